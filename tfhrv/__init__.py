"""tfhrv: time-resolved scaling analysis of long heart inter-beat interval recordings.

For research use only; not for diagnosis.  ``import tfhrv`` is cheap: the public names
below are imported on first use.  The cleaning function is ``tfhrv.signal.clean.clean`` (not
re-exported: the name ``tfhrv.signal.clean`` is its module).
"""

from __future__ import annotations

from functools import cache
from importlib import import_module


@cache
def _version() -> str:
    # importlib.metadata costs about 50 ms to import: asked for only when needed
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("tfhrv")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "0.0.0"

_LAZY = {
    "CleanOptions": "tfhrv.signal.clean",
    "InsufficientDataError": "tfhrv.core.errors",
    "RecordFormatError": "tfhrv.core.errors",
    "Recording": "tfhrv.signal.recording",
    "ScanOptions": "tfhrv.analysis.pipeline",
    "TfhrvWarning": "tfhrv.core.errors",
    "inspect_record": "tfhrv.analysis.inspection",
    "read_recording": "tfhrv.io.readers",
    "circadian_table": "tfhrv.circadian.days",
    "scan": "tfhrv.dataset.build",
}

__all__ = sorted([*_LAZY, "__version__"])


def __getattr__(name: str):
    if name == "__version__":
        return _version()
    if name in _LAZY:
        return getattr(import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'tfhrv' has no attribute {name!r}")


def __dir__() -> list[str]:
    return __all__
