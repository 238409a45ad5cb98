"""Tests of tfhrv.calibration.calibrate (bias correction and Neyman-belt intervals).

Expected values come from (a) theory: the exponent of fGn / fBm of known H (alpha = H
and H + 1, beta = 2H - 1 and 2H + 1; Eke et al. 2000, doi:10.1007/s004249900135; Kiyono
2015, doi:10.1103/PhysRevE.91.052820) and the exact DFA-1 fluctuation function of white
noise (REFERENCES.md 3.3); (b) an independent fGn generator, the PyPI package ``fbm``;
(c) Monte-Carlo cases with fixed seeds.  The full grid (H = 0.1 ... 0.9, two lengths,
two generators, 100 seeds) is ``scripts/validate_estimators.py``; its output is
docs/validation_estimators.md.  This file keeps a representative subset.

Tolerances (c): the mean of R calibrated estimates differs from the truth by the
Monte-Carlo error of that mean (sd / sqrt(R)) plus the error of the table's mean curve it
was inverted through (sd / sqrt(n_rep), n_rep = the table's replicates per cell), which
are independent; the bias check allows 4 x sd x sqrt(1/R + 1/n_rep), two-sided false
alarm about 6e-5 for a Gaussian mean.  Coverage: with true coverage 0.95, P(fewer than 7
of 10 intervals cover) = 0.001 (binomial).

Seeds start at 10^9 so that no draw repeats one used to build the calibration tables
(scripts/make_calibration.py uses seeds below 10^8).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tfhrv.calibration.calibrate import (
    CLASS_THRESHOLD,
    _confidence_set,
    calibrate,
    class_statistic,
    load_table,
    table_name,
)
from tfhrv.estimators.presets import PRESETS, estimate
from tfhrv.synth import fgn

SEED0 = 1_000_000_000
R = 10
N14, N16 = 2**14, 2**16
CHECKED = ("alpha1", "alpha2", "alpha_long", "beta_wavelet_long", "beta_spectral_long")


def _nn(path: np.ndarray) -> np.ndarray:
    """NN-like series 800 ms + 50 ms x standardised path (as the calibration tables)."""
    return 800.0 + 50.0 * (path - path.mean()) / path.std()


def _truth(preset: str, process: str, hurst: float) -> float:
    alpha = hurst if process == "fGn" else hurst + 1.0
    return alpha if preset.startswith("alpha") else 2.0 * alpha - 1.0


def _covers(lo: np.ndarray, hi: np.ndarray, true: float) -> np.ndarray:
    """Interval contains truth; one NaN end means unbounded on that side (calibrate's
    documented meaning: the raw value is beyond the tabulated range); two NaN ends = no
    interval, a miss."""
    lo, hi = np.asarray(lo), np.asarray(hi)
    ok = (np.where(np.isnan(lo), -np.inf, lo) <= true) & \
         (true <= np.where(np.isnan(hi), np.inf, hi))
    return ok & ~(np.isnan(lo) & np.isnan(hi))


def _run(preset: str, paths) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    est, lo, hi = [], [], []
    for path in paths:
        cal = calibrate(estimate(preset, _nn(path)), estimator=preset)
        est.append(cal.exponent)
        lo.append(cal.ci[0])
        hi.append(cal.ci[1])
    return np.array(est), np.array(lo), np.array(hi)


def _bias_tolerance(est: np.ndarray, preset: str) -> float:
    return 4.0 * float(est.std(ddof=1)) * np.sqrt(1.0 / est.size + 1.0 / load_table(preset).n_rep)


def _check_calibrated(preset: str, process: str, hurst: float, n: int, paths) -> None:
    true = _truth(preset, process, hurst)
    est, lo, hi = _run(preset, paths)
    assert abs(est.mean() - true) <= _bias_tolerance(est, preset), (est.mean(), true)
    assert int(_covers(lo, hi, true).sum()) >= 7, (lo, hi, true)


# A table column that is all NaN (the preset cannot run at that length) must not spill
# into a neighbouring length: CalibrationTable.curves interpolates as
# (1 - w) * a[:, j] + w * a[:, j + 1], and at n equal to a tabulated length with w = 1,
# 0 * NaN = NaN.  beta_wavelet_long is tabulated at 4096 (all NaN) and 16384.


CASES = [("fGn", 0.3), ("fGn", 0.7), ("fBm", 0.5)]


@pytest.mark.parametrize(("process", "hurst"), CASES)
def test_alpha2_calibrated_fgn_fbm(process, hurst):
    # Source (a)+(c): alpha2 of fGn (H) / fBm (H + 1), tfhrv Davies-Harte generator.
    paths = [fgn(N14, hurst, rng=SEED0 + s) for s in range(R)]
    if process == "fBm":
        paths = [np.cumsum(p) for p in paths]
    _check_calibrated("alpha2", process, hurst, N14, paths)


@pytest.mark.parametrize("n", [
    N14,
    N16,
])
@pytest.mark.parametrize(("process", "hurst"), CASES)
def test_beta_wavelet_long_calibrated_fgn_fbm(process, hurst, n):
    # Source (a)+(c): wavelet beta of fGn (2H - 1) / fBm (2H + 1).
    paths = [fgn(n, hurst, rng=SEED0 + 100 + s) for s in range(R)]
    if process == "fBm":
        paths = [np.cumsum(p) for p in paths]
    _check_calibrated("beta_wavelet_long", process, hurst, n, paths)


@pytest.fixture
def global_numpy_seed():
    """The ``fbm`` package draws from NumPy's global state; restore it afterwards."""
    state = np.random.get_state()  # noqa: NPY002 - the package's only interface
    yield np.random.seed  # noqa: NPY002
    np.random.set_state(state)  # noqa: NPY002


