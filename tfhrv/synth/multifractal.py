"""Multifractal test processes with known scaling: the multifractal random walk (MRW) and
the binomial cascade."""

from __future__ import annotations

import numpy as np

from tfhrv.core.validation import check_int, check_positive

__all__ = ["binomial_cascade", "log_correlated_gaussian", "mrw"]


def _mrw_autocovariance(lags: np.ndarray, lambda2: float, integral_scale: float) -> np.ndarray:
    """lambda^2 ln(T / (|k| + 1)) for |k| < T - 1, else 0 (Bacry et al. 2001, eq. 10)."""
    k = np.abs(np.asarray(lags, dtype=np.float64))
    return np.where(k < integral_scale - 1, lambda2 * np.log(integral_scale / (k + 1.0)), 0.0)


def log_correlated_gaussian(n: int, lambda2: float, /, *, integral_scale: float | None = None,
                            rng=None) -> tuple[np.ndarray, float]:
    """Stationary Gaussian series with the MRW log-covariance, by circulant embedding.

    Cov(omega_k, omega_l) = lambda^2 ln(T / (|k - l| + 1)) for |k - l| < T - 1, 0 beyond;
    mean -lambda^2 ln T (so that E exp(2 omega) = 1).

    Parameters
    ----------
    n : int
        Number of samples.
    lambda2 : float
        Intermittency coefficient lambda^2 >= 0.
    integral_scale : float, optional
        T in samples (default n): beyond it the series decorrelates.
    rng : None, int or numpy.random.Generator

    Returns
    -------
    omega : numpy.ndarray
        The series.
    clipped : float
        Share of the circulant spectrum that was negative and set to zero (the embedding
        is then approximate; zero for the exact case, tested to be below 1e-3).

    Notes
    -----
    The covariance, wrapped on a circle of 2M >= 2n points, has eigenvalues
    Re FFT(c); the path is Re FFT(sqrt(lambda / 2M) Z) (Wood & Chan 1994), as for fGn
    (:func:`tfhrv.synth.noise.fgn`).

    References
    ----------
    Bacry E, Delour J, Muzy JF. Multifractal random walk. Phys Rev E 2001;64:026103.
    doi:10.1103/PhysRevE.64.026103
    Wood ATA, Chan G. Simulation of stationary Gaussian processes in [0,1]^d.
    J Comput Graph Stat 1994;3:409-432.

    Examples
    --------
    >>> w, clipped = log_correlated_gaussian(4096, 0.05, rng=0)
    >>> w.shape, clipped < 1e-3
    ((4096,), True)
    """
    n = check_int(n, "n", minimum=2)
    lam2 = check_positive(lambda2, "lambda2", strict=False)
    t = float(n if integral_scale is None else check_positive(integral_scale, "integral_scale"))
    gen = np.random.default_rng(rng)
    mean = -lam2 * np.log(t)
    if lam2 == 0:
        return np.full(n, mean), 0.0
    m = 1 << int(np.ceil(np.log2(max(n, t))))
    lags = np.concatenate((np.arange(m + 1), np.arange(m - 1, 0, -1)))
    eig = np.fft.rfft(_mrw_autocovariance(lags, lam2, t)).real
    neg = eig < 0
    clipped = float(-eig[neg].sum() / np.abs(eig).sum())
    eig[neg] = 0.0
    size = 2 * m
    z = gen.standard_normal(size) + 1j * gen.standard_normal(size)
    full = np.concatenate((eig, eig[-2:0:-1]))
    path = np.fft.fft(np.sqrt(full / size) * z).real
    return path[:n] + mean, clipped


