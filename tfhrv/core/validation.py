"""Shared argument validation: every public function calls these at its top."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import numpy as np

from tfhrv.core.errors import InsufficientDataError

__all__ = ["as_1d_float", "as_bool_mask", "check_choice", "check_int", "check_positive",
           "check_range", "check_unit_interval", "readonly"]


def as_1d_float(x: Any, name: str, *, min_len: int = 1, finite: bool = True) -> np.ndarray:
    """Return ``x`` as a contiguous 1-D float64 array, or raise a clear error.

    Raises
    ------
    TypeError
        If ``x`` cannot be converted to floats.
    ValueError
        If it is not 1-D or holds NaN/inf while ``finite`` is set.
    InsufficientDataError
        If it has fewer than ``min_len`` elements.
    """
    try:
        arr = np.ascontiguousarray(x, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise TypeError(f"{name} must be an array of numbers, got {type(x).__name__}") from exc
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got shape {arr.shape}")
    if arr.size < min_len:
        raise InsufficientDataError(f"{name} needs at least {min_len} values, got {arr.size}")
    if finite and not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must hold only finite values")
    return arr


def check_choice(value: Any, name: str, options: Iterable[Any]) -> Any:
    """Return ``value`` if it is one of ``options``; raise ``ValueError`` otherwise."""
    opts = tuple(options)
    if value not in opts:
        raise ValueError(f"{name} must be one of {opts!r}, got {value!r}")
    return value


def check_positive(value: Any, name: str, *, strict: bool = True) -> float:
    """Return ``value`` as float if it is (strictly) positive and finite."""
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise TypeError(f"{name} must be a number, got {value!r}") from exc
    if not np.isfinite(v) or v < 0 or (strict and v == 0):
        kind = "> 0" if strict else ">= 0"
        raise ValueError(f"{name} must be finite and {kind}, got {value!r}")
    return v


def as_bool_mask(m: Any, name: str, size: int, *, like: str = "") -> np.ndarray:
    """Return ``m`` as a boolean array of shape ``(size,)``, or raise a clear error.

    ``like`` names the array whose length ``m`` must match (for the message).
    """
    arr = np.asarray(m)
    if arr.dtype != np.bool_:
        raise TypeError(f"{name} must be a boolean array, got dtype {arr.dtype}")
    if arr.shape != (size,):
        raise ValueError(f"{name} must have shape ({size},){' like ' + like if like else ''}, "
                         f"got {arr.shape}")
    return arr


def check_int(value: Any, name: str, *, minimum: int | None = None) -> int:
    """Return ``value`` as int if it is an integer (not a bool) and at least ``minimum``."""
    if isinstance(value, bool) or not isinstance(value, int | np.integer):
        raise TypeError(f"{name} must be an int, got {value!r}")
    if minimum is not None and value < minimum:
        raise ValueError(f"{name} must be >= {minimum}, got {value!r}")
    return int(value)


def check_unit_interval(value: Any, name: str, *, closed_high: bool = False) -> float:
    """Return ``value`` as float if it lies in (0, 1) (or (0, 1] with ``closed_high``)."""
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise TypeError(f"{name} must be a number, got {value!r}") from exc
    if not (0.0 < v < 1.0 or (closed_high and v == 1.0)):
        raise ValueError(f"{name} must be in (0, 1{']' if closed_high else ')'}, got {value!r}")
    return v


def check_range(value: Any, name: str) -> tuple[float, float]:
    """Return a ``(low, high)`` pair of finite floats with ``0 < low < high``."""
    try:
        low, high = (float(v) for v in value)
    except (TypeError, ValueError) as exc:
        raise TypeError(f"{name} must be a (low, high) pair of numbers, got {value!r}") from exc
    if not (np.isfinite(low) and np.isfinite(high) and 0 < low < high):
        raise ValueError(f"{name} must satisfy 0 < low < high, got {value!r}")
    return low, high


def readonly(a: np.ndarray) -> np.ndarray:
    """Return ``a`` with its write flag cleared (results carry read-only arrays)."""
    a = np.asarray(a)
    a.flags.writeable = False
    return a
