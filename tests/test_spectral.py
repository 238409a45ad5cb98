"""Tests of tfhrv.estimators.spectral.

Sources of expected values, named beside each check:
(a) theory: Parseval's theorem, exact power laws, fGn beta = 2H - 1 (REFERENCES.md 2.1);
(b) independent implementations: scipy.signal.welch / periodogram / lombscargle, and the
    ``colorednoise`` package (Timmer & König, A&A 1995;300:707) for 1/f^beta noise;
(c) Monte-Carlo tolerances from scripts/mc_spectral_beta.py (100 seeds; numbers quoted
    where used).
"""

from __future__ import annotations

import colorednoise
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import signal

from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.spectral import (
    TASK_FORCE_BANDS,
    band_powers,
    beta_from_nn,
    lomb_scargle_psd,
    periodogram_psd,
    spectral_exponent,
    welch_psd,
)
from tfhrv.synth import fgn

N_MC = 2**15  # samples at 1 Hz, as in scripts/mc_spectral_beta.py
BAND_MC = (1e-3, 1e-1)
SEEDS = (11, 12, 13, 14, 15)
# scripts/mc_spectral_beta.py, 100 seeds: SD of one estimate (boxcar periodogram, 20 log
# bins over BAND_MC, n = 2**15) is 0.045 for colorednoise and 0.041 for fGn; |bias| < 0.01.
SD_ONE = 0.045
# Mean of 5 seeds within 4 standard errors: 4 * 0.045 / sqrt(5) = 0.080.
TOL_MEAN5 = 4 * SD_ONE / np.sqrt(len(SEEDS))


def _beta(x: np.ndarray, **kw) -> ScalingFit:
    s = periodogram_psd(x, fs_hz=1.0)
    return spectral_exponent(s.frequency_hz, s.psd, band=BAND_MC, **kw)


# --- agreement with SciPy ---------------------------------------------------------------


@pytest.mark.parametrize("window", ["hann", "hamming", "blackman", "boxcar"])
@pytest.mark.parametrize("detrend", ["constant", "linear", "none"])
def test_welch_equals_scipy(rng, window, detrend):
    # Source: scipy.signal.welch, density scaling, noverlap = nperseg // 2.
    x = rng.standard_normal(3001) + np.linspace(0, 2, 3001)
    s = welch_psd(x, fs_hz=4.0, nperseg=512, detrend=detrend, window=window)
    f, p = signal.welch(x, fs=4.0, window=window, nperseg=512, noverlap=256,
                        detrend=False if detrend == "none" else detrend)
    assert_allclose(s.frequency_hz, f, rtol=1e-12)
    assert_allclose(s.psd, p, rtol=1e-12, atol=1e-12 * p.max())
    assert s.nperseg == 512
    assert s.options["noverlap"] == 256
    # segments: floor((3001 - 256) / 256) = 10
    assert s.options["n_segments"] == 10


@pytest.mark.parametrize("n", [1000, 1001])
@pytest.mark.parametrize("window", ["hann", "boxcar"])
@pytest.mark.parametrize("detrend", ["constant", "linear", "none"])
@pytest.mark.parametrize("pad", [0, 37])
def test_periodogram_equals_scipy(rng, n, window, detrend, pad):
    # Source: scipy.signal.periodogram (density scaling; our own FFT implementation).
    x = rng.standard_normal(n) + np.linspace(0, 3, n)
    nfft = n + pad if pad else None
    s = periodogram_psd(x, fs_hz=3.0, window=window, detrend=detrend, nfft=nfft)
    f, p = signal.periodogram(x, fs=3.0, window=window, nfft=nfft,
                              detrend=False if detrend == "none" else detrend)
    assert_allclose(s.frequency_hz, f, rtol=1e-12)
    # the 0-Hz bin of a detrended series is rounding noise: absolute tolerance there.
    assert_allclose(s.psd, p, rtol=1e-12, atol=1e-12 * p.max())
    assert s.nperseg == n


