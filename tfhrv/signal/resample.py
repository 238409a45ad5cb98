"""Uneven beat series -> even time grid by cubic-spline interpolation.

FFT-based spectra (periodogram, Welch) need evenly sampled data; the NN series is
sampled at the beats.  :func:`resample_even` interpolates the kept beats with a cubic
spline, evaluates it on an even grid and marks every grid sample that lies where data
were removed or missing, so that downstream code can report how much of a spectrum rests
on interpolation.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.linalg import solve_dominant_tridiagonal
from tfhrv.core.validation import as_1d_float, as_bool_mask, check_positive, readonly

__all__ = ["EvenSeries", "resample_even"]

#: Fewest kept beats through which a not-a-knot cubic spline is fitted.
_MIN_KEPT = 4


@dataclass(frozen=True, slots=True)
class EvenSeries:
    """An evenly resampled NN series.

    Attributes
    ----------
    time_s : numpy.ndarray
        Even grid, ``t0 + k / fs_hz`` from the first to (at most) the last kept beat, s.
    value_ms : numpy.ndarray
        Interpolated NN interval at each grid time, ms.
    fs_hz : float
        Sampling rate of the grid, Hz.
    interpolated : numpy.ndarray of bool
        True where the sample lies between two kept beats that have removed beats between
        them, or farther than ``max_gap_s`` from every kept beat.
    n_source : int
        Number of kept beats the spline passes through.
    """

    time_s: np.ndarray
    value_ms: np.ndarray
    fs_hz: float
    interpolated: np.ndarray
    n_source: int

    def __post_init__(self) -> None:
        for name in ("time_s", "value_ms", "interpolated"):
            object.__setattr__(self, name, readonly(np.array(getattr(self, name))))

    @property
    def interpolated_fraction(self) -> float:
        """Share of grid samples flagged as interpolated (0 to 1)."""
        n = self.interpolated.size
        return float(np.count_nonzero(self.interpolated)) / n if n else float("nan")


def _keep_mask(keep: Any, n: int) -> np.ndarray:
    if keep is None:
        return np.ones(n, dtype=bool)
    return as_bool_mask(keep, "keep", n, like="beat_time_s")


def _not_a_knot_spline(x: np.ndarray, y: np.ndarray, at: np.ndarray, j: np.ndarray
                       ) -> np.ndarray:
    """Not-a-knot cubic spline through ``(x, y)`` (at least 4 points) evaluated at ``at``,
    whose interval indices ``x[j] <= at < x[j + 1]`` are given.

    The same system for the knot slopes, coefficients and evaluation order as SciPy's
    ``CubicSpline(x, y, bc_type="not-a-knot")`` and its piecewise-polynomial evaluation;
    SciPy solves the tridiagonal system with LAPACK ``gtsv``, this function by eliminating
    the two not-a-knot end rows (each with multiplier exactly 1, as ``gtsv`` does for the
    first row) and solving the strictly diagonally dominant interior by cyclic reduction
    (:func:`tfhrv.core.linalg.solve_dominant_tridiagonal`), so the values agree with
    SciPy's to rounding (a test checks it).  Written out here because
    ``scipy.interpolate`` costs about 0.3 s to import and about 1 ms of Python overhead per
    call, for one of the 600 windows of a 24-h scan, and ``scipy.linalg`` about 0.3 s.

    References
    ----------
    de Boor C. A Practical Guide to Splines. Springer 1978 (chapter IV, not-a-knot end
    conditions).
    """
    n = x.size
    dx = np.diff(x)
    slope = np.diff(y) / dx
    # rows 1 .. n-2: dx[i] s[i-1] + 2 (dx[i-1] + dx[i]) s[i] + dx[i-1] s[i+1] = b[i]
    diag = 2 * (dx[:-1] + dx[1:])
    b = 3 * (dx[1:] * slope[:-1] + dx[:-1] * slope[1:])
    # row 0: dx[1] s[0] + (x[2] - x[0]) s[1] = b0; subtracting it from row 1 removes s[0]
    d0 = x[2] - x[0]
    b0 = ((dx[0] + 2 * d0) * dx[1] * slope[0] + dx[0] ** 2 * slope[1]) / d0
    # row n-1: (x[-1] - x[-3]) s[-2] + dx[-2] s[-1] = bn; subtracting it from row n-2
    # removes s[-1]
    dn = x[-1] - x[-3]
    bn = (dx[-1] ** 2 * slope[-2] + (2 * dn + dx[-1]) * dx[-2] * slope[-1]) / dn
    diag[0] -= d0
    b[0] -= b0
    diag[-1] -= dn
    b[-1] -= bn
    s = np.empty(n)
    s[1:-1] = solve_dominant_tridiagonal(dx[1:], diag, dx[:-1], b)
    s[0] = (b0 - d0 * s[1]) / dx[1]
    s[-1] = (bn - dn * s[-2]) / dx[-2]
    t = (s[:-1] + s[1:] - 2 * slope) / dx
    c0, c1, c2, c3 = t / dx, (slope - s[:-1]) / dx - t, s[:-1], y[:-1]
    h = at - x[j]
    h2 = h * h
    return c3[j] + c2[j] * h + c1[j] * h2 + c0[j] * (h2 * h)


def resample_even(
    beat_time_s: np.ndarray,
    rr_ms: np.ndarray,
    /,
    *,
    fs_hz: float = 4.0,
    keep: np.ndarray | None = None,
    max_gap_s: float | None = None,
) -> EvenSeries:
    """Resample an NN series onto an even time grid with a cubic spline.

    Parameters
    ----------
    beat_time_s : array of float
        Strictly increasing beat times, s.
    rr_ms : array of float
        Interval ending at each beat, ms (finite, > 0).
    fs_hz : float, default 4.0
        Grid sampling rate, Hz.  4 Hz is common practice for short-term HRV spectra; for
        the 1e-4 to 1e-2 Hz power-law fit 1 Hz is enough (see
        :func:`tfhrv.estimators.spectral.beta_from_nn`).
    keep : array of bool, optional
        Which beats enter the spline (e.g. NN beats after cleaning).  Default: all.
    max_gap_s : float, optional
        Grid samples farther than this from every kept beat are flagged as interpolated.
        ``None`` (default) switches this distance rule off; stretches of removed beats
        are flagged either way.

    Returns
    -------
    EvenSeries
        ``time_s``, ``value_ms``, ``fs_hz``, ``interpolated`` and ``n_source``.

    Raises
    ------
    TypeError
        If inputs are not numeric or ``keep`` is not boolean.
    ValueError
        On unequal lengths, non-increasing times, non-positive intervals or rates.
    InsufficientDataError
        If fewer than 4 beats are kept.

    Notes
    -----
    The spline is the not-a-knot cubic spline (SciPy's ``CubicSpline`` arithmetic) through the
    points ``(t_k, rr_k)`` of the kept beats.  The grid runs from the first kept beat to
    the last, ``t_j = t_first + j / fs_hz``, so there is no extrapolation.

    A grid sample is flagged ``interpolated`` when

    * it lies strictly between two consecutive kept beats that had removed beats between
      them, or
    * its distance to the nearest kept beat exceeds ``max_gap_s``.

    Inside an interval between consecutive kept beats that contains a sample of the
    second kind, the value is the straight line between the two beats instead of the
    spline: a cubic spline across a long empty stretch can overshoot far beyond the data.
    Flagged samples still hold finite values so that an FFT can run; the flag says how
    much of the spectrum rests on them.  Interpolating removed beats before spectral
    analysis, rather than deleting them, is common practice (see Task Force 1996); how
    much it changes the result depends on the share replaced, which is why it is
    reported.

    References
    ----------
    Task Force of the European Society of Cardiology and the North American Society of
    Pacing and Electrophysiology. Heart rate variability: standards of measurement,
    physiological interpretation, and clinical use. Circulation 1996;93:1043-1065.
    doi:10.1161/01.CIR.93.5.1043
    de Boor C. A Practical Guide to Splines. Springer 1978.

    Examples
    --------
    >>> t = np.cumsum(np.full(600, 0.8))
    >>> rr = 800 + 50 * np.sin(2 * np.pi * 0.1 * t)
    >>> es = resample_even(t, rr, fs_hz=4.0)
    >>> round(es.fs_hz, 1), es.n_source, bool(es.interpolated.any())
    (4.0, 600, False)
    >>> err = es.value_ms - (800 + 50 * np.sin(2 * np.pi * 0.1 * es.time_s))
    >>> bool(np.abs(err).max() < 0.1)  # ms; largest at the ends (not-a-knot)
    True
    """
    t = as_1d_float(beat_time_s, "beat_time_s")
    rr = as_1d_float(rr_ms, "rr_ms")
    if t.size != rr.size:
        raise ValueError(
            f"beat_time_s and rr_ms must have the same length, got {t.size} and {rr.size}"
        )
    if np.any(np.diff(t) <= 0):
        raise ValueError("beat_time_s must be strictly increasing")
    if np.any(rr <= 0):
        raise ValueError("rr_ms must be > 0")
    fs = check_positive(fs_hz, "fs_hz")
    gap = None if max_gap_s is None else check_positive(max_gap_s, "max_gap_s")
    k = _keep_mask(keep, t.size)

    idx = np.flatnonzero(k)
    if idx.size < _MIN_KEPT:
        raise InsufficientDataError(
            f"resample_even needs at least {_MIN_KEPT} kept beats, got {idx.size}"
        )
    tk, yk = t[idx], rr[idx]
    n_grid = int(np.floor((tk[-1] - tk[0]) * fs * (1 + 1e-12))) + 1
    grid = tk[0] + np.arange(n_grid) / fs
    # Interval j of the grid sample: tk[j] <= t < tk[j + 1] (the last sample may equal tk[-1]).
    j = np.clip(np.searchsorted(tk, grid, side="right") - 1, 0, idx.size - 2)
    values = _not_a_knot_spline(tk, yk, grid, j)
    removed_between = np.diff(idx) > 1  # one entry per interval between kept beats
    flagged = removed_between[j] & (grid > tk[j]) & (grid < tk[j + 1])

    if gap is not None:
        dist = np.minimum(grid - tk[j], tk[j + 1] - grid)
        far = dist > gap
        flagged |= far
        long_iv = np.zeros(idx.size - 1, dtype=bool)
        long_iv[j[far]] = True
        lin = long_iv[j]
        if lin.any():
            jj = j[lin]
            frac = (grid[lin] - tk[jj]) / (tk[jj + 1] - tk[jj])
            values[lin] = yk[jj] + frac * (yk[jj + 1] - yk[jj])

    return EvenSeries(grid, values, fs, flagged, int(idx.size))
