"""Writing and reading the per-record DataTree (NetCDF4 with groups), atomically.

The file is written to a temporary name in the destination folder and renamed into
place only when complete (``os.replace`` is atomic on POSIX), so an error or a kill never
leaves a half-written file under the final name.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
from pathlib import Path

import xarray as xr

from tfhrv.core.caution import CAUTION
from tfhrv.core.errors import RecordFormatError
from tfhrv.core.files import atomic_write

__all__ = ["CAUTION", "atomic_write", "file_sha256", "open_tree", "provenance", "write_tree"]


_ENGINE = "h5netcdf"


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes (as stored, before decompression)."""
    h = hashlib.sha256()
    with Path(path).open("rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def provenance(*, source: str | None, parameters: dict, history: str) -> dict:
    """Root attributes: version, input, parameters as JSON, the calibration table's
    SHA-256, creation time, caution."""
    from tfhrv import __version__
    from tfhrv.calibration.calibrate import table_sha256

    attrs = {
        "Conventions": "CF-1.10",
        "title": "tfhrv time-resolved scaling analysis",
        "tfhrv_version": __version__,
        "source_file": "" if source is None else Path(source).name,
        "source_sha256": "" if source is None or not Path(source).exists()
        else file_sha256(source),
        "parameters": json.dumps(parameters, sort_keys=True, default=str),
        "calibration_table_sha256": table_sha256(),
        "created": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
        "caution": CAUTION,
        "history": history,
    }
    return attrs


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


def open_tree(path: str | Path, /) -> xr.DataTree:
    """Open a DataTree written by :func:`write_tree`, fully loaded into memory.

    Raises
    ------
    RecordFormatError
        Naming the file when it is not a NetCDF4/HDF5 file or is damaged or truncated.
    """
    name = str(path)
    try:
        with xr.open_datatree(path, engine=_ENGINE) as tree:
            return tree.load()
    except FileNotFoundError:
        raise RecordFormatError(name, "no such file") from None
    except IsADirectoryError:
        raise RecordFormatError(name, "is a folder, not a scan file") from None
    except (OSError, ValueError, KeyError, TypeError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise RecordFormatError(
            name, "is not a readable NetCDF4 scan file (not NetCDF4/HDF5, damaged or "
            f"truncated: {first[:120]})") from None
