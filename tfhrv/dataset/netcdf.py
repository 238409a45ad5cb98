"""Writing and reading the per-record DataTree (NetCDF4 with groups), atomically.

The file is rendered in memory, written to a temporary name in the destination folder
and renamed into place only when complete (``os.replace`` is atomic on POSIX), so an
error, a full disk or a kill never leaves a half-written file under the final name (HDF5
does not recover from a failed write to disk; a write to memory cannot fail that way).

Layout and speed.  :func:`write_tree` takes plain groups
(:mod:`tfhrv.dataset.groups`, what ``tfhrv scan`` writes without importing xarray) or an
``xarray.DataTree`` (turned into groups), CF-encodes each variable itself (NaN fill values
for floats, text as variable-length UTF-8, times as int64 counts of the largest exact CF
unit, the ``coordinates`` attribute) and writes it straight through h5py in the netCDF-4
layout (HDF5 dimension scales, ``_Netcdf4Dimid``, ``_Netcdf4Coordinates``, creation order
tracked), so plain ``xarray.open_datatree(path)`` and netCDF-C readers see the same file
the xarray h5netcdf writer produces (``tests/test_scan.py`` checks both routes against
it).  Going through the h5netcdf object layer cost about 7 ms per variable (about 170
variables) and imported dask and distributed to ask for a scheduler; the direct writer
costs well under 1 ms per variable.  Variables are stored contiguous and uncompressed:
the file is read whole (:func:`open_tree` loads it), the largest arrays are the per-beat
series of ``/nn`` (a few MB for 24 h), and chunking or deflate would cost more time on
both sides than the disk it saves (measured in ``benchmarks/bench_cli.py``).
"""

from __future__ import annotations

import contextlib
import hashlib
import sys
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from tfhrv.core.errors import RecordFormatError
from tfhrv.core.files import atomic_write
from tfhrv.dataset.groups import Group, as_datatree, groups_of

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

__all__ = ["RENAMED_GROUPS", "atomic_write", "file_sha256", "netcdf_bytes", "numpy_only",
           "open_tree", "write_bytes", "write_tree"]


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

    Likewise, while the ``dask`` package itself is not imported no dask collection can
    exist, so xarray's ``is_dask_collection`` (which imports ``dask``, 0.3 s, to answer) is
    answered False for the block.
    """
    cache = absent = None
    utils = original = None
    if "dask" not in sys.modules:
        try:
            from xarray.namedarray import utils

            original = utils.is_dask_collection
            utils.is_dask_collection = _no_dask_collection
        except (ImportError, AttributeError):  # pragma: no cover - other xarray versions
            utils = None
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
        if utils is not None and utils.is_dask_collection is _no_dask_collection:
            utils.is_dask_collection = original


def _no_dask_collection(x: object) -> bool:
    """No object is a dask collection while dask is not imported."""
    return False


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
    """Write attributes through h5py's low-level calls (a third of the time of
    ``obj.attrs[key] = value``, which guesses the type and checks for an existing
    attribute each time); the stored types are h5py's own (checked in the tests)."""
    from h5py import h5a, h5s, h5t, string_dtype

    text = string_dtype("utf-8")
    for key, value in attrs.items():
        v = _attr_value(value)
        name = key.encode("utf-8")
        if isinstance(v, str):
            arr = np.array(v, dtype=text)
        elif isinstance(v, np.ndarray) and v.size and v.dtype.kind in "biuf":
            arr = np.ascontiguousarray(v)
        else:  # lists of text, empty arrays: the high-level call
            obj.attrs[key] = v
            continue
        if h5a.exists(obj.id, name):
            h5a.delete(obj.id, name)
        space = h5s.create(h5s.SCALAR) if arr.ndim == 0 else h5s.create_simple(arr.shape)
        h5a.create(obj.id, name, h5t.py_create(arr.dtype, logical=True), space).write(arr)


