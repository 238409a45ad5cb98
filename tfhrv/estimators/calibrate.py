"""Calibrated bias correction and confidence intervals from shipped Monte-Carlo tables.

Regression standard errors on log-log points are too optimistic, because the points are
correlated.  For every preset (:mod:`tfhrv.estimators.presets`) the script
``scripts/make_calibration.py`` simulates exact fGn (Davies-Harte) for alpha < 1 and
Timmer-Koenig 1/f^beta noise (beta = 2 alpha - 1) for alpha > 1 on a grid of true
exponents and series lengths, runs the preset, and stores the mean, the SD and the 2.5 %
and 97.5 % quantiles of the estimates.  At run time, for a series of length n the curves
are interpolated in log n and inverted:

- bias-corrected exponent: the true value whose mean estimate equals the observed one;
- 95 % interval: the Neyman confidence belt, i.e. the true values whose 97.5 % and
  2.5 % quantiles equal the observed estimate;
- calibrated SE: the SD of the estimates at the corrected value, divided by the local
  slope of the mean curve.

References
----------
Neyman J. Outline of a theory of statistical estimation based on the classical theory
of probability. Phil Trans R Soc A 1937;236:333-380.
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
Efron B, Tibshirani RJ. An Introduction to the Bootstrap. Chapman & Hall 1993, ch. 6
(parametric bootstrap).
"""

from __future__ import annotations

import dataclasses
import functools
from importlib import resources

import numpy as np

from tfhrv.estimators._fit import ScalingFit

__all__ = ["CalibrationTable", "calibrate", "load_table"]

_TABLE_FILE = "calibration.npz"


@dataclasses.dataclass(frozen=True, slots=True)
class CalibrationTable:
    """Monte-Carlo summary for one preset.

    ``truth`` (T,) true exponents in the preset's convention; ``lengths`` (L,) series
    lengths; ``mean``, ``sd``, ``q_low``, ``q_high`` (T, L) of the estimates;
    ``n_rep`` replicates per cell.
    """

    preset: str
    truth: np.ndarray
    lengths: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    q_low: np.ndarray
    q_high: np.ndarray
    n_rep: int

    def curves(self, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Mean, SD and quantile curves over ``truth`` at length ``n``.

        Linear interpolation in log n between the two nearest tabulated lengths whose
        column holds values, clipped to the tabulated range.  A length whose whole column
        is NaN (the preset cannot run at that length) is left out.
        """
        ok = np.isfinite(self.mean).any(axis=0)
        lengths = self.lengths[ok].astype(float)
        cols = [a[:, ok] for a in (self.mean, self.sd, self.q_low, self.q_high)]
        if lengths.size == 0:
            nan = np.full(self.truth.shape, np.nan)
            return nan, nan, nan, nan
        if lengths.size == 1:
            return tuple(c[:, 0] for c in cols)
        logl = np.log(lengths)
        x = float(np.clip(np.log(max(n, 1)), logl[0], logl[-1]))
        j = int(np.clip(np.searchsorted(logl, x, side="right") - 1, 0, logl.size - 2))
        w = (x - logl[j]) / (logl[j + 1] - logl[j])
        if w <= 0.0:
            return tuple(c[:, j] for c in cols)
        if w >= 1.0:
            return tuple(c[:, j + 1] for c in cols)
        return tuple((1 - w) * c[:, j] + w * c[:, j + 1] for c in cols)


@functools.cache
def _tables() -> dict[str, CalibrationTable]:
    ref = resources.files("tfhrv").joinpath("data", _TABLE_FILE)
    out: dict[str, CalibrationTable] = {}
    with resources.as_file(ref) as path, np.load(path) as z:
        for name in [str(s) for s in z["presets"]]:
            out[name] = CalibrationTable(
                preset=name, truth=z[f"{name}__truth"], lengths=z[f"{name}__lengths"],
                mean=z[f"{name}__mean"], sd=z[f"{name}__sd"], q_low=z[f"{name}__q_low"],
                q_high=z[f"{name}__q_high"], n_rep=int(z[f"{name}__n_rep"]),
            )
    return out


def load_table(preset: str, /) -> CalibrationTable:
    """The shipped calibration table of a preset."""
    tables = _tables()
    if preset not in tables:
        raise ValueError(f"preset must be one of {tuple(tables)!r}, got {preset!r}")
    return tables[preset]


def _invert(curve: np.ndarray, truth: np.ndarray, value: float) -> float:
    """The true value whose (monotone) curve value equals ``value``; NaN outside."""
    if value < curve[0] or value > curve[-1]:
        return float("nan")
    return float(np.interp(value, curve, truth))


@functools.lru_cache(maxsize=4096)
def _monotone_curves(estimator: str, n: int) -> tuple[np.ndarray, ...]:
    """Curves at length n made monotone (the estimators are increasing in truth), and the
    local slope of the mean curve; cached, since the windows of a tier share lengths."""
    table = load_table(estimator)
    mean, sd, q_low, q_high = table.curves(n)
    mono = [np.maximum.accumulate(c) for c in (mean, q_low, q_high)]
    slope = np.gradient(mono[0], table.truth)
    return (*mono, sd, slope)


def calibrate(fit: ScalingFit, /, *, estimator: str, n: int | None = None) -> ScalingFit:
    """Replace a fit's exponent, SE and interval by their calibrated versions.

    Parameters
    ----------
    fit : ScalingFit
        Output of the preset ``estimator`` (:func:`tfhrv.estimators.presets.estimate`).
    estimator : str
        The preset name.
    n : int, optional
        Series length in beats, the unit of the tables; default ``fit.n_obs`` (which
        counts resampled samples, not beats, for the resampled spectral preset).

    Returns
    -------
    ScalingFit
        A copy with ``exponent`` bias-corrected, ``se`` and ``ci`` calibrated,
        ``raw_exponent`` the uncorrected value and ``calibrated=True``.  When the raw value
        lies outside the tabulated range the interval end that cannot be inverted is NaN
        and the exponent is left uncorrected.

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> from tfhrv.estimators.presets import estimate
    >>> raw = estimate("alpha2", 800 + 40 * fgn(8192, 0.8, rng=2))
    >>> cal = calibrate(raw, estimator="alpha2")
    >>> cal.calibrated, bool(cal.ci[0] < 0.8 < cal.ci[1])
    (True, True)
    """
    table = load_table(estimator)
    mean, q_low, q_high, sd, slope = _monotone_curves(estimator,
                                                      int(fit.n_obs if n is None else n))
    raw = float(fit.exponent)
    est = _invert(mean, table.truth, raw)
    lo = _invert(q_high, table.truth, raw)
    hi = _invert(q_low, table.truth, raw)
    if not np.isfinite(est):
        est = raw
        se = float(fit.se)
    else:
        local = max(float(np.interp(est, table.truth, slope)), 1e-3)
        se = float(np.interp(est, table.truth, sd)) / local
    return dataclasses.replace(
        fit, exponent=est, se=se, ci=(lo, hi), raw_exponent=raw, calibrated=True,
        options={**dict(fit.options), "calibration": estimator},
    )
