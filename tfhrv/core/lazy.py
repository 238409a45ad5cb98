"""Package namespaces whose public names are imported on first use (``import`` stays cheap)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from importlib import import_module

__all__ = ["lazy_exports"]


def lazy_exports(package: str, table: Mapping[str, str], /
                 ) -> tuple[Callable[[str], object], Callable[[], list[str]]]:
    """``__getattr__`` and ``__dir__`` for a package exporting ``table`` (name -> module).

    Examples
    --------
    >>> getattr_, dir_ = lazy_exports("pkg", {"sqrt": "math"})
    >>> getattr_("sqrt")(9.0), dir_()
    (3.0, ['sqrt'])
    """
    names = sorted(table)

    def __getattr__(name: str):
        if name in table:
            return getattr(import_module(table[name]), name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return list(names)

    return __getattr__, __dir__
