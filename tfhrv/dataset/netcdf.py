"""Writing and reading the per-record DataTree (NetCDF4 with groups), atomically.

The file is rendered in memory, written to a temporary name in the destination folder
and renamed into place only when complete (``os.replace`` is atomic on POSIX), so an
error, a full disk or a kill never leaves a half-written file under the final name (HDF5
does not recover from a failed write to disk; a write to memory cannot fail that way).

Layout and speed.  :func:`write_tree` CF-encodes each group with xarray's own encoders
(times, coordinates attribute, fill values) and writes the encoded variables straight
through h5py in the netCDF-4 layout (HDF5 dimension scales, ``_Netcdf4Dimid``,
``_Netcdf4Coordinates``, creation order tracked), so plain
``xarray.open_datatree(path)`` and netCDF-C readers see the same file the xarray h5netcdf
writer produces.  Going through the h5netcdf object layer cost about 7 ms per variable
(about 170 variables) and imported dask and distributed to ask for a scheduler; the direct
writer costs well under 1 ms per variable.  Variables are stored contiguous and
uncompressed: the file is read whole (:func:`open_tree` loads it), the largest arrays are
the per-beat series of ``/nn`` (a few MB for 24 h), and chunking or deflate would cost
more time on both sides than the disk it saves (measured in ``benchmarks/bench_cli.py``).
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import sys
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from tfhrv.core.errors import RecordFormatError
from tfhrv.core.files import atomic_write

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

__all__ = ["RENAMED_GROUPS", "atomic_write", "file_sha256", "netcdf_bytes", "numpy_only",
           "open_tree", "write_bytes", "write_tree"]


_ENGINE = "h5netcdf"
#: groups renamed since earlier releases: old name -> current name
RENAMED_GROUPS = {"rhythm": "circadian"}
#: NAME of a dimension scale that is not also a variable (netCDF-C's convention).
_PHONY = "This is a netCDF dimension but not a netCDF variable.%10d"


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes (as stored, before decompression)."""
    h = hashlib.sha256()
    with Path(path).open("rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


@contextlib.contextmanager
def numpy_only():
    """While xarray objects are made from numpy arrays only, spare the import of
    dask.array.

    xarray asks of every array it wraps whether it is a dask array, and to answer imports
    ``dask.array`` (0.3-1 s on the 2-core machine) even when no dask array exists.  Unless
    ``dask.array`` is already imported (a dask array may then exist, and nothing is
    changed), xarray is told for the duration of the block that dask arrays are not
    available; the note is removed afterwards, so a dask array made later is recognised
    as usual.  Uses xarray's duck-array module cache (``xarray.namedarray.pycompat``); if
    that is not there, the block runs unchanged.
    """
    cache = absent = None
    if "dask.array" not in sys.modules:
        try:
            from xarray.namedarray import pycompat

            if "dask" not in pycompat._cached_duck_array_modules:
                absent = pycompat.DuckArrayModule.__new__(pycompat.DuckArrayModule)
                absent.module, absent.type, absent.available = None, (), False
                absent.version = pycompat.Version("0.0.0")
                cache = pycompat._cached_duck_array_modules
                cache["dask"] = absent
        except (ImportError, AttributeError):  # pragma: no cover - other xarray versions
            cache = None
    try:
        yield
    finally:
        if cache is not None and cache.get("dask") is absent:
            del cache["dask"]


def _attr_value(value):
    """An attribute as netCDF stores it: text as text, numbers as 1-D arrays."""
    if isinstance(value, str):
        return value
    a = np.asarray(value)
    if a.dtype.kind in "UO":
        return [str(s) for s in a.ravel()] if a.ndim else str(a)
    if a.size == 0:
        return np.zeros(0, dtype=a.dtype if a.dtype.kind in "biuf" else np.float64)
    return np.atleast_1d(a)


def _set_attrs(obj, attrs) -> None:
    for key, value in attrs.items():
        obj.attrs[key] = _attr_value(value)


def _encoded(ds: xr.Dataset) -> tuple[dict, dict]:
    """CF-encoded variables and attributes of one group (xarray's own encoders)."""
    from xarray import conventions

    variables, attrs = conventions.encode_dataset_coordinates(ds)
    variables, attrs = conventions.cf_encoder(variables, attrs)
    return variables, attrs


def _write_group(h5, ds: xr.Dataset, next_dimid: int) -> int:
    import h5py

    variables, attrs = _encoded(ds)
    _set_attrs(h5, attrs)
    sizes: dict = {}
    for var in variables.values():
        sizes.update(zip(var.dims, var.shape, strict=True))
    dimid = {}
    scales = {}
    # dimension scales first (netCDF-C numbers dimensions in creation order)
    for dim, size in sizes.items():
        dimid[dim] = next_dimid
        next_dimid += 1
        var = variables.get(dim)
        if var is not None and var.dims == (dim,):
            scales[dim] = None  # a coordinate variable: created below, then made a scale
        else:
            d = h5.create_dataset(dim, shape=(size,), dtype=">f4")
            d.make_scale(_PHONY % size)
            d.attrs["_Netcdf4Dimid"] = np.int32(dimid[dim])
            scales[dim] = d
    str_dtype = h5py.string_dtype("utf-8")
    for name, var in variables.items():
        data = np.asarray(var.values)
        fill = var.attrs.get("_FillValue", var.encoding.get("_FillValue"))
        if data.dtype.kind in "UO":
            data = data.astype(object)
            d = h5.create_dataset(name, data=data, dtype=str_dtype)
        elif fill is not None and data.dtype.kind in "fiu":
            d = h5.create_dataset(name, data=data, fillvalue=data.dtype.type(fill))
        else:
            d = h5.create_dataset(name, data=data)
        is_scale = name in scales and scales[name] is None
        if is_scale:
            d.make_scale(name)
            d.attrs["_Netcdf4Dimid"] = np.int32(dimid[name])
            scales[name] = d
        if var.dims:
            d.attrs["_Netcdf4Coordinates"] = np.array([dimid[x] for x in var.dims],
                                                      dtype=np.int32)
        _set_attrs(d, var.attrs)
    for name, var in variables.items():
        if name in scales:
            continue
        d = h5[name]
        for axis, dim in enumerate(var.dims):
            d.dims[axis].attach_scale(scales[dim])
    return next_dimid


def _write_h5(tree: xr.DataTree, path) -> None:
    import h5py

    with numpy_only(), h5py.File(path, "w", track_order=True) as h5:
        h5.attrs["_NCProperties"] = np.bytes_(
            f"version=2,tfhrv-h5py={h5py.version.version},hdf5={h5py.version.hdf5_version}")
        next_dimid = 0
        for node in tree.subtree:
            group = h5 if node.is_root else h5.create_group(node.path, track_order=True)
            next_dimid = _write_group(group, node.to_dataset(inherit=False), next_dimid)


def netcdf_bytes(tree: xr.DataTree, /) -> bytes:
    """The NetCDF4 file of a DataTree, rendered in memory (see the module notes)."""
    buf = io.BytesIO()
    _write_h5(tree, buf)
    return buf.getvalue()


def write_bytes(data: bytes):
    """A writer for :func:`tfhrv.core.files.atomic_write` that stores ``data``."""
    def write(tmp: Path) -> None:
        with Path(tmp).open("wb") as fh:
            fh.write(data)
            fh.flush()
    return write


def write_tree(tree: xr.DataTree, path: str | Path, /, *, outputs=None) -> Path:
    """Write a DataTree as NetCDF4 with groups, atomically.

    Each group is CF-encoded by xarray and written through h5py in the netCDF-4 layout
    (see the module notes); ``xarray.open_datatree`` reads it back identical.  With
    ``outputs`` (a :class:`tfhrv.core.files.OutputSet`) the file is staged there and
    renamed with the command's other outputs.
    """
    write = write_bytes(netcdf_bytes(tree))
    if outputs is not None:
        return outputs.add(path, write)
    return atomic_write(path, write)


def open_tree(path: str | Path, /, *, check: bool = True) -> xr.DataTree:
    """Open a scan file written by :func:`write_tree`, fully loaded into memory.

    A group of an older file that has since been renamed (:data:`RENAMED_GROUPS`: the
    ``/rhythm`` group of tfhrv 0.1 is now ``/circadian``) is returned under its current
    name, so older scan files keep working.

    Raises
    ------
    RecordFormatError
        Naming the file when it is not a NetCDF4/HDF5 file or is damaged or truncated.
    tfhrv.dataset.schema.SchemaError
        With ``check`` (default), naming the file and what is missing when it is a NetCDF
        file but not a tfhrv scan file (:mod:`tfhrv.dataset.schema`).
    """
    import xarray as xr

    from tfhrv.dataset.schema import validate

    name = str(path)
    with numpy_only():  # opened without chunks: numpy arrays only
        try:
            with xr.open_datatree(path, engine=_ENGINE) as tree:
                tree = tree.load()
        except FileNotFoundError:
            raise RecordFormatError(name, "no such file") from None
        except IsADirectoryError:
            raise RecordFormatError(name, "is a folder, not a scan file") from None
        except (OSError, ValueError, KeyError, TypeError) as exc:
            first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            raise RecordFormatError(
                name, "is not a readable NetCDF4 scan file (not NetCDF4/HDF5, damaged or "
                f"truncated: {first[:120]})") from None
        for old, new in RENAMED_GROUPS.items():
            if old in tree.children and new not in tree.children:
                tree[f"/{new}"] = xr.DataTree(tree[f"/{old}"].to_dataset())
                del tree[old]
        return validate(tree, path=name) if check else tree
