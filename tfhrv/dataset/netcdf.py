"""Writing and reading the per-record DataTree (NetCDF4 with groups), atomically.

The file is written to a temporary name in the destination folder and renamed into
place only when complete (``os.replace`` is atomic on POSIX), so an error or a kill never
leaves a half-written file under the final name.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
from pathlib import Path

import xarray as xr

__all__ = ["atomic_write", "file_sha256", "open_tree", "write_tree"]


_ENGINE = "h5netcdf"


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes (as stored, before decompression)."""
    h = hashlib.sha256()
    with Path(path).open("rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def atomic_write(path: str | Path, write) -> Path:
    """Call ``write(tmp_path)`` then rename the temporary file onto ``path``.

    The temporary file lives in the same folder (same file system) and is removed if
    ``write`` raises.
    """
    dest = Path(path)
    dest.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".part", dir=dest.parent)
    os.close(fd)
    try:
        write(Path(tmp))
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp creates 0600; give the usual file mode
        os.replace(tmp, dest)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return dest


def write_tree(tree: xr.DataTree, path: str | Path, /) -> Path:
    """Write a DataTree as NetCDF4 with groups, atomically."""
    return atomic_write(path, lambda tmp: tree.to_netcdf(tmp, engine=_ENGINE, mode="w"))


#: groups renamed since earlier releases: old name -> current name
RENAMED_GROUPS = {"rhythm": "circadian"}


def open_tree(path: str | Path, /, *, check: bool = True) -> xr.DataTree:
    """Open a scan file written by :func:`write_tree`, fully loaded into memory.

    With ``check`` (default) the tree is validated against :mod:`tfhrv.dataset.schema`;
    a file that is not a tfhrv scan file raises :class:`~tfhrv.dataset.schema.SchemaError`
    naming the file and what is missing.  A group of an older file that has since been
    renamed (:data:`RENAMED_GROUPS`: the ``/rhythm`` group of tfhrv 0.1 is now
    ``/circadian``) is returned under its current name, so older scan files keep working.
    """
    from tfhrv.dataset.schema import validate

    with xr.open_datatree(path, engine=_ENGINE) as tree:
        tree = tree.load()
    for old, new in RENAMED_GROUPS.items():
        if old in tree.children and new not in tree.children:
            tree[f"/{new}"] = xr.DataTree(tree[f"/{old}"].to_dataset())
            del tree[old]
    return validate(tree, path=str(path)) if check else tree