def mrw(n: int, lambda2: float, /, *, integral_scale: float | None = None, sigma: float = 1.0,
        rng=None) -> np.ndarray:
    """Increments of the multifractal random walk (MRW).

    dX_k = sigma eps_k exp(omega_k), with eps white Gaussian noise and omega the
    log-correlated Gaussian series of :func:`log_correlated_gaussian`, independent.

    Parameters
    ----------
    n : int
        Number of increments.
    lambda2 : float
        Intermittency coefficient lambda^2 (0 gives white Gaussian noise).
    integral_scale : float, optional
        Integral scale T in samples (default n: scaling over the whole series).
    sigma : float, default 1
        Standard deviation of the increments (E dX^2 = sigma^2).
    rng : None, int or numpy.random.Generator

    Returns
    -------
    numpy.ndarray
        ``n`` increments (a noise; its cumulative sum is the walk).

    Notes
    -----
    For scales l < T the walk X has zeta(q) = (q - q (q - 2) lambda^2) / 2
    = q (1/2 + lambda^2) - lambda^2 q^2 / 2, i.e. log-cumulants c1 = 1/2 + lambda^2 and
    c2 = -lambda^2 (Bacry et al. 2001, eq. 13), and the MF-DFA spectrum of the increments
    has h(q) = 1/2 + lambda^2 - lambda^2 q / 2, alpha(q) = 1/2 + lambda^2 - lambda^2 q and
    width lambda^2 (q_max - q_min), for |q| below sqrt(2 / lambda^2); beyond it the
    moments diverge and estimates level off (Bacry et al. 2001, from memory).

    References
    ----------
    Bacry E, Delour J, Muzy JF. Multifractal random walk. Phys Rev E 2001;64:026103.
    doi:10.1103/PhysRevE.64.026103

    Examples
    --------
    >>> x = mrw(2**12, 0.05, rng=1)
    >>> x.shape, bool(np.all(np.isfinite(x)))
    ((4096,), True)
    """
    gen = np.random.default_rng(rng)
    s = check_positive(sigma, "sigma")
    omega, _ = log_correlated_gaussian(n, lambda2, integral_scale=integral_scale, rng=gen)
    return s * gen.standard_normal(omega.size) * np.exp(omega)


def binomial_cascade(levels: int, a: float, /, *, rng=None) -> np.ndarray:
    """The binomial multifractal cascade on 2^levels cells (a measure summing to 1).

    Each cell of the previous level gives a share a to one half and b = 1 - a to the
    other. Deterministic (``rng=None``): the right half always gets a, so cell k holds
    a^{n(k)} b^{levels - n(k)} with n(k) the number of 1 bits of k, the series of
    Kantelhardt et al. 2002 (sec. 5). Random (``rng`` given): the side that gets a is
    drawn with probability 1/2 at every node; the cascade stays conservative, so the
    partition sums are the same.

    Parameters
    ----------
    levels : int
        Number of cascade steps (length 2^levels), 1..26.
    a : float
        Share in (0, 1).
    rng : None, int or numpy.random.Generator
        None: the deterministic cascade.

    Returns
    -------
    numpy.ndarray
        The measure of the 2^levels cells.

    Notes
    -----
    sum_k x_k^q = (a^q + b^q)^levels for every q and both versions, so
    tau(q) = -ln(a^q + b^q) / ln 2, and MF-DFA of the series has
    h(q) = 1/q - ln(a^q + b^q) / (q ln 2) (Kantelhardt et al. 2002).

    References
    ----------
    Kantelhardt JW, Zschiegner SA, Koscielny-Bunde E, Havlin S, Bunde A, Stanley HE.
    Physica A 2002;316:87-114. doi:10.1016/S0378-4371(02)01383-3
    Feder J. Fractals. Plenum 1988, ch. 6.

    Examples
    --------
    >>> binomial_cascade(2, 0.75).tolist()
    [0.0625, 0.1875, 0.1875, 0.5625]
    """
    levels = check_int(levels, "levels", minimum=1)
    if levels > 26:
        raise ValueError(f"levels must be <= 26, got {levels!r}")
    a = float(a)
    if not 0.0 < a < 1.0:
        raise ValueError(f"a must lie in (0, 1), got {a!r}")
    gen = None if rng is None else np.random.default_rng(rng)
    w = np.ones(1)
    for _ in range(levels):
        right = np.full(w.size, a) if gen is None else np.where(gen.random(w.size) < 0.5,
                                                                a, 1.0 - a)
        w = np.column_stack((w * (1.0 - right), w * right)).ravel()
    return w
