"""Tests of tfhrv.signal.resample.

Sources of expected values, named beside each check:
(a) theory: the cubic-spline interpolation error bound of Hall & Meyer (J Approx Theory
    1976;16:105-122), exact interpolation at the knots, and masks derived from the
    documented rules by direct computation;
(b) independent implementations: numpy.interp for the straight-line gap fill, SciPy's
    CubicSpline for the not-a-knot spline (equal to rounding).
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from tfhrv.core.errors import InsufficientDataError
from tfhrv.signal.resample import EvenSeries, resample_even


def _smooth(t):
    return 800 + 40 * np.sin(2 * np.pi * 0.05 * t) + 20 * np.cos(2 * np.pi * 0.013 * t)


# max |d^4/dt^4| of _smooth: sum of amplitude * (2 pi f)^4
_M4 = 40 * (2 * np.pi * 0.05) ** 4 + 20 * (2 * np.pi * 0.013) ** 4


def _beats(rng, n=800):
    return np.cumsum(rng.uniform(0.7, 0.9, n))


def test_smooth_function_reproduced_on_even_grid(rng):
    # Theory: |s - g| <= 5/384 h^4 max|g''''| for cubic-spline interpolation with mesh h
    # (Hall & Meyer 1976, complete spline); away from the ends the not-a-knot spline
    # shares the bound (end effects decay geometrically, de Boor 1978).
    t = _beats(rng)
    es = resample_even(t, _smooth(t), fs_hz=4.0)
    h = np.diff(t).max()
    bound = 5.0 / 384.0 * h**4 * _M4
    inner = (es.time_s > t[0] + 10) & (es.time_s < t[-1] - 10)
    err = np.abs(es.value_ms - _smooth(es.time_s))
    assert err[inner].max() <= bound
    assert err.max() <= 2 * bound  # end intervals: the same order
    # Grid: even, starts at the first kept beat, never extrapolates.
    assert_allclose(np.diff(es.time_s), 0.25, rtol=1e-9)
    assert es.time_s[0] == t[0] and es.time_s[-1] <= t[-1]
    assert t[-1] - es.time_s[-1] < 0.25
    assert es.n_source == t.size and es.fs_hz == 4.0
    assert not es.interpolated.any() and es.interpolated_fraction == 0.0


def test_spline_passes_through_the_knots():
    # Theory: an interpolating spline equals the data at its knots; with beats on a
    # 0.5-s lattice every other 4-Hz grid sample is a knot.
    t = np.arange(1, 401) * 0.5
    rr = 800 + 30 * np.random.default_rng(2).standard_normal(400)
    es = resample_even(t, rr, fs_hz=4.0)
    assert_allclose(es.value_ms[::2], rr, rtol=1e-12)


def test_mask_around_removed_60s_stretch():
    # Rule: samples strictly between the two kept beats around removed beats are flagged.
    t = np.arange(1, 501) * 0.8  # 0.8 .. 400 s
    rr = _smooth(t)
    keep = ~((t > 100) & (t < 160))  # 60 s of beats removed
    es = resample_even(t, rr, fs_hz=4.0, keep=keep)
    t_before = t[keep & (t <= 100)].max()
    t_after = t[keep & (t >= 160)].min()
    expected = (es.time_s > t_before) & (es.time_s < t_after)
    assert_array_equal(es.interpolated, expected)
    assert es.n_source == keep.sum()
    assert_allclose(es.interpolated_fraction, expected.mean(), rtol=1e-12)


def test_mask_and_fill_around_60s_gap():
    # Rule: with max_gap_s, samples farther than it from every kept beat are flagged,
    # computed here by brute force; the whole gap interval is filled by the straight
    # line between its two beats (numpy.interp), so there is no spline overshoot.
    t_all = np.arange(1, 501) * 0.8
    present = ~((t_all > 100) & (t_all < 160))  # beats absent, not just removed
    t = t_all[present]
    rr = _smooth(t)
    es = resample_even(t, rr, fs_hz=4.0, max_gap_s=2.0)
    dist = np.abs(es.time_s[:, None] - t[None, :]).min(axis=1)
    assert_array_equal(es.interpolated, dist > 2.0)
    a, b = t[t <= 100].max(), t[t >= 160].min()
    in_gap = (es.time_s > a) & (es.time_s < b)
    assert es.interpolated[in_gap].sum() == in_gap.sum() - 2 * 8  # 2 s = 8 samples each side
    assert_allclose(es.value_ms[in_gap], np.interp(es.time_s[in_gap], [a, b],
                                                   [_smooth(a), _smooth(b)]), rtol=1e-12)
    # Without max_gap_s the distance rule is off: nothing was removed, nothing flagged.
    assert not resample_even(t, rr, fs_hz=4.0).interpolated.any()


def test_result_is_frozen_and_readonly(rng):
    t = _beats(rng, 50)
    es = resample_even(t, _smooth(t), fs_hz=2.0)
    assert isinstance(es, EvenSeries)
    assert not es.value_ms.flags.writeable and not es.interpolated.flags.writeable
    with pytest.raises(AttributeError):
        es.fs_hz = 3.0  # type: ignore[misc]


def test_input_validation():
    t = np.arange(1.0, 11.0)
    rr = np.full(10, 800.0)
    with pytest.raises(ValueError, match="same length"):
        resample_even(t, rr[:-1])
    with pytest.raises(ValueError, match="strictly increasing"):
        resample_even(t[::-1], rr)
    with pytest.raises(ValueError, match="rr_ms must be > 0"):
        resample_even(t, -rr)
    with pytest.raises(ValueError, match="fs_hz must be finite and > 0"):
        resample_even(t, rr, fs_hz=0.0)
    with pytest.raises(ValueError, match="max_gap_s must be finite and > 0"):
        resample_even(t, rr, max_gap_s=-1.0)
    with pytest.raises(TypeError, match="keep must be a boolean array"):
        resample_even(t, rr, keep=np.ones(10))
    with pytest.raises(ValueError, match="keep must have shape"):
        resample_even(t, rr, keep=np.ones(9, dtype=bool))
    few = np.zeros(10, dtype=bool)
    few[:3] = True
    with pytest.raises(InsufficientDataError, match="at least 4 kept beats"):
        resample_even(t, rr, keep=few)
    with pytest.raises(ValueError, match="finite"):
        resample_even(np.r_[t[:-1], np.nan], rr)


@pytest.mark.parametrize("n", [4, 5, 6, 7, 65, 66, 129, 350, 4000, 70_001])
@pytest.mark.parametrize("gaps", [False, True])
def test_spline_equals_scipy_cubicspline(n, gaps):
    # Reference: SciPy's CubicSpline(bc_type="not-a-knot") evaluated by PPoly (the same
    # system, solved by LAPACK gtsv with partial pivoting; ours by cyclic reduction), so
    # the values agree to rounding: measured at most 5e-15 of the largest value, also with
    # long gaps between knots (which make gtsv pivot).
    from scipy.interpolate import CubicSpline

    from tfhrv.signal.resample import _not_a_knot_spline

    gen = np.random.default_rng(n)
    dx = gen.uniform(0.3, 1.5, n)
    if gaps:  # a few knots spaced up to 500 times farther apart, the first interval too
        dx[gen.integers(0, n, max(1, n // 50))] *= gen.uniform(1.0, 500.0)
        dx[1] *= 300.0
    x = 1000.0 + np.cumsum(dx)
    y = 800.0 + 50.0 * gen.standard_normal(n)
    grid = x[0] + np.arange(int((x[-1] - x[0]) * 4.0) + 1) / 4.0
    j = np.clip(np.searchsorted(x, grid, side="right") - 1, 0, n - 2)
    ref = CubicSpline(x, y, bc_type="not-a-knot")(grid)
    assert_allclose(_not_a_knot_spline(x, y, grid, j), ref, rtol=0,
                    atol=1e-14 * np.abs(ref).max())
