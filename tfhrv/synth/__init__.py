"""Synthetic data with known scaling: fGn/fBm (Davies-Harte), 1/f^beta noise, and multi-day
recordings with ground truth.

The names below are imported on first use, so ``import tfhrv.synth`` stays cheap.
"""

from importlib import import_module

_LAZY = {
    "fbm": "tfhrv.synth.noise",
    "fgn": "tfhrv.synth.noise",
    "fgn_autocovariance": "tfhrv.synth.noise",
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


def __getattr__(name: str):
    if name in _LAZY:
        return getattr(import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'tfhrv.synth' has no attribute {name!r}")


def __dir__() -> list[str]:
    return __all__
