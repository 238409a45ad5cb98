"""Writing and reading the per-record DataTree (NetCDF4 with groups), atomically.

The file is rendered in memory and written to a temporary name in the destination folder,
then renamed into place only when complete (``os.replace`` is atomic on POSIX), so an
error, a full disk or a kill never leaves a half-written file under the final name.
"""

from __future__ import annotations

import hashlib
import io
from pathlib import Path

import xarray as xr

from tfhrv.core.errors import RecordFormatError
from tfhrv.core.files import atomic_write

__all__ = ["RENAMED_GROUPS", "atomic_write", "file_sha256", "netcdf_bytes", "open_tree",
           "write_bytes", "write_tree"]


_ENGINE = "h5netcdf"
#: groups renamed since earlier releases: old name -> current name
RENAMED_GROUPS = {"rhythm": "circadian"}


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes (as stored, before decompression)."""
    h = hashlib.sha256()
    with Path(path).open("rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def netcdf_bytes(tree: xr.DataTree, /) -> bytes:
    """The NetCDF4 file of a DataTree, rendered in memory.

    HDF5 does not recover from a failed write (a full disk or a file size limit ended in
    a segmentation fault), so the file is built in memory and written with a plain
    ``write``, whose failure is an ordinary ``OSError``.
    """
    buf = io.BytesIO()
    tree.to_netcdf(buf, engine=_ENGINE, mode="w")
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

    With ``outputs`` (a :class:`tfhrv.core.files.OutputSet`) the file is staged there and
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
    from tfhrv.dataset.schema import validate

    name = str(path)
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