#: CF time units, largest first, in milliseconds (the writer picks the largest that
#: divides every value exactly, as xarray's encoder does).
_TIME_UNITS = (("days", 86_400_000), ("hours", 3_600_000), ("minutes", 60_000),
               ("seconds", 1000), ("milliseconds", 1))


def _exact_unit(ms: np.ndarray) -> tuple[str, int]:
    for unit, size in _TIME_UNITS:
        if not np.any(ms % size):
            return unit, size
    return _TIME_UNITS[-1]  # pragma: no cover - ms always divides


def _cf_variable(data, attrs: dict) -> tuple[np.ndarray, dict, object]:
    """One variable CF-encoded: stored array, attributes and fill value (or None).

    Floats get a NaN ``_FillValue``; booleans are stored as int8 marked ``dtype: bool``;
    text as variable-length UTF-8; datetimes and timedeltas as int64 counts of the
    largest exact unit (CF units, ``since`` the first value for datetimes), to the
    millisecond.
    """
    a = np.asarray(data)
    attrs = dict(attrs)
    if a.dtype.kind in "UO":
        return a.astype(object), attrs, None
    if a.dtype.kind == "b":
        attrs["dtype"] = "bool"
        return a.astype(np.int8), attrs, None
    if a.dtype.kind == "M":
        ms = a.astype("datetime64[ms]")
        if np.isnat(ms).any():
            raise ValueError("datetimes to write must not be missing (NaT)")
        ref = ms.ravel()[0] if ms.size else np.datetime64("1970-01-01T00:00:00", "ms")
        counts = (ms - ref).astype(np.int64)
        unit, size = _exact_unit(counts)
        text = str(ref.astype("datetime64[s]" if not ref.astype(np.int64) % 1000
                              else "datetime64[ms]")).replace("T", " ")
        attrs.update(units=f"{unit} since {text}", calendar="proleptic_gregorian")
        return counts // size, attrs, None
    if a.dtype.kind == "m":
        ms = a.astype("timedelta64[ms]")
        if np.isnat(ms).any():
            raise ValueError("timedeltas to write must not be missing (NaT)")
        counts = ms.astype(np.int64)
        unit, size = _exact_unit(counts)
        attrs.update(units=unit, dtype="timedelta64[ms]")
        return counts // size, attrs, None
    if a.dtype.kind == "f":
        fill = attrs.setdefault("_FillValue", np.nan)
        return a, attrs, fill
    return a, attrs, attrs.get("_FillValue")


def _encoded(group: Group) -> tuple[dict, dict]:
    """The CF-encoded variables of a group, ``name -> (dims, array, attrs, fill)``, with
    the ``coordinates`` attribute naming each data variable's non-index coordinates (CF
    1.10 section 5), and the group's attributes."""
    labels = {n: dims for n, (dims, _, _) in group.coords.items() if dims != (n,)}
    out: dict = {}
    for name, (dims, data, attrs) in group.data.items():
        array, enc, fill = _cf_variable(data, attrs)
        names = sorted(c for c, cdims in labels.items() if set(cdims) <= set(dims))
        if names:
            enc["coordinates"] = " ".join(names)
        out[name] = (tuple(dims), array, enc, fill)
    for name, (dims, data, attrs) in group.coords.items():
        out[name] = (tuple(dims),) + _cf_variable(data, attrs)
    attrs = dict(group.attrs)
    orphans = sorted(set(labels) - {c for _, _, a, _ in out.values()
                                    for c in a.get("coordinates", "").split()})
    if orphans:  # coordinates no data variable carries (CF: a global attribute)
        attrs["coordinates"] = " ".join(orphans)
    return out, attrs


