"""Tests of tfhrv.core.specfun (the special functions that replace scipy.special and the
scipy.fft fast lengths on the scan and inspect path).

Sources of expected values, named beside each check:
(a) an independent library: SciPy 1.17 (scipy.special, scipy.fft) over wide grids;
(b) exact values: psi(1) = -gamma, psi(1/2) = -gamma - 2 ln 2, psi'(1) = pi^2/6,
    psi'(1/2) = pi^2/2 (Abramowitz & Stegun 1964, 6.3.2, 6.3.3, 6.4.2, 6.4.4); the t
    distribution with 1 and 2 degrees of freedom in closed form (Cauchy: 1/2 + atan(t)/pi;
    dof 2: 1/2 + t / (2 sqrt(2 + t^2)), Johnson, Kotz & Balakrishnan 1995, ch. 28);
    dof 4 evaluated with 50-digit decimal arithmetic from A & S 26.7.4;
(c) published tables: Student t 97.5 % points, A & S 1964 table 26.10 (three decimals);
    the normal 97.5 % point 1.959963984540054 (A & S table 26.5 / Wichura 1988).
"""

from __future__ import annotations

import math
from decimal import Decimal, getcontext

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import fft as sp_fft
from scipy import special

from tfhrv.core import specfun as sf

EULER_GAMMA = 0.5772156649015329


# --------------------------------------------------------------------------- psi functions

def test_digamma_and_trigamma_match_scipy_on_half_integers():
    # (a) the callers pass n/2 for counts n >= 1 (wavelet log-scale diagram) and nu/2
    x = np.arange(1, 200_001) / 2.0
    # measured: 1e-14 relative at x = 1.5 (psi(1.5) = 0.036, near the root of psi, where the
    # absolute error 3.7e-16 is what counts), 2e-15 elsewhere
    assert_allclose(sf.digamma(x), special.digamma(x), rtol=2e-15, atol=5e-16)
    assert_allclose(sf.trigamma(x), special.polygamma(1, x), rtol=2e-15)  # 6.4e-16


def test_digamma_and_trigamma_match_scipy_on_a_wide_grid():
    # (a) 1e-3 .. 1e6; digamma has a root at 1.4616..., where only absolute error is small
    x = np.geomspace(1e-3, 1e6, 5001)
    ref = special.digamma(x)
    assert_allclose(sf.digamma(x), ref, rtol=4e-15, atol=1e-15)
    assert_allclose(sf.trigamma(x), special.polygamma(1, x), rtol=2e-15)


def test_psi_functions_exact_values_and_scalars():
    # (b) A & S 6.3.2, 6.3.3, 6.4.2, 6.4.4
    assert sf.digamma(1.0) == pytest.approx(-EULER_GAMMA, rel=1e-15, abs=0)
    assert sf.digamma(0.5) == pytest.approx(-EULER_GAMMA - 2 * math.log(2), rel=1e-15, abs=0)
    assert sf.trigamma(1.0) == pytest.approx(math.pi**2 / 6, rel=1e-15, abs=0)
    assert sf.trigamma(0.5) == pytest.approx(math.pi**2 / 2, rel=1e-15, abs=0)
    assert isinstance(sf.digamma(2.0), float) and sf.digamma(np.ones(3)).shape == (3,)
    with pytest.raises(ValueError, match="x must be > 0"):
        sf.digamma(np.array([1.0, 0.0]))
    with pytest.raises(ValueError, match="x must be > 0"):
        sf.trigamma(np.nan)


# --------------------------------------------------------------------------- normal

def test_normal_cdf_and_quantile_match_scipy():
    # (a) both tails; erfc keeps the lower tail's relative precision
    x = np.linspace(-37.0, 8.0, 4501)
    ours = np.array([sf.ndtr(v) for v in x])
    assert_allclose(ours, special.ndtr(x), rtol=5e-13)  # measured 2.4e-13 (at x = -37)
    mid = np.abs(x) < 5
    assert_allclose(ours[mid], special.ndtr(x[mid]), rtol=1e-14)  # measured 6.9e-15
    p = np.concatenate([np.geomspace(1e-300, 0.5, 400), 1 - np.geomspace(1e-16, 0.5, 200)])
    assert_allclose([sf.ndtri(v) for v in p], special.ndtri(p), rtol=1e-15)
    # (c) the two-sided 95 % point
    assert sf.ndtri(0.975) == pytest.approx(1.959963984540054, rel=1e-15, abs=0)
    with pytest.raises(ValueError, match="p must be in"):
        sf.ndtri(1.0)


# --------------------------------------------------------------------------- Student t

