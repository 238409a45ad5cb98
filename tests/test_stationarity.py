"""Tests of tfhrv.stationarity.battery.

Sources of expected values (STYLE.md "Tests"):
(a) exact results: the KPSS hand example, the invariance of Fourier moduli under phase
    randomisation, direct numpy computation of the drift statistics;
(b) independent implementations: statsmodels 0.15 ``adfuller`` and ``kpss``;
(c) seeded statistical cases, with tolerances from the Monte-Carlo rates printed by
    scripts/mc_stationarity.py (300 seeds) and the binomial spread for 20 seeds.
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pytest
from numpy.testing import assert_allclose
from statsmodels.tools.sm_exceptions import InterpolationWarning
from statsmodels.tsa.stattools import adfuller, kpss

from tfhrv.core.errors import InsufficientDataError
from tfhrv.stationarity.adf import adf_test
from tfhrv.stationarity.battery import CATEGORIES, stationarity_battery
from tfhrv.stationarity.drift import drift_test, normal_scores
from tfhrv.stationarity.kpss import kpss_test
from tfhrv.stationarity.surrogates import _trim_ends, surrogates
from tfhrv.synth import fgn

N_SEEDS = 20


@pytest.fixture
def rng():
    return np.random.default_rng(20240601)


def _white_and_walk():
    # REFERENCES.md 5.4: np.random.default_rng(0).standard_normal(1000) and its cumsum
    wn = np.random.default_rng(0).standard_normal(1000)
    return wn, np.cumsum(wn)


# --------------------------------------------------------------------------- KPSS


def test_kpss_hand_example_nlags0():
    # REFERENCES.md 5.1 (Kwiatkowski et al. 1992 eq. 11 by hand): x = 1..5, "c",
    # nlags = 0 -> sum S^2 = 26, eta = 26/25, sigma^2 = 2, KPSS = 0.52, p = 0.0372.
    res = kpss_test([1.0, 2.0, 3.0, 4.0, 5.0], regression="c", nlags=0)
    assert_allclose(res.statistic, 0.52, rtol=1e-12)
    assert_allclose(res.pvalue, 0.0372, atol=5e-5)
    assert res.pvalue_bound is None
    assert res.lags == 0


def test_kpss_hand_example_nlags1():
    # REFERENCES.md 5.1: nlags = 1 -> sigma^2 = (10 + 2 * 1/2 * 4)/5 = 2.8,
    # KPSS = 1.04 / 2.8 = 0.371429, p = 0.0895.
    res = kpss_test(np.arange(1.0, 6.0), nlags=1)
    assert_allclose(res.statistic, 1.04 / 2.8, rtol=1e-12)
    assert_allclose(res.pvalue, 0.0895, atol=5e-5)


def test_kpss_reference_white_and_walk():
    # REFERENCES.md 5.4 (statsmodels 0.15 on seeded data): white noise 0.2316 (p clipped
    # at 0.10, lags 2); random walk 3.837 (p clipped at 0.01, lags 19).
    wn, walk = _white_and_walk()
    r_wn = kpss_test(wn)
    r_rw = kpss_test(walk)
    assert_allclose(r_wn.statistic, 0.2316, atol=5e-5)
    assert (r_wn.pvalue, r_wn.pvalue_bound, r_wn.lags) == (0.10, "upper", 2)
    assert_allclose(r_rw.statistic, 3.837, atol=5e-4)
    assert (r_rw.pvalue, r_rw.pvalue_bound, r_rw.lags) == (0.01, "lower", 19)


def test_kpss_bound_matches_statsmodels_warning():
    # statsmodels emits InterpolationWarning exactly when p is clipped; our wrapper
    # must turn it into data (no warning escapes: pytest runs with -W error).
    _, walk = _white_and_walk()
    with pytest.warns(InterpolationWarning, match="smaller"):
        ref = kpss(walk, regression="ct", nlags="auto", result_object=True)
    ours = kpss_test(walk, regression="ct")
    assert_allclose(ours.statistic, ref.statistic, rtol=1e-12)
    assert ours.pvalue == ref.pvalue == 0.01
    assert ours.pvalue_bound == "lower"


def test_kpss_interior_pvalue_has_no_bound(rng):
    # Inside the KPSS (1992) table the p-value is interpolated, not clipped; compare
    # with statsmodels on a series whose statistic falls between 0.347 and 0.739.
    x = np.arange(1.0, 6.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # statsmodels must not warn here either
        ref = kpss(x, nlags=1, result_object=True)
    assert kpss_test(x, nlags=1).pvalue == ref.pvalue


# --------------------------------------------------------------------------- ADF


@pytest.mark.parametrize("n", [120, 350, 2000, 15000])
@pytest.mark.parametrize("lag", [0, 1, 5, 12])
def test_adf_equals_statsmodels_at_fixed_lag(n, lag):
    # statsmodels adfuller(regression="c", autolag=None, maxlag=lag) is the reference:
    # same regression, same statistic, to 1e-8; p-value via the same MacKinnon surface.
    x = 800.0 + 40.0 * fgn(n, 0.8, rng=n + lag)
    ref = adfuller(x, maxlag=lag, regression="c", autolag=None, result_object=True)
    ours = adf_test(x, maxlag=lag, autolag=None)
    assert_allclose(ours.statistic, ref.statistic, rtol=1e-8)
    assert_allclose(ours.pvalue, ref.pvalue, rtol=1e-8, atol=1e-12)
    assert (ours.lags, ours.nobs) == (ref.lags, ref.nobs)


@pytest.mark.parametrize("seed", range(4))
def test_adf_aic_search_equals_statsmodels(seed):
    # statsmodels adfuller(autolag="AIC") with its default Schwert maxlag: our one-QR
    # search must pick the same lag and give the same statistic.
    gen = np.random.default_rng(seed)
    n = int(gen.integers(150, 600))
    e = gen.standard_normal(n)
    x = np.cumsum(e) * 0.2 + np.convolve(e, [1.0, 0.6, 0.3], mode="same")  # ARMA-ish
    ref = adfuller(x, regression="c", autolag="AIC", result_object=True)
    ours = adf_test(x)
    assert ours.lags == ref.lags
    assert_allclose(ours.statistic, ref.statistic, rtol=1e-8)
    assert_allclose(ours.pvalue, ref.pvalue, rtol=1e-8, atol=1e-12)


def test_adf_reference_white_and_walk():
    # REFERENCES.md 5.4: white noise stat -31.39, p = 0, lags 0; walk 0.418, p = 0.982.
    wn, walk = _white_and_walk()
    r_wn, r_rw = adf_test(wn), adf_test(walk)
    assert_allclose(r_wn.statistic, -31.39, atol=5e-3)
    assert r_wn.lags == 0 and r_wn.pvalue == 0.0
    assert_allclose(r_rw.statistic, 0.418, atol=5e-4)
    assert_allclose(r_rw.pvalue, 0.982, atol=5e-4)


def test_constant_series_is_flagged_not_raised():
    # statsmodels adfuller raises on a constant series; we return a flagged NaN.
    x = np.full(400, 812.5)
    with pytest.raises(ValueError, match="constant"):
        adfuller(x, result_object=True)
    a, k = adf_test(x), kpss_test(x)
    assert a.flag == "constant" and np.isnan(a.statistic) and np.isnan(a.pvalue)
    assert k.flag == "constant" and np.isnan(k.statistic)
    res = stationarity_battery(x)
    assert res.category == "inconclusive"
    assert res.flags == ("constant",)
    assert "constant" in res.reason


def test_adf_maxlag_validation():
    with pytest.raises(ValueError, match="maxlag"):
        adf_test(np.arange(20.0) ** 2, maxlag=9)


# --------------------------------------------------------------------------- surrogates


@pytest.mark.parametrize("n", [351, 512])
def test_phase_surrogates_keep_fourier_moduli(n):
    # Theiler et al. 1992: phase randomisation keeps |rfft| exactly (odd and even n;
    # the zero-frequency and Nyquist terms are real and left unchanged).
    x = 800.0 + 40.0 * fgn(n, 0.9, rng=n)
    s = surrogates(x, n_surrogates=25, rng=1)
    ref = np.abs(np.fft.rfft(x))
    got = np.abs(np.fft.rfft(s, axis=1))
    assert_allclose(got, np.broadcast_to(ref, got.shape), rtol=1e-9, atol=1e-9 * ref.max())
    assert_allclose(s.mean(axis=1), x.mean(), rtol=1e-12)
    assert not np.allclose(s[0], x)  # the phases did change


def test_iaaft_surrogates_keep_values_and_roughly_the_spectrum():
    # Schreiber & Schmitz 1996: IAAFT surrogates are exact rearrangements of the data,
    # with a periodogram close to the original's (smoothed over 16 bins, within 20 %).
    x = np.exp(fgn(1024, 0.8, rng=5))  # skewed values, long memory
    s = surrogates(x, n_surrogates=8, method="iaaft", rng=2)
    assert_allclose(np.sort(s, axis=1), np.broadcast_to(np.sort(x), s.shape), rtol=0)
    p_ref = np.abs(np.fft.rfft(x - x.mean()))[1:513] ** 2
    p_sur = np.abs(np.fft.rfft(s - s.mean(axis=1, keepdims=True), axis=1))[:, 1:513] ** 2
    band = p_ref.reshape(32, 16).sum(axis=1)
    band_sur = p_sur.reshape(8, 32, 16).sum(axis=2)
    assert_allclose(band_sur, np.broadcast_to(band, band_sur.shape), rtol=0.2)


def test_drift_test_size_on_heavy_tailed_and_skewed_stationary_noise():
    # Independent noise is stationary whatever its distribution, so a level-alpha test must
    # reject about alpha of such windows (binomial: at most 12 of 60 at alpha = 0.05 has
    # probability > 0.999 when the true rate is 0.05). Gaussian phase surrogates on the raw
    # values rejected about 70 % of Student-t(3) and 85 % of lognormal windows; on normal
    # scores (Theiler et al. 1992, amplitude adjustment) the size is nominal.
    gen = np.random.default_rng(20260412)
    for draw in (lambda: gen.standard_t(3, 400), lambda: gen.lognormal(0.0, 0.8, 400)):
        rejected = sum(drift_test(800.0 + 30.0 * draw(), rng=s).pvalue < 0.05
                       for s in range(60))
        assert rejected <= 12, rejected


def test_normal_scores_are_blom_scores_of_mid_ranks():
    from scipy.special import ndtri
    from scipy.stats import rankdata

    x = np.round(np.random.default_rng(4).standard_t(3, 500) * 4.0)  # many ties
    expected = ndtri((rankdata(x, method="average") - 0.375) / (x.size + 0.25))
    assert_allclose(normal_scores(x), expected, rtol=1e-14, atol=1e-15)
    assert np.array_equal(np.argsort(normal_scores(x), kind="stable"),
                          np.argsort(x, kind="stable"))


def test_surrogates_reproducible_by_seed():
    x = np.random.default_rng(0).standard_normal(300)
    assert_allclose(surrogates(x, rng=3), surrogates(x, rng=3), rtol=0)
    assert not np.allclose(surrogates(x, rng=3), surrogates(x, rng=4))
    a = stationarity_battery(800 + 40 * x)
    b = stationarity_battery(800 + 40 * x)
    assert a == b  # fixed default seed: the same window gives the same result


# --------------------------------------------------------------------------- drift


@pytest.mark.parametrize("transform", ["none", "normal-scores"])
def test_drift_statistics_match_direct_computation(rng, transform):
    # Direct numpy computation on np.array_split blocks (definition in drift_test Notes);
    # normal scores from SciPy: Blom (1958) positions of average ranks, Phi^-1 by ndtri.
    from scipy.special import ndtri
    from scipy.stats import rankdata

    x = 800.0 + 30.0 * rng.standard_normal(347)
    x[200:] += 25.0
    x = np.round(x / 7.8125) * 7.8125  # quantised as NN intervals at 128 Hz: ties
    res = drift_test(x, n_subwindows=6, n_surrogates=19, transform=transform, rng=0)
    assert res.transform == transform
    if transform == "normal-scores":
        x = ndtri((rankdata(x) - 0.375) / (x.size + 0.25))
    blocks = np.array_split(x, 6)
    means = np.array([b.mean() for b in blocks])
    sds = np.array([b.std(ddof=1) for b in blocks])
    pooled = np.sqrt(sum((b.size - 1) * b.var(ddof=1) for b in blocks) / (x.size - 6))
    assert_allclose(res.mean_drift, means.std(ddof=1) / pooled, rtol=1e-10)
    assert_allclose(res.sd_drift, sds.max() / sds.min(), rtol=1e-10)
    # rank p-values (1 + #{surrogate >= observed}) / (B + 1) of each statistic
    md = np.concatenate([[res.mean_drift], res.surrogate_mean_drift])
    sd = np.concatenate([[res.sd_drift], res.surrogate_sd_drift])
    assert res.mean_pvalue == (1 + np.sum(md[1:] >= md[0])) / 20
    assert res.sd_pvalue == (1 + np.sum(sd[1:] >= sd[0])) / 20
    # min-p combination (Westfall & Young 1993), written out with plain loops
    q = [min(np.mean(md >= md[i]), np.mean(sd >= sd[i])) for i in range(20)]
    assert res.pvalue == sum(qi <= q[0] for qi in q) / 20
    assert res.pvalue <= 2 * min(res.mean_pvalue, res.sd_pvalue) + 1e-12
    assert not res.surrogate_mean_drift.flags.writeable


def test_drift_trim_option_reduces_end_mismatch():
    # end_match="trim" (Schreiber & Schmitz 2000) cuts at most min(n // 10, 100)
    # samples at each end, choosing the cut that minimises jump^2 + slip^2 of the
    # periodic extension: never worse than the uncut series.
    x = fgn(600, 0.9, rng=11)
    y = _trim_ends(x)

    def mismatch(z):
        return (z[0] - z[-1]) ** 2 + ((z[1] - z[0]) - (z[-1] - z[-2])) ** 2

    assert 600 - 2 * 60 <= y.size < 600
    assert mismatch(y) <= mismatch(x)
    assert np.shares_memory(y, x) and y[0] in x[:61] and y[-1] in x[-61:]
    res = drift_test(x, end_match="trim")
    assert (res.end_match, res.n_used) == ("trim", y.size)


# --------------------------------------------------------------------------- categories


def _categories(make, n_seeds=N_SEEDS, **kw):
    return [stationarity_battery(make(seed), rng=seed, **kw).category for seed in range(n_seeds)]


def _fgn(n, seed, hurst=0.6):
    return fgn(n, hurst, rng=seed)


def _half(n):
    return np.arange(n) >= n // 2


# Rates from scripts/mc_stationarity.py (300 seeds, n = 350, alpha = 0.05, B = 99):
#   "drifting": white 0.030, fGn(0.6) 0.027, 2-SD shift 0.953, variance x3 0.997;
#   random walk: unit-root or drifting 0.884; linear trend 3 SD: drifting 1.000.
# Binomial, 20 seeds: a false-alarm count <= 4 has probability 0.997 at p = 0.05 and
# 0.05 at p = 0.40 (the rate of the end-to-end-detrended variant we rejected), so the
# check can fail. A detection count >= 16 has probability 0.998 at p = 0.953 and 0.006 at
# p = 0.5; >= 18 (linear trend) has 0.99 at p = 0.98. (A broken combination, min-p with
# B = 39, detected 0 of 20 shifts and failed these tests.)


def test_white_noise_rarely_drifting():
    cats = _categories(lambda s: 800 + 40 * np.random.default_rng(s).standard_normal(350))
    assert cats.count("drifting") <= 4
    assert cats.count("stationary") >= 14  # MC share 0.920


def test_fgn_rarely_drifting():
    cats = _categories(lambda s: 800 + 40 * _fgn(350, s))
    assert cats.count("drifting") <= 4
    assert cats.count("unit-root") == 0  # MC share 0.000 (0 of 300)


def test_level_shift_is_drifting():
    cats = _categories(lambda s: 800 + 40 * (_fgn(350, s) + 2.0 * _half(350)))
    assert cats.count("drifting") >= 16


def test_variance_change_is_drifting():
    # variance x3 (SD x sqrt 3) in the second half
    cats = _categories(lambda s: 800 + 40 * np.where(_half(350), 3**0.5, 1) * _fgn(350, s))
    assert cats.count("drifting") >= 16


def test_random_walk_is_unit_root_or_drifting():
    # MC share 0.884 at n = 350; P(count <= 13 | 20, 0.884) < 0.01
    cats = _categories(lambda s: 800 + np.cumsum(np.random.default_rng(s).standard_normal(350)))
    assert sum(c in ("unit-root", "drifting") for c in cats) >= 14
    assert cats.count("stationary") <= 3


def test_linear_trend_is_trend_or_drifting():
    def make(s):
        return 800 + 40 * (np.random.default_rng(s).standard_normal(350) + np.linspace(0, 3, 350))

    cats = _categories(make)
    assert sum(c in ("trend", "drifting") for c in cats) >= 18


def test_too_short():
    res = stationarity_battery(np.linspace(700, 900, 119), min_len=120)
    assert res.category == "too-short"
    assert res.n_obs == 119 and np.isnan(res.adf_stat) and "119" in res.reason
    assert stationarity_battery([], min_len=120).category == "too-short"


# --------------------------------------------------------------------------- contract


def test_result_contract():
    res = stationarity_battery(800 + 40 * _fgn(400, 1))
    names = [f.name for f in dataclasses.fields(res)]
    assert names[:15] == [
        "adf_stat", "adf_pvalue", "adf_lags", "kpss_stat", "kpss_pvalue",
        "kpss_pvalue_bound", "kpss_trend_stat", "kpss_trend_pvalue",
        "kpss_trend_pvalue_bound", "mean_drift", "sd_drift", "drift_pvalue",
        "category", "reason", "n_obs",
    ]  # fmt: skip
    assert res.category in CATEGORIES and "\n" not in res.reason
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.category = "trend"  # type: ignore[misc]
    assert CATEGORIES == (
        "stationary", "trend", "unit-root", "drifting", "inconclusive", "too-short",
    )  # fmt: skip


def test_validation_errors():
    x = np.random.default_rng(0).standard_normal(300)
    with pytest.raises(ValueError, match="alpha"):
        stationarity_battery(x, alpha=0.2)
    with pytest.raises(ValueError, match="surrogate_method"):
        stationarity_battery(x, surrogate_method="aaft")
    with pytest.raises(ValueError, match="regression"):
        kpss_test(x, regression="ctt")
    with pytest.raises(TypeError, match="n_surrogates"):
        drift_test(x, n_surrogates=9.5)
    with pytest.raises(ValueError, match="1-D"):
        stationarity_battery(x.reshape(10, 30))
    with pytest.raises(ValueError, match="sub-window"):
        drift_test(x[:10], n_subwindows=6)
    with pytest.raises(InsufficientDataError):
        adf_test(x[:4])


def test_adf_pvalue_equals_statsmodels_mackinnonp():
    # Source: statsmodels.tsa.adfvalues.mackinnonp (MacKinnon 1994 response surface);
    # adf_test evaluates the same published coefficients without importing statsmodels
    from statsmodels.tsa.adfvalues import mackinnonp

    from tfhrv.stationarity.adf import _mackinnon_p_constant

    for stat in np.linspace(-25.0, 3.0, 561):
        assert _mackinnon_p_constant(stat) == pytest.approx(
            mackinnonp(stat, regression="c", N=1), abs=1e-14)


@pytest.mark.parametrize("regression", ["c", "ct"])
@pytest.mark.parametrize("nlags", ["auto", "legacy", 3])
def test_kpss_equals_statsmodels(regression, nlags):
    # Source: statsmodels.tsa.stattools.kpss (statistic, lags, p-value and the
    # InterpolationWarning direction); kpss_test computes the same without its overhead
    import warnings as _w

    from statsmodels.tools.sm_exceptions import InterpolationWarning

    from tfhrv.synth import fgn

    for seed, n in ((1, 130), (2, 350), (3, 1000), (4, 18000)):
        for x in (fgn(n, 0.7, rng=seed), np.cumsum(fgn(n, 0.5, rng=seed)),
                  fgn(n, 0.9, rng=seed) + np.linspace(0.0, 2.0, n)):
            x = 800.0 + 40.0 * x
            with _w.catch_warnings(record=True) as caught:
                _w.simplefilter("always", InterpolationWarning)
                ref = kpss(x, regression=regression, nlags=nlags, result_object=True)
            ours = kpss_test(x, regression=regression, nlags=nlags)
            assert ours.lags == ref.lags
            assert ours.statistic == pytest.approx(ref.statistic, rel=1e-9)
            assert ours.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
            text = " ".join(str(w.message) for w in caught)
            expected = "lower" if "smaller" in text else "upper" if "greater" in text else None
            assert ours.pvalue_bound == expected
