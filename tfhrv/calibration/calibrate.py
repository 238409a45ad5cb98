"""Calibrated bias correction and confidence intervals from shipped Monte-Carlo tables.

Regression standard errors on log-log points are too optimistic, because the points are
correlated.  For every preset (:mod:`tfhrv.estimators.presets`) the script
``scripts/make_calibration.py`` simulates processes of known exponent on a grid of true
exponents and series lengths, runs the preset, and stores per cell the mean, the SD and
the 2.5 % and 97.5 % quantiles of the estimates.  Two calibration models:

- ``"powerlaw"`` (default): exact fGn (Davies-Harte) for alpha < 1 and Timmer-Koenig
  1/f^beta noise (beta = 2 alpha - 1) for alpha > 1.  Continuous across alpha = 1, the
  model of heart-period fluctuations as 1/f-type noise (Kobayashi & Musha 1982).
- ``"fgn-fbm"``: the dichotomous model of Eke et al. (2000), fGn for alpha < 1 and fBm
  (H = alpha - 1) for alpha > 1, both Davies-Harte.  At the scales of a few beats fBm
  with small H looks like fGn (its mean alpha1 falls back below 1 as H -> 0), so the
  estimate alone cannot tell the branches apart; the class statistic
  (:func:`class_statistic`, DFA-1 at the longest scales) does, and the tables hold one
  belt per class ("noise": class statistic <= 1, "motion": > 1), conditional on it.

At run time, for a series of length n the curves are interpolated in log n and used as:

- bias-corrected exponent: the true value whose mean estimate equals the observed one
  (within the branch of the class under "fgn-fbm");
- 95 % interval: the Neyman confidence set, the true values whose central 95 % band of
  estimates contains the observed one (its hull when it is not one interval);
- calibrated SE: the SD of the estimates at the corrected value, divided by the local
  slope of the mean curve.

References
----------
Neyman J. Outline of a theory of statistical estimation based on the classical theory
of probability. Phil Trans R Soc A 1937;236:333-380.
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
Efron B, Tibshirani RJ. An Introduction to the Bootstrap. Chapman & Hall 1993, ch. 6
(parametric bootstrap).
Timmer J, Koenig M. On generating power law noise. Astron Astrophys 1995;300:707-710.
Eke A, Herman P, Bassingthwaighte JB, et al. Physiological time series: distinguishing
fractal noises from motions. Pflugers Arch 2000;439:403-415.
Kobayashi M, Musha T. 1/f fluctuation of heartbeat period. IEEE Trans Biomed Eng
1982;29:456-457.
"""

from __future__ import annotations

import dataclasses
import functools
import io
import threading
from importlib import resources

import numpy as np

from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.validation import as_1d_float
from tfhrv.estimators.dfa import dfa
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.presets import DFA_PRESETS

__all__ = ["CLASS_THRESHOLD", "MODELS", "CalibrationTable", "Curves", "calibrate",
           "class_range", "class_statistic", "interval_text", "load_table", "table_name",
           "table_sha256"]

_TABLE_FILE = "calibration.npz"

#: Calibration models: "powerlaw" (fGn below alpha 1, 1/f^beta noise above, one belt) and
#: "fgn-fbm" (fGn below, fBm above, one belt per class of the class statistic).
MODELS: tuple[str, ...] = ("powerlaw", "fgn-fbm")
#: The class statistic (a DFA-1 alpha at the longest scales) above this is "motion".
CLASS_THRESHOLD = 1.0