@pytest.mark.parametrize(("dofs", "rtol"), [(range(1, 31), 2e-13), (range(31, 201), 6e-13)])
def test_t_cdf_matches_scipy_in_both_tails(dofs, rtol):
    # (a) relative error of the probability itself, including tails down to 1e-300, where
    # the closed form alone would cancel digits (measured: 1.1e-13 for dof <= 30, 3e-13 up
    # to dof 200, at the far tail where exp() of a large argument sets the limit)
    t = np.concatenate([np.linspace(-50, 50, 201), np.geomspace(1e-2, 1e8, 121)])
    t = np.concatenate([t, -t])
    for k in dofs:
        ours = np.array([sf.stdtr(k, v) for v in t])
        ref = special.stdtr(k, t)
        keep = ref > 1e-300
        assert_allclose(ours[keep], ref[keep], rtol=rtol, err_msg=f"dof={k}")


def test_t_cdf_exact_forms():
    # (b) dof 1 (Cauchy) and dof 2, including small |t| where SciPy 1.17 itself is off by
    # about 1e-9 (stdtr(1, 1e-8) = 0.500000004743, exact 0.500000003183)
    for t in np.geomspace(1e-12, 1e6, 400):
        r = math.sqrt(2 + t * t)
        assert sf.stdtr(1, t) == pytest.approx(0.5 + math.atan(t) / math.pi, rel=1e-15, abs=0)
        # lower tails: (1 - A) / 2 of the closed form; measured 2.3e-15 and 5.0e-15
        assert sf.stdtr(1, -t) == pytest.approx(math.atan(1 / t) / math.pi, rel=5e-15, abs=0)
        assert sf.stdtr(2, t) == pytest.approx(0.5 + t / (2 * r), rel=1e-15, abs=0)
        assert sf.stdtr(2, -t) == pytest.approx(1 / (r * (r + t)), rel=1e-14, abs=0)
    assert sf.stdtr(1, 1.0) == 0.75
    assert sf.stdtr(5, math.inf) == 1.0 and sf.stdtr(5, -math.inf) == 0.0
    assert math.isnan(sf.stdtr(5, math.nan))
    for bad in (0, 2.5, True, -1):
        with pytest.raises(ValueError, match="dof must be an integer >= 1"):
            sf.stdtr(bad, 1.0)


def test_t_quantile_matches_scipy_and_round_trips():
    # (a) the tails used for intervals and tests; (b) the round trip through stdtr
    ps = [1e-100, 1e-10, 0.001, 0.025, 0.05, 0.3, 0.6, 0.9, 0.95, 0.975, 0.995, 1 - 1e-12]
    for k in [*range(1, 61), 100, 200]:
        for p in ps:
            t = sf.stdtrit(k, p)
            assert t == pytest.approx(float(special.stdtrit(k, p)), rel=2e-13, abs=0), (k, p)
            q = min(p, 1 - p)
            back = sf.stdtr(k, -abs(t))
            # measured 1.3e-14 (5.6e-14 in the far tails, where exp() of a large logarithm
            # and ln B(dof/2, 1/2) from lgamma set the limit)
            assert back == pytest.approx(q, rel=1e-13, abs=0), (k, p)


def test_t_quantile_exact_values():
    # (b) dof 1: tan(pi (p - 1/2)); dof 2: (2p - 1) / sqrt(2 p (1 - p))
    for p in np.linspace(0.01, 0.99, 99):
        assert sf.stdtrit(1, p) == pytest.approx(math.tan(math.pi * (p - 0.5)), rel=1e-14, abs=0)
        assert sf.stdtrit(2, p) == pytest.approx((2 * p - 1) / math.sqrt(2 * p * (1 - p)),
                                                 rel=1e-14, abs=0)
    assert sf.stdtrit(7, 0.5) == 0.0
    # (b) dof 4 near the centre, checked in 50-digit decimal arithmetic (A & S 26.7.4:
    # P(T <= t) = 1/2 + sin(theta) (1 + cos^2(theta) / 2) / 2); SciPy 1.17 is off by 1.6e-9
    # relative here
    getcontext().prec = 50
    t = Decimal(sf.stdtrit(4, 0.5001))
    r2 = 4 + t * t
    cdf = (1 + t / r2.sqrt() * (1 + Decimal(2) / r2)) / 2
    assert abs(cdf - Decimal(0.5001)) < Decimal(1e-16)
    # (c) A & S table 26.10, t at 0.975 (two-sided 5 %), three decimals
    for k, published in [(1, 12.706), (3, 3.182), (10, 2.228), (30, 2.042), (120, 1.980)]:
        assert round(sf.stdtrit(k, 0.975), 3) == published
    with pytest.raises(ValueError, match="p must be in"):
        sf.stdtrit(3, 0.0)


