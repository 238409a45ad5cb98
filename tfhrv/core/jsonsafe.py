"""Strict JSON (RFC 8259): no ``NaN`` or ``Infinity``, which strict parsers reject.

Numpy layer: standard library and numpy only.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

__all__ = ["dumps_strict", "to_strict"]


def to_strict(obj: Any, /, *, reasons: dict[str, str] | None = None, path: str = "") -> Any:
    """``obj`` with numpy values as Python ones and every non-finite number as None.

    Parameters
    ----------
    obj : any
        Nested dicts, lists, tuples, numbers, strings, numpy scalars and arrays.
    reasons : dict, optional
        Filled with ``{json path: "not a finite number (nan)"}`` for every value replaced
        by None, so that a caller can say why a value is missing.
    path : str
        The path of ``obj`` itself (dotted keys, ``[i]`` for list items).

    Examples
    --------
    >>> r = {}
    >>> to_strict({"a": float("nan"), "b": [1, np.float64(2.5)], "c": np.inf}, reasons=r)
    {'a': None, 'b': [1, 2.5], 'c': None}
    >>> sorted(r)
    ['a', 'c']
    """
    if isinstance(obj, dict):
        return {str(k): to_strict(v, reasons=reasons, path=f"{path}.{k}" if path else str(k))
                for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_strict(v, reasons=reasons, path=f"{path}[{i}]") for i, v in enumerate(obj)]
    if isinstance(obj, np.ndarray):
        return to_strict(obj.tolist(), reasons=reasons, path=path)
    if isinstance(obj, bool | np.bool_):
        return bool(obj)
    if isinstance(obj, int | np.integer):
        return int(obj)
    if isinstance(obj, float | np.floating):
        v = float(obj)
        if math.isfinite(v):
            return v
        if reasons is not None:
            reasons[path] = f"not a finite number ({v})"
        return None
    if obj is None or isinstance(obj, str):
        return obj
    return str(obj)


def dumps_strict(obj: Any, /, **kwargs) -> str:
    """``json.dumps`` of :func:`to_strict` (``allow_nan=False``: a NaN left anywhere raises)."""
    return json.dumps(to_strict(obj), allow_nan=False, **kwargs)
