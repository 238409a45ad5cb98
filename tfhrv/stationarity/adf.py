"""Augmented Dickey-Fuller test (null: unit root), constant only, lag by AIC.

Our own one-QR implementation of exactly the statsmodels ``adfuller`` statistic, with the
MacKinnon (1994) p-value from his published response-surface coefficients.

References
----------
Said SE, Dickey DA. Testing for unit roots in autoregressive-moving average models of
unknown order. Biometrika 1984;71:599-607. doi:10.1093/biomet/71.3.599
MacKinnon JG. Approximate asymptotic distribution functions for unit-root and
cointegration tests. J Bus Econ Stat 1994;12:167-176. doi:10.1080/07350015.1994.10510005
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from tfhrv.core.linalg import solve_lower_triangular
from tfhrv.core.specfun import ndtr
from tfhrv.core.validation import as_1d_float, check_choice

__all__ = ["ADFResult", "adf_test"]

#: MacKinnon (1994) coefficients for the ADF statistic with a constant and one variable:
#: p = Phi(polynomial(stat)), the small-p polynomial up to ``_TAU_STAR``, the large-p one
#: above; p is 0 below ``_TAU_MIN`` and 1 above ``_TAU_MAX``.  The same numbers as the
#: tables in ``statsmodels.tsa.adfvalues`` (checked in tests/test_stationarity.py).
_TAU_MAX, _TAU_MIN, _TAU_STAR = 2.74, -18.83, -1.61
_TAU_SMALLP = (2.1659, 1.4412, 0.038269)
_TAU_LARGEP = (1.7339, 0.93202, -0.12745, -0.010368)


@dataclass(frozen=True, slots=True)
class ADFResult:
    """Augmented Dickey-Fuller test (regression with a constant).

    Attributes
    ----------
    statistic : float
        t-statistic of the lagged level (NaN when ``flag`` is set).
    pvalue : float
        MacKinnon (1994, 2010) approximate p-value.
    lags : int
        Number of lagged differences used (-1 when undefined).
    maxlag : int
        Largest lag searched.
    nobs : int
        Observations in the final regression.
    flag : str or None
        ``"constant"`` when the series is constant (the test is undefined),
        ``"singular"`` when the regressors are exactly collinear.
    """

    statistic: float
    pvalue: float
    lags: int
    maxlag: int
    nobs: int
    flag: str | None


def _schwert_maxlag(n: int) -> int:
    """Schwert (1989) rule ceil(12 (n/100)^(1/4)), capped at n//2 - 2 as statsmodels."""
    return max(0, min(int(math.ceil(12.0 * (n / 100.0) ** 0.25)), n // 2 - 2))


def _adf_design(x: np.ndarray, dx: np.ndarray, lags: int, *, rows: tuple[int, int] | None = None
                ) -> np.ndarray:
    """Z = [x_{t-1}, dx_{t-1}, ..., dx_{t-lags}, dx_t] of the ADF regression (no constant).

    One row per response index t (dx_t = x_{t+1} - x_t) in ``rows`` = [first, stop),
    default [lags, n - 1): all rows with every lag available.
    """
    n = x.size
    first, stop = rows if rows is not None else (lags, n - 1)
    cols = [x[first:stop]]
    cols.extend(dx[first - j : stop - j] for j in range(1, lags + 1))
    cols.append(dx[first:stop])
    return np.column_stack(cols)


def _mackinnon_p_constant(stat: float) -> float:
    """MacKinnon (1994) p-value of the ADF statistic, constant only, one variable.

    Equal to ``statsmodels.tsa.adfvalues.mackinnonp(stat, regression="c", N=1)``; the
    normal CDF is :func:`tfhrv.core.specfun.ndtr`.
    """
    if stat > _TAU_MAX:
        return 1.0
    if stat < _TAU_MIN:
        return 0.0
    coef = np.asarray(_TAU_SMALLP if stat <= _TAU_STAR else _TAU_LARGEP, dtype=np.float64)
    return ndtr(float(np.polynomial.polynomial.polyval(stat, coef)))


def _projections(mom: np.ndarray, sums: np.ndarray, m: int) -> tuple[np.ndarray, float]:
    """Q'y of the centred, unit-norm regressors and the centred y'y, from moments.

    ``mom`` = Z'Z and ``sums`` = Z'1 over the m rows of Z = [regressors (in the order of
    the projection), response].  Centring every column and y is the same as including a
    constant (Frisch-Waugh): the centred moments are mom - sums sums' / m (the caller
    passes a level column centred on the series mean, so no digits are lost).  Scaling to
    unit norm makes the Gram matrix a correlation matrix, so its Cholesky factor R = L' is
    the QR factor R of the scaled columns, and Q'y = L^{-1} X'y.
    """
    cen = mom - np.outer(sums, sums) / m
    norm = np.sqrt(np.maximum(np.diag(cen)[:-1], 0.0))
    scale = np.abs(sums[:-1]).max(initial=0.0) / m + 1.0
    if not np.all(norm > 1e-12 * np.sqrt(m) * scale):
        raise np.linalg.LinAlgError("a regressor is constant")  # degenerate window
    gram = cen[:-1, :-1] / np.outer(norm, norm)
    chol = np.linalg.cholesky(gram)
    qty = solve_lower_triangular(chol, cen[:-1, -1] / norm)
    return qty, float(cen[-1, -1])


def adf_test(
    x, /, *, maxlag: int | None = None, autolag: Literal["AIC"] | None = "AIC"
) -> ADFResult:
    """Augmented Dickey-Fuller unit-root test with a constant, lag by AIC.

    Parameters
    ----------
    x : array_like
        1-D series (e.g. NN intervals in ms), at least 6 values.
    maxlag : int, optional
        Largest number of lagged differences. Default: the Schwert (1989) rule
        ceil(12 (n/100)^(1/4)), at most n//2 - 2 (the statsmodels default).
    autolag : {"AIC", None}, default "AIC"
        "AIC": choose the lag in 0..maxlag minimising AIC; None: use ``maxlag``.

    Returns
    -------
    ADFResult
        statistic, pvalue, lags, maxlag, nobs and flag (``"constant"`` with NaN
        statistic and p-value when ``x`` is constant, where the test is undefined).

    Notes
    -----
    Regression, for t = p+1 .. n-1 (0-based)::

        dx_t = c + g x_{t-1} + sum_{j=1..p} d_j dx_{t-j} + e_t,

    statistic = g_hat / se(g_hat). The AIC search fits every p in 0..maxlag on the
    common sample t = maxlag+1 .. n-1, AIC_p = nobs log(RSS_p) + 2 (p + 2), ties to the
    smaller p (as statsmodels); the chosen p is then refitted on its own longer sample.
    The constant is absorbed by centring (Frisch-Waugh) and the columns scaled to unit
    norm; one Cholesky factor R of the Gram matrix of [x_{t-1}, dx_{t-1}, ...] is the
    QR factor, and every nested RSS follows from z = R^{-T} X'y:
    RSS_p = y'y - sum_{i <= p+1} z_i^2. The final fit puts x_{t-1} last so its
    t-statistic is z_last / s; its moment matrix is that of the search sample restricted
    to its columns plus the few rows the search sample left out, so the long design
    matrix is built once. This reproduces
    ``statsmodels.tsa.stattools.adfuller(x, regression="c")`` (checked to 1e-8 in the
    tests) at a small fraction of its cost, so no cap below the Schwert rule is needed.
    p-value: MacKinnon (1994) response surface with the tables of
    ``statsmodels.tsa.adfvalues`` (the same value as its ``mackinnonp``, checked in the
    tests, without its per-call overhead). Exactly collinear regressors
    (a degenerate, nearly constant window) give NaN with ``flag="singular"``.

    References
    ----------
    Dickey DA, Fuller WA. Distribution of the estimators for autoregressive time
    series with a unit root. J Am Stat Assoc 1979;74:427-431. doi:10.2307/2286348
    Said SE, Dickey DA. Testing for unit roots in autoregressive-moving average models
    of unknown order. Biometrika 1984;71:599-607. doi:10.1093/biomet/71.3.599
    Schwert GW. Tests for unit roots: a Monte Carlo investigation. J Bus Econ Stat
    1989;7:147-159. doi:10.1080/07350015.1989.10509723
    MacKinnon JG. Approximate asymptotic distribution functions for unit-root and
    cointegration tests. J Bus Econ Stat 1994;12:167-176. doi:10.2307/1391481

    Examples
    --------
    >>> import numpy as np
    >>> walk = np.cumsum(np.random.default_rng(0).standard_normal(1000))
    >>> res = adf_test(walk)
    >>> bool(res.pvalue > 0.05)
    True
    """
    x = as_1d_float(x, "x", min_len=6)
    if autolag is not None:
        check_choice(autolag, "autolag", ("AIC",))
    n = x.size
    limit = n // 2 - 2
    if maxlag is None:
        maxlag = _schwert_maxlag(n)
    else:
        maxlag = int(maxlag)
        if not 0 <= maxlag <= limit:
            raise ValueError(f"maxlag must be in [0, {limit}] for n = {n}, got {maxlag}")
    if x.max() == x.min():
        return ADFResult(math.nan, math.nan, -1, maxlag, n - 1 - maxlag, "constant")
    x = x - x.mean()  # the regression has a constant: centring x changes nothing but digits
    dx = np.diff(x)
    lags = maxlag
    try:
        # one design over the search sample t = maxlag .. n-2: [level, dx lags 1..maxlag, y]
        z = _adf_design(x, dx, maxlag)
        mom, sums, nobs = z.T @ z, np.add.reduce(z, axis=0), z.shape[0]
        if autolag is not None and maxlag > 0:
            qty, yy = _projections(mom, sums, nobs)
            rss = np.maximum(yy - np.cumsum(qty**2), np.finfo(float).tiny)
            ncols = np.arange(2, maxlag + 3)  # constant + level + p lags, p = 0..maxlag
            aic = nobs * np.log(rss) + 2.0 * ncols
            lags = int(np.argmin(aic))  # first minimum: ties go to the smaller lag
        # final fit on its own sample t = lags .. n-2 with the level last (its t-statistic
        # is then (Q'y)_last / s, since R_ll > 0): the search moments of those columns plus
        # the rows t = lags .. maxlag-1 that the search sample left out
        cols = [*range(1, lags + 1), 0, maxlag + 1]
        mom, sums = mom[np.ix_(cols, cols)], sums[cols]
        if lags < maxlag:
            extra = _adf_design(x, dx, lags, rows=(lags, maxlag))
            extra = extra[:, [*range(1, lags + 1), 0, lags + 1]]
            mom = mom + extra.T @ extra
            sums = sums + np.add.reduce(extra, axis=0)
            nobs += maxlag - lags
        qty, yy = _projections(mom, sums, nobs)
    except np.linalg.LinAlgError:  # exactly collinear regressors (degenerate window)
        return ADFResult(math.nan, math.nan, -1, maxlag, n - 1 - maxlag, "singular")
    dof = nobs - (lags + 2)
    stat = float(qty[-1] / math.sqrt(max(yy - float(qty @ qty), 0.0) / dof))
    pvalue = _mackinnon_p_constant(stat)
    return ADFResult(stat, pvalue, lags, maxlag, int(nobs), None)
