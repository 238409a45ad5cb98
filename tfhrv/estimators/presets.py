"""The named estimator configurations used by the scan and by the calibration tables.

A preset fixes every option of an estimator (scale or frequency range, order, wavelet),
so that the calibration tables computed by ``scripts/make_calibration.py`` describe
exactly what the scan runs.

=====================  ==============================================================
preset                 what it computes
=====================  ==============================================================
alpha1                 DFA-q over every integer box size 4-16 beats (Peng et al. 1995)
alpha2                 DFA-q over 16-64 beats (Peng et al. 1995)
alpha_long             DFA-q over 64 beats to min(N/4, 4096) beats
beta_spectral_short    periodogram of the beat-indexed series, fit over 1/16-1/4
                       cycles per beat (the alpha1 range)
beta_wavelet_short     Abry-Veitch regression over octaves 2-4 (4-16 beats)
beta_spectral_long     periodogram of the 1-Hz resampled series, fit from
                       max(1e-4 Hz, 10 / duration) to 1e-2 Hz
beta_wavelet_long      Abry-Veitch regression from octave 7 (128 beats, about 1e-2 Hz
                       at 0.8 s per beat) to the coarsest octave with >= 16
                       boundary-free coefficients
=====================  ==============================================================
"""

from __future__ import annotations

import numpy as np

from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.validation import as_1d_float
from tfhrv.estimators.dfa import Fluctuation, dfa, dfa_ranges
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.spectral import beta_from_nn, periodogram_psd, spectral_exponent
from tfhrv.estimators.wavelet import logscale_diagram, wavelet_exponent

__all__ = ["DFA_PRESETS", "PRESETS", "dfa_fit_range", "estimate", "estimate_dfa", "long_band"]

PRESETS: tuple[str, ...] = (
    "alpha1",
    "alpha2",
    "alpha_long",
    "beta_spectral_short",
    "beta_wavelet_short",
    "beta_spectral_long",
    "beta_wavelet_long",
)

#: The presets that are DFA fits (they can share one fluctuation function).
DFA_PRESETS: tuple[str, ...] = ("alpha1", "alpha2", "alpha_long")

#: Lowest frequency of the classical long-term band (Hz) and its upper edge.
LONG_BAND_HZ = (1e-4, 1e-2)
#: Periods of the lowest fitted frequency that a series must span (Task Force 1996
#: recommends about ten periods of a band's lower limit; from memory).
MIN_PERIODS = 10.0


def long_band(duration_s: float, /) -> tuple[float, float]:
    """Fit band of the long-range spectral preset for a series of this duration.

    Examples
    --------
    >>> long_band(86400.0)[0] > 1e-4
    True
    >>> long_band(4 * 86400.0)
    (0.0001, 0.01)
    """
    low = max(LONG_BAND_HZ[0], MIN_PERIODS / float(duration_s))
    if low >= LONG_BAND_HZ[1] / 3:
        raise InsufficientDataError(
            f"a series of {duration_s:.0f} s is too short for the long-range band: it needs "
            f"{MIN_PERIODS:g} periods of a frequency at least 3x below {LONG_BAND_HZ[1]:g} Hz"
        )
    return (low, LONG_BAND_HZ[1])


