"""Multifractal scaling: MF-DFA and wavelet-leader log-cumulants (pure numpy).

Two estimators of how the local scaling of a series varies:

* :func:`mfdfa` - multifractal detrended fluctuation analysis (Kantelhardt et al. 2002):
  q-order fluctuation functions F_q(s), generalised Hurst exponents h(q),
  tau(q) = q h(q) - 1, the singularity spectrum f(alpha) by Legendre transform, and its
  width.  Built on the per-box residual variances of :func:`tfhrv.estimators.dfa.box_variances`
  (one pass per scale serves every q).
* :func:`leader_cumulants` - wavelet leaders (Jaffard 2004; Wendt, Abry & Jaffard 2007) on
  the DWT of :func:`tfhrv.estimators.wavelet.dwt_details`, and the log-cumulants c1
  (about the mean Hoelder exponent) and c2 (the width: 0 for a monofractal, < 0 for a
  multifractal).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.validation import as_1d_float, check_int, check_range, readonly
from tfhrv.estimators.dfa import box_variances
from tfhrv.estimators.wavelet import DEFAULT_J1, MIN_COEFFICIENTS, dwt_details, octave_pair

__all__ = [
    "DEFAULT_Q",
    "LeaderCumulants",
    "MFDFA_RANGE",
    "MultifractalSpectrum",
    "binomial_hq",
    "leader_cumulants",
    "mfdfa",
    "mfdfa_fit_range",
]

#: Default moment orders: -5 to 5 in steps of 0.5 (the range of Kantelhardt et al. 2002).
DEFAULT_Q: np.ndarray = readonly(np.linspace(-5.0, 5.0, 21))
#: Default MF-DFA fit range in beats: 16 beats (well above the DFA-2 minimum of 4, where
#: small boxes distort negative-q moments, Kantelhardt et al. 2002 sec. 3) to 1024 beats,
#: and at most N/10 so that every fitted scale has >= 20 boxes (common practice).
MFDFA_RANGE: tuple[int, int] = (16, 1024)
#: Scales per decade of the MF-DFA grid (common practice).
_MF_SCALES_PER_DECADE = 10
#: Default MF-DFA order: quadratic detrending of the profile (the issue's "order >= 2";
#: Kantelhardt et al. 2002 use orders 1-3).
DEFAULT_ORDER = 2
#: A box whose residual variance is below this fraction of the median of its scale is
#: "empty" (a run of identical values, e.g. interpolated gaps) and left out, since its
#: negative moments diverge.
_EMPTY_BOX = 1e-10
_LN2 = np.log(2.0)


@dataclass(frozen=True, slots=True)
class MultifractalSpectrum:
    """Result of :func:`mfdfa`.

    Attributes
    ----------
    q : numpy.ndarray
        Moment orders.
    scales : numpy.ndarray of int
        Box sizes s (beats) at which F_q was computed; all are fitted.
    fq : numpy.ndarray
        F_q(s), shape (len(q), len(scales)), units of x.
    h : numpy.ndarray
        Generalised Hurst exponents h(q) (slope of log F_q on log s).
    h_se : numpy.ndarray
        Ordinary least-squares SE of each h(q) (optimistic: points are correlated).
    tau : numpy.ndarray
        Mass exponents tau(q) = q h(q) - 1.
    alpha : numpy.ndarray
        Hoelder exponents alpha = d tau / d q (finite differences).
    f : numpy.ndarray
        Singularity spectrum f(alpha) = q alpha - tau.
    width : float
        alpha(q_min) - alpha(q_max): the spectrum width over the q range.
    fit_range : (float, float)
        Smallest and largest fitted scale (beats).
    order : int
        Detrending order.
    n_obs : int
        Length of the series.
    n_empty : int
        Boxes left out as empty (zero residual variance).
    """

    q: np.ndarray
    scales: np.ndarray
    fq: np.ndarray
    h: np.ndarray
    h_se: np.ndarray
    tau: np.ndarray
    alpha: np.ndarray
    f: np.ndarray
    width: float
    fit_range: tuple[float, float]
    order: int
    n_obs: int
    n_empty: int

    def __post_init__(self) -> None:
        for name in ("q", "scales", "fq", "h", "h_se", "tau", "alpha", "f"):
            object.__setattr__(self, name, readonly(np.array(getattr(self, name))))


@dataclass(frozen=True, slots=True)
class LeaderCumulants:
    """Result of :func:`leader_cumulants`.

    Attributes
    ----------
    octaves : numpy.ndarray of int
        Octaves j (1 = finest) that hold at least 2 leaders.
    n_leaders : numpy.ndarray of int
        Number of boundary-free leaders at each octave.
    cumulant1 : numpy.ndarray
        C1(j): mean of ln L_{j,k}.
    cumulant2 : numpy.ndarray
        C2(j): variance of ln L_{j,k}.
    c1, c2 : float
        Log-cumulants: slopes of C1(j) and C2(j) against j ln 2 over ``fit_range``.
    c1_se, c2_se : float
        Their regression standard errors (octaves treated as independent: optimistic).
    fit_range : (int, int)
        Fitted octaves (j1, j2).
    wavelet : str
        PyWavelets name of the wavelet.
    gamma : float
        Order of the fractional integration applied to the coefficients (d 2^{gamma j}).
    n_obs : int
        Length of the series.
    """

    octaves: np.ndarray
    n_leaders: np.ndarray
    cumulant1: np.ndarray
    cumulant2: np.ndarray
    c1: float
    c2: float
    c1_se: float
    c2_se: float
    fit_range: tuple[int, int]
    wavelet: str
    gamma: float
    n_obs: int

    def __post_init__(self) -> None:
        for name in ("octaves", "n_leaders", "cumulant1", "cumulant2"):
            object.__setattr__(self, name, readonly(np.array(getattr(self, name))))


def mfdfa_fit_range(n_obs: int, /) -> tuple[int, int]:
    """The default MF-DFA fit range for a series of ``n_obs`` beats: 16 to min(1024, N/10).

    Examples
    --------
    >>> mfdfa_fit_range(4000), mfdfa_fit_range(100000)
    ((16, 400), (16, 1024))
    """
    lo, hi = MFDFA_RANGE
    return lo, min(hi, int(n_obs) // 10)


def _scale_grid(lo: float, hi: float) -> np.ndarray:
    num = int(np.ceil(_MF_SCALES_PER_DECADE * np.log10(hi / lo))) + 1
    return np.unique(np.rint(np.geomspace(lo, hi, num)).astype(np.int64))


def _ols_slopes(x: np.ndarray, y: np.ndarray, w: np.ndarray | None = None
                ) -> tuple[np.ndarray, np.ndarray]:
    """(Weighted) least-squares slopes and their SEs of each row of y on x."""
    w = np.ones_like(x) if w is None else w
    sw = w.sum()
    xm = (w * x).sum() / sw
    dx = x - xm
    sxx = (w * dx * dx).sum()
    ym = (y * w).sum(axis=-1, keepdims=True) / sw
    slope = ((y - ym) * (w * dx)).sum(axis=-1) / sxx
    resid = y - ym - slope[..., None] * dx
    dof = x.size - 2
    if dof <= 0:
        return slope, np.full(slope.shape, np.nan)
    s2 = (w * resid * resid).sum(axis=-1) / dof * (x.size / sw)
    return slope, np.sqrt(s2 / sxx * (sw / x.size))


def mfdfa(
    x: np.ndarray, /, *, q: np.ndarray | None = None, order: int = DEFAULT_ORDER,
    fit_range: tuple[float, float] | None = None, scales: np.ndarray | None = None,
) -> MultifractalSpectrum:
    """Multifractal detrended fluctuation analysis.

    Parameters
    ----------
    x : array_like
        Beat-indexed series (NN intervals).
    q : array_like, optional
        Moment orders; default -5 to 5 in steps of 0.5 (:data:`DEFAULT_Q`). q = 0 is
        handled by the logarithmic average.
    order : {1, 2, 3}, default 2
        Degree of the polynomial removed from the profile in each box (MF-DFA-order).
    fit_range : (float, float), optional
        Box sizes (beats) to fit; default :func:`mfdfa_fit_range` (16 to min(1024, N/10)).
        Scales are log-spaced integers, 10 per decade (common practice).
    scales : array_like of int, optional
        Explicit box sizes (beats), all fitted; overrides ``fit_range``.

    Returns
    -------
    MultifractalSpectrum

    Raises
    ------
    InsufficientDataError
        If fewer than 3 scales fit in the range (N below about 400 for the default).

    Notes
    -----
    With F^2(nu, s) the residual variance of box nu (2 floor(N/s) boxes, tiled from both
    ends; :func:`tfhrv.estimators.dfa.box_variances`), Kantelhardt et al. 2002 eqs. 4
    and 10 define

        F_q(s) = { 1/(2 N_s) sum_nu [F^2(nu, s)]^{q/2} }^{1/q}          (q != 0)
        F_0(s) = exp{ 1/(4 N_s) sum_nu ln F^2(nu, s) }                    (q = 0),

    and h(q) is the least-squares slope of log F_q(s) on log s. Negative q amplify the
    boxes of smallest variance; as in the paper, the fit starts well above the smallest
    admissible box (here 16 beats), and boxes with zero residual variance (runs of equal
    values) are left out (counted in ``n_empty``), since their negative moments diverge.
    tau(q) = q h(q) - 1 (eq. 15), alpha = tau'(q) and f(alpha) = q alpha - tau(q)
    (eq. 16), with tau' by central differences on the q grid (one-sided at its ends).
    For a monofractal, h(q) = H for all q; for fGn, H is the Hurst exponent.

    References
    ----------
    Kantelhardt JW, Zschiegner SA, Koscielny-Bunde E, Havlin S, Bunde A, Stanley HE.
    Multifractal detrended fluctuation analysis of nonstationary time series. Physica A
    2002;316:87-114. doi:10.1016/S0378-4371(02)01383-3

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> res = mfdfa(fgn(2**15, 0.7, rng=1))
    >>> res.fit_range
    (16.0, 1024.0)
    >>> bool(np.all(np.abs(res.h - 0.7) < 0.1)) and bool(abs(res.width) < 0.3)
    True
    """
    qs = DEFAULT_Q if q is None else as_1d_float(q, "q", min_len=2)
    if np.any(np.diff(qs) <= 0):
        raise ValueError(f"q must be strictly increasing, got {qs!r}")
    x = as_1d_float(x, "x", min_len=40)
    if scales is None:
        lo, hi = mfdfa_fit_range(x.size) if fit_range is None else check_range(
            fit_range, "fit_range")
        lo, hi = max(lo, order + 2), min(hi, x.size / 4)
        if hi <= lo:
            raise InsufficientDataError(
                f"a series of {x.size} values leaves no MF-DFA scales in the fit range "
                f"{fit_range if fit_range is not None else MFDFA_RANGE!r}"
            )
        scales = _scale_grid(lo, hi)
    if np.size(scales) < 3:
        raise InsufficientDataError(
            f"fewer than 3 MF-DFA scales ({np.size(scales)}) for {x.size} values"
        )
    if np.ptp(x) == 0:
        raise InsufficientDataError("x must not be constant (no fluctuation to scale)")
    scales, var = box_variances(x, scales=scales, order=order)
    logf = np.empty((qs.size, scales.size))
    zero = qs == 0
    half = qs[~zero][:, None] / 2.0
    n_empty = 0
    for i, v in enumerate(var):
        med = float(np.median(v))
        keep = v > _EMPTY_BOX * med if med > 0 else v > 0
        n_empty += int(v.size - keep.sum())
        lv = np.log(v[keep])
        if lv.size == 0:
            raise InsufficientDataError(f"every box of {scales[i]} beats has zero variance")
        # ln F_q = (1/q) ln mean exp((q/2) ln F^2), by a shifted log-sum-exp (no overflow)
        a = half * lv[None, :]
        amax = a.max(axis=1, keepdims=True)
        logf[~zero, i] = ((amax[:, 0] + np.log(np.mean(np.exp(a - amax), axis=1)))
                          / qs[~zero])
        logf[zero, i] = 0.5 * lv.mean()
    ls = np.log(scales.astype(np.float64))
    h, h_se = _ols_slopes(ls, logf)
    tau = qs * h - 1.0
    alpha = np.gradient(tau, qs)
    f = qs * alpha - tau
    return MultifractalSpectrum(
        q=qs, scales=scales, fq=np.exp(logf), h=h, h_se=h_se, tau=tau, alpha=alpha, f=f,
        width=float(alpha[0] - alpha[-1]),
        fit_range=(float(scales[0]), float(scales[-1])), order=int(order),
        n_obs=int(x.size), n_empty=n_empty,
    )


def binomial_hq(q: np.ndarray, a: float, /) -> np.ndarray:
    """Analytic h(q) of the binomial multifractal series with weights a and 1 - a.

    h(q) = 1/q - ln(a^q + b^q) / (q ln 2), b = 1 - a (Kantelhardt et al. 2002, sec. 5,
    binomial model), and at q = 0 its limit h(0) = -(ln a + ln b) / (2 ln 2).

    Examples
    --------
    >>> np.round(binomial_hq(np.array([-2.0, 2.0]), 0.5), 6).tolist()  # uniform: h = 1
    [1.0, 1.0]
    """
    q = np.asarray(q, dtype=np.float64)
    b = 1.0 - float(a)
    out = np.empty_like(q)
    nz = q != 0
    out[nz] = 1.0 / q[nz] - np.log(a ** q[nz] + b ** q[nz]) / (q[nz] * _LN2)
    # q -> 0: ln(a^q + b^q) = ln 2 + q (ln a + ln b)/2 + O(q^2)
    out[~nz] = -(np.log(a) + np.log(b)) / (2.0 * _LN2)
    return out


def _leaders(details: tuple[np.ndarray, ...], gamma: float) -> list[np.ndarray]:
    """Wavelet leaders per octave from detail coefficients (finest first).

    L_{j,k} = sup |d_{j',k'}| 2^{j'(gamma - 1/2)} over the octaves j' <= j and the
    positions k' inside the three dyadic intervals lambda_{j,k-1}, lambda_{j,k},
    lambda_{j,k+1} (3 lambda). The factor 2^{-j/2} turns the orthonormal (L2) DWT into
    the L1 normalisation the leaders are defined with; 2^{gamma j} is the fractional
    integration of order gamma (Wendt et al. 2007, 2009).
    """
    out: list[np.ndarray] = []
    sup = np.zeros(0)
    for j, d in enumerate(details, start=1):
        a = np.abs(d) * 2.0 ** (j * (gamma - 0.5))
        if sup.size >= 2 and a.size:
            m = min(a.size, sup.size // 2)
            a = np.maximum(a[:m], np.maximum(sup[0: 2 * m: 2], sup[1: 2 * m: 2]))
        sup = a
        if a.size >= 3:
            out.append(np.maximum(np.maximum(a[:-2], a[1:-1]), a[2:]))
        else:
            out.append(np.zeros(0))
    return out


def leader_cumulants(
    x: np.ndarray, /, *, vanishing_moments: int = 3, octaves: tuple[int, int] | None = None,
    gamma: float = 1.0,
) -> LeaderCumulants:
    """Log-cumulants c1 and c2 of the wavelet leaders of ``x``.

    Parameters
    ----------
    x : array_like
        Beat-indexed series (NN intervals).
    vanishing_moments : int, default 3
        Vanishing moments N of the Daubechies wavelet (db N). Leaders need N larger than
        the largest Hoelder exponent analysed, here about 1 to 1.5 after the integration
        below, and ignore polynomial trends of degree < N (Wendt et al. 2007); 3 covers
        both (common practice).
    octaves : (int, int), optional
        Fitted octaves (j1, j2); default as for the wavelet exponent
        (:func:`tfhrv.estimators.wavelet.wavelet_exponent`): j1 = 3 and j2 the coarsest
        octave with at least 16 leaders.
    gamma : float, default 1
        Fractional integration order applied to the coefficients. Leaders require a
        positive minimal regularity; a noise-like NN series (fGn-like, H < 1) has
        negative regularity, so it is integrated once (gamma = 1, the profile as in
        MF-DFA). This shifts c1 by gamma and leaves c2 unchanged.

    Returns
    -------
    LeaderCumulants

    Raises
    ------
    InsufficientDataError
        If fewer than 2 octaves are available in the fitted range.

    Notes
    -----
    Leaders are built on the boundary-free coefficients of
    :func:`tfhrv.estimators.wavelet.dwt_details` (see :func:`_leaders`). With
    C_p(j) the p-th cumulant of ln L_{j,k} over k, C_p(j) = C_p^0 + c_p ln 2^j, so c_p is
    the slope of C_p(j) against j ln 2, estimated by least squares weighted by the number
    of leaders n_j (Wendt et al. 2007). The scaling function is
    zeta(q) = c1 q + c2 q^2 / 2 + ..., so c1 is about the mean Hoelder exponent and
    c2 = 0 for a monofractal (fGn, fBm), c2 < 0 for a multifractal (c2 = -lambda^2 for
    the multifractal random walk).

    References
    ----------
    Jaffard S. Wavelet techniques in multifractal analysis. Proc Symp Pure Math
    2004;72(2):91-151.
    Wendt H, Abry P, Jaffard S. Bootstrap for empirical multifractal analysis. IEEE Signal
    Process Mag 2007;24(4):38-48. doi:10.1109/MSP.2007.4286563
    Wendt H, Roux SG, Jaffard S, Abry P. Wavelet leaders and bootstrap for multifractal
    analysis of images. Signal Process 2009;89:1100-1114.
    doi:10.1016/j.sigpro.2008.12.015

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> lc = leader_cumulants(fgn(2**15, 0.7, rng=1))
    >>> lc.fit_range, bool(abs(lc.c2) < 0.05), bool(abs(lc.c1 - 0.7) < 0.15)
    ((3, 10), True, True)
    """
    vm = check_int(vanishing_moments, "vanishing_moments", minimum=1)
    g = float(gamma)
    if not np.isfinite(g) or g < 0:
        raise ValueError(f"gamma must be finite and >= 0, got {gamma!r}")
    name, details, n = dwt_details(x, vanishing_moments=vm)
    leaders = _leaders(details, g)
    octs, counts, c1s, c2s = [], [], [], []
    for j, lead in enumerate(leaders, start=1):
        lead = lead[lead > 0]
        if lead.size < 2:
            break
        ll = np.log(lead)
        octs.append(j)
        counts.append(lead.size)
        c1s.append(float(ll.mean()))
        c2s.append(float(ll.var(ddof=1)))
    j = np.asarray(octs, dtype=np.int64)
    nj = np.asarray(counts, dtype=np.int64)
    if octaves is None:
        enough = j[nj >= MIN_COEFFICIENTS]
        j1, j2 = DEFAULT_J1, int(enough.max()) if enough.size else 0
    else:
        j1, j2 = octave_pair(octaves)
    used = (j >= j1) & (j <= j2)
    if used.sum() < 2 or (j.size and j2 > j.max()):
        raise InsufficientDataError(
            f"x of length {n} gives leaders at octaves {j.tolist()} (>= {MIN_COEFFICIENTS} "
            f"at {j[nj >= MIN_COEFFICIENTS].tolist()}); the fit needs octaves {j1}..{j2}"
        )
    xs = j[used] * _LN2
    w = nj[used].astype(np.float64)
    c1, c1_se = _ols_slopes(xs, np.asarray(c1s)[used], w)
    c2, c2_se = _ols_slopes(xs, np.asarray(c2s)[used], w)
    return LeaderCumulants(
        octaves=j, n_leaders=nj, cumulant1=np.asarray(c1s), cumulant2=np.asarray(c2s),
        c1=float(c1), c2=float(c2), c1_se=float(c1_se), c2_se=float(c2_se),
        fit_range=(j1, j2), wavelet=name, gamma=g, n_obs=n,
    )
