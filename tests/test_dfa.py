"""Tests of tfhrv.estimators.dfa.

Expected values come from (a) exact theory: the closed forms and the fGn table of
REFERENCES 3.3, and the trace formula E F^2(s) = tr(R C R) / s (R the residual-maker of
the degree-q fit on s points, C the covariance of the in-box profile) computed here;
(b) an independent textbook implementation (numpy.polyfit per box); (c) Monte Carlo with
fixed seeds, tolerances = 4 standard errors of the mean over the seeds.
"""

from __future__ import annotations

import colorednoise
import numpy as np
import pytest
from numpy.testing import assert_allclose

from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.dfa import (
    _box_basis,
    alpha1_slope,
    alpha2_slope,
    default_scales,
    dfa,
    dfa_fluctuation,
    local_alpha,
)
from tfhrv.estimators.loglog import loglog_fit
from tfhrv.synth import fgn, fgn_autocovariance

N_SIGMA = 4.0  # tolerance in standard errors of a Monte-Carlo mean


def mc_tol(values: np.ndarray) -> float:
    """N_SIGMA standard errors of the mean of per-seed estimates."""
    v = np.asarray(values)
    return N_SIGMA * v.std(ddof=1) / np.sqrt(v.shape[0])


def textbook_f(x: np.ndarray, scales, order: int) -> np.ndarray:
    """DFA by numpy.polyfit in every box, boxes from both ends (Peng et al. 1995,
    doi:10.1063/1.166141; Kantelhardt et al. 2001, doi:10.1016/S0378-4371(01)00144-3)."""
    y = np.cumsum(x - x.mean())
    out = []
    for n in scales:
        m = y.size // n
        k = np.arange(n, dtype=np.float64)
        starts = [*range(0, m * n, n), *range(y.size - m * n, y.size, n)]
        res = []
        for s0 in starts:
            seg = y[s0:s0 + n]
            coef = np.polyfit(k, seg, order)
            res.append(np.mean((seg - np.polyval(coef, k)) ** 2))
        out.append(np.sqrt(np.mean(res)))
    return np.array(out)


def exact_f2(s: int, order: int, profile_cov) -> float:
    """Exact E F^2(s) = tr(R C) / s for an in-box profile covariance C (REFERENCES 3.3)."""
    t = np.arange(s, dtype=np.float64) - (s - 1) / 2
    v = np.vander(t / s, order + 1, increasing=True)
    q, _ = np.linalg.qr(v)
    c = profile_cov(s)
    return float((np.trace(c) - np.trace(q.T @ c @ q)) / s)


def stationary_profile_cov(gamma):
    """In-box profile covariance L G L^T for a stationary series with autocovariance
    gamma(k); the profile's offset at the box start is a constant, removed by any DFA."""
    def cov(s):
        k = np.arange(s)
        g = gamma(np.abs(k[:, None] - k[None, :]))
        lower = np.tril(np.ones((s, s)))
        return lower @ g @ lower.T
    return cov


def brownian_profile_cov(s):
    """x = cumsum(white): within a box x = x_start + partial sums (the x_start part is a
    linear profile trend, removed by DFA-1), so the profile is L L w."""
    lower = np.tril(np.ones((s, s)))
    ll = lower @ lower
    return ll @ ll.T


def exact_alpha(scales, order, profile_cov) -> float:
    f2 = np.array([exact_f2(int(s), order, profile_cov) for s in scales])
    return loglog_fit(np.log10(np.asarray(scales, float)), 0.5 * np.log10(f2)).slope


# --------------------------------------------------------------------------- kernel