def estimate(
    name: str,
    nn_ms: np.ndarray,
    /,
    *,
    beat_time_s: np.ndarray | None = None,
    order: int = 1,
    vanishing_moments: int = 3,
) -> ScalingFit:
    """Run one named preset on a beat-indexed NN series.

    Parameters
    ----------
    name : str
        One of :data:`PRESETS`.
    nn_ms : array
        NN intervals, ms (beat-indexed).
    beat_time_s : array, optional
        Beat times (s) for ``beta_spectral_long``; default the running sum of ``nn_ms``.
    order : int, default 1
        DFA order q.
    vanishing_moments : int, default 3
        Wavelet vanishing moments N.

    Returns
    -------
    ScalingFit
        Uncalibrated; see :func:`tfhrv.calibration.calibrate.calibrate`.

    Raises
    ------
    InsufficientDataError
        If the series cannot support the preset.

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> fit = estimate("alpha1", 800 + 40 * fgn(2000, 0.5, rng=0))
    >>> bool(0.45 < fit.exponent < 0.75)
    True
    """
    if name not in PRESETS:
        raise ValueError(f"name must be one of {PRESETS!r}, got {name!r}")
    x = as_1d_float(nn_ms, "nn_ms", min_len=16)
    if name in DFA_PRESETS:
        return dfa(x, fit_range=dfa_fit_range(name, x.size), order=order)
    if name == "beta_spectral_short":
        spec = periodogram_psd(x, fs_hz=1.0)
        return spectral_exponent(spec.frequency_hz, spec.psd, band=(1 / 16, 1 / 4),
                                 n_obs=x.size)
    if name == "beta_wavelet_short":
        return wavelet_exponent(x, vanishing_moments=vanishing_moments, octaves=(2, 4))
    if name == "beta_spectral_long":
        t = np.cumsum(x) / 1000.0 if beat_time_s is None else as_1d_float(
            beat_time_s, "beat_time_s", min_len=x.size)
        duration = float(t[-1] - t[0] + x[0] / 1000.0)
        return beta_from_nn(t, x, band=long_band(duration), fs_hz=1.0)
    # beta_wavelet_long
    diag = logscale_diagram(x, vanishing_moments=vanishing_moments)
    ok = diag.octaves[diag.n_coefficients >= 16]
    if ok.size == 0 or ok.max() < 8:
        raise InsufficientDataError(
            f"beta_wavelet_long needs octaves 7..8 or coarser with >= 16 coefficients; a "
            f"series of {x.size} beats is too short")
    return wavelet_exponent(x, vanishing_moments=vanishing_moments, octaves=(7, int(ok.max())),
                            diagram=diag)


def dfa_fit_range(name: str, n_obs: int, /) -> tuple[int, int]:
    """Box-size range (beats) of a DFA preset for a series of ``n_obs`` beats.

    Examples
    --------
    >>> dfa_fit_range("alpha_long", 86000)
    (64, 4096)
    """
    if name == "alpha1":
        return (4, 16)
    if name == "alpha2":
        return (16, 64)
    if name == "alpha_long":
        hi = min(int(n_obs) // 4, 4096)
        if hi < 256:
            raise InsufficientDataError(
                f"alpha_long needs at least 1024 beats (scales 64..256+), got {n_obs}")
        return (64, hi)
    raise ValueError(f"name must be one of {DFA_PRESETS!r}, got {name!r}")


def estimate_dfa(
    names, nn_ms: np.ndarray, /, *, order: int = 1, extra_scales: np.ndarray | None = None,
) -> tuple[dict[str, ScalingFit], Fluctuation | None]:
    """Several DFA presets from one fluctuation function (see
    :func:`tfhrv.estimators.dfa.dfa_ranges`).

    Each exponent equals ``estimate(name, nn_ms, order=order).exponent``. Presets the
    series cannot support are left out of the result; the fluctuation function is None
    when none can be computed.

    Examples
    --------
    >>> from tfhrv.synth import fgn
    >>> x = 800 + 40 * fgn(1000, 0.7, rng=1)
    >>> fits, fl = estimate_dfa(("alpha1", "alpha2", "alpha_long"), x)
    >>> sorted(fits), bool(fits["alpha1"].exponent == estimate("alpha1", x).exponent)
    (['alpha1', 'alpha2'], True)
    """
    x = as_1d_float(nn_ms, "nn_ms", min_len=16)
    ranges = {}
    for name in names:
        try:
            ranges[name] = dfa_fit_range(name, x.size)
        except InsufficientDataError:
            continue
    if not ranges and extra_scales is None:
        return {}, None
    return dfa_ranges(x, fit_ranges=ranges, order=order, extra_scales=extra_scales)
