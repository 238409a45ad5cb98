"""Scaling-exponent estimators: pure functions on 1-D arrays returning frozen results."""

from tfhrv.estimators.dfa import (
    Fluctuation,
    LocalSlopes,
    alpha1_slope,
    alpha2_slope,
    dfa,
    dfa_fluctuation,
    dfa_ranges,
    local_alpha,
    local_slopes,
)
from tfhrv.estimators.loglog import Conversion, ScalingFit, convert_exponent, loglog_fit
from tfhrv.estimators.presets import DFA_PRESETS, PRESETS, dfa_fit_range, estimate, estimate_dfa
from tfhrv.estimators.spectral import (
    TASK_FORCE_BANDS,
    BandPowers,
    Spectrum,
    band_powers,
    beta_from_nn,
    lomb_scargle_psd,
    periodogram_psd,
    spectral_exponent,
    welch_psd,
)
from tfhrv.estimators.wavelet import LogscaleDiagram, logscale_diagram, wavelet_exponent

__all__ = [
    "DFA_PRESETS",
    "PRESETS",
    "TASK_FORCE_BANDS",
    "BandPowers",
    "Conversion",
    "Fluctuation",
    "LocalSlopes",
    "LogscaleDiagram",
    "ScalingFit",
    "Spectrum",
    "alpha1_slope",
    "alpha2_slope",
    "band_powers",
    "beta_from_nn",
    "convert_exponent",
    "dfa",
    "dfa_fit_range",
    "dfa_fluctuation",
    "dfa_ranges",
    "estimate",
    "estimate_dfa",
    "local_alpha",
    "local_slopes",
    "logscale_diagram",
    "lomb_scargle_psd",
    "loglog_fit",
    "periodogram_psd",
    "spectral_exponent",
    "wavelet_exponent",
    "welch_psd",
]
