"""Model pieces of the synthetic recordings (used by :mod:`tfhrv.synth.recordings`).

- :func:`lf_resonance`: a narrow-band stochastic oscillation (the low-frequency, ~0.1 Hz
  baroreflex / Mayer-wave rhythm) as a second-order band-pass resonance on an even time grid;
- :func:`expected_dfa1_f2`: the expected squared DFA-1 fluctuation of a stationary series
  with a known autocovariance (exact trace formula), and the autocovariances of the
  simulated components, so the generator can state the short-scale alpha1 its own model
  implies.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import signal

__all__ = [
    "ALPHA1_SCALES",
    "ALPHA2_SCALES",
    "LF_GRID_HZ",
    "LONG_SCALES",
    "cosine_acov",
    "expected_dfa1_f2",
    "expected_exponents",
    "expected_slope",
    "lf_resonance",
    "lf_resonance_acov",
    "powerlaw_acov",
]

#: Sampling rate of the time grid on which the LF oscillation is generated (Hz); beat
#: values are read off it by linear interpolation.
LF_GRID_HZ = 4.0

#: Box sizes of alpha1 (every integer 4..16 beats, Peng et al. 1995).
ALPHA1_SCALES = np.arange(4, 17)
#: Box sizes of alpha2 (every integer 16..64 beats, Peng et al. 1995).
ALPHA2_SCALES = np.arange(16, 65)
#: Box sizes of the long-range exponent: 64..1024 beats, 16 per decade (the grid that
#: ``tfhrv.estimators.dfa.dfa(x, fit_range=(64, 1024))`` fits).
LONG_SCALES = np.unique(np.rint(np.geomspace(64, 1024, 21)).astype(np.int64))


def _resonator(f0_hz: float, bandwidth_hz: float, fs_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients (b, a) of the band-pass resonance: poles r exp(+-i w0), zeros at +-1."""
    r = np.exp(-np.pi * bandwidth_hz / fs_hz)
    w0 = 2.0 * np.pi * f0_hz / fs_hz
    return np.array([1.0, 0.0, -1.0]), np.array([1.0, -2.0 * r * np.cos(w0), r * r])


def _impulse(f0_hz: float, bandwidth_hz: float, fs_hz: float) -> np.ndarray:
    """Impulse response of :func:`_resonator`, until the envelope r^k falls below 1e-12."""
    b, a = _resonator(f0_hz, bandwidth_hz, fs_hz)
    r = np.sqrt(a[2])
    n = int(np.ceil(np.log(1e-12) / np.log(r))) + 3
    d = np.zeros(n)
    d[0] = 1.0
    return signal.lfilter(b, a, d)


def lf_resonance(n: int, f0_hz: float, bandwidth_hz: float, gen: np.random.Generator,
                 fs_hz: float = LF_GRID_HZ) -> np.ndarray:
    """``n`` samples (spacing 1/fs) of a unit-variance narrow-band oscillation.

    Gaussian white noise filtered by H(z) = (1 - z^-2) / (1 - 2 r cos(w0) z^-1 + r^2 z^-2),
    with w0 = 2 pi f0 / fs and r = exp(-pi B / fs): an AR(2) resonance whose power peaks
    near f0 with a half-power full width close to B (for B << f0), plus zeros at 0 and at
    the Nyquist frequency so that it adds no power at the lowest frequencies (it leaves
    the long-range scaling alone).  A burn-in as long as the impulse response is dropped,
    so the series starts in the stationary state; the output is divided by the exact
    stationary SD, sqrt(sum h_k^2).
    """
    b, a = _resonator(f0_hz, bandwidth_hz, fs_hz)
    h = _impulse(f0_hz, bandwidth_hz, fs_hz)
    burn = h.size
    y = signal.lfilter(b, a, gen.standard_normal(int(n) + burn))[burn:]
    return y / np.sqrt(np.sum(h * h))


def lf_resonance_acov(lags_s: np.ndarray, f0_hz: float, bandwidth_hz: float,
                      fs_hz: float = LF_GRID_HZ) -> np.ndarray:
    """Autocorrelation of :func:`lf_resonance` at time lags (s), linear between grid lags.

    rho(m) = sum_k h_k h_{k+m} / sum_k h_k^2 from the impulse response h.
    """
    h = _impulse(f0_hz, bandwidth_hz, fs_hz)
    full = np.correlate(h, h, mode="full")[h.size - 1:]
    rho = full / full[0]
    m = np.abs(np.asarray(lags_s, dtype=np.float64)) * fs_hz
    return np.interp(m, np.arange(rho.size), rho, right=0.0)


def powerlaw_acov(lags: np.ndarray, beta: float, n: int) -> np.ndarray:
    """Autocorrelation of Timmer–König 1/f^beta noise of length ``n`` (periodic, exact).

    rho(k) = sum_j w_j f_j^-beta cos(2 pi f_j k) / sum_j w_j f_j^-beta over f_j = j/n,
    0 < j <= n/2, with w_j = 2 except w = 1 at the Nyquist frequency of an even ``n``
    (an inverse real FFT of the power spectrum).
    """
    n = int(n)
    if n < 2:
        return (np.asarray(lags) == 0).astype(np.float64)
    f = np.fft.rfftfreq(n)
    p = np.zeros(f.size)
    p[1:] = f[1:] ** (-float(beta))
    acov = np.fft.irfft(p, n)
    k = np.abs(np.asarray(lags, dtype=np.int64)) % n
    return acov[k] / acov[0]