def _write_group(h5, group: Group, next_dimid: int) -> int:
    import h5py

    variables, attrs = _encoded(group)
    _set_attrs(h5, attrs)
    sizes: dict = {}
    for dims, array, _, _ in variables.values():
        sizes.update(zip(dims, array.shape, strict=True))
    dimid = {}
    scales = {}
    # dimension scales first (netCDF-C numbers dimensions in creation order)
    for dim, size in sizes.items():
        dimid[dim] = next_dimid
        next_dimid += 1
        var = variables.get(dim)
        if var is not None and var[0] == (dim,):
            scales[dim] = None  # a coordinate variable: created below, then made a scale
        else:
            d = h5.create_dataset(dim, shape=(size,), dtype=">f4")
            d.make_scale(_PHONY % size)
            d.attrs["_Netcdf4Dimid"] = np.int32(dimid[dim])
            scales[dim] = d
    str_dtype = h5py.string_dtype("utf-8")
    made = {}
    for name, (dims, data, enc, fill) in variables.items():
        if data.dtype.kind == "O":
            # typed as HDF5 text up front: h5py then skips its per-element type scan
            d = h5.create_dataset(name, data=data.astype(str_dtype), dtype=str_dtype)
        elif fill is not None and data.dtype.kind in "fiu":
            d = h5.create_dataset(name, data=data, fillvalue=data.dtype.type(fill))
        else:
            d = h5.create_dataset(name, data=data)
        if name in scales and scales[name] is None:
            d.make_scale(name)
            d.attrs["_Netcdf4Dimid"] = np.int32(dimid[name])
            scales[name] = d
        if dims:
            d.attrs["_Netcdf4Coordinates"] = np.array([dimid[x] for x in dims],
                                                      dtype=np.int32)
        _set_attrs(d, enc)
        made[name] = d
    for name, (dims, _, _, _) in variables.items():
        if name in scales:
            continue
        d = made[name]
        for axis, dim in enumerate(dims):
            d.dims[axis].attach_scale(scales[dim])
    return next_dimid


def _file_image(groups: dict[str, Group]) -> bytes:
    """The HDF5 file of ``groups`` built in HDF5's own memory (the "core" driver, no
    backing file) and returned as bytes: faster than a Python file object, through
    which HDF5 would call back into Python for every block it writes."""
    import h5py

    with h5py.File("tfhrv-in-memory.nc", "w", driver="core", backing_store=False,
                   track_order=True) as h5:
        h5.attrs["_NCProperties"] = np.bytes_(
            f"version=2,tfhrv-h5py={h5py.version.version},hdf5={h5py.version.hdf5_version}")
        next_dimid = 0
        for path_, group in groups.items():
            node = h5 if path_ == "/" else h5.create_group(path_, track_order=True)
            next_dimid = _write_group(node, group, next_dimid)
        h5.flush()
        return h5.id.get_file_image()


def _as_groups(tree) -> dict[str, Group]:
    if isinstance(tree, dict):
        if "/" not in tree:
            raise ValueError("groups must include the root group '/'")
        return tree
    return groups_of(tree)


def netcdf_bytes(tree: xr.DataTree | dict[str, Group], /) -> bytes:
    """The NetCDF4 file of a DataTree or of plain groups (path -> :class:`Group`, as
    :func:`tfhrv.dataset.build.build_groups` makes them), rendered in memory (see the
    module notes)."""
    return _file_image(_as_groups(tree))


def write_bytes(data: bytes):
    """A writer for :func:`tfhrv.core.files.atomic_write` that stores ``data``."""
    def write(tmp: Path) -> None:
        with Path(tmp).open("wb") as fh:
            fh.write(data)
            fh.flush()
    return write


def write_tree(tree: xr.DataTree | dict[str, Group], path: str | Path, /, *,
               outputs=None) -> Path:
    """Write a DataTree, or plain groups (:mod:`tfhrv.dataset.groups`), as NetCDF4 with
    groups, atomically.

    Each group is CF-encoded and written through h5py in the netCDF-4 layout (see the
    module notes); ``xarray.open_datatree`` reads it back identical.  With
    ``outputs`` (a :class:`tfhrv.core.files.OutputSet`) the file is staged there and
    renamed with the command's other outputs.
    """
    write = write_bytes(netcdf_bytes(tree))
    if outputs is not None:
        return outputs.add(path, write)
    return atomic_write(path, write)


