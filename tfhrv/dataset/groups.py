"""The scan file's content as plain numpy groups, before (or without) xarray.

A scan file is a few groups of labelled arrays.  :func:`tfhrv.dataset.build.build_groups`
produces them as :class:`Group` objects (numpy arrays with dimension names and
attributes), which :func:`tfhrv.dataset.netcdf.netcdf_bytes` writes directly, so that
``tfhrv scan`` never imports xarray and pandas (about 0.6 s of a fresh process on the
2-core machine, ``benchmarks/bench_cli.py``).  :func:`as_datatree` makes the same content
an ``xarray.DataTree`` for everything that reads it (circadian, figures, report, cohort);
:func:`groups_of` goes back, so a tree read from a file or extended (``/circadian``) is
written by the same writer.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

__all__ = ["Group", "as_datatree", "groups_of"]

#: ``(dims, data, attrs)``, as :func:`tfhrv.dataset.schema.variable` returns it.
Entry = tuple


@dataclass(frozen=True, slots=True)
class Group:
    """One group: data variables and coordinates as ``name -> (dims, data, attrs)``, and
    the group's attributes.

    A coordinate named like its only dimension is that dimension's index (a netCDF
    coordinate variable); other coordinates label the data variables that share their
    dimensions.
    """

    data: dict = field(default_factory=dict)
    coords: dict = field(default_factory=dict)
    attrs: dict = field(default_factory=dict)

    def sizes(self) -> dict[str, int]:
        """Dimension name -> length, over every variable of the group."""
        out: dict[str, int] = {}
        for dims, data, _ in (*self.coords.values(), *self.data.values()):
            shape = np.shape(data)
            if len(dims) != len(shape):
                raise ValueError(f"dims {dims} do not match an array of shape {shape}")
            for dim, n in zip(dims, shape, strict=True):
                if out.setdefault(dim, n) != n:
                    raise ValueError(f"dimension {dim!r} has lengths {out[dim]} and {n}")
        return out


def as_datatree(groups: dict[str, Group], /) -> xr.DataTree:
    """An ``xarray.DataTree`` of the groups (path -> :class:`Group`, root ``"/"``)."""
    import xarray as xr

    from tfhrv.dataset.netcdf import numpy_only

    with numpy_only():
        return xr.DataTree.from_dict({
            path: xr.Dataset(g.data, coords=g.coords, attrs=dict(g.attrs))
            for path, g in groups.items()})


def groups_of(tree: xr.DataTree, /) -> dict[str, Group]:
    """The groups of a DataTree (inverse of :func:`as_datatree`), in tree order.

    Each variable is taken as xarray holds it in memory (decoded values and attributes);
    the time units xarray chose when it read a file are not carried over (the writer
    picks its own exact units).
    """
    out: dict[str, Group] = {}
    for node in tree.subtree:
        ds = node.to_dataset(inherit=False)
        coords = {n: (v.dims, v.values, dict(v.attrs)) for n, v in ds.coords.items()}
        data = {n: (v.dims, v.values, dict(v.attrs)) for n, v in ds.data_vars.items()}
        out["/" if node.is_root else node.path] = Group(data, coords, dict(ds.attrs))
    return out