def test_alpha2_calibrated_on_independent_generator(global_numpy_seed):
    # Source (b): fGn with H = 0.7 from the PyPI package fbm (its own Davies-Harte code).
    fbm_pkg = pytest.importorskip("fbm")
    gen = fbm_pkg.FBM(n=N14, hurst=0.7, method="daviesharte")
    paths = []
    for s in range(R):
        global_numpy_seed(SEED0 % 2**32 + 200 + s)
        paths.append(gen.fgn())
    assert gen.method == "daviesharte"  # no fallback to another method
    _check_calibrated("alpha2", "fGn", 0.7, N14, paths)


def _dfa1_white_alpha1() -> float:
    """Least-squares slope of log sqrt(E F^2(s)) on log s, s = 4..16, with the exact
    DFA-1 white-noise E F^2(s) = (s^2 - 4) / (15 s) (REFERENCES.md 3.3)."""
    s = np.arange(4, 17, dtype=float)
    return float(np.polyfit(np.log(s), 0.5 * np.log((s * s - 4) / (15 * s)), 1)[0])


def test_alpha1_white_noise_raw_0583_calibrated_05(rng):
    # Source (a): REFERENCES 3.3 -- expected raw alpha1 of white noise 0.583, not 0.5;
    # calibration must map it to the fGn value H = 0.5.
    assert_allclose(_dfa1_white_alpha1(), 0.583, atol=5e-4)
    raw, cal = [], []
    for _ in range(R):
        fit = estimate("alpha1", _nn(rng.standard_normal(N14)))
        raw.append(fit.exponent)
        cal.append(calibrate(fit, estimator="alpha1").exponent)
    raw, cal = np.array(raw), np.array(cal)
    assert abs(raw.mean() - _dfa1_white_alpha1()) <= 4 * raw.std(ddof=1) / np.sqrt(R)
    assert abs(cal.mean() - 0.5) <= _bias_tolerance(cal, "alpha1")


def test_calibrate_keeps_raw_and_marks_calibrated():
    fit = estimate("alpha2", _nn(fgn(N14, 0.6, rng=SEED0 + 300)))
    cal = calibrate(fit, estimator="alpha2")
    assert cal.calibrated and not fit.calibrated
    assert cal.slope_exponent == fit.exponent
    assert cal.exponent != fit.exponent  # the table's bias at alpha 0.6 is not exactly 0
    assert cal.options["calibration"] == "alpha2"
    assert cal.ci[0] < cal.exponent < cal.ci[1]
    assert cal.se > 0
    # everything but the calibrated fields is carried over
    for name in ("kind", "n_obs", "n_points", "fit_range", "method", "intercept"):
        assert getattr(cal, name) == getattr(fit, name)
    np.testing.assert_array_equal(cal.y, fit.y)