#: HDF5 and netCDF-4 bookkeeping attributes, not variable attributes.
_INTERNAL_ATTRS = frozenset({"CLASS", "NAME", "DIMENSION_LIST", "REFERENCE_LIST",
                             "_Netcdf4Dimid", "_Netcdf4Coordinates", "_NCProperties",
                             "_FillValue", "coordinates", "_nc3_strict"})
_UNIT_MS = dict(_TIME_UNITS)


def _attr_decoded(value):
    """An HDF5 attribute as xarray's netCDF readers give it: text as str, a one-element
    numeric array as a numpy scalar, longer arrays as arrays, a text array as a list."""
    if isinstance(value, bytes):
        return value.decode("utf-8")
    if isinstance(value, np.ndarray):
        if value.dtype.kind in "OSU":
            items = [v.decode("utf-8") if isinstance(v, bytes) else str(v) for v in value.ravel()]
            return items[0] if value.size == 1 else items
        return value[0] if value.size == 1 else value
    return value


#: HDF5 dimension-scale bookkeeping (object references), never needed from the attributes.
_REFERENCE_ATTRS = frozenset({"DIMENSION_LIST", "REFERENCE_LIST"})


def _raw_attrs(obj) -> dict:
    """Every attribute of an HDF5 object but the scale references, read once (as h5py
    gives them)."""
    return {k: obj.attrs[k] for k in obj.attrs if k not in _REFERENCE_ATTRS}


def _decoded(d, raw: dict) -> tuple[np.ndarray, dict]:
    """Values and attributes of one stored variable (``raw``: its attributes as
    :func:`_raw_attrs` reads them), CF-decoded as :func:`_cf_variable` encodes them (and
    as xarray decodes them)."""
    attrs = {k: _attr_decoded(v) for k, v in raw.items() if k not in _INTERNAL_ATTRS}
    if d.dtype.kind in "OS":
        data = d.asstr()[()]
        return np.asarray(data, dtype=str) if np.ndim(data) else np.str_(data), attrs
    data = d[()]
    units = attrs.get("units")
    kind = attrs.get("dtype")
    if isinstance(units, str) and " since " in units and "calendar" in attrs:
        unit, ref = units.split(" since ", 1)
        if unit in _UNIT_MS:
            base = np.datetime64(ref.strip().replace(" ", "T"), "ms")
            data = (base + (np.asarray(data, dtype=np.int64) * _UNIT_MS[unit]).astype(
                "timedelta64[ms]")).astype("datetime64[ns]")
            del attrs["units"], attrs["calendar"]
    elif isinstance(kind, str) and kind.startswith("timedelta64") and units in _UNIT_MS:
        data = (np.asarray(data, dtype=np.int64) * _UNIT_MS[units]).astype(
            "timedelta64[ms]").astype(kind)
        del attrs["units"], attrs["dtype"]
    elif kind == "bool":
        data = np.asarray(data).astype(bool)
        del attrs["dtype"]
    else:
        fill = raw.get("_FillValue")
        if fill is not None and data.dtype.kind in "iu":  # masked integers become floats
            data = np.where(data == np.asarray(fill).ravel()[0], np.nan, data)
    return data, attrs


def _dimension_names(d, raw: dict, dimids: dict[int, str]) -> tuple[str, ...]:
    """The dimension names of a variable: from its netCDF-4 dimension ids
    (``_Netcdf4Coordinates``) when they name dimensions seen in this group or above it,
    else from the HDF5 dimension scales attached to it (slower: h5py resolves each
    scale's path)."""
    ids = raw.get("_Netcdf4Coordinates")
    if ids is not None and np.size(ids) == d.ndim and all(int(i) in dimids for i in ids):
        return tuple(dimids[int(i)] for i in np.ravel(ids))
    return tuple(d.dims[i][0].name.rsplit("/", 1)[-1] if len(d.dims[i])
                 else f"phony_dim_{i}" for i in range(d.ndim))


