"""Synthetic data with known scaling: fGn/fBm (Davies-Harte), 1/f^beta noise, and multi-day
recordings with ground truth.

The names below are imported on first use, so ``import tfhrv.synth`` stays cheap.
"""

from tfhrv.core.lazy import lazy_exports

_LAZY = {
    "fbm": "tfhrv.synth.noise",
    "fgn": "tfhrv.synth.noise",
    "fgn_autocovariance": "tfhrv.synth.noise",
    "binomial_cascade": "tfhrv.synth.multifractal",
    "log_correlated_gaussian": "tfhrv.synth.multifractal",
    "mrw": "tfhrv.synth.multifractal",
    "powerlaw_noise": "tfhrv.synth.noise",
    "PROFILES": "tfhrv.synth.recordings",
    "SimulationProfile": "tfhrv.synth.recordings",
    "SleepSchedule": "tfhrv.synth.recordings",
    "SyntheticRecording": "tfhrv.synth.recordings",
    "simulate_recording": "tfhrv.synth.recordings",
    "sidecar_path": "tfhrv.synth.files",
    "write_recording_csv": "tfhrv.synth.files",
}

__all__ = sorted(_LAZY)

__getattr__, __dir__ = lazy_exports(__name__, _LAZY)