def cosine_acov(lags: np.ndarray, cycles_per_lag: float) -> np.ndarray:
    """Autocorrelation of a sinusoid of random phase: cos(2 pi nu k)."""
    return np.cos(2.0 * np.pi * cycles_per_lag * np.asarray(lags, dtype=np.float64))


@lru_cache(maxsize=64)
def _dfa1_lag_weights(n: int) -> np.ndarray:
    """c(m) = sum_i M[i, i + m], m = 0..n-1, for M = L^T Q L (see :func:`expected_dfa1_f2`)."""
    m = np.arange(n)
    c = 0.5 * (n - m) * (n - m + 1.0)  # diagonal sums of L^T L, whose entries are n - max(i, j)
    k = np.arange(n, dtype=np.float64)
    for col in (np.ones(n), k - k.mean()):  # orthogonal columns of X: (X^T X)^-1 is diagonal
        b = np.cumsum(col[::-1])[::-1]  # L^T col
        c -= np.correlate(b, b, mode="full")[n - 1:] / (col @ col)
    c.flags.writeable = False
    return c


def expected_dfa1_f2(acov: np.ndarray, scales: np.ndarray = ALPHA1_SCALES) -> np.ndarray:
    """Expected squared DFA-1 fluctuation E F^2(n) of a stationary series.

    Parameters
    ----------
    acov : numpy.ndarray
        Autocovariance gamma(0), gamma(1), ... up to at least lag max(scales) - 1.
    scales : numpy.ndarray of int
        Box sizes n (>= 3).

    Notes
    -----
    Within a box the profile is y = c 1 + L x (L the lower-triangular matrix of ones, x
    the n increments); least-squares removal of a line is the projection Q = I - X X^+
    with X = [1, k], which also removes c.  Hence, averaged over complete boxes,

        E F^2(n) = tr(Q L Sigma_n L^T) / n = (1/n) sum_{i,j} M_ij gamma(|i - j|),

    with Sigma_n = [gamma(|i - j|)] and M = L^T Q L, summed here along its diagonals in
    O(n^2).  For white noise this gives (n^2 - 4) / (15 n) (REFERENCES 3.3).  It depends
    only on the variogram gamma(0) - gamma(k) (Q annihilates L 1), so it holds for any
    segment of a stationary series whatever mean was removed before the profile (Peng et
    al. 1995).
    """
    acov = np.asarray(acov, dtype=np.float64)
    if acov.size < int(np.max(scales)):
        raise ValueError(f"acov must reach lag max(scales) - 1 = {int(np.max(scales)) - 1}, "
                         f"got {acov.size} values")
    out = np.empty(len(scales))
    for i, n in enumerate(np.asarray(scales, dtype=np.int64)):
        c = _dfa1_lag_weights(int(n))
        out[i] = (c[0] * acov[0] + 2.0 * c[1:] @ acov[1:n]) / n
    return out


def expected_slope(f2: np.ndarray, scales: np.ndarray) -> float:
    """Least-squares slope of log sqrt(E F^2(n)) on log n: the exponent of the expected
    fluctuation function."""
    return float(np.polyfit(np.log(scales), 0.5 * np.log(f2), 1)[0])


def expected_exponents(rho_x: np.ndarray, /, *, nn_s: float, sd_ms: float,
                       white_sd_ms: float, resp_hz: float, resp_amp_ms: float, lf_hz: float,
                       lf_bandwidth_hz: float, lf_sd_ms: float) -> tuple[float, float, float]:
    """DFA-1 exponents (alpha1 over 4..16, alpha2 over 16..64, long over 64..1024 beats)
    that the model of one sleep or wake state implies, from the exact expected fluctuation
    function.

    ``rho_x`` is the autocorrelation of the scaling component at lags 0..1024 beats.  The
    beat-domain autocovariance is the sum of the components' (independent) ones:
    sd^2 rho_x(k) + white^2 [k = 0] + (A^2 / 2) cos(2 pi f_r T k) + sd_LF^2 rho_LF(T k),
    with T = ``nn_s`` the mean interval taken as the beat spacing of the time-domain
    components (their phase jitter with the beat times is ignored).
    """
    k = np.arange(int(LONG_SCALES[-1]) + 1)
    acov = sd_ms**2 * np.asarray(rho_x, dtype=np.float64)[: k.size]
    acov = acov + resp_amp_ms**2 / 2.0 * cosine_acov(k, resp_hz * nn_s)
    acov[0] += white_sd_ms**2
    if lf_sd_ms > 0:
        acov += lf_sd_ms**2 * lf_resonance_acov(k * nn_s, lf_hz, lf_bandwidth_hz)
    return tuple(expected_slope(expected_dfa1_f2(acov, sc), sc)
                 for sc in (ALPHA1_SCALES, ALPHA2_SCALES, LONG_SCALES))