def _read_groups(path) -> dict[str, Group]:
    """Every group of a netCDF-4 file as plain :class:`Group` objects (numpy only).

    Each attribute is read once.  Dimension ids (``_Netcdf4Dimid``) are visible in the
    group that defines them and in its subgroups, as in netCDF-4.
    """
    import h5py

    out: dict[str, Group] = {}
    with h5py.File(path, "r") as h5:
        nodes = [h5]
        h5.visit(lambda name: nodes.append(h5[name]) if isinstance(h5[name], h5py.Group)
                 else None)
        visible: dict[str, dict[int, str]] = {}
        for node in nodes:  # parents come before their subgroups
            node_attrs = _raw_attrs(node)
            parent = node.name.rsplit("/", 1)[0] or "/"
            dimids = dict(visible.get(parent, {})) if node.name != "/" else {}
            datasets = [(name, d, _raw_attrs(d)) for name, d in node.items()
                        if isinstance(d, h5py.Dataset)]
            for name, _, raw in datasets:
                if raw.get("CLASS") == b"DIMENSION_SCALE" and "_Netcdf4Dimid" in raw:
                    dimids[int(np.ravel(raw["_Netcdf4Dimid"])[0])] = name
            visible[node.name] = dimids
            variables: dict = {}
            scales = set()
            labels = set(str(_attr_decoded(node_attrs.get("coordinates", ""))).split())
            for name, d, raw in datasets:
                if raw.get("CLASS") == b"DIMENSION_SCALE":
                    if str(_attr_decoded(raw.get("NAME", b""))).startswith(_PHONY[:40]):
                        continue  # a dimension without a variable
                    scales.add(name)
                    dims = (name,)
                else:
                    dims = _dimension_names(d, raw, dimids)
                    labels.update(str(_attr_decoded(raw.get("coordinates", ""))).split())
                data, attrs = _decoded(d, raw)
                variables[name] = (dims, data, attrs)
            coords = {n: v for n, v in variables.items() if n in scales or n in labels}
            data_vars = {n: v for n, v in variables.items() if n not in coords}
            attrs = {k: _attr_decoded(v) for k, v in node_attrs.items()
                     if k not in _INTERNAL_ATTRS}
            out["/" if node.name == "/" else node.name] = Group(data_vars, coords, attrs)
    return out


def open_tree(path: str | Path, /, *, check: bool = True) -> xr.DataTree:
    """Open a scan file written by :func:`write_tree`, fully loaded into memory.

    The file is read through h5py and CF-decoded here (:func:`_read_groups`), giving the
    same tree as ``xarray.open_datatree(path).load()`` (``tests/test_scan.py``) at about a
    third of the time: the h5netcdf layer costs several ms of Python per variable.

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
    from tfhrv.dataset.schema import validate

    name = str(path)
    if Path(name).is_dir():
        raise RecordFormatError(name, "is a folder, not a scan file")
    try:
        groups = _read_groups(name)
    except FileNotFoundError:
        raise RecordFormatError(name, "no such file") from None
    except (OSError, ValueError, KeyError, TypeError, IndexError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise RecordFormatError(
            name, "is not a readable NetCDF4 scan file (not NetCDF4/HDF5, damaged or "
            f"truncated: {first[:120]})") from None
    for old, new in RENAMED_GROUPS.items():
        if f"/{old}" in groups and f"/{new}" not in groups:
            groups = {(f"/{new}" if p == f"/{old}" else p): g for p, g in groups.items()}
    tree = as_datatree(groups)
    return validate(tree, path=name) if check else tree
