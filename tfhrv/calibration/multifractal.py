"""Calibrated multifractal estimates: intervals for c2 and the MF-DFA width, and a test of
multifractality against the monofractal null.

``scripts/make_multifractal_calibration.py`` simulates, on a grid of lengths,

- the **monofractal null** (c2 = 0): Gaussian 1/f^beta noise (Timmer & Koenig 1995) on a
  grid of beta, since the null distribution of the estimates can depend on the exponent;
- the **multifractal random walk** (Bacry, Delour & Muzy 2001) on a grid of lambda^2,
  whose log-cumulant is c2 = -lambda^2 and whose MF-DFA width over q in [-5, 5] is
  10 lambda^2,

and stores every replicate's estimates in ``tfhrv/data/multifractal.npz`` (separate from
``calibration.npz``).  At run time, for a series of n beats:

- **c2 and its 95 % interval**: a Neyman belt over lambda^2 (as
  :mod:`tfhrv.calibration.calibrate` does for the exponents): the point is the true c2
  whose mean estimate equals the observed one, the interval the true values whose
  central 95 % band contains it.  The MRW is simulated with white innovations (beta = 0
  at the level of the increments); where the null shows that the estimate's bias
  depends on beta, the belt is shifted by the null mean at the series' beta minus the
  null mean at beta = 0, and its spread about each mean is scaled by the ratio of the
  null SDs at the two betas (a location-scale transfer from the null to the alternative;
  an assumption, checked on fGn and the MRW by ``scripts/validate_multifractal.py``; the
  null SD of c2 grows with beta, by about 60 % from beta = 0 to 1.5 at 4000 beats).
  The upper end stops at 0: c2 > 0 is not a scaling model (a value above every band
  means "monofractal or no scaling").
- **the width** likewise, over the MRW width 10 lambda^2.
- **p-value for c2 < 0**: the share of null replicates at the nearest tabulated beta and
  length whose c2 estimate is at or below the observed one, (1 + k) / (1 + R).
- **c1 and h(q)**: no bias correction; the interval is the estimate +- 1.96 SD of the
  null replicates at the nearest beta and length.

beta is read from the series itself as 2 c1 - 1 (c1 is the mean Hoelder exponent of the
profile, H for fGn), clipped to the tabulated range.  Lengths between tabulated ones
take the nearest tabulated length in log n.

References
----------
Neyman J. Outline of a theory of statistical estimation based on the classical theory of
probability. Phil Trans R Soc A 1937;236:333-380.
Bacry E, Delour J, Muzy JF. Multifractal random walk. Phys Rev E 2001;64:026103.
Timmer J, Koenig M. On generating power law noise. Astron Astrophys 1995;300:707-710.
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
    "raw_estimates",
]

_TABLE_FILE = "multifractal.npz"
_Z975 = 1.959963984540054


@dataclass(frozen=True, slots=True)
class MultifractalTable:
    """Replicates of the multifractal calibration (see module docstring).

    ``lengths`` (L,), ``betas`` (B,), ``lambda2`` (K,), ``q`` (Q,); null arrays
    ``null_c1``, ``null_c2``, ``null_width`` (B, L, R) and ``null_h`` (B, L, R, Q); MRW
    arrays ``mrw_c2``, ``mrw_width`` (K, L, R). NaN where an estimate could not run.
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
        The tabulated beta whose null was used.
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


def _nearest(grid: np.ndarray, value: float, *, log: bool = False) -> int:
    g = np.log(grid) if log else grid
    v = np.log(max(value, 1e-300)) if log else value
    return int(np.argmin(np.abs(g - v)))


def _belt(truth: np.ndarray, reps: np.ndarray, shift: float, scale: float, value: float
          ) -> tuple[float, tuple[float, float]]:
    """Point and Neyman interval of ``value`` from replicates (T, R) at each truth
    (increasing), the estimates shifted by ``shift`` and their spread about each truth's
    mean multiplied by ``scale``; the upper end stops at truth[-1]."""
    with np.errstate(invalid="ignore"):
        centre = np.nanmean(reps, axis=1, keepdims=True)
        reps = centre + (reps - centre) * scale
        mean = np.nanmean(reps, axis=1) + shift
        lo_q = np.nanquantile(reps, 0.025, axis=1) + shift
        hi_q = np.nanquantile(reps, 0.975, axis=1) + shift
    if not np.isfinite(value) or not np.isfinite(mean).any():
        return float("nan"), (float("nan"), float("nan"))
    point = _point(truth, mean, value)
    if not np.isfinite(point) and value > np.nanmax(mean):
        point = float(truth[-1])
    lo, hi = _confidence_set(truth, lo_q, hi_q, value)
    if np.isfinite(lo_q[-1]) and value >= lo_q[-1]:
        hi = float(truth[-1])  # the band at the edge of the model contains it, or lies below
        if not np.isfinite(lo) and value > hi_q[-1]:
            lo = float(truth[-1])
    return point, (lo, hi)


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
    li = _nearest(tab.lengths, n, log=True)
    bi = _nearest(tab.betas, 2.0 * c1 - 1.0)
    b0 = _nearest(tab.betas, 0.0)
    null_c2 = tab.null_c2[bi, li]
    null_w = tab.null_width[bi, li]
    with np.errstate(invalid="ignore"):
        sd_h = np.nanstd(tab.null_h[bi, li], axis=0, ddof=1)
        sd_c1 = float(np.nanstd(tab.null_c1[bi, li], ddof=1))
        shift_c2 = float(np.nanmean(null_c2) - np.nanmean(tab.null_c2[b0, li]))
        shift_w = float(np.nanmean(null_w) - np.nanmean(tab.null_width[b0, li]))
        scale_c2 = float(np.nanstd(null_c2) / np.nanstd(tab.null_c2[b0, li]))
        scale_w = float(np.nanstd(null_w) / np.nanstd(tab.null_width[b0, li]))
    order_k = np.argsort(-tab.lambda2)  # truth c2 = -lambda^2, increasing
    c2_cal, c2_ci = _belt(-tab.lambda2[order_k], tab.mrw_c2[order_k, li], shift_c2,
                          scale_c2, c2)
    w_truth = 10.0 * tab.lambda2  # width of the MRW over q in [-5, 5]
    order_w = np.argsort(w_truth)
    w_cal, w_ci = _belt(-w_truth[order_w][::-1], -tab.mrw_width[order_w, li][::-1], -shift_w,
                        scale_w, -width)
    w_cal, w_ci = -w_cal, (-w_ci[1], -w_ci[0])  # width >= 0: the belt is run on -width
    ok = np.isfinite(null_c2)
    pval = float((1 + np.sum(null_c2[ok] <= c2)) / (1 + ok.sum())) if np.isfinite(c2) else \
        float("nan")
    h_ci = np.column_stack((h - _Z975 * sd_h, h + _Z975 * sd_h))
    return MultifractalEstimate(
        n_obs=n, q=DEFAULT_Q, h=h, h_ci=h_ci, alpha=alpha, f=f, width_slope=width,
        width=float(w_cal), width_ci=(float(w_ci[0]), float(w_ci[1])), c1=c1,
        c1_ci=(c1 - _Z975 * sd_c1, c1 + _Z975 * sd_c1), c2_slope=c2, c2=float(c2_cal),
        c2_ci=c2_ci, c2_pvalue=pval, null_beta=float(tab.betas[bi]))
