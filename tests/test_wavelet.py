"""Tests of tfhrv.estimators.wavelet (Abry–Veitch log-scale diagram).

Expected values come from (a) exact theory: the check table of REFERENCES 4.2 and the
exact expected octave energies E d_j^2 = psi_j^T Cov psi_j computed here from the exact
covariance of the simulated process and the wavelet's equivalent filter; (b) PyWavelets
itself for the boundary bookkeeping; (c) Monte Carlo with fixed seeds, tolerances = 4
standard errors of the mean over the seeds.
"""

from __future__ import annotations

import colorednoise
import numpy as np
import pytest
import pywt
from numpy.testing import assert_allclose

from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.loglog import loglog_fit
from tfhrv.estimators.wavelet import (
    _valid_intervals,
    logscale_bias,
    logscale_diagram,
    logscale_variance,
    octave_to_frequency_hz,
    wavelet_exponent,
)
from tfhrv.synth import fbm, fgn, fgn_autocovariance

N_SIGMA = 4.0
N_OBS = 2**14


def mc_tol(values: np.ndarray) -> float:
    v = np.asarray(values)
    return N_SIGMA * v.std(ddof=1) / np.sqrt(v.size)


def test_bias_and_variance_table():
    # Source (a): REFERENCES 4.2 check table, g_j = psi(n/2)/ln2 - log2(n/2),
    # Var(y_j) = zeta(2, n/2)/ln^2 2 (Veitch & Abry 1999, doi:10.1109/18.761330).
    n_j = np.array([2, 4, 8, 16, 32, 64, 128, 256, 512, 1024])
    g = [-0.832746, -0.390051, -0.187805, -0.092044, -0.045554, -0.022660, -0.011300,
         -0.005643, -0.002820, -0.001409]
    var = [3.423715, 1.342346, 0.590740, 0.277107, 0.134235, 0.066070, 0.032777,
           0.016324, 0.008146, 0.004069]
    assert_allclose(logscale_bias(n_j), g, atol=1e-6)
    assert_allclose(logscale_variance(n_j), var, atol=1e-6)


def test_bias_and_variance_against_chi2_monte_carlo():
    # Source (c)+(a): n mu / s^2 ~ chi^2(n) for iid Gaussian coefficients (REFERENCES 4.2).
    rng = np.random.default_rng(11)
    n = 8
    y = np.log2(np.mean(rng.standard_normal((200_000, n)) ** 2, axis=1))
    assert abs(y.mean() - logscale_bias(n)) < N_SIGMA * y.std() / np.sqrt(y.size)
    assert_allclose(y.var(), logscale_variance(n), rtol=0.02)  # var of var: ~0.3 % SE


@pytest.mark.parametrize("name", ["db1", "db2", "db3", "db4", "sym4"])
@pytest.mark.parametrize("n_obs", [1000, 1024, 777])
def test_kept_coefficients_are_free_of_the_boundary(name, n_obs):
    # Source (b): embed x in a longer series z = [a, x, b] aligned to 2^levels; a
    # coefficient of x free of the periodisation wrap and padding equals the matching
    # coefficient of z. The intervals must also be maximal: one step outside, it differs.
    rng = np.random.default_rng(5)
    flen = pywt.Wavelet(name).dec_len
    levels = pywt.dwt_max_level(n_obs, flen)
    pre = 2**levels * 4
    post = (-(pre + n_obs)) % 2**levels + 2**levels * 4
    x = rng.standard_normal(n_obs)
    z = np.concatenate([rng.standard_normal(pre), x, rng.standard_normal(post)])
    cx = pywt.wavedec(x, name, mode="periodization", level=levels)[:0:-1]
    cz = pywt.wavedec(z, name, mode="periodization", level=levels)[:0:-1]
    for j, (lo, hi) in enumerate(_valid_intervals(n_obs, flen, levels), start=1):
        if hi < lo:
            continue
        off = pre // 2**j
        assert_allclose(cx[j - 1][lo:hi + 1], cz[j - 1][lo + off:hi + 1 + off], rtol=1e-10,
                        atol=1e-12)
        # (a small last filter tap can make the difference small, but not rounding-small)
        if lo - 1 >= 0:
            assert abs(cx[j - 1][lo - 1] - cz[j - 1][lo - 1 + off]) > 1e-9
        if hi + 1 < cx[j - 1].size:
            assert abs(cx[j - 1][hi + 1] - cz[j - 1][hi + 1 + off]) > 1e-9


# ----------------------------------------------------------- exact expectations