def class_range(n_obs: int, /) -> tuple[int, int]:
    """Box sizes (beats) of the class statistic for a series of ``n_obs`` beats.

    The longest scales a DFA-1 fit can use: the alpha_long range (64 to min(N/4, 4096))
    from 1024 beats, else 16 to N/4.  At long scales fGn and fBm follow their asymptotic
    power laws, so alpha below or above 1 tells a noise from a motion (Eke et al. 2000).

    Examples
    --------
    >>> class_range(512), class_range(86000)
    ((16, 128), (64, 4096))
    """
    n = int(n_obs)
    if n >= 1024:
        return (64, min(n // 4, 4096))
    return (16, n // 4)


def class_statistic(nn_ms: np.ndarray, /) -> float:
    """The fGn/fBm class statistic of a series: DFA-1 alpha over :func:`class_range`.

    NaN when the series is too short (under 128 beats) or constant.

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> x = fgn(4096, 0.5, rng=1)
    >>> class_statistic(x) < CLASS_THRESHOLD < class_statistic(x.cumsum())
    True
    """
    x = as_1d_float(nn_ms, "nn_ms")
    if x.size < 128:
        return float("nan")
    try:
        return float(dfa(x, fit_range=class_range(x.size), order=1).exponent)
    except InsufficientDataError:
        return float("nan")


@dataclasses.dataclass(frozen=True, slots=True)
class Curves:
    """A table's curves over ``truth`` at one length and class: the share of replicates
    in the class, and the mean, SD and 2.5 / 97.5 % quantiles of their estimates."""

    share: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    q_low: np.ndarray
    q_high: np.ndarray


@dataclasses.dataclass(frozen=True, slots=True)
class CalibrationTable:
    """Monte-Carlo summary for one preset under one calibration model.

    ``truth`` (T,) true exponents in the preset's convention (noise branch below 1,
    motion branch above); ``lengths`` (L,) series lengths; ``classes`` (K,) the class
    names ("any" = all replicates; "noise"/"motion" = class statistic <= / > 1);
    ``share``, ``mean``, ``sd``, ``q_low``, ``q_high`` (K, T, L); ``n_rep`` replicates
    per cell (half of it at the longest length).
    """

    preset: str
    model: str
    truth: np.ndarray
    lengths: np.ndarray
    classes: tuple[str, ...]
    share: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    q_low: np.ndarray
    q_high: np.ndarray
    n_rep: int
    _columns: tuple = dataclasses.field(init=False, repr=False, compare=False)
    _log_lengths: np.ndarray = dataclasses.field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        for name in ("share", "mean", "sd", "q_low", "q_high"):  # stored as float32
            object.__setattr__(self, name, np.asarray(getattr(self, name), dtype=np.float64))
        ok = np.isfinite(self.mean).any(axis=(0, 1))
        object.__setattr__(self, "_log_lengths", np.log(self.lengths.astype(float))[ok])
        # per class, the five curves at the lengths that hold values: (T, L') each
        object.__setattr__(self, "_columns", tuple(
            tuple(a[k][:, ok] for a in (self.share, self.mean, self.sd, self.q_low,
                                        self.q_high))
            for k in range(len(self.classes))))

    def curves(self, n: int, /, *, cls: str = "any") -> Curves:
        """The curves over ``truth`` at length ``n`` for class ``cls``.

        Linear interpolation in log n between the two nearest tabulated lengths whose
        column holds values, clipped to the tabulated range.  A length whose whole column
        is NaN (the preset cannot run at that length) is left out.
        """
        if cls not in self.classes:
            raise ValueError(f"cls must be one of {self.classes!r}, got {cls!r}")
        cols = self._columns[self.classes.index(cls)]
        logl = self._log_lengths
        if logl.size == 0:
            return Curves(*(np.full(self.truth.shape, np.nan) for _ in cols))
        if logl.size == 1:
            return Curves(*(c[:, 0] for c in cols))
        x = float(np.clip(np.log(max(n, 1)), logl[0], logl[-1]))
        j = int(np.clip(np.searchsorted(logl, x, side="right") - 1, 0, logl.size - 2))
        w = (x - logl[j]) / (logl[j + 1] - logl[j])
        if w <= 0.0:
            return Curves(*(c[:, j] for c in cols))
        if w >= 1.0:
            return Curves(*(c[:, j + 1] for c in cols))
        return Curves(*((1 - w) * c[:, j] + w * c[:, j + 1] for c in cols))


@functools.cache
def table_sha256() -> str:
    """SHA-256 (hex) of the shipped calibration table file (provenance, cohort resume)."""
    import hashlib

    ref = resources.files("tfhrv").joinpath("data", _TABLE_FILE)
    return hashlib.sha256(ref.read_bytes()).hexdigest()


@functools.cache
def _table_file() -> np.lib.npyio.NpzFile:
    """The shipped table file, read into memory once (no file stays open); its arrays
    are read on first use under :data:`_TABLE_LOCK` (a run needs a few of the 26 tables)."""
    ref = resources.files("tfhrv").joinpath("data", _TABLE_FILE)
    return np.load(io.BytesIO(ref.read_bytes()))


_TABLE_LOCK = threading.Lock()


@functools.cache
def _table_index() -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The preset and model names of the shipped table file."""
    with _TABLE_LOCK:
        z = _table_file()
        return tuple(str(s) for s in z["presets"]), tuple(str(m) for m in z["models"])


@functools.cache
def _table(preset: str, model: str) -> CalibrationTable:
    """One table of the shipped file."""
    pre = f"{preset}__{model}__"
    with _TABLE_LOCK:
        z = _table_file()
        return CalibrationTable(
            preset=preset, model=model, truth=z[pre + "truth"], lengths=z[pre + "lengths"],
            classes=tuple(str(c) for c in z[pre + "classes"]),
            share=z[pre + "share"], mean=z[pre + "mean"], sd=z[pre + "sd"],
            q_low=z[pre + "q_low"], q_high=z[pre + "q_high"], n_rep=int(z[pre + "n_rep"]),
        )


def load_table(preset: str, /, *, model: str = "powerlaw") -> CalibrationTable:
    """The shipped calibration table of a preset under a calibration model.

    ``preset`` is a preset name, or for DFA orders above 1 the name with ``.q2`` / ``.q3``
    appended (:func:`table_name`).
    """
    if model not in MODELS:
        raise ValueError(f"model must be one of {MODELS!r}, got {model!r}")
    if preset not in _table_names():
        raise ValueError(f"preset must be one of {_table_index()[0]!r}, got {preset!r}")
    return _table(preset, model)


#: the options the tables were simulated with; other values have no table
_TABLE_VANISHING_MOMENTS = 3


@functools.cache
def _table_names() -> frozenset[str]:
    return frozenset(_table_index()[0])


def table_name(estimator: str, fit: ScalingFit, /) -> str | None:
    """Name of the table that matches a fit's options, or None if none was simulated.

    DFA presets: the preset name for DFA-1, ``<preset>.q<order>`` for higher orders;
    wavelet presets: only 3 vanishing moments are tabulated.
    """
    names = _table_names()
    if estimator in DFA_PRESETS:
        order = int(fit.options.get("order", 1))
        name = estimator if order == 1 else f"{estimator}.q{order}"
    elif fit.method == "wavelet":
        vm = int(fit.options.get("vanishing_moments", _TABLE_VANISHING_MOMENTS))
        name = estimator if vm == _TABLE_VANISHING_MOMENTS else None
    else:
        name = estimator
    return name if name in names else None


def interval_text(lo: float, hi: float, /, *, digits: int = 2) -> str:
    """A calibrated interval as text: ``[lo, hi]``; an end that :func:`calibrate` left NaN
    (the confidence set reaches past the tabulated range) reads ``open``; no interval at
    all reads ``n/a``.

    Examples
    --------
    >>> interval_text(1.05, float("nan")), interval_text(float("nan"), float("nan"))
    ('[1.05, open]', 'n/a')
    """
    lo, hi = float(lo), float(hi)
    if not (np.isfinite(lo) or np.isfinite(hi)):
        return "n/a"
    a = f"{lo:.{digits}f}" if np.isfinite(lo) else "open"
    b = f"{hi:.{digits}f}" if np.isfinite(hi) else "open"
    return f"[{a}, {b}]"


def _point(truth: np.ndarray, mean: np.ndarray, value: float) -> float:
    """The true value whose mean curve equals ``value``; NaN outside the curve's range.

    The curve is inverted between its lowest and its highest point (where a curve folds
    back at an end of the grid, as the leaky periodogram's does, the folded part cannot
    be inverted), made non-decreasing there against Monte-Carlo wiggles.
    """
    ok = np.isfinite(mean)
    t, m = truth[ok], mean[ok]
    if t.size >= 2:
        i, j = int(np.argmin(m)), int(np.argmax(m))
        if j > i:
            t, m = t[i: j + 1], m[i: j + 1]
    m = np.maximum.accumulate(m)
    if t.size < 2 or value < m[0] or value > m[-1]:
        return float("nan")
    return float(np.interp(value, m, t))


def _confidence_set(truth: np.ndarray, q_low: np.ndarray, q_high: np.ndarray,
                    value: float) -> tuple[float, float]:
    """Hull of the true values whose band [q_low, q_high] contains ``value``.

    The band edges are linear between the grid points where both are known, so on each
    grid interval the truths with q_low <= value <= q_high form one sub-interval, found
    exactly; only the first and the last interval that hold such truths are needed.  An
    end at the first or last point of the table's grid is NaN (the set may go on beyond
    the tabulated range); no such value at all gives (NaN, NaN).
    """
    ok = np.isfinite(q_low) & np.isfinite(q_high)
    t, lo, hi = truth[ok], q_low[ok], q_high[ok]
    if t.size < 2:
        return float("nan"), float("nan")
    v = float(value)
    candidates = np.flatnonzero((np.minimum(lo[:-1], lo[1:]) <= v)
                                & (np.maximum(hi[:-1], hi[1:]) >= v)).tolist()

    def part(k: int) -> tuple[float, float] | None:
        """[s0, s1] in [0, 1] of interval k where lo <= v <= hi, or None."""
        s0, s1 = 0.0, 1.0
        for a, b in ((lo[k] - v, lo[k + 1] - lo[k]), (v - hi[k], hi[k] - hi[k + 1])):
            # need a + b s <= 0
            if b > 0:
                s1 = min(s1, -a / b)
            elif b < 0:
                s0 = max(s0, -a / b)
            elif a > 0:
                return None
        return (s0, s1) if s0 <= s1 else None

    first = next(((k, p) for k in candidates if (p := part(k)) is not None), None)
    if first is None:
        return float("nan"), float("nan")
    last = next((k, p) for k in reversed(candidates) if (p := part(k)) is not None)
    (i, (s0, _)), (j, (_, s1)) = first, last
    lower = float(t[i] + (t[i + 1] - t[i]) * s0)
    upper = float(t[j] + (t[j + 1] - t[j]) * s1)
    return (float("nan") if lower <= truth[0] else lower,
            float("nan") if upper >= truth[-1] else upper)


@functools.lru_cache(maxsize=4096)
def _class_curves(estimator: str, model: str, cls: str, n: int
                  ) -> tuple[np.ndarray, Curves, np.ndarray, np.ndarray, np.ndarray]:
    """Truth, curves, the mean and SD curves on the branch of the point estimate (NaN
    off it) and the local slope of that mean curve, cached (the windows of a tier share
    lengths)."""
    table = load_table(estimator, model=model)
    c = table.curves(n, cls=cls)
    if cls == "noise":
        branch = table.truth < 1.0
    elif cls == "motion":
        branch = table.truth > 1.0
    else:
        branch = np.ones(table.truth.size, dtype=bool)
    mean = np.where(branch, c.mean, np.nan)
    sd = np.where(branch, c.sd, np.nan)
    ok = np.isfinite(mean)
    slope = np.full(table.truth.size, np.nan)
    if ok.sum() >= 2:
        slope[ok] = np.gradient(np.maximum.accumulate(mean[ok]), table.truth[ok])
    return table.truth, c, mean, sd, slope


def calibrate(fit: ScalingFit, /, *, estimator: str, n: int | None = None,
              model: str = "powerlaw", class_stat: float | None = None) -> ScalingFit:
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
    model : {"powerlaw", "fgn-fbm"}, default "powerlaw"
        The calibration model (module docstring).
    class_stat : float, optional
        :func:`class_statistic` of the same series; used by ``"fgn-fbm"`` to choose the
        class belt.  Missing or NaN: the belt over all replicates is used.

    Returns
    -------
    ScalingFit
        A copy with ``exponent`` bias-corrected, ``se`` and ``ci`` calibrated,
        ``slope_exponent`` the uncorrected value and ``calibrated=True``; ``options`` record
        the table, the model and the class used.  When the raw value lies beyond the
        range of the mean curve the exponent is left uncorrected and the interval end on
        that side is NaN (open; such an interval is never the narrowest when the primary
        estimator is chosen); an end that reaches the tabulated range's edge is NaN as
        well.  When no table was simulated for the fit's options (wavelet
        vanishing moments other than 3, :func:`table_name`) the fit is returned
        uncorrected with ``calibrated=False`` and a NaN interval.

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> from tfhrv.estimators.presets import estimate
    >>> raw = estimate("alpha2", 800 + 40 * fgn(8192, 0.8, rng=2))
    >>> cal = calibrate(raw, estimator="alpha2")
    >>> cal.calibrated, bool(cal.ci[0] < 0.8 < cal.ci[1])
    (True, True)
    """
    if model not in MODELS:
        raise ValueError(f"model must be one of {MODELS!r}, got {model!r}")
    name = table_name(estimator, fit)
    if name is None:
        # no simulation for these options: an honest "unknown" interval, not a table
        # built for other options
        return dataclasses.replace(
            fit, ci=(float("nan"), float("nan")), calibrated=False,
            options={**dict(fit.options), "calibration": "none (no table for these options)",
                     "calibration_model": model})
    cls = "any"
    if model == "fgn-fbm" and class_stat is not None and np.isfinite(class_stat):
        cls = "motion" if float(class_stat) > CLASS_THRESHOLD else "noise"
    truth, c, mean, sd, slope = _class_curves(name, model, cls,
                                              int(fit.n_obs if n is None else n))
    raw = float(fit.exponent)
    est = _point(truth, mean, raw)
    lo, hi = _confidence_set(truth, c.q_low, c.q_high, raw)
    if not np.isfinite(est):
        # beyond the mean curve the exponent stays the raw slope, and the interval end on
        # that side is open: a finite end there only marks where the simulated band folds
        # back or ends, not how far the truth may lie (a raw spectral slope of 2.9 in a
        # 5-min window gave [2.73, 2.82] before); the other end is a valid bound and stays
        est = raw
        se = float(fit.se)
        finite = mean[np.isfinite(mean)]
        if finite.size and raw > finite.max():
            hi = float("nan")
        else:
            lo = float("nan")
    else:
        local = max(float(np.interp(est, truth[np.isfinite(slope)],
                                    slope[np.isfinite(slope)])), 1e-3)
        ok = np.isfinite(sd)
        se = float(np.interp(est, truth[ok], sd[ok])) / local
    return dataclasses.replace(
        fit, exponent=est, se=se, ci=(lo, hi), slope_exponent=raw, calibrated=True,
        options={**dict(fit.options), "calibration": name, "calibration_model": model,
                 "calibration_class": cls},
    )