def test_lomb_scargle_equals_scipy_after_scaling(rng):
    # Source: scipy.signal.lombscargle with angular frequencies and floating_mean=True;
    # our documented scaling PSD = 2 P / fs_mean, fs_mean = (N - 1) / (t_N - t_1).
    t = np.cumsum(rng.uniform(0.6, 1.0, 500))
    y = 800 + 30 * rng.standard_normal(500)
    f = np.linspace(0.002, 0.6, 300)
    s = lomb_scargle_psd(t, y, frequency_hz=f)
    p = signal.lombscargle(t, y, 2 * np.pi * f, floating_mean=True)
    fs_mean = 499 / (t[-1] - t[0])
    assert_allclose(s.psd, 2 * p / fs_mean, rtol=1e-12)
    assert_allclose(s.fs_hz, fs_mean, rtol=1e-12)


def test_lomb_scargle_on_even_grid_equals_periodogram(rng):
    # Source: scipy.signal.periodogram.  On an even grid at the Fourier frequencies the
    # floating-mean Lomb-Scargle fit is the Fourier fit (Scargle 1982), so the scaled
    # values must equal the periodogram.
    n, fs = 1200, 4.0
    x = rng.standard_normal(n)
    f, p = signal.periodogram(x, fs=fs)
    s = lomb_scargle_psd(np.arange(n) / fs, x, frequency_hz=f[1:-1])
    assert_allclose(s.psd, p[1:-1], rtol=1e-9)


def test_welch_never_shrinks_nperseg(rng):
    # Source: STYLE.md trap: scipy shrinks nperseg on short input; we refuse instead.
    with pytest.raises(InsufficientDataError, match="nperseg"):
        welch_psd(rng.standard_normal(100), fs_hz=4.0, nperseg=256)


# --- band powers (Parseval) -------------------------------------------------------------

A_LF, A_HF = 20.0, 10.0  # ms


def _two_tones(t):
    lf = A_LF * np.sin(2 * np.pi * 0.1 * t + 0.3)
    hf = A_HF * np.sin(2 * np.pi * 0.25 * t + 1.1)
    return 800 + lf + hf


@pytest.mark.parametrize("method", ["periodogram", "welch"])
def test_band_powers_parseval(method):
    # Theory (Parseval): a sinusoid of amplitude A has variance A^2 / 2, all of it in the
    # band holding its frequency.  Tolerance 5 %: the Hann-window cross term between
    # tones is O(1 / nperseg) (< 1e-3 here).  Other bands: Hann sidelobes decay as 1/k^3
    # (Harris, Proc IEEE 1978;66:51-83) and the nearest foreign band edge is >= 7 bins
    # away, so leakage < 1e-3 of the line power.
    fs = 4.0
    t = np.arange(int(300 * fs)) / fs  # 5 min: 0.1 and 0.25 Hz fall on Fourier bins
    x = _two_tones(t)
    if method == "periodogram":
        s = periodogram_psd(x, fs_hz=fs)
    else:
        s = welch_psd(x, fs_hz=fs, nperseg=512)
    bp = band_powers(s)
    assert bp.names == ("ULF", "VLF", "LF", "HF")
    assert_allclose(bp["LF"], A_LF**2 / 2, rtol=0.05)
    assert_allclose(bp["HF"], A_HF**2 / 2, rtol=0.05)
    assert bp["VLF"] < 1e-3 * A_HF**2 / 2
    assert np.isnan(bp["ULF"])  # no bin in (0, 0.003] Hz for a 5-min record
    assert bp.n_points[0] == 0
    assert_allclose(bp.total_power, (A_LF**2 + A_HF**2) / 2, rtol=0.05)
    assert_allclose(bp.lf_hf, A_LF**2 / A_HF**2, rtol=0.05)
    assert_allclose(bp.lf_nu, A_LF**2 / (A_LF**2 + A_HF**2), rtol=0.05)
    assert_allclose(bp.lf_nu + bp.hf_nu, 1.0, rtol=1e-12)


def test_task_force_bands():
    # Source: Task Force 1996, Table 2 (REFERENCES.md 1.1).
    assert dict(TASK_FORCE_BANDS) == {
        "ULF": (0.0, 0.003), "VLF": (0.003, 0.04), "LF": (0.04, 0.15), "HF": (0.15, 0.4)
    }