def wavelet_filter(j: int, name: str = "db3") -> np.ndarray:
    """psi_{j,k} as a sequence: the inverse DWT of one unit coefficient at octave j
    (orthonormal wavelet, so d_{j,k} = <x, psi_{j,k}>)."""
    lev = pywt.dwt_max_level(N_OBS, pywt.Wavelet(name).dec_len)
    c = pywt.wavedec(np.zeros(N_OBS), name, mode="periodization", level=lev)
    d = c[len(c) - j]
    d[d.size // 2] = 1.0
    p = pywt.waverec(c, name, mode="periodization")
    nz = np.flatnonzero(np.abs(p) > 0)
    return p[nz[0]:nz[-1] + 1]


def exact_slope(fit, cov) -> float:
    """Slope of log2 E d_j^2 on j, with the estimator's octaves and weights. ``cov(lag)``
    is the autocovariance (stationary) or, for fBm, -|lag|^{2H}/2, which gives the same
    E d^2 because the wavelet has a vanishing zeroth moment."""
    js = np.arange(int(fit.fit_range[0]), int(fit.fit_range[1]) + 1)
    energy = []
    for j in js:
        p = wavelet_filter(int(j))
        ac = np.correlate(p, p, "full")
        energy.append(float(ac @ cov(np.arange(-(p.size - 1), p.size))))
    return loglog_fit(js.astype(float), np.log2(energy), weights=fit.weights[fit.used],
                      known_variance=True).slope


@pytest.mark.parametrize(
    ("process", "hurst", "target"),
    [("fGn", 0.3, -0.4), ("fGn", 0.5, 0.0), ("fGn", 0.8, 0.6), ("fBm", 0.3, 1.6),
     ("fBm", 0.8, 2.6)],
)
def test_fgn_fbm_slopes(process, hurst, target):
    # beta = 2H - 1 (fGn), 2H + 1 (fBm) (REFERENCES 2.1, 4.2). The mean over 8 Davies–Harte
    # paths is compared with the exact expected slope on the same octaves (a) within
    # 4 SE (c); the exact slope itself is within 0.05 of the asymptotic beta (finite-
    # octave departure of fGn from a pure power law; REFERENCES 4.2 reports -0.429 for
    # H = 0.3 with db3).
    gen = fgn if process == "fGn" else fbm
    fits = [wavelet_exponent(gen(N_OBS, hurst, rng=200 + s)) for s in range(8)]
    est = np.array([f.exponent for f in fits])
    if process == "fGn":
        def cov(lag):
            return fgn_autocovariance(hurst, lag)
    else:
        def cov(lag):
            return -0.5 * np.abs(lag) ** (2 * hurst)
    exact = exact_slope(fits[0], cov)
    assert abs(exact - target) < 0.05
    assert abs(est.mean() - exact) < mc_tol(est)
    # The known-variance SE is of the size of the seed-to-seed spread (within 2x).
    assert 0.5 < fits[0].se / est.std(ddof=1) < 2.0


@pytest.mark.parametrize("beta", [0.5, 1.0, 1.5])
def test_colorednoise_slopes(beta):
    # colorednoise (independent generator, Timmer & Koenig 1995, A&A 300:707) draws
    # independent Fourier coefficients with variance ~ f^-beta, f clipped at 1/N: a
    # circular process with autocovariance ~ irfft(f^-beta), from which the exact
    # expected slope follows (a); tolerance (c) from 8 seeds.
    f = np.fft.rfftfreq(N_OBS)
    f[0] = f[1]
    gamma = np.fft.irfft(f**-beta, n=N_OBS)

    def cov(lag):
        return gamma[np.abs(lag) % N_OBS]

    fits = [wavelet_exponent(colorednoise.powerlaw_psd_gaussian(beta, N_OBS, random_state=s))
            for s in range(8)]
    est = np.array([fi.exponent for fi in fits])
    exact = exact_slope(fits[0], cov)
    assert abs(exact - beta) < 0.05
    assert abs(est.mean() - exact) < mc_tol(est)


def test_periodization_without_boundary_handling_would_fail():
    # REFERENCES 4.3: the plain periodised DWT of fBm (H = 0.8) is biased to about 2.06;
    # the boundary handling here must recover 2H + 1 = 2.6 (positive control on the
    # same path: the naive estimate is far off).
    x = fbm(N_OBS, 0.8, rng=9)
    fit = wavelet_exponent(x)
    c = pywt.wavedec(x, "db3", mode="periodization")[:0:-1]
    j = np.arange(fit.fit_range[0], fit.fit_range[1] + 1).astype(int)
    naive = np.polyfit(j, [np.log2(np.mean(c[k - 1] ** 2)) for k in j], 1)[0]
    assert abs(fit.exponent - 2.6) < 4 * fit.se
    assert abs(naive - 2.6) > 10 * fit.se


# ---------------------------------------------------------------- trends

def test_quadratic_trend_does_not_move_estimate():
    # N = 3 vanishing moments annihilate quadratic trends (Abry & Veitch 1998,
    # doi:10.1109/18.650984; REFERENCES 4.3). Paired: same fGn path with and without.
    noise = fgn(N_OBS, 0.7, rng=21)
    t = np.arange(N_OBS) / N_OBS
    trend = 5.0 * noise.std() * (2 * t - 1) ** 2
    b0 = wavelet_exponent(noise, vanishing_moments=3).exponent
    b1 = wavelet_exponent(noise + trend, vanishing_moments=3).exponent
    assert abs(b1 - b0) < 0.02
    # Positive control: with one vanishing moment (Haar) the same trend moves it.
    h0 = wavelet_exponent(noise, vanishing_moments=1).exponent
    h1 = wavelet_exponent(noise + trend, vanishing_moments=1).exponent
    assert abs(h1 - h0) > 0.02


# ---------------------------------------------------------------- diagram & helpers

def test_result_exposes_logscale_diagram():
    x = fgn(N_OBS, 0.6, rng=3)
    fit = wavelet_exponent(x)
    d = logscale_diagram(x)
    assert fit.kind == "beta" and fit.fit_units == "octave" and fit.method == "wavelet"
    # Default rule: j1 = 3, j2 = coarsest octave with >= 16 boundary-free coefficients.
    n_j = np.array(fit.options["n_coefficients"])
    assert fit.fit_range == (3.0, float(d.octaves[n_j >= 16].max()))
    assert n_j[int(fit.fit_range[1])] < 16
    assert_allclose(fit.x, d.octaves)
    assert_allclose(fit.y, np.log2(d.energy) - logscale_bias(d.n_coefficients), rtol=1e-12)
    assert_allclose(fit.weights, 1 / logscale_variance(d.n_coefficients), rtol=1e-12)
    assert fit.used.sum() == fit.n_points
    # The periodised DWT keeps n/2^j coefficients minus about L - 1 at the boundary.
    assert np.all(N_OBS // 2 ** d.octaves - n_j <= pywt.Wavelet("db3").dec_len)
    assert not fit.y.flags.writeable and not d.energy.flags.writeable
    sub = wavelet_exponent(x, octaves=(2, 6))
    assert sub.fit_range == (2.0, 6.0) and sub.n_points == 5


def test_octave_frequency_band_contains_wavelet_passband():
    # Source (b): the centroid of |FFT|^2 of the equivalent filter of octave j (built by
    # pywt) lies inside octave_to_frequency_hz(j, fs).
    fs = 4.0
    for j in range(1, 7):
        p = wavelet_filter(j)
        spec = np.abs(np.fft.rfft(p, 8192)) ** 2
        freq = np.fft.rfftfreq(8192, d=1 / fs)
        centroid = (freq * spec).sum() / spec.sum()
        low, high = octave_to_frequency_hz(j, fs)
        assert low < centroid < high


def test_validation_errors():
    x = np.random.default_rng(0).standard_normal(2000)
    with pytest.raises(ValueError, match="vanishing_moments"):
        wavelet_exponent(x, vanishing_moments=0)
    with pytest.raises(ValueError, match="vanishing_moments"):
        wavelet_exponent(x, vanishing_moments=1, wavelet_family="sym")
    with pytest.raises(TypeError, match="vanishing_moments"):
        wavelet_exponent(x, vanishing_moments=2.5)
    with pytest.raises(ValueError, match="wavelet_family"):
        wavelet_exponent(x, wavelet_family="haar")
    with pytest.raises(ValueError, match="octaves"):
        wavelet_exponent(x, octaves=(4, 3))
    with pytest.raises(InsufficientDataError):
        wavelet_exponent(x, octaves=(3, 20))
    with pytest.raises(InsufficientDataError):
        wavelet_exponent(x[:200])  # default fit needs two octaves with >= 16 coefficients
    with pytest.raises(InsufficientDataError):
        wavelet_exponent(x[:8])
    with pytest.raises(ValueError, match="constant"):
        wavelet_exponent(np.ones(1000))
    with pytest.raises(ValueError, match="fs_hz"):
        octave_to_frequency_hz(1, 0.0)