@pytest.mark.parametrize("order", [1, 2, 3])
@pytest.mark.parametrize("kind", ["white", "brownian"])
def test_fast_kernel_matches_textbook_polyfit(order, kind):
    # Source (b): a per-box numpy.polyfit DFA written above.
    rng = np.random.default_rng(100 + order)
    x = rng.standard_normal(1503)
    if kind == "brownian":
        x = np.cumsum(x) + 800.0  # strongly non-stationary, far from zero
    scales = [order + 2, 7, 16, 50, 101, 375]  # up to N/4, including N % n == 0 cases
    fast = dfa_fluctuation(x, scales=scales, order=order)
    assert_allclose(fast.fluctuation, textbook_f(x, scales, order), rtol=1e-8)
    assert_allclose(fast.n_boxes, [2 * (x.size // n) for n in scales])


@pytest.mark.parametrize("n", [4, 5, 6, 17, 64, 1000, 25_000])
def test_box_basis_is_orthonormal_polynomial_basis(n):
    # Exact theory: [1/sqrt(n), basis] must be orthonormal and span the polynomials of
    # degree <= q on n points (checked against numpy.polynomial Vandermonde columns).
    for order in (1, 2, 3):
        if n < order + 2:
            continue
        g = np.column_stack([np.full(n, n**-0.5), _box_basis(n, order)])
        assert_allclose(g.T @ g, np.eye(order + 1), atol=1e-12)
        v = np.polynomial.polynomial.polyvander(np.linspace(-1, 1, n), order)
        assert_allclose(g @ (g.T @ v), v, atol=1e-9)


def test_nearly_polynomial_profile_uses_explicit_residuals():
    # Exact theory: DFA-q removes degree-q profile polynomials, so F(poly + e) = F(e) by
    # superposition (Hu et al. 2001, doi:10.1103/PhysRevE.64.011114). A quadratic signal of
    # size 1 on 1e-6 noise makes |y_c|^2 - |P^T y_c|^2 cancel completely; the kernel must
    # fall back to explicit residuals. Bound: rounding of a profile of size ~N.
    rng = np.random.default_rng(3)
    t = np.linspace(-1.0, 1.0, 2000)
    noise = 1e-6 * rng.standard_normal(t.size)
    scales = [5, 16, 50, 200, 500]
    with_poly = dfa_fluctuation(1.0 + t + t**2 + noise, scales=scales, order=3)
    alone = dfa_fluctuation(noise, scales=scales, order=3)
    assert_allclose(with_poly.fluctuation, alone.fluctuation, rtol=1e-4)


def test_trace_formula_reproduces_closed_forms():
    # Source (a): REFERENCES 3.3, E F^2 = (s^2 - 4)/(15 s) (DFA-1), 3(s^2 - 9)/(70 s) (DFA-2).
    white = stationary_profile_cov(lambda k: (k == 0).astype(float))
    for s in (4, 8, 16, 32, 64):
        assert_allclose(exact_f2(s, 1, white), (s * s - 4) / (15 * s), rtol=1e-10)
        assert_allclose(exact_f2(s, 2, white), 3 * (s * s - 9) / (70 * s), rtol=1e-10)


@pytest.mark.parametrize("order", [1, 2])
def test_white_noise_f2_matches_exact_expectation(order):
    # Source (a): REFERENCES 3.3 closed forms; tiling from both ends leaves E F^2 unchanged.
    # Tolerance (c): 4 standard errors over 40 seeds.
    scales = np.array([4, 8, 16, 32, 64])
    f2 = np.array([
        dfa_fluctuation(np.random.default_rng(seed).standard_normal(4096), scales=scales,
                        order=order).fluctuation ** 2
        for seed in range(40)
    ])
    s = scales.astype(float)
    exact = (s**2 - 4) / (15 * s) if order == 1 else 3 * (s**2 - 9) / (70 * s)
    tol = N_SIGMA * f2.std(axis=0, ddof=1) / np.sqrt(f2.shape[0])
    assert np.all(np.abs(f2.mean(axis=0) - exact) < tol)


# Source (a): REFERENCES 3.3, exact expected DFA exponents for fGn on all integer scales.
FGN_TABLE = [
    (0.25, 1, (4, 16), 0.3689), (0.25, 1, (16, 64), 0.2612),
    (0.50, 1, (4, 16), 0.5830), (0.50, 1, (16, 64), 0.5043),
    (0.75, 1, (4, 16), 0.8169), (0.75, 1, (16, 64), 0.7528),
    (0.90, 1, (4, 16), 0.9638), (0.90, 1, (16, 64), 0.9027),
    (0.50, 2, (4, 16), 0.7292), (0.75, 2, (4, 16), 0.9487), (0.90, 2, (16, 64), 0.9059),
]


@pytest.mark.parametrize(("hurst", "order", "fit_range", "expected"), FGN_TABLE)
def test_fgn_alpha_matches_exact_table(hurst, order, fit_range, expected):
    # Tolerance (c): 4 standard errors of the mean alpha over 12 Davies–Harte paths.
    alphas = np.array([
        dfa(fgn(2**14, hurst, rng=1000 + seed), fit_range=fit_range, order=order).exponent
        for seed in range(12)
    ])
    assert abs(alphas.mean() - expected) < mc_tol(alphas)
    # The trace formula with the fGn covariance reproduces the published table (a).
    exact = exact_alpha(range(fit_range[0], fit_range[1] + 1), order,
                        stationary_profile_cov(lambda k: fgn_autocovariance(hurst, k)))
    assert_allclose(exact, expected, atol=6e-5)


def test_alpha1_white_noise_is_0583_not_05():
    # Source (a): REFERENCES 3.3, expected alpha1 (integer scales 4..16) = 0.583.
    fits = [alpha1_slope(np.random.default_rng(s).standard_normal(8192)) for s in range(24)]
    a = np.array([f.exponent for f in fits])
    assert abs(a.mean() - 0.5830) < mc_tol(a)
    assert fits[0].options["scales"] == tuple(range(4, 17))
    assert fits[0].fit_range == (4.0, 16.0) and fits[0].n_points == 13
    a2 = np.array([alpha2_slope(np.random.default_rng(s).standard_normal(2**14)).exponent
                   for s in range(24)])
    assert abs(a2.mean() - 0.5043) < mc_tol(a2)  # REFERENCES 3.3, 16..64


# ------------------------------------------------------------- landmark exponents

SCALES_LONG = np.unique(np.rint(np.geomspace(16, 512, 11)).astype(int))


def colorednoise_profile_cov(n_obs: int, beta: float):
    """Exact covariance of colorednoise.powerlaw_psd_gaussian (Timmer & Koenig 1995,
    A&A 300:707): independent Gaussian Fourier coefficients with variance ~ f^-beta
    (f clipped at 1/N), a circular stationary process with gamma ~ irfft(f^-beta)."""
    f = np.fft.rfftfreq(n_obs)
    f[0] = f[1]
    gamma_circ = np.fft.irfft(f ** -beta, n=n_obs)
    return stationary_profile_cov(lambda k: gamma_circ[k])


@pytest.mark.parametrize(("kind", "landmark"), [("white", 0.5), ("pink", 1.0),
                                                ("brownian", 1.5)])
def test_landmark_exponents(kind, landmark):
    # alpha = 0.5 / 1.0 / 1.5 for white, 1/f and Brownian noise (REFERENCES 2.1).
    # 1/f noise from colorednoise, an independent generator (b); the expected value on
    # this scale grid is exact (a), tolerance (c) from 12 seeds.
    n_obs = 8192
    if kind == "white":
        cov = stationary_profile_cov(lambda k: (k == 0).astype(float))
    elif kind == "pink":
        cov = colorednoise_profile_cov(n_obs, 1.0)
    else:
        cov = brownian_profile_cov
    expected = exact_alpha(SCALES_LONG, 1, cov)
    assert abs(expected - landmark) < 0.05  # finite-scale theory near the landmark

    def series(seed):
        if kind == "pink":
            return colorednoise.powerlaw_psd_gaussian(1.0, n_obs, random_state=seed)
        w = np.random.default_rng(seed).standard_normal(n_obs)
        return np.cumsum(w) if kind == "brownian" else w

    a = np.array([dfa(series(s), fit_range=(16, 512), scales=SCALES_LONG).exponent
                  for s in range(12)])
    assert abs(a.mean() - expected) < mc_tol(a)


# ---------------------------------------------------------------- trends

def test_quadratic_trend_does_not_move_dfa3():
    # DFA-q removes polynomial trends of degree q - 1 in the signal (Hu et al. 2001,
    # doi:10.1103/PhysRevE.64.011114; Kantelhardt et al. 2001). Paired: same fGn path.
    n = 2**14
    noise = fgn(n, 0.7, rng=7)
    t = np.arange(n) / n
    trend = 5.0 * noise.std() * (2 * t - 1) ** 2  # 5 noise SDs peak to trough
    a3 = dfa(noise, order=3, fit_range=(16, 1024)).exponent
    a3_trend = dfa(noise + trend, order=3, fit_range=(16, 1024)).exponent
    assert abs(a3_trend - a3) < 0.02
    # Positive control: DFA-1 cannot remove it, so the same trend moves it past 0.02.
    a1 = dfa(noise, order=1, fit_range=(16, 1024)).exponent
    a1_trend = dfa(noise + trend, order=1, fit_range=(16, 1024)).exponent
    assert abs(a1_trend - a1) > 0.02


# ------------------------------------------------------------ local slopes

def test_local_alpha_matches_exact_local_slope_of_white_noise():
    # Source (a): DFA-1 white noise, log F^2 = log((s^2-4)/(15 s)); its exact least-squares
    # slope over each sliding window is compared with the mean over seeds (c).
    scales = default_scales(4096)
    res = [local_alpha(np.random.default_rng(s).standard_normal(4096), scales=scales)
           for s in range(20)]
    slopes = np.array([r.slopes for r in res])
    ls = np.log10(scales.astype(float))
    lf = 0.5 * np.log10((scales**2 - 4) / (15 * scales))
    exact = []
    for c in ls:
        w = np.abs(ls - c) <= res[0].half_width + 1e-12
        exact.append(np.polyfit(ls[w], lf[w], 1)[0])
    tol = N_SIGMA * slopes.std(axis=0, ddof=1) / np.sqrt(len(res))
    assert np.all(np.abs(slopes.mean(axis=0) - np.array(exact)) < tol)
    assert res[0].n_points.min() >= 2
    assert not res[0].slopes.flags.writeable


def test_default_scales_rule():
    s = default_scales(100_000)
    assert s[0] == 4 and s[-1] == 25_000
    assert np.all(np.diff(s) > 0)
    per_decade = (s.size - 1) / np.log10(s[-1] / s[0])
    assert 14 <= per_decade <= 16  # about 16 per decade, fewer after de-duplication
    assert default_scales(1000, order=3)[0] == 5  # DFA-3 needs n >= q + 2


# ------------------------------------------------------------ validation

def test_validation_errors():
    x = np.random.default_rng(0).standard_normal(1000)
    with pytest.raises(ValueError, match="order"):
        dfa_fluctuation(x, order=4)
    with pytest.raises(ValueError, match="order"):
        alpha1_slope(x, order=0)
    with pytest.raises(TypeError, match="order"):
        dfa(x, order=1.5)
    with pytest.raises(InsufficientDataError):
        alpha2_slope(x[:200])  # needs 4 * 64 beats
    with pytest.raises(InsufficientDataError):
        dfa_fluctuation(x[:10])
    with pytest.raises(ValueError, match="scales"):
        dfa_fluctuation(x, scales=[2, 8])
    with pytest.raises(ValueError, match="fit_range"):
        dfa(x, fit_range=(16, 4))
    with pytest.raises(ValueError, match="constant"):
        dfa(np.ones(1000))


def test_result_fields():
    x = fgn(4096, 0.6, rng=3)
    fit = alpha1_slope(x, order=2)
    assert fit.kind == "alpha" and fit.fit_units == "beats" and fit.method == "DFA-2"
    assert fit.used.sum() == fit.n_points == 13
    assert_allclose(10 ** fit.x[fit.used], np.arange(4, 17), rtol=1e-12)
    fl = dfa_fluctuation(x, scales=np.arange(4, 17), order=2)
    assert_allclose(10 ** fit.y[fit.used], fl.fluctuation, rtol=1e-12)
    assert fit.ci[0] < fit.exponent < fit.ci[1]
    assert fit.converted().process_class == "fGn"
    with pytest.raises(ValueError):
        fit.x[0] = 1.0  # read-only


@pytest.mark.parametrize("trend_ms", [0.0, 300.0])
def test_short_series_prefix_sum_path_equals_per_scale_kernel(trend_ms, monkeypatch):
    # DFA-1 on series <= 4096 beats uses prefix sums for all scales at once; it must give
    # the same F(n) as the per-scale Gram-polynomial kernel (itself checked against a
    # per-box least-squares fit above), also with a strong trend (profile far from 0)
    import importlib

    mod = importlib.import_module("tfhrv.estimators.dfa")
    for seed, n in ((1, 300), (2, 1001), (3, 4096)):
        x = 800.0 + 50.0 * fgn(n, 0.8, rng=seed) + np.linspace(0.0, trend_ms, n)
        scales = np.arange(4, n // 4 + 1)
        fast = dfa_fluctuation(x, scales=scales).fluctuation
        monkeypatch.setattr(mod, "_STACK_BELOW", 0)
        ref = dfa_fluctuation(x, scales=scales).fluctuation
        monkeypatch.undo()
        np.testing.assert_allclose(fast, ref, rtol=1e-9)


def test_loglog_curvature_test_equals_statsmodels_wls():
    # Source: statsmodels WLS of y on [1, x, x^2] (x centred): the quadratic coefficient and
    # its two-sided t-test p-value are what loglog_fit reports as curvature (Frisch-Waugh)
    import statsmodels.api as sm

    rng = np.random.default_rng(3)
    for i in range(20):
        n = int(rng.integers(5, 40))
        x = np.sort(rng.uniform(0.0, 3.0, n))
        y = 1.0 + 0.8 * x + 0.05 * (i % 2) * x * x + rng.normal(0.0, 0.1, n)
        w = rng.uniform(0.5, 2.0, n)
        fit = loglog_fit(x, y, weights=w)
        xc = x - np.average(x, weights=w)
        ref = sm.WLS(y, np.column_stack([np.ones(n), xc, xc * xc]), weights=w).fit()
        assert_allclose(fit.curvature, ref.params[2], rtol=1e-9, atol=1e-12)
        assert_allclose(fit.curvature_pvalue, ref.pvalues[2], rtol=1e-7, atol=1e-12)
