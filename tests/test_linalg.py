"""Tests of tfhrv.core.linalg.

Sources of expected values, named beside each check:
(a) an independent library: SciPy's LAPACK wrappers, ``scipy.linalg.solve_banded`` (gtsv,
    Gaussian elimination with partial pivoting) and ``solve_triangular`` (trtrs);
(b) theory: a known solution x, b = A x computed exactly in integers.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy.linalg import solve_banded, solve_triangular

from tfhrv.core.linalg import solve_dominant_tridiagonal, solve_lower_triangular


def spline_like_system(n: int, gen: np.random.Generator, *, gaps: bool):
    """The interior rows of the not-a-knot spline system on random knot spacings
    (sub = h_i, diag = 2 (h_{i-1} + h_i), sup = h_{i-1}), with the first and last rows
    folded as the spline folds them (dominance ratio close to 1 there)."""
    h = gen.uniform(0.3, 1.5, n + 1)
    if gaps:
        h[gen.integers(0, n + 1, max(1, n // 50))] *= gen.uniform(1.0, 1000.0)
        h[0] *= 1000.0
    sub, sup, diag = h[1:].copy(), h[:-1].copy(), 2.0 * (h[:-1] + h[1:])
    diag[0] -= h[0] + h[1] * 0.999
    diag[-1] -= h[-1] + h[-2] * 0.999
    return sub, diag, sup, gen.standard_normal(n)


def banded_reference(sub, diag, sup, rhs):
    ab = np.zeros((3, diag.size))
    ab[0, 1:], ab[1], ab[2, :-1] = sup[:-1], diag, sub[1:]
    return solve_banded((1, 1), ab, rhs)


@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 63, 64, 65, 66, 127, 129, 300, 1001, 20_000,
                               300_001])
@pytest.mark.parametrize("gaps", [False, True])
def test_tridiagonal_equals_lapack_gtsv_to_rounding(n, gaps):
    # (a) LAPACK gtsv through scipy.linalg.solve_banded; measured at most 5.5e-16 of max |x|
    gen = np.random.default_rng(n + gaps)
    sub, diag, sup, rhs = spline_like_system(n, gen, gaps=gaps)
    ref = banded_reference(sub, diag, sup, rhs)
    got = solve_dominant_tridiagonal(sub, diag, sup, rhs)
    assert_allclose(got, ref, rtol=0, atol=4e-15 * np.abs(ref).max())


def test_tridiagonal_exact_solution_and_inputs_untouched():
    # (b) x = 1..n with the [1, 4, 1] matrix: b = 6 i (ends 4 + 2 = 6 and 4 n + n - 1)
    n = 1000
    x = np.arange(1.0, n + 1)
    sub, diag, sup = np.ones(n), np.full(n, 4.0), np.ones(n)
    rhs = 4 * x + np.r_[0.0, x[:-1]] + np.r_[x[1:], 0.0]
    keep = [v.copy() for v in (sub, diag, sup, rhs)]
    assert_allclose(solve_dominant_tridiagonal(sub, diag, sup, rhs), x, rtol=1e-15)
    for before, after in zip(keep, (sub, diag, sup, rhs), strict=True):
        assert_array_equal(before, after)


def test_tridiagonal_refuses_a_system_that_is_not_dominant():
    with pytest.raises(ValueError, match="strictly diagonally dominant; row 2"):
        solve_dominant_tridiagonal(np.ones(4), np.array([4.0, 4.0, 2.0, 4.0]), np.ones(4),
                                   np.ones(4))
    with pytest.raises(ValueError, match="one length"):
        solve_dominant_tridiagonal(np.ones(3), np.ones(4), np.ones(4), np.ones(4))


@pytest.mark.parametrize("k", [1, 2, 5, 17, 48])
def test_lower_triangular_equals_lapack(k):
    # (a) scipy.linalg.solve_triangular(lower=True) on the Cholesky factor of a
    # correlation matrix (how the ADF regression uses it)
    gen = np.random.default_rng(k)
    z = gen.standard_normal((10 * k + 5, k)) + 0.5 * gen.standard_normal((10 * k + 5, 1))
    chol = np.linalg.cholesky(np.corrcoef(z, rowvar=False).reshape(k, k))
    b = gen.standard_normal(k)
    ref = solve_triangular(chol, b, lower=True)
    assert_allclose(solve_lower_triangular(chol, b), ref, rtol=1e-13,
                    atol=1e-14 * np.abs(ref).max())
    with pytest.raises(ValueError, match="square"):
        solve_lower_triangular(chol, np.ones(k + 1))
