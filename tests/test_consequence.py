"""Measured effect of non-stationarity on the FFT slope, and block intervals
(tfhrv.analysis.consequence).

Sources: the jackknife variance (B - 1)/B sum (b_i - mean b)^2 (Tukey 1958; Efron & Stein
1981) over deleted blocks (Künsch 1989); the subseries SE sd / sqrt(B) (Carlstein 1986);
power-law test series are Timmer & König (1995) noise; optimal segmentation (Auger &
Lawrence 1989) must recover change points placed by construction.
"""

from __future__ import annotations

import numpy as np
import pytest

from tfhrv.analysis.consequence import (
    _null_series,
    difference_interval,
    fill_gaps,
    level_change_effect,
    level_steps,
    slope_jackknife,
    subseries_interval,
)

BAND = (10 / 86400, 1e-2)


def test_segmentation_recovers_steps_and_ramps_placed_by_construction():
    t = np.arange(86400.0)
    ramp = np.clip((t - 30000.0) / 2400.0 + 0.5, 0, 1) - np.clip((t - 60000.0) / 2400.0 + 0.5,
                                                                  0, 1)
    y = 800.0 + 150.0 * ramp
    level, at, step, width = level_steps(y)
    assert [abs(a - c) <= 300 for a, c in zip(at, (30000, 60000), strict=True)] == [True, True]
    assert np.allclose(step, (150.0, -150.0), atol=5.0)
    assert width == (2400.0, 2400.0)
    assert np.max(np.abs(level - y)) < 10.0


def test_fill_gaps_is_the_straight_line_of_the_resampler():
    y = fill_gaps(np.array([1.0, 50.0, 50.0, 50.0, 5.0]), np.array([0, 1, 1, 1, 0], bool))
    assert np.allclose(y, [1.0, 2.0, 3.0, 4.0, 5.0])


def test_jackknife_and_subseries_follow_the_published_formulas():
    x = 800 + 50 * _null_series(86400, 1.0, 11)
    j = slope_jackknife(x, band_hz=BAND)
    v = np.asarray(j.values)
    b = v.size
    assert b == 6 and j.method == "jackknife"
    assert j.se == pytest.approx(np.sqrt((b - 1) / b * np.sum((v - v.mean()) ** 2)))
    s = subseries_interval(np.array([1.0, 1.2, 0.9, 1.1, 1.0, np.nan]), estimate=1.05)
    assert s.n_blocks == 5
    assert s.se == pytest.approx(np.std([1.0, 1.2, 0.9, 1.1, 1.0], ddof=1) / np.sqrt(5))
    # t quantile with 4 df (2.776, from tables)
    assert s.ci[1] - 1.05 == pytest.approx(2.776 * s.se, rel=1e-3)


def test_difference_interval_adds_variances():
    d, se, ci = difference_interval(1.3, 0.06, 1.0, 0.08)
    assert (round(d, 6), round(se, 6)) == (0.3, 0.1)
    assert ci == pytest.approx((0.3 - 0.196, 0.3 + 0.196), abs=1e-3)


def test_jackknife_se_is_of_the_size_of_the_sampling_sd_on_a_power_law():
    # Monte-Carlo: SD of the raw slope over independent 24-h 1/f records vs the mean
    # jackknife SE; the jackknife is conservative (Efron & Stein 1981) but of that order
    slopes, ses = [], []
    for seed in range(12):
        x = 800 + 50 * _null_series(86400, 1.0, 100 + seed)
        j = slope_jackknife(x, band_hz=BAND)
        slopes.append(j.estimate)
        ses.append(j.se)
    ratio = np.mean(ses) / np.std(slopes, ddof=1)
    assert 0.5 < ratio < 3.0, ratio


def test_level_effect_is_small_on_power_law_and_tracks_an_injected_day_night_change():
    effects = [level_change_effect(800 + 50 * _null_series(86400, b, s), band_hz=BAND).effect
               for b, s in ((0.8, 1), (1.2, 2), (1.6, 3))]
    assert max(abs(e) for e in effects) < 0.1, effects
    # a night 200 ms longer (4 background SD) on a beta = 0.8 background: the true change
    # of the slope (with minus without, same noise) is recovered within 0.1
    from tfhrv.analysis.consequence import _slope

    t = np.arange(86400.0)
    night = 1 / (1 + np.exp(-(t - 30000) / 500)) - 1 / (1 + np.exp(-(t - 59000) / 500))
    truths = []
    for seed in (4, 5, 6):
        bg = 800 + 50 * _null_series(86400, 0.8, seed)
        truth = _slope(bg + 200 * night, BAND, 1.0) - _slope(bg, BAND, 1.0)
        e = level_change_effect(bg + 200 * night, band_hz=BAND)
        assert abs(e.effect - truth) < 0.1, (truth, e.effect)
        assert e.ci[0] < e.effect < e.ci[1]
        truths.append(truth)
    assert np.mean(truths) > 0.05  # the injected change does distort the slope


def test_options_are_checked():
    x = 800 + 50 * _null_series(4096, 1.0, 1)
    with pytest.raises(ValueError, match="n_null"):
        level_change_effect(x, band_hz=(1e-2, 1e-1), n_null=1)
    with pytest.raises(ValueError, match="gap"):
        level_change_effect(x, band_hz=(1e-2, 1e-1), gap=np.zeros(3, bool))
