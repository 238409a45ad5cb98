"""Exception and warning classes of tfhrv.

Every error a user can cause is one of these (or a plain ``TypeError``/``ValueError``
raised by argument validation), so the command line can turn it into one clear line.
"""

from __future__ import annotations

__all__ = [
    "DeprecatedNameWarning",
    "InsufficientDataError",
    "RecordFormatError",
    "TfhrvWarning",
    "UnknownLabelWarning",
]


class TfhrvWarning(UserWarning):
    """Base class of the warnings tfhrv emits."""


class DeprecatedNameWarning(TfhrvWarning):
    """A renamed command, option or function was used under its old name (kept for one
    release)."""


class UnknownLabelWarning(TfhrvWarning):
    """A beat label code the reader does not know; the beat is treated as non-sinus."""


class InsufficientDataError(ValueError):
    """The data are too short or too sparse for the requested analysis."""


class RecordFormatError(ValueError):
    """A recording file cannot be read.

    Parameters
    ----------
    path : str
        The file that failed.
    problem : str
        What is wrong, in one sentence.
    line : int, optional
        1-based line number in the (decompressed) file where the problem is, when known.
    """

    def __init__(self, path: str, problem: str, *, line: int | None = None) -> None:
        self.path = str(path)
        self.problem = problem
        self.line = line
        where = f"{self.path}, line {line}" if line is not None else self.path
        super().__init__(f"{where}: {problem}")