# --------------------------------------------------------------------------- F distribution

def test_f_survival_for_even_numerator_dof_matches_scipy_and_exact_values():
    # (a) scipy.special.fdtrc over the cosinor's dfn (2, 4) and more, dfd 1..20000
    rng = np.random.default_rng(11)
    xs = np.concatenate([rng.uniform(0.0, 6.0, 40), 10.0 ** rng.uniform(-6, 2.5, 40)])
    for dfn in (2, 4, 6, 8):
        for dfd in (1, 2, 3, 5, 10, 17, 50, 150, 1000):
            ref = special.fdtrc(dfn, dfd, xs)
            got = np.array([sf.fdtrc(dfn, dfd, x) for x in xs])
            ok = ref > 1e-290
            assert_allclose(got[ok], ref[ok], rtol=2e-13)
    # (b) 60-digit decimal arithmetic of A & S 26.6.4 where SciPy 1.17 keeps only 13 digits
    getcontext().prec = 60
    for dfn, dfd, x in ((4, 20000, 2.722871213609003), (4, 5000, 1.6545089903175798),
                        (2, 20000, 3.0)):
        big_x, m, d = Decimal(x), Decimal(dfn), Decimal(dfd)
        y = d / (d + m * big_x)
        exact = (y.ln() * d / 2).exp() * (1 + (d / 2 * (1 - y) if dfn == 4 else 0))
        assert abs(Decimal(sf.fdtrc(dfn, dfd, x)) - exact) / exact < Decimal(1e-14)
    assert sf.fdtrc(2, 7, 0.0) == 1.0 and sf.fdtrc(4, 7, math.inf) == 0.0
    with pytest.raises(ValueError, match="even"):
        sf.fdtrc(3, 10, 1.0)


def test_f_quantile_for_two_numerator_dof():
    # (a) scipy.special.fdtri; (b) A & S table 26.9, F(0.95; 2, 10) = 4.10, F(0.99; 2, 20)
    # = 5.85 (two decimals)
    for dfd in (1, 2, 3, 5, 10, 17, 50, 150, 1000, 5000):
        for p in (0.0, 0.01, 0.5, 0.9, 0.95, 0.99, 0.999999):
            assert sf.fdtri(2, dfd, p) == pytest.approx(special.fdtri(2, dfd, p), rel=1e-14,
                                                        abs=1e-300)
    assert round(sf.fdtri(2, 10, 0.95), 2) == 4.10
    assert round(sf.fdtri(2, 20, 0.99), 2) == 5.85
    assert sf.fdtrc(2, 12, sf.fdtri(2, 12, 0.9)) == pytest.approx(0.1, rel=1e-14)
    with pytest.raises(ValueError, match="dfn = 2"):
        sf.fdtri(4, 10, 0.5)


# --------------------------------------------------------------------------- FFT lengths

def test_fast_lengths_equal_scipy_for_every_n_up_to_100000():
    # (a) scipy.fft.next_fast_len / prev_fast_len with real=True: 5-smooth numbers
    n = range(1, 100_001)
    assert [sf.next_fast_len(k) for k in n] == [sp_fft.next_fast_len(k, real=True) for k in n]
    assert [sf.prev_fast_len(k) for k in n] == [sp_fft.prev_fast_len(k, real=True) for k in n]
    for k in (2**40 + 1, 3**25 - 1, 10**15 + 7):  # far beyond: exact integers, still 5-smooth
        assert sf.next_fast_len(k) == sp_fft.next_fast_len(k, real=True)
        assert sf.prev_fast_len(k) == sp_fft.prev_fast_len(k, real=True)
    with pytest.raises(ValueError, match="n must be an integer >= 1"):
        sf.next_fast_len(0)


def test_ndtri_array_matches_scipy_and_the_scalar_function():
    # Wichura (1988) AS 241 against SciPy's ndtri (Cephes), over the whole open interval
    # and both tails; the scalar ndtri (statistics.NormalDist, the same algorithm) exactly.
    p = np.concatenate([np.linspace(1e-9, 1 - 1e-9, 20001), 10.0 ** -np.arange(1, 300, 7),
                        1 - 10.0 ** -np.arange(1, 16)])
    got = sf.ndtri_array(p)
    assert_allclose(got, special.ndtri(p), rtol=1e-14, atol=1e-14)
    assert np.array_equal(got[::401], [sf.ndtri(v) for v in p[::401]])
    with pytest.raises(ValueError, match="p must be in"):
        sf.ndtri_array([0.5, 1.0])
