"""NN cleaning rules and the quality summary."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tfhrv.signal.clean import CleanOptions, Reason, clean
from tfhrv.signal.recording import Recording


def _rec(rr, labels=None, times=None):
    rr = np.asarray(rr, dtype=float)
    t = np.cumsum(rr) / 1000.0 if times is None else np.asarray(times, dtype=float)
    lab = np.full(rr.size, "N") if labels is None else np.asarray(labels)
    return Recording(t, rr, lab)


def test_ectopic_beat_removes_both_neighbouring_intervals():
    # a premature ventricular beat: short coupling interval then a compensatory pause
    rr = [800.0] * 20 + [500.0, 1100.0] + [800.0] * 20
    labels = ["N"] * 20 + ["V", "N"] + ["N"] * 20
    res = clean(_rec(rr, labels))
    assert res.reason[20] == Reason.NON_SINUS_END
    assert res.reason[21] == Reason.NON_SINUS_START
    assert res.keep.sum() == len(rr) - 2
    assert_allclose(res.quality.ectopic_fraction, 1 / len(rr))


def test_range_rule_and_relative_change_rule():
    rr = [800.0] * 30 + [250.0] + [800.0] * 30 + [1050.0] + [800.0] * 30 + [2500.0 / 2]
    res = clean(_rec(rr))
    assert res.reason[30] == Reason.OUT_OF_RANGE  # < 300 ms
    assert res.reason[61] == Reason.RELATIVE_CHANGE  # +31 % against the local median
    assert res.reason[-1] == Reason.RELATIVE_CHANGE  # 1250 ms = +56 %
    # a slow drift of 1 % per beat is physiology, not an artefact
    slow = clean(_rec(800.0 * 1.01 ** np.arange(40)))
    assert slow.keep.all()


def test_relative_change_threshold_is_an_option():
    rr = [800.0] * 30 + [900.0] + [800.0] * 30  # +12.5 %
    assert clean(_rec(rr)).keep.all()
    strict = clean(_rec(rr), options=CleanOptions(max_relative_change=0.1))
    assert strict.reason[30] == Reason.RELATIVE_CHANGE


def test_gap_from_long_interval_and_from_time_jump():
    rr = [800.0] * 100 + [3_600_000.0] + [800.0] * 100  # one-hour unreadable stretch
    res = clean(_rec(rr))
    assert res.reason[100] == Reason.GAP
    q = res.quality
    assert q.n_gaps == 1
    assert_allclose(q.longest_gap_s, 3600.0, rtol=1e-9)
    assert_allclose(q.gaps_s[0], [80.0, 3680.0], rtol=1e-9)
    # a jump in beat time that the interval does not explain (missing rows)
    t = np.cumsum([0.8] * 50)
    t[25:] += 120.0
    res2 = clean(_rec([800.0] * 50, times=t))
    assert res2.reason[25] == Reason.GAP
    assert res2.quality.longest_gap_s == pytest.approx(120.8, rel=1e-9)


def test_quality_numbers_against_direct_computation(rng):
    rr = 800 + 40 * rng.standard_normal(5000)
    res = clean(_rec(rr))
    nn = rr[res.keep]
    q = res.quality
    assert_allclose(q.nn_mean_ms, nn.mean())
    assert_allclose(q.nn_sd_ms, nn.std(ddof=1))
    pairs = res.keep[1:] & res.keep[:-1]
    assert_allclose(q.rmssd_ms, np.sqrt(np.mean(np.diff(rr)[pairs] ** 2)))
    assert_allclose(q.analysable_s, nn.sum() / 1000)
    assert sum(q.removed.values()) + q.n_kept == q.n_intervals


def test_hourly_coverage_marks_the_missing_hour():
    rr = np.concatenate([np.full(4500, 800.0), [3_600_000.0], np.full(4500, 800.0)])
    q = clean(_rec(rr)).quality
    # 3600 s of beats, one hour missing, 3600 s of beats -> hours: full, empty, full
    assert q.hourly_coverage.shape == (3,)
    assert_allclose(q.hourly_coverage, [1.0, 0.0, 1.0], atol=1e-3)


def test_reason_codes_are_stable_flag_meanings():
    assert Reason.meanings().split()[0] == "kept"
    assert [int(r) for r in Reason] == list(range(len(Reason)))


def test_options_validated():
    with pytest.raises(ValueError, match="min_ms must be < max_ms"):
        CleanOptions(min_ms=900, max_ms=800)
    with pytest.raises(ValueError, match="reference_beats"):
        CleanOptions(reference_beats=1)


@pytest.mark.parametrize("size", [3, 4, 11, 12])
@pytest.mark.parametrize("n", [2, 11, 12, 500, 70_001])
def test_running_median_equals_scipy_median_filter(n, size):
    # Reference: scipy.ndimage.median_filter with mirrored ends (independent library);
    # an order statistic involves no arithmetic, so the values must be equal.
    from scipy import ndimage

    from tfhrv.signal.clean import _running_median

    gen = np.random.default_rng(n + size)
    for x in (gen.integers(300, 1500, n).astype(float), gen.random(n)):
        np.testing.assert_array_equal(_running_median(x, size, block=997),
                                      ndimage.median_filter(x, size=size, mode="mirror"))
