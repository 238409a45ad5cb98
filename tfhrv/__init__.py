"""tfhrv: time-resolved scaling analysis of long heart inter-beat interval recordings.

For research use only; not for diagnosis.
"""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version

from tfhrv.errors import InsufficientDataError, RecordFormatError, TfhrvWarning
from tfhrv.recording import Recording

try:
    __version__ = version("tfhrv")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0.0.0"

__all__ = [
    "InsufficientDataError",
    "Recording",
    "RecordFormatError",
    "TfhrvWarning",
    "__version__",
]