@pytest.mark.parametrize("preset", CHECKED)
def test_table_mean_curves_increase(preset):
    # The point estimate inverts E[estimate], which must increase in the truth under the
    # default "powerlaw" model.  Checked at the lengths validated here and in
    # scripts/validate_estimators.py (2^14, 2^16); the spectral preset only over beta in
    # [-0.4, 2.0]: leakage flattens its mean curve at both ends of the grid (see
    # docs/validation_estimators.md), so it is not invertible there.  Where the two
    # simulated families meet (fGn H = 0.98 and 1/f^beta noise with alpha = 1.02) the
    # curve may be flat to within the Monte-Carlo error: alpha1 is about 1.04 for both.
    table = load_table(preset)
    keep = np.ones(table.truth.size, dtype=bool)
    if preset == "beta_spectral_long":
        keep = (table.truth >= -0.4) & (table.truth <= 2.0)
    join = np.flatnonzero(table.truth[keep] < 1.0)[-1]  # diff index across alpha = 1
    checked = 0
    for k, n in enumerate(table.lengths):
        col = table.mean[0, keep, k]
        if n not in (N14, N16) or np.all(np.isnan(col)):
            continue
        d = np.diff(col)
        assert d[join] > -0.005, (n, col)
        assert np.all(np.delete(d, join) > 0), (n, col)
        checked += 1
    assert checked >= 2


@pytest.mark.parametrize("preset", CHECKED)
def test_calibrated_values_monotone_in_raw(preset):
    fit = estimate(preset, _nn(fgn(N16, 0.5, rng=SEED0 + 400)))
    mean = load_table(preset).curves(fit.n_obs).mean
    lo, hi = np.nanmin(mean), np.nanmax(mean)
    if preset == "beta_spectral_long":
        # leakage folds its belt back at both ends: true beta of 2.4-2.96 gives raw slopes
        # down to about 1.2, so above that the confidence set honestly reaches the top of
        # the grid (open upper end); the ends are monotone below it
        lo, hi = -0.3, 1.1
    grid = np.linspace(lo, hi, 60)
    out = np.array([(c.exponent, *c.ci) for c in (
        calibrate(dataclasses.replace(fit, exponent=float(v)), estimator=preset)
        for v in grid)])
    for col in out.T:
        good = col[np.isfinite(col)]
        assert good.size >= 30
        assert np.all(np.diff(good) >= 0)


def test_out_of_range_raw_gives_nan_ends_not_numbers():
    fit = estimate("alpha2", _nn(fgn(N14, 0.5, rng=SEED0 + 500)))
    c = load_table("alpha2").curves(fit.n_obs)
    mean, q_low, q_high = c.mean, c.q_low, c.q_high
    # far above every curve: no end can be inverted, exponent left uncorrected
    far = calibrate(dataclasses.replace(fit, exponent=float(q_high.max()) + 0.5),
                    estimator="alpha2")
    assert np.isnan(far.ci[0]) and np.isnan(far.ci[1])
    assert far.exponent == far.slope_exponent
    low = calibrate(dataclasses.replace(fit, exponent=float(q_low.min()) - 0.5),
                    estimator="alpha2")
    assert np.isnan(low.ci[0]) and np.isnan(low.ci[1])
    # above the 2.5 % curve's top but below the 97.5 % curve's: the upper end is open
    # (NaN), the lower end is a number below the raw value
    v = 0.5 * (float(mean.max()) + float(q_high.max()))
    assert q_low.max() < v < q_high.max()
    edge = calibrate(dataclasses.replace(fit, exponent=v), estimator="alpha2")
    assert np.isnan(edge.ci[1])
    assert np.isfinite(edge.ci[0]) and edge.ci[0] < load_table("alpha2").truth[-1]


def test_beyond_mean_curve_the_near_end_is_open_even_where_the_band_folds_back():
    # Confidence-belt inversion (Neyman 1937, Phil Trans R Soc A 236:333-380): a raw value
    # above every mean of the belt cannot be inverted to a point estimate, so the exponent
    # stays the raw slope and nothing bounds the truth from above.  The 5-min spectral
    # preset's upper quantile folds back at the top of its grid; the near end used to come
    # out finite and below the exponent there (a raw 2.94 with [2.59, 2.87]).
    n = 400
    rng = np.random.default_rng(5)
    fit = estimate("beta_spectral_short", 800.0 + 4.0 * np.cumsum(rng.standard_normal(n)))
    c = load_table("beta_spectral_short").curves(n)
    top = float(np.nanmax(c.mean))
    for v in np.linspace(top + 0.01, float(np.nanmax(c.q_high)) - 0.01, 12):
        cal = calibrate(dataclasses.replace(fit, exponent=float(v)),
                        estimator="beta_spectral_short", n=n)
        assert cal.exponent == cal.slope_exponent == v
        assert np.isnan(cal.ci[1]), (v, cal.ci)
        assert np.isnan(cal.ci[0]) or cal.ci[0] <= v


