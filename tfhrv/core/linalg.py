"""Two small linear solvers in numpy: a diagonally dominant tridiagonal system (cyclic
reduction) and a lower-triangular system (LAPACK ``gesv`` through numpy).

Written out so that the record pipeline does not import ``scipy.linalg`` (about 0.3 s in a
fresh process, issue #16) for ``solve_banded`` and ``solve_triangular``; both agree with
them to rounding (``tests/test_linalg.py``).
"""

from __future__ import annotations

import numpy as np

__all__ = ["solve_dominant_tridiagonal", "solve_lower_triangular"]

_EPS = np.finfo(np.float64).eps
#: A reduced system at most this long is solved by the Thomas algorithm in Python floats,
#: which costs less than the numpy calls of the further levels (measured).
_THOMAS_BELOW = 64


def solve_dominant_tridiagonal(sub: np.ndarray, diag: np.ndarray, sup: np.ndarray,
                               rhs: np.ndarray, /) -> np.ndarray:
    """Solve a strictly row diagonally dominant tridiagonal system by cyclic reduction.

    Row i reads ``sub[i] x[i-1] + diag[i] x[i] + sup[i] x[i+1] = rhs[i]`` (``sub[0]`` and
    ``sup[-1]`` are ignored).

    Parameters
    ----------
    sub, diag, sup, rhs : array of float
        The three diagonals and the right-hand side, all of length n >= 1, with
        ``|sub[i]| + |sup[i]| < |diag[i]|`` in every row.

    Returns
    -------
    numpy.ndarray
        The solution x (length n).

    Raises
    ------
    ValueError
        On unequal lengths or a row that is not strictly diagonally dominant.

    Notes
    -----
    Odd-even (cyclic) reduction (Hockney 1965; Golub & Van Loan 2013, sec. 4.5)
    eliminates the odd-numbered unknowns from the even-numbered rows: the reduced system
    is tridiagonal again, of half the size, and is reduced the same way; the odd unknowns
    then follow from their own rows.  Every level is a handful of vectorised numpy
    operations, so there is no Python loop over the n rows.  No pivoting is needed: for a
    strictly diagonally dominant matrix the reduction is stable and each level at least
    squares the dominance ratio r = max_i (|sub_i| + |sup_i|) / |diag_i| (Heller 1976), so
    once r^(2^k) is below the double-precision epsilon the reduced system is diagonal to
    rounding and the reduction stops there (incomplete cyclic reduction, Heller 1976).  A
    reduced system of at most 64 unknowns is instead finished by the Thomas algorithm
    (Gaussian elimination without pivoting, stable under the same dominance), which costs
    less than the numpy calls of further levels.  The solution agrees with LAPACK's
    ``gtsv`` (``scipy.linalg.solve_banded``) to rounding; it takes about 1.3 to 3 times
    as long (measured for n = 20 000 to 300).

    References
    ----------
    Hockney RW. A fast direct solution of Poisson's equation using Fourier analysis.
    J ACM 1965;12:95-113. doi:10.1145/321250.321259
    Heller D. Some aspects of the cyclic reduction algorithm for block tridiagonal linear
    systems. SIAM J Numer Anal 1976;13:484-496. doi:10.1137/0713042
    Golub GH, Van Loan CF. Matrix Computations, 4th ed. Johns Hopkins University Press
    2013 (sec. 4.3 and 4.5).

    Examples
    --------
    >>> x = solve_dominant_tridiagonal(np.ones(5), np.full(5, 4.0), np.ones(5),
    ...                                np.array([5.0, 6, 6, 6, 5]))
    >>> np.allclose(x, 1.0)
    True
    """
    a = np.array(sub, dtype=np.float64)  # copies: their end entries are set to 0
    c = np.array(sup, dtype=np.float64)
    d = np.asarray(diag, dtype=np.float64)  # never written to
    f = np.asarray(rhs, dtype=np.float64)
    n = d.size
    if d.ndim != 1 or not a.shape == c.shape == f.shape == d.shape:
        raise ValueError(f"sub, diag, sup and rhs must be 1-D of one length, got shapes "
                         f"{a.shape}, {d.shape}, {c.shape} and {f.shape}")
    if n == 0:
        return f.copy()
    a[0] = 0.0
    c[-1] = 0.0
    off = np.abs(a)
    off += np.abs(c)
    off /= np.abs(d)
    ratio = float(off.max())
    if not ratio < 1.0:  # also NaN
        i = int(np.argmax(np.where(np.isnan(off), np.inf, off)))
        raise ValueError(f"the system must be strictly diagonally dominant; row {i} has "
                         f"|diag| = {abs(d[i])!r} and |sub| + |sup| = {abs(a[i]) + abs(c[i])!r}")
    levels = []
    # Heller (1976): each level at least squares the dominance ratio bound
    while d.size > _THOMAS_BELOW and ratio > _EPS:
        m = d.size
        ne, no = (m + 1) // 2, m // 2
        ao, do, co, fo = a[1::2], d[1::2], c[1::2], f[1::2]
        levels.append((ao, do, co, fo))
        ae, ce = a[0::2], c[0::2]
        d, f = d[0::2].copy(), f[0::2].copy()
        neg_inv = np.divide(-1.0, do)
        alpha = ae[1:] * neg_inv[:ne - 1]  # even row 2k (k >= 1) less its upper odd neighbour
        gamma = ce[:no] * neg_inv  # even row 2k (2k + 1 < m) less its lower odd neighbour
        d[1:] += alpha * co[:ne - 1]
        f[1:] += alpha * fo[:ne - 1]
        d[:no] += gamma * ao
        f[:no] += gamma * fo
        a = np.empty(ne)
        a[0] = 0.0
        np.multiply(alpha, ao[:ne - 1], out=a[1:])
        c = np.zeros(ne)
        np.multiply(gamma, co, out=c[:no])
        ratio *= ratio
    x = f / d if ratio <= _EPS else _thomas(a, d, c, f)
    for ao, do, co, fo in reversed(levels):
        no, ne = do.size, x.size
        full = np.empty(ne + no)
        full[0::2] = x
        xo = full[1::2]
        np.multiply(ao, x[:no], out=xo)
        if ne > no:
            xo += co * x[1:]
        else:  # the last odd row has no lower neighbour (its sup entry is 0)
            xo[:-1] += co[:-1] * x[1:]
        np.subtract(fo, xo, out=xo)
        xo /= do
        x = full
    return x


