"""Synthetic series and recordings with known scaling exponents.

Exact fractional Gaussian noise (fGn) and fractional Brownian motion (fBm) by the
Davies–Harte circulant-embedding method.
"""

from __future__ import annotations

import numpy as np

from tfhrv._validation import check_positive

__all__ = ["fbm", "fgn", "fgn_autocovariance"]


def fgn_autocovariance(hurst: float, lags: np.ndarray) -> np.ndarray:
    """Exact autocovariance of unit-variance fGn.

    gamma(k) = (|k+1|^{2H} - 2|k|^{2H} + |k-1|^{2H}) / 2.

    References
    ----------
    Beran J. Statistics for Long-Memory Processes. Chapman & Hall 1994, eq. 2.11.
    """
    k = np.abs(np.asarray(lags, dtype=np.float64))
    h2 = 2.0 * hurst
    return 0.5 * (np.abs(k + 1) ** h2 - 2 * k**h2 + np.abs(k - 1) ** h2)


def fgn(n: int, hurst: float, /, *, sigma: float = 1.0, rng=None) -> np.ndarray:
    """Exact fractional Gaussian noise by the Davies–Harte method.

    Parameters
    ----------
    n : int
        Number of samples (>= 2).
    hurst : float
        Hurst exponent H in (0, 1).  The spectrum behaves as 1/f^beta with beta = 2H - 1.
    sigma : float, default 1
        Standard deviation.
    rng : None, int or numpy.random.Generator
        Source of randomness, passed to :func:`numpy.random.default_rng`.

    Returns
    -------
    numpy.ndarray
        ``n`` samples of fGn.

    Notes
    -----
    The autocovariance c = [gamma(0..n), gamma(n-1..1)] is embedded in a circulant matrix
    of size 2n whose eigenvalues lambda = Re FFT(c) are non-negative for fGn (Craigmile
    2003); the path is Re FFT(sqrt(lambda / 2n) Z) for complex standard normal Z.

    References
    ----------
    Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
    doi:10.1093/biomet/74.1.95
    Wood ATA, Chan G. Simulation of stationary Gaussian processes in [0,1]^d.
    J Comput Graph Stat 1994;3:409-432.

    Examples
    --------
    >>> x = fgn(4096, 0.5, rng=0)
    >>> round(float(x.std()), 1)
    1.0
    """
    n = int(n)
    if n < 2:
        raise ValueError(f"n must be >= 2, got {n}")
    if not 0.0 < float(hurst) < 1.0:
        raise ValueError(f"hurst must be in (0, 1), got {hurst!r}")
    sigma = check_positive(sigma, "sigma")
    gen = np.random.default_rng(rng)
    gamma = fgn_autocovariance(float(hurst), np.arange(n + 1))
    row = np.concatenate([gamma, gamma[-2:0:-1]])
    lam = np.fft.fft(row).real
    lam[lam < 0] = 0.0  # round-off only; exact eigenvalues are >= 0 for fGn
    m = row.size
    z = gen.standard_normal(m) + 1j * gen.standard_normal(m)
    w = np.fft.fft(np.sqrt(lam / m) * z)
    return sigma * w.real[:n]


def fbm(n: int, hurst: float, /, *, sigma: float = 1.0, rng=None) -> np.ndarray:
    """Fractional Brownian motion: the running sum of exact fGn (``n`` samples).

    The spectrum behaves as 1/f^beta with beta = 2H + 1; DFA alpha = H + 1.

    Examples
    --------
    >>> b = fbm(1024, 0.7, rng=1)
    >>> b.shape
    (1024,)
    """
    return np.cumsum(fgn(n, hurst, sigma=sigma, rng=rng))
