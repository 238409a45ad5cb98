"""Scaling-exponent estimators: pure functions on 1-D arrays returning frozen results.

The names below are imported on first use, so importing one estimator module does not
import the others (scipy.signal, for one, is slow to import).
"""

from tfhrv.core.lazy import lazy_exports

_LAZY = {
    "BandPowers": "tfhrv.estimators.spectral",
    "Conversion": "tfhrv.estimators.loglog",
    "DFA_PRESETS": "tfhrv.estimators.presets",
    "Fluctuation": "tfhrv.estimators.dfa",
    "LeaderCumulants": "tfhrv.estimators.multifractal",
    "LocalSlopes": "tfhrv.estimators.dfa",
    "LogscaleDiagram": "tfhrv.estimators.wavelet",
    "MultifractalSpectrum": "tfhrv.estimators.multifractal",
    "PRESETS": "tfhrv.estimators.presets",
    "ScalingFit": "tfhrv.estimators.loglog",
    "Spectrum": "tfhrv.estimators.spectral",
    "TASK_FORCE_BANDS": "tfhrv.estimators.spectral",
    "alpha1_slope": "tfhrv.estimators.dfa",
    "alpha2_slope": "tfhrv.estimators.dfa",
    "band_powers": "tfhrv.estimators.spectral",
    "box_variances": "tfhrv.estimators.dfa",
    "beta_from_nn": "tfhrv.estimators.spectral",
    "convert_exponent": "tfhrv.estimators.loglog",
    "dfa": "tfhrv.estimators.dfa",
    "dfa_fit_range": "tfhrv.estimators.presets",
    "dfa_fluctuation": "tfhrv.estimators.dfa",
    "dfa_ranges": "tfhrv.estimators.dfa",
    "dwt_details": "tfhrv.estimators.wavelet",
    "estimate": "tfhrv.estimators.presets",
    "estimate_dfa": "tfhrv.estimators.presets",
    "leader_cumulants": "tfhrv.estimators.multifractal",
    "local_alpha": "tfhrv.estimators.dfa",
    "local_slopes": "tfhrv.estimators.dfa",
    "loglog_fit": "tfhrv.estimators.loglog",
    "logscale_diagram": "tfhrv.estimators.wavelet",
    "lomb_scargle_psd": "tfhrv.estimators.spectral",
    "mfdfa": "tfhrv.estimators.multifractal",
    "periodogram_psd": "tfhrv.estimators.spectral",
    "spectral_exponent": "tfhrv.estimators.spectral",
    "wavelet_exponent": "tfhrv.estimators.wavelet",
    "welch_psd": "tfhrv.estimators.spectral",
}

__all__ = sorted(_LAZY)

__getattr__, __dir__ = lazy_exports(__name__, _LAZY)