def _thomas(a: np.ndarray, d: np.ndarray, c: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Gaussian elimination without pivoting (the Thomas algorithm; Golub & Van Loan 2013,
    algorithm 4.3.1) of a short diagonally dominant tridiagonal system, in Python floats."""
    a, d, c, f = a.tolist(), d.tolist(), c.tolist(), f.tolist()
    cp, fp = [c[0] / d[0]], [f[0] / d[0]]
    for i in range(1, len(d)):
        den = d[i] - a[i] * cp[-1]
        cp.append(c[i] / den)
        fp.append((f[i] - a[i] * fp[-1]) / den)
    x = fp
    for i in range(len(d) - 2, -1, -1):
        x[i] -= cp[i] * x[i + 1]
    return np.array(x)


def solve_lower_triangular(lower: np.ndarray, rhs: np.ndarray, /) -> np.ndarray:
    """Solve L x = b for a small lower-triangular L.

    Parameters
    ----------
    lower : array of float, shape (k, k)
        Lower-triangular matrix with non-zero diagonal (entries above it are ignored).
    rhs : array of float, shape (k,)

    Returns
    -------
    numpy.ndarray
        x, shape (k,).

    Notes
    -----
    The system (upper triangle zeroed) goes to LAPACK's general solver ``gesv`` through
    :func:`numpy.linalg.solve` (LU with partial pivoting; Golub & Van Loan 2013, sec.
    3.4): for the few columns of a regression several times faster than forward
    substitution (algorithm 3.1.1) written as a Python loop; both are backward stable and
    agree with ``scipy.linalg.solve_triangular(lower=True)`` to rounding (tests).

    References
    ----------
    Golub GH, Van Loan CF. Matrix Computations, 4th ed. Johns Hopkins University Press
    2013 (sec. 3.1).

    Examples
    --------
    >>> solve_lower_triangular(np.array([[2.0, 0.0], [1.0, 1.0]]), np.array([2.0, 3.0]))
    array([1., 2.])
    """
    L = np.asarray(lower, dtype=np.float64)
    b = np.asarray(rhs, dtype=np.float64)
    k = b.size
    if L.shape != (k, k) or b.ndim != 1:
        raise ValueError(f"lower must be square with the length of rhs, got shapes "
                         f"{L.shape} and {b.shape}")
    return np.linalg.solve(np.tril(L), b)