def test_load_table_unknown_preset_names_options():
    with pytest.raises(ValueError, match="preset must be one of") as info:
        load_table("alpha3")
    for name in PRESETS:
        assert repr(name) in str(info.value)
    assert "'alpha3'" in str(info.value)


@pytest.mark.parametrize("preset", [
    p
    if p == "beta_wavelet_long" else p for p in PRESETS])
def test_curves_finite_at_every_tabulated_length(preset):
    table = load_table(preset)
    for k, n in enumerate(table.lengths):
        finite = np.isfinite(table.mean[0, :, k])
        if finite.any():
            assert np.all(np.isfinite(table.curves(int(n)).mean[finite])), n


# ---------------------------------------------------------------- the two calibration models


def _run_model(preset: str, paths, model: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    est, lo, hi = [], [], []
    for path in paths:
        nn = _nn(path)
        cal = calibrate(estimate(preset, nn), estimator=preset, model=model,
                        class_stat=class_statistic(nn))
        est.append(cal.exponent)
        lo.append(cal.ci[0])
        hi.append(cal.ci[1])
    return np.array(est), np.array(lo), np.array(hi)


@pytest.mark.parametrize("hurst", [0.1, 0.5])
def test_alpha1_of_fbm_needs_the_fgn_fbm_model(hurst):
    # Source (a): DFA alpha of fBm = H + 1 (Peng et al. 1995: 1.5 for Brownian motion;
    # Eke et al. 2000).  At 4-16 beats fBm with small H looks like fGn, so the "powerlaw"
    # model (1/f^beta noise above alpha 1) cannot recover it -- the documented limit,
    # shown here -- while "fgn-fbm", whose class statistic reads the longest scales, can.
    true = 1.0 + hurst
    paths = [np.cumsum(fgn(N14, hurst, rng=SEED0 + 600 + s)) for s in range(R)]
    est, lo, hi = _run_model("alpha1", paths, "fgn-fbm")
    table = load_table("alpha1", model="fgn-fbm")
    tol = 4.0 * float(est.std(ddof=1)) * np.sqrt(1.0 / R + 1.0 / table.n_rep)
    assert abs(est.mean() - true) <= max(tol, 0.01), (est.mean(), true)
    assert int(_covers(lo, hi, true).sum()) >= 7, (lo, hi, true)
    wrong, wlo, whi = _run_model("alpha1", paths, "powerlaw")
    assert wrong.mean() < true - 0.03  # outside its family: biased low ...
    assert int(_covers(wlo, whi, true).sum()) <= 3  # ... and the intervals miss


def test_class_statistic_tells_fgn_from_fbm():
    # Source (a): at long scales DFA-1 gives H for fGn and H + 1 for fBm (Eke et al. 2000),
    # so the class statistic is below 1 for fGn H = 0.9 and above it for fBm H = 0.1.
    noise = [class_statistic(_nn(fgn(N14, 0.9, rng=SEED0 + 700 + s))) for s in range(R)]
    motion = [class_statistic(_nn(np.cumsum(fgn(N14, 0.2, rng=SEED0 + 710 + s))))
              for s in range(R)]
    assert max(noise) < CLASS_THRESHOLD < min(motion)
    assert np.isnan(class_statistic(np.ones(100)))  # too short


def test_powerlaw_model_on_independent_one_over_f_noise():
    # Source (b): 1/f noise (beta = 1, alpha = 1; Peng et al. 1995) from the PyPI package
    # colorednoise (its own Timmer-Koenig 1995 code); the "powerlaw" model is continuous
    # across alpha = 1, so the calibrated alpha2 is 1 within its Monte-Carlo error.
    colorednoise = pytest.importorskip("colorednoise")
    paths = [colorednoise.powerlaw_psd_gaussian(1.0, 4 * N14, random_state=SEED0 + 800 + s)[
        N14: 2 * N14] for s in range(R)]
    est, lo, hi = _run(("alpha2"), paths)
    assert abs(est.mean() - 1.0) <= _bias_tolerance(est, "alpha2"), est.mean()
    assert int(_covers(lo, hi, 1.0).sum()) >= 7


def test_confidence_set_is_the_hull_of_a_non_monotone_belt():
    # A belt that rises, falls back and rises again (the fGn/fBm join at short scales):
    # an estimate inside both rising parts gives the hull of both; ends at the grid's
    # first/last point are open (NaN); an estimate beyond every band gives no interval.
    truth = np.array([0.0, 1.0, 2.0, 3.0])
    mean = np.array([0.0, 1.0, 0.0, 3.0])
    lo, hi = mean - 0.25, mean + 0.25
    a, b = _confidence_set(truth, lo, hi, 0.5)
    # inside on t in [0.25, 0.75], [1.25, 1.75] and [2 + 1/12, 2.25]: the hull
    assert a == pytest.approx(0.25, abs=1e-3) and b == pytest.approx(2.25, abs=1e-3)
    assert np.isnan(_confidence_set(truth, lo, hi, 0.1)[0])  # truth 0 itself is inside
    assert all(np.isnan(_confidence_set(truth, lo, hi, 9.0)))


def test_dfa_order_has_its_own_table_and_other_wavelets_none():
    x = _nn(fgn(N14, 0.7, rng=SEED0 + 900))
    fit2 = estimate("alpha2", x, order=2)
    cal2 = calibrate(fit2, estimator="alpha2")
    assert cal2.calibrated and cal2.options["calibration"] == "alpha2.q2"
    assert table_name("alpha2", estimate("alpha2", x)) == "alpha2"
    assert table_name("alpha2", estimate("alpha2", x, order=3)) == "alpha2.q3"
    w4 = calibrate(estimate("beta_wavelet_long", x, vanishing_moments=4),
                   estimator="beta_wavelet_long")
    assert not w4.calibrated and all(np.isnan(w4.ci))
    assert w4.exponent == w4.slope_exponent


def test_unknown_model_is_named():
    fit = estimate("alpha2", _nn(fgn(N14, 0.6, rng=SEED0 + 950)))
    with pytest.raises(ValueError, match="model must be one of"):
        calibrate(fit, estimator="alpha2", model="fbm")


def test_dfa2_alpha1_calibrated_with_its_own_table(rng):
    # Source (a): DFA-q of fGn measures H at every order (Kantelhardt et al. 2001); DFA-2
    # over 4-16 beats is biased by about +0.2 (finite-size), far more than DFA-1, so the
    # order-1 table would not correct it.  White noise: H = 0.5.
    est, lo, hi = [], [], []
    for _ in range(R):
        cal = calibrate(estimate("alpha1", _nn(rng.standard_normal(N14)), order=2),
                        estimator="alpha1")
        assert cal.options["calibration"] == "alpha1.q2"
        est.append(cal.exponent)
        lo.append(cal.ci[0])
        hi.append(cal.ci[1])
    est = np.array(est)
    tol = 4.0 * float(est.std(ddof=1)) * np.sqrt(1.0 / R + 1.0 / load_table("alpha1.q2").n_rep)
    assert abs(est.mean() - 0.5) <= tol, est.mean()
    assert int(_covers(np.array(lo), np.array(hi), 0.5).sum()) >= 7


def test_confidence_set_matches_a_brute_force_search(rng):
    # The exact per-interval solution against a direct search on a 20001-point grid of
    # the same piecewise-linear belt, for random (also non-monotone) belts and values.
    fine = np.linspace(0.0, 5.0, 20001)
    for _ in range(200):
        truth = np.linspace(0.0, 5.0, 6)
        mean = np.cumsum(rng.normal(0.3, 0.5, truth.size))
        half = rng.uniform(0.05, 0.6, truth.size)
        lo, hi = mean - half, mean + half
        value = float(rng.uniform(mean.min() - 0.5, mean.max() + 0.5))
        inside = (np.interp(fine, truth, lo) <= value) & (value <= np.interp(fine, truth, hi))
        got = _confidence_set(truth, lo, hi, value)
        if not inside.any():
            assert all(np.isnan(got))
            continue
        a, b = fine[inside][0], fine[inside][-1]
        want = (np.nan if a <= 0 else a, np.nan if b >= 5 else b)
        np.testing.assert_allclose(got, want, atol=3e-4)
