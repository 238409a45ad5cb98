"""The shared result type and the one log-log fit helper used by every estimator."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Literal

import numpy as np

from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.specfun import stdtr
from tfhrv.core.validation import readonly

__all__ = ["Conversion", "LogLogFit", "ScalingFit", "convert_exponent", "loglog_fit"]

ExponentKind = Literal["beta", "alpha"]


@dataclass(frozen=True, slots=True)
class Conversion:
    """One exponent in the three usual conventions.

    ``beta`` (PSD ~ 1/f^beta), ``alpha`` (DFA) and ``hurst`` (H of the fGn or fBm class
    that has this exponent), with ``process_class`` "fGn" (beta < 1) or "fBm" (beta > 1).
    At beta == 1 exactly the class is "1/f" and ``hurst`` is 1 (fGn limit).

    References
    ----------
    Eke A et al. Physiological time series: distinguishing fractal noises from motions.
    Pflugers Arch 2000;439:403-415.
    Kiyono K. Establishing a direct connection between detrended fluctuation analysis and
    Fourier analysis. Phys Rev E 2015;91:052820.
    """

    beta: float
    alpha: float
    hurst: float
    process_class: str


def convert_exponent(value: float, /, *, kind: ExponentKind) -> Conversion:
    """Convert a beta or alpha value to all conventions.

    alpha = (beta + 1) / 2; H = alpha for fGn (beta < 1) and H = alpha - 1 for fBm (beta > 1).

    Examples
    --------
    >>> convert_exponent(1.0, kind="alpha").beta
    1.0
    >>> c = convert_exponent(2.0, kind="beta")
    >>> (c.alpha, c.hurst, c.process_class)
    (1.5, 0.5, 'fBm')
    """
    v = float(value)
    if kind == "beta":
        beta, alpha = v, (v + 1.0) / 2.0
    elif kind == "alpha":
        alpha, beta = v, 2.0 * v - 1.0
    else:
        raise ValueError(f"kind must be one of ('beta', 'alpha'), got {kind!r}")
    if not np.isfinite(beta):
        return Conversion(beta, alpha, float("nan"), "unknown")
    if beta < 1.0:
        return Conversion(beta, alpha, alpha, "fGn")
    if beta > 1.0:
        return Conversion(beta, alpha, alpha - 1.0, "fBm")
    return Conversion(beta, alpha, 1.0, "1/f")


@dataclass(frozen=True, slots=True)
class LogLogFit:
    """Weighted least-squares line (and curvature check) through log-log points."""

    slope: float
    intercept: float
    slope_se: float
    r_squared: float
    curvature: float
    curvature_pvalue: float
    n_points: int


def loglog_fit(
    x: np.ndarray, y: np.ndarray, /, *, weights: np.ndarray | None = None,
    known_variance: bool = False,
) -> LogLogFit:
    """Fit y = a + b x by weighted least squares, with a quadratic-term curvature test.

    Parameters
    ----------
    x, y : array
        Points already on log axes (any base, the same for both).
    weights : array, optional
        Weights w_i (inverse variances when ``known_variance``); equal weights by default.
    known_variance : bool, default False
        If True the weights are exact inverse variances and the slope SE is
        sqrt(S0 / (S0 S2 - S1^2)) (Veitch & Abry 1999); otherwise the residual variance is
        estimated from the fit.

    Returns
    -------
    LogLogFit
        ``slope``, ``intercept``, ``slope_se``, weighted ``r_squared``, the coefficient of
        an added quadratic term (``curvature``) and the two-sided p-value of its t-test
        (NaN with fewer than 4 points).

    References
    ----------
    Veitch D, Abry P. A wavelet-based joint estimator of the parameters of long-range
    dependence. IEEE Trans Inf Theory 1999;45:878-897. doi:10.1109/18.761330

    Examples
    --------
    >>> f = loglog_fit(np.array([0.0, 1, 2, 3]), np.array([1.0, 3, 5, 7]))
    >>> round(f.slope, 6), round(f.intercept, 6)
    (2.0, 1.0)
    """
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    w = np.ones_like(x) if weights is None else np.asarray(weights, dtype=np.float64)
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(w) & (w > 0)
    x, y, w = x[ok], y[ok], w[ok]
    n = x.size
    if n < 2 or np.ptp(x) == 0:
        raise InsufficientDataError(f"a log-log fit needs at least 2 distinct points, got {n}")
    s0, s1, s2 = w.sum(), (w * x).sum(), (w * x * x).sum()
    det = s0 * s2 - s1 * s1
    slope = ((s0 * (w * x * y).sum()) - s1 * (w * y).sum()) / det
    intercept = ((w * y).sum() - slope * s1) / s0
    resid = y - intercept - slope * x
    ybar = (w * y).sum() / s0
    ss_tot = float((w * (y - ybar) ** 2).sum())
    ss_res = float((w * resid**2).sum())
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0 else float("nan")
    if known_variance:
        se = float(np.sqrt(s0 / det))
    elif n > 2:
        se = float(np.sqrt(ss_res / (n - 2) * s0 / det))
    else:
        se = float("nan")
    curv, curv_p = float("nan"), float("nan")
    if n >= 4:
        # quadratic term by Frisch-Waugh: its coefficient in y ~ 1 + x + x^2 is the
        # weighted regression of the linear fit's residuals on the part of x^2 that is
        # orthogonal (weighted) to 1 and x; the residual SS drops by curv^2 |q_perp|^2
        xc = x - s1 / s0
        q = xc * xc
        sxx = float((w * xc * xc).sum())
        q_perp = q - (w * q).sum() / s0 - xc * ((w * xc * q).sum() / sxx)
        sqq = float((w * q_perp * q_perp).sum())
        dof = n - 3
        if sqq > 1e-14 * float((w * q * q).sum()):
            curv = float((w * q_perp * resid).sum() / sqq)
            sigma2 = max(ss_res - curv * curv * sqq, 0.0) / dof
            se_c = float(np.sqrt(sigma2 / sqq))
            if se_c > 0:
                curv_p = 2.0 * stdtr(dof, -abs(curv / se_c))  # two-sided t
            else:
                curv_p = 0.0 if curv != 0 else 1.0
    return LogLogFit(float(slope), float(intercept), se, float(r2), curv, curv_p, int(n))


@dataclass(frozen=True, slots=True)
class ScalingFit:
    """Result of a scaling-exponent estimator.

    Attributes
    ----------
    exponent : float
        The estimate in the estimator's convention (``kind``): beta for spectral and
        wavelet estimators, alpha for DFA.  After calibration, the bias-corrected value.
    kind : {"beta", "alpha"}
    se : float
        Standard error (regression SE before calibration; calibrated SE after).
    ci : tuple of float
        95 % interval (regression-based until :mod:`tfhrv.calibration.calibrate` replaces it).
    intercept : float
        Intercept of the log-log line.
    fit_range : tuple of float
        The range actually fitted, in ``fit_units``.
    fit_units : str
        "Hz", "beats" or "octave".
    x, y, weights : numpy.ndarray
        The whole curve on log axes (log10 frequency / log10 scale / octave j) and weights.
    used : numpy.ndarray of bool
        Which points entered the fit.
    n_obs : int
        Length of the analysed series (samples or beats).
    n_points : int
        Number of fitted points.
    r_squared, curvature, curvature_pvalue : float
        Goodness of fit and the quadratic-term check on log-log axes.
    method : str
        Short name of the estimator.
    options : mapping
        Every effective option (what was used, not what was asked for).
    slope_exponent : float
        The slope of the fitted log-log line expressed as the exponent, before any
        calibration (equal to ``exponent`` until :mod:`tfhrv.calibration` corrects it).  In
        files and tables it is the ``*_slope`` variable; ``exponent`` is the bare name.
    calibrated : bool
        Whether ``exponent``, ``se`` and ``ci`` come from the calibration tables.
    lack_of_fit_pvalue, excess_scatter : float
        Spectral fits on raw periodogram ordinates only (NaN otherwise): the p-value of the
        chi-square lack-of-fit test of the binned points against one line, given the known
        scatter of log periodogram ordinates, and the RMS departure from the line beyond
        that scatter (log10 units); see :func:`tfhrv.estimators.spectral.spectral_exponent`.
    withheld : str
        Empty when the exponent stands; otherwise a reason code (and text) why the data hold
        no exponent to report (``exponent``, ``se`` and ``ci`` are then NaN; the fitted
        curve is kept); see :func:`tfhrv.analysis.fits.withhold_reason`.
    """

    exponent: float
    kind: ExponentKind
    se: float
    ci: tuple[float, float]
    intercept: float
    fit_range: tuple[float, float]
    fit_units: str
    x: np.ndarray
    y: np.ndarray
    weights: np.ndarray
    used: np.ndarray
    n_obs: int
    n_points: int
    r_squared: float
    curvature: float
    curvature_pvalue: float
    method: str
    options: Mapping[str, Any] = field(default_factory=dict)
    slope_exponent: float = float("nan")
    calibrated: bool = False
    lack_of_fit_pvalue: float = float("nan")
    excess_scatter: float = float("nan")
    withheld: str = ""

    def __post_init__(self) -> None:
        for name in ("x", "y", "weights", "used"):
            v = getattr(self, name)
            # an own read-only array (from another fit, e.g. by dataclasses.replace) is
            # already immutable; anything else is copied and frozen
            if not (isinstance(v, np.ndarray) and not v.flags.writeable and v.base is None):
                object.__setattr__(self, name, readonly(np.array(v)))
        object.__setattr__(self, "options", MappingProxyType(dict(self.options)))
        if not np.isfinite(self.slope_exponent):
            object.__setattr__(self, "slope_exponent", float(self.exponent))

    def __reduce__(self):
        # pickled with its options as a plain dict (a mappingproxy cannot be pickled), so
        # that a fit can come back from a worker process
        fields = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        fields["options"] = dict(self.options)
        return (_scaling_fit, (fields,))

    def converted(self) -> Conversion:
        """The exponent as beta, alpha and Hurst, with its fGn/fBm class."""
        return convert_exponent(self.exponent, kind=self.kind)


def _scaling_fit(fields: dict) -> ScalingFit:
    """A ScalingFit from its fields (the unpickling side of ``ScalingFit.__reduce__``)."""
    return ScalingFit(**fields)
