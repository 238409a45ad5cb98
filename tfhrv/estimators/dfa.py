"""Detrended fluctuation analysis (DFA) of order q with a vectorised kernel.

F(n) is the root-mean-square deviation of the integrated series (the profile) from a
degree-q polynomial fitted in boxes of n beats; alpha is the slope of log F against
log n (Peng et al. 1995).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import Any

import numpy as np

from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.specfun import stdtrit
from tfhrv.core.validation import as_1d_float, check_choice, check_positive, check_range, readonly
from tfhrv.estimators.loglog import ScalingFit, loglog_fit

__all__ = [
    "Fluctuation",
    "LocalSlopes",
    "alpha1_slope",
    "alpha2_slope",
    "box_variances",
    "default_scales",
    "dfa",
    "dfa_fluctuation",
    "dfa_ranges",
    "local_alpha",
    "local_slopes",
]

_ORDERS = (1, 2, 3)
#: Scales per decade of the default log-spaced grid (common practice).
SCALES_PER_DECADE = 16
#: Short-term range (beats) of Peng et al. 1995.
ALPHA1_RANGE = (4, 16)
#: Intermediate range (beats) of Peng et al. 1995.
ALPHA2_RANGE = (16, 64)
#: Series up to this length stack both box tilings into one matrix per scale (measured
#: faster on short windows; slower on long ones, where the copy dominates).
_STACK_BELOW = 4096
#: numpy.longdouble is wider than float64 here (x86: 64-bit mantissa), as the prefix-sum
#: DFA-1 path for short series needs; elsewhere the per-scale kernel is used throughout.
_EXTENDED = np.finfo(np.longdouble).nmant >= 60
#: A fitted scale range of at most this many integers uses every integer scale.
_MAX_INTEGER_SCALES = 100


@dataclass(frozen=True, slots=True)
class Fluctuation:
    """The DFA fluctuation function F(n).

    Attributes
    ----------
    scales : numpy.ndarray of int
        Box sizes n in beats, increasing.
    fluctuation : numpy.ndarray
        F(n) in the units of x.
    order : int
        Polynomial order q of the detrending.
    n_obs : int
        Length of the analysed series.
    n_boxes : numpy.ndarray of int
        Number of boxes averaged at each scale (2 floor(N/n): tiled from both ends).
    """

    scales: np.ndarray
    fluctuation: np.ndarray
    order: int
    n_obs: int
    n_boxes: np.ndarray

    def __post_init__(self) -> None:
        for name in ("scales", "fluctuation", "n_boxes"):
            object.__setattr__(self, name, readonly(np.array(getattr(self, name))))


@dataclass(frozen=True, slots=True)
class LocalSlopes:
    """Local DFA exponent d log F / d log n at each scale.

    Attributes
    ----------
    scales : numpy.ndarray of int
        Box sizes n in beats.
    slopes : numpy.ndarray
        Local slope at each scale.
    fluctuation : numpy.ndarray
        F(n) the slopes were computed from.
    n_points : numpy.ndarray of int
        Number of scales in each sliding window.
    half_width : float
        Half-width of the sliding window in decades of n.
    order : int
        DFA order q.
    n_obs : int
        Length of the analysed series.
    """

    scales: np.ndarray
    slopes: np.ndarray
    fluctuation: np.ndarray
    n_points: np.ndarray
    half_width: float
    order: int
    n_obs: int

    def __post_init__(self) -> None:
        for name in ("scales", "slopes", "fluctuation", "n_points"):
            object.__setattr__(self, name, readonly(np.array(getattr(self, name))))


def _check_order(order: Any) -> int:
    if isinstance(order, bool) or not isinstance(order, int | np.integer):
        raise TypeError(f"order must be an int, got {order!r}")
    return int(check_choice(int(order), "order", _ORDERS))


def _min_scale(order: int) -> int:
    """Smallest box with at least one residual degree of freedom (n >= q + 2), and >= 4."""
    return max(4, order + 2)


def default_scales(n_obs: int, /, *, order: int = 1) -> np.ndarray:
    """Default DFA scales: integers log-spaced from max(4, q + 2) to floor(N/4).

    About 16 scales per decade (common practice), rounded to integers and de-duplicated,
    so the smallest scales are consecutive integers. The upper limit N/4 keeps at least 8
    boxes per scale (4 from each end; common practice).

    Examples
    --------
    >>> default_scales(100).tolist()
    [4, 5, 6, 7, 8, 9, 11, 12, 14, 16, 19, 22, 25]
    """
    order = _check_order(order)
    lo, hi = _min_scale(order), int(n_obs) // 4
    if hi <= lo:
        raise InsufficientDataError(
            f"a series of {n_obs} values leaves no DFA-{order} scales between {lo} and N/4"
        )
    num = int(np.ceil(SCALES_PER_DECADE * np.log10(hi / lo))) + 1
    return np.unique(np.rint(np.geomspace(lo, hi, num)).astype(np.int64))


@functools.lru_cache(maxsize=512)
def _box_basis(n: int, order: int) -> np.ndarray:
    """Orthonormal basis (n x q) of the degree-1..q polynomials on n points, orthogonal
    to the constant: the discrete Gram (Chebyshev) polynomials of the centred, scaled
    in-box index u = (k - (n-1)/2) / n, namely u, u^2 - (1 - 1/n^2)/12 and
    u^3 - u (3 - 7/n^2)/20, each normalised (closed forms from memory; orthonormality is
    checked in the tests)."""
    u = np.arange(n, dtype=np.float64) * (1.0 / n) - (n - 1) / (2.0 * n)
    rows = np.empty((order, n))
    rows[0] = u
    if order >= 2:
        u2 = u * u
        rows[1] = u2 - (1.0 - 1.0 / n**2) / 12.0
    if order >= 3:
        rows[2] = u * (u2 - (3.0 - 7.0 / n**2) / 20.0)
    rows /= np.sqrt(np.einsum("ij,ij->i", rows, rows))[:, None]
    return readonly(np.ascontiguousarray(rows.T))  # cached: shared, so read-only


def _box_rss(boxes: np.ndarray, basis: np.ndarray, work: np.ndarray) -> float:
    """Total residual sum of squares of the degree-q fits in all rows of ``boxes``.

    Each box is centred on its mean; the fitted part is the projection on ``basis``
    (orthonormal, orthogonal to constants), so RSS = |y_c|^2 - |P^T y_c|^2. If that
    difference has lost more than about 6 of the 16 significant digits (a profile that
    is almost exactly a degree-q polynomial), the residuals are formed explicitly.
    """
    m, n = boxes.shape
    means = np.add.reduce(boxes, axis=1) * (1.0 / n)
    centred = np.subtract(boxes, means[:, None], out=work[: m * n].reshape(m, n))
    coef = centred @ basis
    # einsum rather than vdot: BLAS ddot threads stall on a busy machine.
    total = float(np.einsum("ij,ij->", centred, centred))
    rss = total - float(np.einsum("ij,ij->", coef, coef))
    if rss <= 1e-6 * total:
        resid = centred - coef @ basis.T
        rss = float(np.einsum("ij,ij->", resid, resid))
    return rss


def _box_rss_each(boxes: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """Residual sum of squares of the degree-q fit in each row of ``boxes``.

    The per-box version of :func:`_box_rss` (same projection on the orthonormal Gram
    basis, same guard: a box that loses more than about 6 significant digits in the
    difference of squares gets its residuals formed explicitly).
    """
    n = boxes.shape[1]
    centred = boxes - np.add.reduce(boxes, axis=1)[:, None] * (1.0 / n)
    coef = centred @ basis
    total = np.einsum("ij,ij->i", centred, centred)
    rss = total - np.einsum("ij,ij->i", coef, coef)
    lossy = rss <= 1e-6 * total
    if lossy.any():
        resid = centred[lossy] - coef[lossy] @ basis.T
        rss[lossy] = np.einsum("ij,ij->i", resid, resid)
    return np.maximum(rss, 0.0)


def _linear_rss_all_scales(profile: np.ndarray, scales: np.ndarray) -> tuple:
    """Per-scale RSS of DFA-1 from window prefix sums, every box of every scale at once.

    For a box [a, a + n) with in-box index t centred on (n - 1)/2, the linear fit leaves
    RSS = S_yy - S_y^2 / n - S_ty^2 / (n (n^2 - 1) / 12), and S_y, S_yy and
    S_ty = S_ky - (a + (n - 1)/2) S_y come from prefix sums of y, y^2 and k y, accumulated
    in extended precision.  Used only on short series (N <= _STACK_BELOW); F agrees with
    the per-scale kernel to about 1e-10 there (tests), and a box whose RSS keeps fewer
    than about 7 significant digits of its centred sum of squares flags its scale, which
    the caller recomputes with the per-scale kernel.
    Returns (rss per scale, flagged per scale).
    """
    n_obs = profile.size
    y = profile.astype(np.longdouble)  # 64-bit mantissa on x86: the sums keep their digits
    k = np.arange(n_obs, dtype=np.longdouble)
    zero = np.zeros(1, dtype=np.longdouble)
    c0 = np.concatenate((zero, np.cumsum(y)))
    c1 = np.concatenate((zero, np.cumsum(k * y)))
    c2 = np.concatenate((zero, np.cumsum(y * y)))
    m = n_obs // scales
    reps = 2 * m
    which = np.repeat(np.arange(scales.size), reps)
    n = scales[which].astype(np.float64)
    # box index j within its scale: the first m boxes tile from the start, the next m
    # from the end (rest = N - m n values skipped at the start)
    first = np.concatenate(([0], np.cumsum(reps)[:-1]))
    j = np.arange(which.size) - first[which]
    mm = m[which]
    rest = n_obs - mm * scales[which]
    start = np.where(j < mm, j * scales[which], rest + (j - mm) * scales[which])
    stop = start + scales[which]
    sy = c0[stop] - c0[start]
    syy = c2[stop] - c2[start]
    sty = (c1[stop] - c1[start]) - (start + (n - 1.0) / 2.0) * sy
    centred = syy - sy * sy / n
    rss = (centred - sty * sty / (n * (n * n - 1.0) / 12.0)).astype(np.float64)
    centred = centred.astype(np.float64)
    per_scale = np.bincount(which, weights=rss, minlength=scales.size)
    lossy = rss <= 1e-7 * np.maximum(centred, 0.0)
    flagged = np.bincount(which, weights=lossy, minlength=scales.size) > 0
    return per_scale, flagged


def _fluctuation(profile: np.ndarray, scales: np.ndarray, order: int) -> tuple:
    n_obs = profile.size
    f2 = np.empty(scales.size)
    nbox = 2 * (n_obs // scales)
    todo = range(scales.size)
    if order == 1 and n_obs <= _STACK_BELOW and _EXTENDED:  # short: no per-scale loop
        rss, flagged = _linear_rss_all_scales(profile, scales)
        f2[:] = rss / (nbox * scales)
        todo = np.flatnonzero(flagged).tolist()
    work = np.empty(2 * n_obs)
    for i in todo:
        n = int(scales[i])
        m = n_obs // n
        basis = _box_basis(n, order)
        rest = n_obs - m * n
        if rest and n_obs <= _STACK_BELOW:  # both tilings in one matrix: fewer calls
            boxes = np.concatenate((profile[: m * n].reshape(m, n),
                                    profile[rest:].reshape(m, n)))
            rss = _box_rss(boxes, basis, work)
        elif rest:  # a copy costs more than a call on long series
            rss = _box_rss(profile[: m * n].reshape(m, n), basis, work)
            rss += _box_rss(profile[rest:].reshape(m, n), basis, work)
        else:  # both tilings coincide
            rss = 2.0 * _box_rss(profile.reshape(m, n), basis, work)
        f2[i] = rss / (2 * m * n)
    return np.sqrt(f2), nbox


def _validate_scales(scales: Any, n_obs: int, order: int) -> np.ndarray:
    s = np.asarray(scales)
    if s.ndim != 1 or s.size == 0:
        raise ValueError(f"scales must be a non-empty 1-D sequence, got shape {s.shape}")
    if not np.issubdtype(s.dtype, np.integer):
        if not np.issubdtype(s.dtype, np.floating) or np.any(s != np.round(s)):
            raise TypeError("scales must be integers (box sizes in beats)")
    s = np.unique(s.astype(np.int64))
    low = order + 2
    if s[0] < low or s[-1] > n_obs:
        raise ValueError(
            f"scales must lie in [{low}, N={n_obs}] for DFA-{order}, got {s[0]}..{s[-1]}"
        )
    return s


def dfa_fluctuation(
    x: np.ndarray, /, *, scales: np.ndarray | None = None, order: int = 1
) -> Fluctuation:
    """DFA fluctuation function F(n) of order q.

    Parameters
    ----------
    x : array_like
        Beat-indexed series, e.g. NN intervals in ms (at least 20 values).
    scales : array_like of int, optional
        Box sizes n in beats, q + 2 <= n <= N. Default :func:`default_scales`: integers
        log-spaced from max(4, q + 2) to N/4, about 16 per decade.
    order : {1, 2, 3}, default 1
        Degree q of the polynomial removed from the profile in each box (DFA-q).

    Returns
    -------
    Fluctuation
        ``scales``, ``fluctuation`` F(n), ``order``, ``n_obs``, ``n_boxes``.

    Notes
    -----
    Profile y(k) = sum_{i<=k} (x_i - mean x), k = 1..N. At scale n the profile is cut into
    floor(N/n) boxes from the start and floor(N/n) boxes from the end (Peng et al. 1995;
    Kantelhardt et al. 2001), 2 floor(N/n) boxes in all, and

        F^2(n) = 1/(2 floor(N/n)) sum_boxes (1/n) sum_{k in box} (y(k) - p_box(k))^2,

    with p_box the least-squares polynomial of degree q. The kernel handles every box of
    a scale at once: the profile is viewed as a (boxes x n) matrix, centred per box, and
    projected on an orthonormal basis of the degree-1..q discrete (Gram) polynomials in
    the centred in-box index, i.e. the box moments sum_k P_m(k) y(k) come from one matrix
    product per scale, and RSS = |y_c|^2 - sum_m (sum_k P_m(k) y_c(k))^2 per box, y_c
    being the box-centred profile. No difference of global cumulative sums is taken
    (those lose all digits once the profile wanders far from zero), and where the
    difference of squares itself would cancel (a box almost exactly polynomial) the
    residuals are formed explicitly; F agrees with a per-box least-squares fit to about
    1e-10 even for order 3 at n = N/4. Cost is O(q N) per scale.

    References
    ----------
    Peng C-K, Havlin S, Stanley HE, Goldberger AL. Quantification of scaling exponents and
    crossover phenomena in nonstationary heartbeat time series. Chaos 1995;5:82-87.
    doi:10.1063/1.166141
    Kantelhardt JW, Koscielny-Bunde E, Rego HHA, Havlin S, Bunde A. Detecting long-range
    correlations with detrended fluctuation analysis. Physica A 2001;295:441-454.
    doi:10.1016/S0378-4371(01)00144-3

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> fl = dfa_fluctuation(rng.standard_normal(2**16), scales=[4, 16])
    >>> exact = np.array([12 / 60, 252 / 240])  # E F^2 = (s^2 - 4) / (15 s)
    >>> bool(np.all(np.abs(fl.fluctuation**2 / exact - 1) < 0.03))
    True
    """
    order = _check_order(order)
    x = as_1d_float(x, "x", min_len=4 * (_min_scale(order) + 1))
    if np.ptp(x) == 0:
        raise InsufficientDataError("x must not be constant (no fluctuation to scale)")
    s = default_scales(x.size, order=order) if scales is None else _validate_scales(
        scales, x.size, order
    )
    profile = np.cumsum(x - x.mean())
    f, nbox = _fluctuation(profile, s, order)
    return Fluctuation(scales=s, fluctuation=f, order=order, n_obs=x.size, n_boxes=nbox)


def box_variances(
    x: np.ndarray, /, *, scales: np.ndarray, order: int = 2
) -> tuple[np.ndarray, tuple[np.ndarray, ...]]:
    """Residual variance of the DFA-q fit in every box, scale by scale.

    The per-box quantities F^2(nu, n) that :func:`dfa_fluctuation` averages: the same
    profile, the same boxes (floor(N/n) from the start and floor(N/n) from the end) and
    the same orthonormal-basis kernel. Multifractal DFA raises them to the power q/2
    before averaging (:mod:`tfhrv.estimators.multifractal`).

    Parameters
    ----------
    x : array_like
        Beat-indexed series.
    scales : array_like of int
        Box sizes n in beats, q + 2 <= n <= N.
    order : {1, 2, 3}, default 2
        DFA order q.

    Returns
    -------
    scales : numpy.ndarray of int
        The validated, sorted scales.
    variances : tuple of numpy.ndarray
        For each scale, the 2 floor(N/n) values F^2(nu, n) = (1/n) sum_{k in box nu}
        (y(k) - p_nu(k))^2, boxes from the start first.

    References
    ----------
    Kantelhardt JW, Zschiegner SA, Koscielny-Bunde E, Havlin S, Bunde A, Stanley HE.
    Multifractal detrended fluctuation analysis of nonstationary time series. Physica A
    2002;316:87-114, eqs. 2-3. doi:10.1016/S0378-4371(02)01383-3

    Examples
    --------
    >>> x = np.random.default_rng(1).standard_normal(4096)
    >>> s, var = box_variances(x, scales=[16, 64], order=1)
    >>> fl = dfa_fluctuation(x, scales=[16, 64], order=1)
    >>> bool(np.allclose([np.sqrt(v.mean()) for v in var], fl.fluctuation, rtol=1e-9))
    True
    """
    order = _check_order(order)
    x = as_1d_float(x, "x", min_len=4 * (_min_scale(order) + 1))
    s = _validate_scales(scales, x.size, order)
    profile = np.cumsum(x - x.mean())
    n_obs = profile.size
    out = []
    for n in s.tolist():
        m = n_obs // n
        basis = _box_basis(n, order)
        fwd = _box_rss_each(profile[: m * n].reshape(m, n), basis)
        rest = n_obs - m * n
        bwd = _box_rss_each(profile[rest:].reshape(m, n), basis) if rest else fwd
        out.append(readonly(np.concatenate((fwd, bwd)) / n))
    return s, tuple(out)


def _fit_scales(lo: float, hi: float, order: int) -> np.ndarray:
    lo_i = max(int(np.ceil(lo)), order + 2)
    hi_i = int(np.floor(hi))
    if hi_i - lo_i + 1 <= _MAX_INTEGER_SCALES:
        return np.arange(lo_i, hi_i + 1, dtype=np.int64)
    grid = np.rint(np.geomspace(lo_i, hi_i, int(np.ceil(SCALES_PER_DECADE
                                                         * np.log10(hi_i / lo_i))) + 1))
    return np.unique(grid.astype(np.int64))


def dfa(
    x: np.ndarray, /, *, fit_range: tuple[float, float] = ALPHA1_RANGE, order: int = 1,
    scales: np.ndarray | None = None,
) -> ScalingFit:
    """DFA scaling exponent alpha over a range of box sizes.

    Parameters
    ----------
    x : array_like
        Beat-indexed series (NN intervals).
    fit_range : (float, float), default (4, 16)
        Box sizes (beats) to fit, inclusive. The upper end must not exceed N/4.
    order : {1, 2, 3}, default 1
        DFA order q.
    scales : array_like of int, optional
        Scales at which to evaluate F; those inside ``fit_range`` are fitted. By default
        the fit uses every integer scale in ``fit_range`` when there are at most 100 of
        them (as for alpha1 and alpha2, so results match the exact expectations of
        REFERENCES 3.3), otherwise a 16-per-decade log-spaced grid; scales below q + 2
        are skipped. The returned curve is these scales together with
        :func:`default_scales`.

    Returns
    -------
    ScalingFit
        ``kind="alpha"``, ``fit_units="beats"``, ``x`` = log10 n, ``y`` = log10 F(n),
        ``weights`` = 1, ``used`` marks fitted scales, ``fit_range`` = the smallest and
        largest fitted scale, ``se`` the ordinary least-squares slope SE, ``ci`` its 95 %
        t interval; ``options`` holds ``order``, ``scales`` (fitted) and ``fit_range``
        (asked for).

    Raises
    ------
    InsufficientDataError
        If N < 4 * fit_range[1] or fewer than 2 scales fall in the range.

    Notes
    -----
    Ordinary least squares of log10 F(n) on log10 n (Peng et al. 1995). For white noise
    the expected DFA-1 alpha over the integer scales 4..16 is 0.583, not 0.5: small boxes
    are biased upwards (REFERENCES 3.3, exact trace formula). Points are correlated, so
    the SE is optimistic until calibrated.

    References
    ----------
    Peng C-K, Havlin S, Stanley HE, Goldberger AL. Chaos 1995;5:82-87.
    doi:10.1063/1.166141

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> fit = dfa(fgn(2**15, 0.75, rng=2), fit_range=(16, 64))
    >>> fit.kind, fit.fit_range, fit.n_points
    ('alpha', (16.0, 64.0), 49)
    >>> bool(abs(fit.exponent - 0.75) < 0.05)
    True
    """
    order = _check_order(order)
    lo, hi = check_range(fit_range, "fit_range")
    x = as_1d_float(x, "x", min_len=1)
    if x.size < 4 * hi:
        raise InsufficientDataError(
            f"fit_range={fit_range!r} needs at least 4 * {hi:g} = {int(np.ceil(4 * hi))} "
            f"values (4 boxes at the largest scale), got {x.size}"
        )
    if scales is None:
        fit_s = _fit_scales(lo, hi, order)
        try:
            curve = np.union1d(default_scales(x.size, order=order), fit_s)
        except InsufficientDataError:
            curve = fit_s
    else:
        curve = _validate_scales(scales, x.size, order)
        fit_s = curve[(curve >= lo) & (curve <= hi)]
    fl = dfa_fluctuation(x, scales=curve, order=order)
    return _alpha_fit(fl, fit_s, (lo, hi))


def _alpha_fit(fl: Fluctuation, fit_s: np.ndarray, asked: tuple[float, float]) -> ScalingFit:
    """Least-squares alpha over the scales ``fit_s`` of a fluctuation function."""
    used = np.isin(fl.scales, fit_s)
    if used.sum() < 2:
        raise InsufficientDataError(
            f"fewer than 2 DFA-{fl.order} scales in fit_range={asked!r}"
        )
    lx, ly = np.log10(fl.scales.astype(np.float64)), np.log10(fl.fluctuation)
    fit = loglog_fit(lx[used], ly[used])
    dof = fit.n_points - 2
    t = stdtrit(dof, 0.975) if dof > 0 else float("nan")
    fitted = fl.scales[used]
    return ScalingFit(
        exponent=fit.slope, kind="alpha", se=fit.slope_se,
        ci=(fit.slope - t * fit.slope_se, fit.slope + t * fit.slope_se),
        intercept=fit.intercept, fit_range=(float(fitted[0]), float(fitted[-1])),
        fit_units="beats", x=lx, y=ly, weights=np.ones_like(lx), used=used, n_obs=fl.n_obs,
        n_points=fit.n_points, r_squared=fit.r_squared, curvature=fit.curvature,
        curvature_pvalue=fit.curvature_pvalue, method=f"DFA-{fl.order}",
        options={"order": fl.order, "fit_range": asked,
                 "scales": tuple(int(v) for v in fitted), "box_tiling": "forward+backward"},
    )


def dfa_ranges(
    x: np.ndarray, /, *, fit_ranges: dict[str, tuple[float, float]], order: int = 1,
    extra_scales: np.ndarray | None = None,
) -> tuple[dict[str, ScalingFit], Fluctuation]:
    """Several DFA exponents from one fluctuation function.

    Each range is fitted over the same scales as :func:`dfa` with its default ``scales``
    would use, so every exponent equals ``dfa(x, fit_range=r, order=order).exponent``;
    F(n) is computed once over the union of those scales and ``extra_scales`` (for
    example the grid of :func:`local_slopes`), which saves the repeated work when a scan
    asks for alpha1, alpha2, alpha_long and local slopes of the same window.

    Parameters
    ----------
    x : array_like
        Beat-indexed series.
    fit_ranges : dict of name -> (float, float)
        Box-size ranges (beats) to fit. A range whose upper end exceeds N/4, or that
        holds fewer than 2 scales, is left out of the result.
    order : {1, 2, 3}, default 1
        DFA order q.
    extra_scales : array_like of int, optional
        Further scales at which to evaluate F (not fitted).

    Returns
    -------
    fits : dict of name -> ScalingFit
        As :func:`dfa` returns, except that ``x``/``y`` hold the whole shared curve.
    fluctuation : Fluctuation
        F(n) at the union of the scales.

    Examples
    --------
    >>> rng = np.random.default_rng(3)
    >>> x = rng.standard_normal(4000)
    >>> fits, fl = dfa_ranges(x, fit_ranges={"a1": (4, 16), "a2": (16, 64)})
    >>> bool(fits["a2"].exponent == dfa(x, fit_range=(16, 64)).exponent)
    True
    """
    order = _check_order(order)
    x = as_1d_float(x, "x", min_len=4 * (_min_scale(order) + 1))
    wanted = {}
    for name, rng_ in fit_ranges.items():
        lo, hi = check_range(rng_, f"fit_ranges[{name!r}]")
        if x.size >= 4 * hi:
            wanted[name] = ((lo, hi), _fit_scales(lo, hi, order))
    union = np.zeros(0, dtype=np.int64)
    for _, fit_s in wanted.values():
        union = np.union1d(union, fit_s)
    if extra_scales is not None:
        union = np.union1d(union, _validate_scales(extra_scales, x.size, order))
    if union.size == 0:
        raise InsufficientDataError(f"no DFA range fits a series of {x.size} values")
    fl = dfa_fluctuation(x, scales=union, order=order)
    fits = {}
    for name, (asked, fit_s) in wanted.items():
        try:
            fits[name] = _alpha_fit(fl, fit_s, asked)
        except InsufficientDataError:
            continue
    return fits, fl


def alpha1_slope(x: np.ndarray, /, *, order: int = 1) -> ScalingFit:
    """Short-term DFA slope alpha1: every integer box size 4..16 beats (Peng et al. 1995).

    The slope of the fitted line, before calibration (the ``alpha1_slope`` of a scan file);
    the scan file's ``alpha1`` is this value bias-corrected by
    :func:`tfhrv.calibration.calibrate.calibrate`.  See :func:`dfa`.

    Examples
    --------
    >>> rng = np.random.default_rng(5)
    >>> bool(abs(alpha1_slope(rng.standard_normal(20000)).exponent - 0.583) < 0.03)
    True
    """
    return dfa(x, fit_range=ALPHA1_RANGE, order=order)


def alpha2_slope(x: np.ndarray, /, *, order: int = 1) -> ScalingFit:
    """Intermediate DFA slope alpha2: every integer box size 16..64 beats (Peng et al. 1995).

    Before calibration, like :func:`alpha1_slope`.  See :func:`dfa`.

    Examples
    --------
    >>> rng = np.random.default_rng(6)
    >>> bool(abs(alpha2_slope(rng.standard_normal(20000)).exponent - 0.504) < 0.05)
    True
    """
    return dfa(x, fit_range=ALPHA2_RANGE, order=order)


def local_alpha(
    x: np.ndarray, /, *, scales: np.ndarray | None = None, order: int = 1,
    half_width: float = 0.15,
) -> LocalSlopes:
    """Local DFA exponent: the slope of log F(n) against log n around each scale.

    Parameters
    ----------
    x : array_like
        Beat-indexed series.
    scales : array_like of int, optional
        Box sizes (beats); default :func:`default_scales`. Pass the same grid for every
        window to build a time x scale map.
    order : {1, 2, 3}, default 1
        DFA order q.
    half_width : float, default 0.15
        Half-width of the sliding window in decades of n: the slope at scale n is the
        ordinary least-squares slope of log10 F on log10 n over the scales within
        n 10^(+-half_width) (a factor 1.41 either side by default, about 5 points of the
        default grid), always including the immediate neighbours on the grid so that a
        coarse grid still gives a slope; windows are one-sided at the ends of the grid.

    Returns
    -------
    LocalSlopes
        ``scales``, ``slopes``, ``fluctuation``, ``n_points``, ``half_width``, ``order``,
        ``n_obs``.

    Notes
    -----
    Local slopes show crossovers that a single straight-line fit hides (Peng et al.
    1995, the alpha1/alpha2 crossover of heartbeat series). For white noise the exact
    DFA-1 local slope is (s^2 + 4) / (2 (s^2 - 4)) (REFERENCES 3.3), 0.83 at s = 4.

    Examples
    --------
    >>> rng = np.random.default_rng(7)
    >>> loc = local_alpha(rng.standard_normal(2**14), scales=[4, 8, 16, 32, 64, 128])
    >>> loc.n_points.tolist()
    [2, 3, 3, 3, 3, 2]
    >>> bool(loc.slopes[0] > 0.6) and bool(np.all(np.abs(loc.slopes[2:] - 0.5) < 0.05))
    True
    """
    fl = dfa_fluctuation(x, scales=scales, order=order)
    return local_slopes(fl, half_width=half_width)


def local_slopes(fl: Fluctuation, /, *, half_width: float = 0.15) -> LocalSlopes:
    """Local slopes of a computed fluctuation function (see :func:`local_alpha`).

    Examples
    --------
    >>> fl = dfa_fluctuation(np.random.default_rng(7).standard_normal(4096),
    ...                      scales=[4, 8, 16, 32, 64])
    >>> local_slopes(fl).n_points.tolist()
    [2, 3, 3, 3, 2]
    """
    hw = check_positive(half_width, "half_width")
    lx, ly = np.log10(fl.scales.astype(np.float64)), np.log10(fl.fluctuation)
    idx = np.arange(lx.size)
    inside = (np.abs(lx[:, None] - lx[None, :]) <= hw + 1e-12) | (
        np.abs(idx[:, None] - idx[None, :]) <= 1
    )  # rows: centre scale; always the immediate neighbours
    w = inside.astype(np.float64)
    cnt = w.sum(axis=1)
    mx, my = (w @ lx) / cnt, (w @ ly) / cnt
    dx = lx[None, :] - mx[:, None]
    sxx = np.einsum("ij,ij->i", w, dx * dx)
    sxy = np.einsum("ij,ij->i", w, dx * (ly[None, :] - my[:, None]))
    with np.errstate(invalid="ignore", divide="ignore"):
        slopes = np.where(sxx > 0, sxy / sxx, np.nan)
    return LocalSlopes(
        scales=fl.scales, slopes=slopes, fluctuation=fl.fluctuation,
        n_points=cnt.astype(np.int64), half_width=hw, order=fl.order, n_obs=fl.n_obs,
    )
