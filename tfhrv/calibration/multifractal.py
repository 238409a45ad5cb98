"""Calibrated multifractal estimates: intervals for c2 and the MF-DFA width, and a test of
multifractality against the monofractal null.

``scripts/make_multifractal_calibration.py`` simulates, on a grid of lengths (4000 to
120000 beats),

- the **monofractal null** (c2 = 0) in two families on a grid of beta each, since the
  null distribution of the estimates depends on the exponent (the SD of c2 grows by
  about 60 % from beta = 0 to 1.5) and, at 24-h lengths where its SD is about 0.002, on
  the family: Gaussian 1/f^beta noise (Timmer & Koenig 1995) and exact fGn (Davies &
  Harte 1987);
- the **multifractal random walk** (Bacry, Delour & Muzy 2001) on a grid of lambda^2,
  whose log-cumulant is c2 = -lambda^2 and whose MF-DFA width over q in [-5, 5] is
  10 lambda^2,

and stores every replicate's estimates in ``tfhrv/data/multifractal.npz`` (separate from
``calibration.npz``).  At run time, for a series of n beats, with beta read from the
series as 2 c1 - 1 (c1 is about H for the profile of fGn) and the null cells those of
each family whose beta brackets it:

- **lengths**: the replicates of the tabulated length at or below n, standardised, with
  their mean and SD interpolated in log n to n (a location-scale interpolation);
- **c2 and its 95 % interval**: a Neyman belt over lambda^2 (as
  :mod:`tfhrv.calibration.calibrate` does for the exponents): the point is the true c2
  whose mean estimate equals the observed one, the interval the true values whose
  central 95 % band contains it.  The MRW is simulated with white innovations (beta = 0);
  the belt is moved to the series' beta by a location-scale transfer from the null: its
  estimates are shifted by the null mean at beta minus the null mean of white noise, and
  their spread about each mean scaled by the ratio of the null SDs, the null at beta being
  the replicates of all its cells pooled (so the spread between families and the
  neighbouring betas widens it). This is an assumption, checked on fGn and the MRW by
  ``scripts/validate_multifractal.py``.  The upper end stops at 0: c2 > 0 is not a
  scaling model. An estimate above the monofractal band (seen on 24-h records with level
  changes, which push c2 up, METHODS 7a) has an empty confidence set: c2 is then left
  uncorrected (= ``c2_slope``) with a NaN interval, as the exponents are outside their
  tables (:mod:`tfhrv.calibration.calibrate`).
- **the width** likewise, over the MRW width 10 lambda^2.
- **p-value for c2 < 0**: in each null cell, the share of replicates whose c2 estimate is
  at or below the observed one, (1 + k) / (1 + R); the largest over the cells.
- **c1 and h(q)**: no bias correction; the interval is the estimate +- 1.96 times the
  largest within-cell null SD (not pooled: the cells differ in their true exponent).

References
----------
Neyman J. Outline of a theory of statistical estimation based on the classical theory of
probability. Phil Trans R Soc A 1937;236:333-380.
Bacry E, Delour J, Muzy JF. Multifractal random walk. Phys Rev E 2001;64:026103.
Timmer J, Koenig M. On generating power law noise. Astron Astrophys 1995;300:707-710.
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
Wendt H, Abry P, Jaffard S. Bootstrap for empirical multifractal analysis. IEEE Signal
Process Mag 2007;24(4):38-48.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from importlib import resources

import numpy as np

from tfhrv.calibration.calibrate import _confidence_set, _point
from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.validation import readonly
from tfhrv.estimators.multifractal import (
    DEFAULT_ORDER,
    DEFAULT_Q,
    leader_cumulants,
    mfdfa,
)

__all__ = [
    "MultifractalEstimate",
    "MultifractalTable",
    "estimate_multifractal",
    "load_multifractal_table",
    "multifractal_table_sha256",
    "raw_estimates",
]

_TABLE_FILE = "multifractal.npz"
_Z975 = 1.959963984540054


@dataclass(frozen=True, slots=True)
class MultifractalTable:
    """Replicates of the multifractal calibration (see module docstring).

    ``lengths`` (L,), ``betas`` (F, B) per null family (0: Timmer-Koenig 1/f^beta, 1: exact
    fGn), ``lambda2`` (K,), ``q`` (Q,); null arrays ``null_c1``, ``null_c2``,
    ``null_width`` (F, B, L, R) and ``null_h`` (F, B, L, R, Q); MRW arrays ``mrw_c2``,
    ``mrw_width`` (K, L, R). NaN where an estimate could not run.
    """

    lengths: np.ndarray
    betas: np.ndarray
    lambda2: np.ndarray
    q: np.ndarray
    null_c1: np.ndarray
    null_c2: np.ndarray
    null_width: np.ndarray
    null_h: np.ndarray
    mrw_c2: np.ndarray
    mrw_width: np.ndarray


@functools.cache
def multifractal_table_sha256() -> str:
    """SHA-256 (hex) of the shipped multifractal table file (provenance, cohort resume)."""
    import hashlib

    ref = resources.files("tfhrv").joinpath("data", _TABLE_FILE)
    return hashlib.sha256(ref.read_bytes()).hexdigest()


@functools.cache
def load_multifractal_table() -> MultifractalTable:
    """The shipped multifractal calibration table (``tfhrv/data/multifractal.npz``)."""
    ref = resources.files("tfhrv").joinpath("data", _TABLE_FILE)
    with resources.as_file(ref) as path, np.load(path) as z:
        return MultifractalTable(**{k: readonly(np.asarray(z[k], dtype=np.float64))
                                    for k in MultifractalTable.__dataclass_fields__})


@dataclass(frozen=True, slots=True)
class MultifractalEstimate:
    """Raw and calibrated multifractal estimates of one series.

    Attributes
    ----------
    n_obs : int
        Length of the series (beats).
    q : numpy.ndarray
        Moment orders of ``h``.
    h, h_ci : numpy.ndarray
        MF-DFA h(q) and its 95 % interval (Q, 2) from the null SD (not bias-corrected).
    alpha, f : numpy.ndarray
        Singularity spectrum (Legendre transform of tau(q) = q h(q) - 1).
    width_slope, width, width_ci
        MF-DFA width alpha(q_min) - alpha(q_max): raw, calibrated, 95 % interval.
    c1, c1_ci
        Leader log-cumulant c1 and its interval (null SD; not bias-corrected).
    c2_slope, c2, c2_ci
        Leader log-cumulant c2: raw (slope of the log-leader variance against ln 2^j),
        calibrated, 95 % interval.
    c2_pvalue : float
        One-sided p-value of "c2 < 0" against the monofractal null.
    null_beta : float
        The beta (2 c1 - 1) at which the null was read.
    """

    n_obs: int
    q: np.ndarray
    h: np.ndarray
    h_ci: np.ndarray
    alpha: np.ndarray
    f: np.ndarray
    width_slope: float
    width: float
    width_ci: tuple[float, float]
    c1: float
    c1_ci: tuple[float, float]
    c2_slope: float
    c2: float
    c2_ci: tuple[float, float]
    c2_pvalue: float
    null_beta: float


def raw_estimates(x: np.ndarray, /, *, order: int = DEFAULT_ORDER, vanishing_moments: int = 3
                  ) -> tuple[np.ndarray, float, float, float, np.ndarray, np.ndarray]:
    """(h(q), width, c1, c2, alpha, f) of a series, NaN where an estimator cannot run.

    The exact computation the calibration tables were simulated with.
    """
    nan_q = np.full(DEFAULT_Q.size, np.nan)
    h, width, alpha, f = nan_q, np.nan, nan_q, nan_q
    c1 = c2 = np.nan
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        try:
            res = mfdfa(x, order=order)
            h, width, alpha, f = res.h, res.width, res.alpha, res.f
        except InsufficientDataError:
            pass
        try:
            lc = leader_cumulants(x, vanishing_moments=vanishing_moments)
            c1, c2 = lc.c1, lc.c2
        except InsufficientDataError:
            pass
    return h, float(width), float(c1), float(c2), alpha, f


def _at_length(reps: np.ndarray, lengths: np.ndarray, n: int) -> np.ndarray:
    """Replicates (..., L, R) at length ``n``: the standardised replicates of the nearest
    tabulated length at or below n (the nearest one below the grid), with mean and SD
    interpolated linearly in log n between the two bracketing lengths (log SD), clipped
    to the grid."""
    logl = np.log(lengths)
    x = float(np.clip(np.log(max(n, 1)), logl[0], logl[-1]))
    j = int(np.clip(np.searchsorted(logl, x, side="right") - 1, 0, logl.size - 1))
    k = min(j + 1, logl.size - 1)
    w = 0.0 if k == j else (x - logl[j]) / (logl[k] - logl[j])
    finite = bool(np.isfinite(reps).all())  # the nan-functions are slow: only if needed
    with np.errstate(invalid="ignore", divide="ignore"):
        m = reps.mean(axis=-1) if finite else np.nanmean(reps, axis=-1)
        sd = reps.std(axis=-1, ddof=1) if finite else np.nanstd(reps, axis=-1, ddof=1)
        mean = (1 - w) * m[..., j] + w * m[..., k]
        sdv = np.exp((1 - w) * np.log(sd[..., j]) + w * np.log(sd[..., k]))
        z = (reps[..., j, :] - m[..., j, None]) / sd[..., j, None]
    return mean[..., None] + sdv[..., None] * z


def _null_cells(betas: np.ndarray, beta: float) -> list[tuple[int, int]]:
    """(family, beta index) of the null cells that bracket ``beta`` in each family (the
    nearest edge when beta lies off a family's grid by less than 0.25; a family whose
    grid is farther is not used)."""
    cells = []
    for fi, grid in enumerate(betas):
        if beta < grid[0] - 0.25 or beta > grid[-1] + 0.25:
            continue
        j = int(np.searchsorted(grid, beta))
        cells += [(fi, b) for b in {max(j - 1, 0), min(j, grid.size - 1)}]
    if not cells:  # outside every family: the nearest point of the first family
        cells = [(0, int(np.argmin(np.abs(betas[0] - beta))))]
    return sorted(cells)


def _belt(truth: np.ndarray, reps: np.ndarray, shift: float, scale: float, value: float
          ) -> tuple[float, tuple[float, float]]:
    """Point and Neyman interval of ``value`` from replicates (T, R) at each truth
    (increasing), the estimates shifted by ``shift`` and their spread about each truth's
    mean multiplied by ``scale``; the upper end stops at truth[-1]."""
    with np.errstate(invalid="ignore"):
        centre = np.nanmean(reps, axis=1, keepdims=True)
        reps = centre + (reps - centre) * scale
        mean = np.nanmean(reps, axis=1) + shift
        quantile = np.quantile if np.isfinite(reps).all() else np.nanquantile
        lo_q = quantile(reps, 0.025, axis=1) + shift
        hi_q = quantile(reps, 0.975, axis=1) + shift
    if not np.isfinite(value) or not np.isfinite(mean).any():
        return float("nan"), (float("nan"), float("nan"))
    if np.isfinite(hi_q[-1]) and value > hi_q[-1]:
        # above the band of the monofractal edge: no member of the model family gives
        # such a value (the confidence set is empty); left uncorrected, no interval
        return float(value), (float("nan"), float("nan"))
    point = _point(truth, mean, value)
    if not np.isfinite(point) and value > np.nanmax(mean):
        point = float(truth[-1])
    lo, hi = _confidence_set(truth, lo_q, hi_q, value)
    if np.isfinite(lo_q[-1]) and value >= lo_q[-1]:
        hi = float(truth[-1])  # the band at the edge of the model contains it
    return point + 0.0, (lo + 0.0, hi + 0.0)  # + 0.0: no negative zero (truth -lambda^2)


def estimate_multifractal(x: np.ndarray, /, *, order: int = DEFAULT_ORDER,
                          vanishing_moments: int = 3) -> MultifractalEstimate:
    """Raw and calibrated multifractal estimates of a series (module docstring).

    Parameters
    ----------
    x : array_like
        Beat-indexed series (NN intervals).
    order : int, default 2
        MF-DFA detrending order (the tables hold order 2 only: other orders get raw
        values and NaN intervals).
    vanishing_moments : int, default 3
        Wavelet vanishing moments (tables: 3 only, likewise).

    Returns
    -------
    MultifractalEstimate

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> est = estimate_multifractal(fgn(16384, 0.8, rng=3))
    >>> bool(est.c2_pvalue > 0.05), bool(est.c2_ci[0] <= 0.0 <= est.c2_ci[1])
    (True, True)
    """
    h, width, c1, c2, alpha, f = raw_estimates(x, order=order,
                                              vanishing_moments=vanishing_moments)
    n = int(np.size(x))
    nan2 = (float("nan"), float("nan"))
    tab = load_multifractal_table()
    tabulated = order == DEFAULT_ORDER and vanishing_moments == 3
    if not tabulated or not np.isfinite(c1):
        return MultifractalEstimate(
            n_obs=n, q=DEFAULT_Q, h=h, h_ci=np.full((h.size, 2), np.nan), alpha=alpha, f=f,
            width_slope=width, width=float("nan"), width_ci=nan2, c1=c1, c1_ci=nan2,
            c2_slope=c2, c2=float("nan"), c2_ci=nan2, c2_pvalue=float("nan"),
            null_beta=float("nan"))
    beta = 2.0 * c1 - 1.0
    cells = _null_cells(tab.betas, beta)
    def cell(name: str, c: tuple[int, int]) -> np.ndarray:  # one null cell at length n
        return _at_length(getattr(tab, name)[c], tab.lengths, n)

    def pooled(name: str) -> np.ndarray:  # the null replicates of all cells near beta
        return np.concatenate([cell(name, c) for c in cells])

    mrw_c2 = _at_length(tab.mrw_c2, tab.lengths, n)
    mrw_w = _at_length(tab.mrw_width, tab.lengths, n)
    with np.errstate(invalid="ignore"):
        null_c2, null_w = pooled("null_c2"), pooled("null_width")
        base_c2, base_w = cell("null_c2", (0, 0)), cell("null_width", (0, 0))  # white noise
        shift_c2 = float(np.nanmean(null_c2) - np.nanmean(base_c2))
        scale_c2 = float(np.nanstd(null_c2, ddof=1) / np.nanstd(base_c2, ddof=1))
        shift_w = float(np.nanmean(null_w) - np.nanmean(base_w))
        scale_w = float(np.nanstd(null_w, ddof=1) / np.nanstd(base_w, ddof=1))
        # h(q) and c1 differ between the cells (their truth is the cell's exponent): the
        # largest within-cell SD, not the pooled one
        sd_h = np.nanmax([np.nanstd(_at_length(np.moveaxis(tab.null_h[c], -1, 0),
                                               tab.lengths, n), axis=-1, ddof=1)
                          for c in cells], axis=0)
        sd_c1 = max(float(np.nanstd(cell("null_c1", c), ddof=1)) for c in cells)
    order_k = np.argsort(-tab.lambda2)  # truth c2 = -lambda^2, increasing
    c2_cal, c2_ci = _belt(-tab.lambda2[order_k], mrw_c2[order_k], shift_c2,
                          scale_c2, c2)
    w_truth = 10.0 * tab.lambda2  # width of the MRW over q in [-5, 5]
    order_w = np.argsort(w_truth)
    w_cal, w_ci = _belt(-w_truth[order_w][::-1], -mrw_w[order_w][::-1], -shift_w,
                        scale_w, -width)
    w_cal, w_ci = -w_cal, (-w_ci[1], -w_ci[0])  # width >= 0: the belt is run on -width
    pval = float("nan")
    if np.isfinite(c2):  # the largest p over the null cells near beta (conservative)
        pval = max(float((1 + np.sum(r[np.isfinite(r)] <= c2)) / (1 + np.isfinite(r).sum()))
                   for r in (cell("null_c2", c) for c in cells))
    h_ci = np.column_stack((h - _Z975 * sd_h, h + _Z975 * sd_h))
    return MultifractalEstimate(
        n_obs=n, q=DEFAULT_Q, h=h, h_ci=h_ci, alpha=alpha, f=f, width_slope=width,
        width=float(w_cal), width_ci=(float(w_ci[0]), float(w_ci[1])), c1=c1,
        c1_ci=(c1 - _Z975 * sd_c1, c1 + _Z975 * sd_c1), c2_slope=c2, c2=float(c2_cal),
        c2_ci=c2_ci, c2_pvalue=pval, null_beta=float(beta))