@pytest.mark.parametrize(("f0", "amp", "band"), [(0.1, A_LF, "LF"), (0.25, A_HF, "HF")])
def test_lomb_scargle_uneven_matches_even_band_power(f0, amp, band):
    # Compare uneven-sampling Lomb-Scargle with the even-sampling periodogram of the same
    # sinusoid (whose band power is exactly A^2/2 by Parseval).  Tolerance 6 %: from
    # scripts/mc_spectral_beta.py (100 seeds, 375 jittered beats) the relative error has
    # mean <= 0.011 and SD <= 0.0113; 0.011 + 4 * 0.0113 < 0.06.  The foreign band gets
    # the spectral-window continuum of irregular sampling (Scargle 1982): < 3 %.
    rng = np.random.default_rng(20261202)
    tb = np.cumsum(rng.uniform(0.6, 1.0, 375))
    ph = 0.7
    y = 800 + amp * np.sin(2 * np.pi * f0 * tb + ph)
    dur = tb[-1] - tb[0]
    ls = band_powers(lomb_scargle_psd(tb, y, frequency_hz=np.arange(1, int(0.6 * dur * 4))
                                      / (dur * 4)))
    te = np.arange(1200) / 4.0
    even = band_powers(periodogram_psd(800 + amp * np.sin(2 * np.pi * f0 * te + ph), fs_hz=4.0))
    assert_allclose(even[band], amp**2 / 2, rtol=1e-9)  # Parseval, exact on a bin
    assert_allclose(ls[band], even[band], rtol=0.06)
    other = "HF" if band == "LF" else "LF"
    assert ls[other] < 0.03 * amp**2 / 2


# --- the log-binned power-law fit -------------------------------------------------------


@pytest.mark.parametrize("beta", [-0.5, 0.0, 1.0, 1.7, 2.5])
def test_exponent_of_exact_power_law(beta):
    # Theory: PSD = c f^-beta is a straight line of slope -beta on log-log axes.
    f = np.arange(1, 50001) / 100000.0
    fit = spectral_exponent(f, 7.0 * f**-beta, band=(1e-4, 1e-2))
    assert_allclose(fit.exponent, beta, rtol=1e-10, atol=1e-10)
    assert fit.kind == "beta" and fit.fit_units == "Hz"
    assert fit.n_points == 20  # 10 bins per decade over two decades
    if beta != 0:  # a flat line has no variance to explain
        assert_allclose(fit.r_squared, 1.0, rtol=1e-12)
    assert fit.fit_range[0] >= 1e-4 and fit.fit_range[1] < 1e-2


@pytest.mark.parametrize("beta", [0.0, 1.0, 2.0])
def test_exponent_on_colorednoise(beta):
    # Source: colorednoise.powerlaw_psd_gaussian (independent 1/f^beta generator).
    # Tolerance: mean of 5 seeds within 4 SE (TOL_MEAN5 = 0.080, from SD_ONE = 0.045);
    # the 5-seed spread itself must agree with the Monte-Carlo SD (chi-square, 4 df:
    # P(s > 2.5 SD) ~ 5e-5).
    est = np.array([
        _beta(colorednoise.powerlaw_psd_gaussian(beta, N_MC, random_state=s)).exponent
        for s in SEEDS
    ])
    assert abs(est.mean() - beta) < TOL_MEAN5
    assert est.std(ddof=1) < 2.5 * SD_ONE


@pytest.mark.parametrize("hurst", [0.3, 0.7, 0.9])
def test_exponent_on_fgn(hurst):
    # Theory: fGn has beta = 2H - 1 (REFERENCES.md 2.1); Davies-Harte paths from
    # tfhrv.synth.recordings.  Tolerance as above (fGn SD 0.041 < SD_ONE).
    est = np.array([_beta(fgn(N_MC, hurst, rng=s)).exponent for s in SEEDS])
    assert abs(est.mean() - (2 * hurst - 1)) < TOL_MEAN5


