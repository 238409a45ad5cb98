"""Exact fGn/fBm (Davies–Harte) and 1/f^beta noise (Timmer–König)."""

from __future__ import annotations

import functools

import numpy as np

from tfhrv.core.validation import check_positive, readonly

__all__ = ["fbm", "fgn", "fgn_autocovariance", "powerlaw_noise"]


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
    root = _circulant_root(n, float(hurst))
    m = root.size
    z = gen.standard_normal(m) + 1j * gen.standard_normal(m)
    w = np.fft.fft(root * z)
    return sigma * w.real[:n]


@functools.lru_cache(maxsize=4)
def _circulant_root(n: int, hurst: float) -> np.ndarray:
    """sqrt(lambda / 2n) of the Davies-Harte circulant embedding of n fGn samples
    (read-only; cached, since a null ensemble draws many paths of one length and H)."""
    gamma = fgn_autocovariance(hurst, np.arange(n + 1))
    row = np.concatenate([gamma, gamma[-2:0:-1]])
    lam = np.fft.fft(row).real
    lam[lam < 0] = 0.0  # round-off only; exact eigenvalues are >= 0 for fGn
    return readonly(np.sqrt(lam / row.size))


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


# ---------------------------------------------------------------------------------------
# 1/f^beta noise
# ---------------------------------------------------------------------------------------


def powerlaw_noise(n: int, beta: float, /, *, sigma: float = 1.0, rng=None) -> np.ndarray:
    """Gaussian 1/f^beta noise by the Timmer–König method.

    Parameters
    ----------
    n : int
        Number of samples (>= 2).
    beta : float
        Spectral exponent: the power spectral density behaves as 1/f^beta (log-log slope
        -beta).  Any finite value; 0 is white noise, 1 pink, 2 Brownian-like.
    sigma : float, default 1
        Expected standard deviation of the output.
    rng : None, int or numpy.random.Generator
        Source of randomness, passed to :func:`numpy.random.default_rng`.

    Returns
    -------
    numpy.ndarray
        ``n`` samples with zero mean (the f = 0 coefficient is zero).

    Notes
    -----
    For each Fourier frequency f_k = k/n (0 < k <= n/2) the real and imaginary parts of
    the coefficient are drawn independently from N(0, f_k^{-beta}), i.e. amplitude
    proportional to f_k^{-beta/2}; the coefficient at the Nyquist frequency (even n) is
    real.  The series is the inverse real FFT.  The expected variance

        Var x = (4 sum_{0<k<n/2} f_k^{-beta} + 2 [n even] f_{n/2}^{-beta}) / n^2

    is divided out and the result multiplied by ``sigma``.  The series is periodic (its
    spectrum has no power below 1/n); for long-range work take ``n`` well beyond the
    longest scale of interest.

    References
    ----------
    Timmer J, König M. On generating power law noise. Astron Astrophys 1995;300:707-710.

    Examples
    --------
    >>> x = powerlaw_noise(8192, 1.0, rng=0)
    >>> x.shape, abs(float(x.mean())) < 1e-12
    ((8192,), True)
    """
    n = int(n)
    if n < 2:
        raise ValueError(f"n must be >= 2, got {n}")
    beta = float(beta)
    if not np.isfinite(beta):
        raise ValueError(f"beta must be finite, got {beta!r}")
    sigma = check_positive(sigma, "sigma")
    gen = np.random.default_rng(rng)
    f = np.fft.rfftfreq(n)
    scale = np.zeros_like(f)
    scale[1:] = f[1:] ** (-beta / 2.0)
    re = gen.standard_normal(f.size) * scale
    im = gen.standard_normal(f.size) * scale
    im[0] = 0.0
    power = 4.0 * np.sum(scale[1:] ** 2)
    if n % 2 == 0:
        im[-1] = 0.0
        re[-1] *= np.sqrt(2.0)
        power -= 2.0 * scale[-1] ** 2  # the Nyquist term counts once, with variance 2 s^2
    x = np.fft.irfft(re + 1j * im, n)
    return sigma * x * (n / np.sqrt(power))