def test_sign_convention_beta_one_is_plus_one():
    # REFERENCES.md section 6: healthy-like beta = 1 noise must give exponent +1 and a
    # log-log slope of -1 (Kobayashi & Musha 1982), not +1.
    fit = _beta(colorednoise.powerlaw_psd_gaussian(1.0, N_MC, random_state=7))
    slope = np.polyfit(fit.x[fit.used], fit.y[fit.used], 1)[0]  # numpy's own line fit
    assert abs(fit.exponent - 1.0) < 4 * SD_ONE
    assert abs(slope + 1.0) < 4 * SD_ONE
    assert_allclose(fit.exponent, -slope, rtol=1e-10)
    conv = fit.converted()
    assert_allclose(conv.alpha, (fit.exponent + 1) / 2, rtol=1e-12)  # Kiyono 2015


def test_fit_result_fields(rng):
    fit = _beta(rng.standard_normal(N_MC))
    assert fit.used.sum() == fit.n_points == 20
    assert fit.x.size == fit.y.size == fit.weights.size == fit.used.size > fit.n_points
    assert not fit.x.flags.writeable
    q = fit.ci[1] - fit.exponent
    assert_allclose(fit.exponent - fit.ci[0], q, rtol=1e-12)
    assert q > 0 and 0 <= fit.curvature_pvalue <= 1
    assert fit.options["n_bins"] == 20 and fit.options["min_cycles"] == 2.0


def test_too_short_series_raises_naming_band():
    # Rule: duration * band low >= min_cycles (2).  One hour at 1 Hz holds 0.36 cycles of
    # 1e-4 Hz, so the default 24-h band must be refused with a message naming it.
    x = np.random.default_rng(1).standard_normal(3600)
    s = periodogram_psd(x, fs_hz=1.0)
    with pytest.raises(InsufficientDataError, match=r"band \(0\.0001, 0\.01\) Hz"):
        spectral_exponent(s.frequency_hz, s.psd, band=(1e-4, 1e-2))
    t = np.arange(1, 4501) * 0.8
    with pytest.raises(InsufficientDataError, match=r"band \(0\.0001, 0\.01\)"):
        beta_from_nn(t, np.full(4500, 800.0) + np.sin(t))


def test_quadratic_trend_moves_raw_periodogram_slope():
    # Half of the trend-robustness check (the wavelet/DFA half lives elsewhere).  A trend
    # 20 (t/T)^2 ends 20 SD above its start; its periodic-extension jump leaks as 1/f^2
    # (boxcar periodogram), pulling beta towards 2.  scripts/mc_spectral_beta.py: shift
    # mean 0.95, SD 0.04 over 100 seeds; we require > 0.5, i.e. far beyond the SD of an
    # untrended estimate (0.041).
    ramp = 20.0 * (np.arange(N_MC) / N_MC) ** 2
    for s in SEEDS[:3]:
        x = fgn(N_MC, 0.7, rng=s)
        shift = _beta(x + ramp).exponent - _beta(x).exponent
        assert shift > 0.5


# --- the NN convenience -----------------------------------------------------------------

# scripts/mc_spectral_beta.py, NN = 800 + 40 fGn(H = 0.8) ms, 2**14 beats, band 1e-3..1e-1:
# SD of one estimate <= 0.085 for every method (incl. Lomb-Scargle with a 10 % gap),
# |bias| <= 0.015.  Tolerance 4 SD + bias = 0.355 on a single series.
NN_TOL = 4 * 0.085 + 0.015


@pytest.mark.parametrize("method", ["periodogram", "welch", "lomb-scargle"])
def test_beta_from_nn_recovers_fgn(method):
    # Theory: beta = 2H - 1 = 0.6 (REFERENCES.md 2.1).
    rr = 800.0 + 40.0 * fgn(2**14, 0.8, rng=5)
    t = np.cumsum(rr) / 1000.0
    fit = beta_from_nn(t, rr, band=BAND_MC, method=method)
    assert abs(fit.exponent - 0.6) < NN_TOL
    assert fit.options["psd_method"] == method
    if method != "lomb-scargle":
        assert fit.options["fs_hz"] == 1.0  # max(1 Hz, 4 x 0.1 Hz)
        assert fit.options["interpolated_fraction"] == 0.0


def test_beta_from_nn_lomb_scargle_with_gap():
    # A 10 % hole in the middle: Lomb-Scargle needs no interpolation; same tolerance.
    rr = 800.0 + 40.0 * fgn(2**14, 0.8, rng=6)
    t = np.cumsum(rr) / 1000.0
    keep = np.ones(rr.size, dtype=bool)
    keep[7000:8600] = False
    fit = beta_from_nn(t, rr, band=BAND_MC, method="lomb-scargle", keep=keep)
    assert abs(fit.exponent - 0.6) < NN_TOL
    assert fit.options["nperseg"] == keep.sum()
    per = beta_from_nn(t, rr, band=BAND_MC, method="periodogram", keep=keep)
    assert 0.05 < per.options["interpolated_fraction"] < 0.15


def test_input_validation(rng):
    x = rng.standard_normal(100)
    with pytest.raises(ValueError, match="window must be one of"):
        periodogram_psd(x, fs_hz=1.0, window="kaiser")
    with pytest.raises(ValueError, match="method must be one of"):
        beta_from_nn(np.arange(1.0, 101), np.full(100, 800.0), method="fft")
    with pytest.raises(ValueError, match="band must satisfy"):
        spectral_exponent(np.arange(1.0, 10), np.ones(9), band=(0.1, 0.01))
    with pytest.raises(TypeError, match="nperseg must be an int"):
        welch_psd(x, fs_hz=1.0, nperseg=50.0)
    with pytest.raises(ValueError, match="strictly increasing"):
        lomb_scargle_psd(np.array([0.0, 2.0, 1.0]), np.ones(3), frequency_hz=[0.1])


def test_lomb_scargle_too_short_raises_before_computing():
    # Same duration rule for the uneven path: 2000 beats at 0.8 s = 1600 s < 2 / 1e-3 s.
    t = np.arange(1, 2001) * 0.8
    with pytest.raises(InsufficientDataError, match=r"band \(0\.001, 0\.1\) Hz"):
        beta_from_nn(t, 800 + np.sin(t), band=BAND_MC, method="lomb-scargle")


def _lof(x, *, band=(1e-4, 1e-2)):
    spec = periodogram_psd(x, fs_hz=1.0)
    return spectral_exponent(spec.frequency_hz, spec.psd, band=band, ordinate_dof=2.0)


def test_lack_of_fit_on_pure_and_broken_power_laws():
    # Source: colorednoise.powerlaw_psd_gaussian (independent generator); theory: a log
    # periodogram ordinate has variance pi^2/6 (Geweke & Porter-Hudak 1983); the p-value
    # uses a Monte-Carlo null of independent log chi^2_2 ordinates, so on a pure power law
    # it is uniform (measured: 1 of 100 below 0.01 at each beta 0, 1, 2).  With 40 records
    # the share below 0.01 stays under 0.1 (binomial P < 1e-3 at the nominal 0.01).
    n = 86_400
    ps = np.array([_lof(colorednoise.powerlaw_psd_gaussian(1.0, n, random_state=s))
                   .lack_of_fit_pvalue for s in range(40)])
    assert np.mean(ps < 0.01) < 0.1
    # a knee: white below 1e-3 Hz and 1/f^2 above (two power laws in one band) is rejected
    # and its excess scatter is large
    rng = np.random.default_rng(5)
    f = np.fft.rfftfreq(n, d=1.0)
    amp = (np.maximum(f, 1e-3) / 1e-3) ** -1.0
    spec = amp * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    spec[0] = 0.0
    knee = _lof(np.fft.irfft(spec, n=n))
    assert knee.lack_of_fit_pvalue <= 0.002 and knee.excess_scatter > 0.1  # 0.002: 1/(499+1)
    # without ordinate_dof (e.g. Welch) the test is not computed
    no = spectral_exponent(f[1:], np.abs(spec[1:]) ** 2)
    assert np.isnan(no.lack_of_fit_pvalue) and np.isnan(no.excess_scatter)
