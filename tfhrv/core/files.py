"""Writing outputs safely: atomic files, all-or-nothing output sets, input protection.

The promises (``docs/RELIABILITY.md``):

- an output is written to a temporary name in its own folder and renamed into place only
  when complete (``os.replace`` is atomic on POSIX), so a failure or a kill never leaves a
  half-written file under the final name, and the temporary file is removed;
- the outputs of one command are staged together and renamed only when every one of them
  was written (:class:`OutputSet`): a failed write leaves the earlier outputs as they were;
- no output may be one of the inputs, compared by resolved path and by file identity
  (device and inode), so a symlink or another spelling of the same file is caught
  (:func:`check_outputs`);
- a failed write is one :class:`OutputError` naming the output the user asked for, not
  the hidden temporary file.

Standard library only (this is the lowest layer).
"""

from __future__ import annotations

import errno
import hashlib
import os
import re
import shutil
import tempfile
from collections.abc import Callable, Iterable
from pathlib import Path

__all__ = [
    "OutputError",
    "OutputSet",
    "atomic_write",
    "check_outputs",
    "safe_file_stem",
    "same_file",
    "short_text",
]

#: Longest file-name stem we derive from a user's text, in UTF-8 bytes.  POSIX file
#: systems allow 255 bytes per name component (common practice: leave room for suffixes
#: such as ``.circadian.csv`` and the temporary ``.part`` decoration).
MAX_STEM_BYTES = 120


class OutputError(OSError):
    """An output could not be written; the message names the output, not a temporary file."""

    def __init__(self, path: str | Path, problem: str) -> None:
        self.path = str(path)
        self.problem = problem
        super().__init__(f"{self.path}: cannot write: {problem}")


def short_text(text: object, /, limit: int = 60) -> str:
    """``repr`` of ``text`` cut to about ``limit`` characters (for echoing user input).

    Examples
    --------
    >>> short_text("x" * 1000, 10)
    "'xxxxxxxxxx...' (1000 characters)"
    """
    s = str(text)
    if len(s) <= limit:
        return repr(s)
    return f"{s[:limit]!r}... ({len(s)} characters)".replace("'...", "...'", 1)


def _why(exc: BaseException) -> str:
    if isinstance(exc, OSError) and exc.errno is not None:
        if exc.errno in (errno.ENOSPC, errno.EFBIG, errno.EDQUOT):
            return f"the disk is full or the file size limit is reached ({exc.strerror})"
        if exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
            return f"permission denied or read-only folder ({exc.strerror})"
        return exc.strerror or str(exc)
    return f"{type(exc).__name__}: {short_text(exc, 200)}"


def _remove(p: Path) -> None:
    try:
        shutil.rmtree(p) if p.is_dir() and not p.is_symlink() else p.unlink(missing_ok=True)
    except OSError:
        pass


def _stage(dest: Path, write: Callable[[Path], object], *, directory: bool = False) -> Path:
    """Write ``dest``'s content to a fresh temporary path beside it; return that path."""
    try:
        dest.parent.mkdir(parents=True, exist_ok=True)
        if directory:
            tmp = Path(tempfile.mkdtemp(prefix=f".{dest.name[:MAX_STEM_BYTES]}.", suffix=".part",
                                        dir=dest.parent))
            tmp.rmdir()  # the writer creates it (zarr, for one, wants to)
        else:
            fd, name = tempfile.mkstemp(prefix=f".{dest.name[:MAX_STEM_BYTES]}.",
                                        suffix=".part", dir=dest.parent)
            os.close(fd)
            tmp = Path(name)
    except OSError as exc:
        raise OutputError(dest, _why(exc)) from None
    try:
        write(tmp)
        if not directory:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)  # mkstemp creates 0600; give the usual file mode
    except BaseException as exc:
        _remove(tmp)
        if isinstance(exc, OSError | MemoryError) and not isinstance(exc, OutputError):
            raise OutputError(dest, _why(exc)) from None
        raise
    return tmp


def _commit(tmp: Path, dest: Path) -> None:
    try:
        if dest.is_dir() and not dest.is_symlink() and tmp.is_dir():
            old = dest.with_name(f".{dest.name}.old.part")
            _remove(old)
            os.replace(dest, old)
            os.replace(tmp, dest)
            _remove(old)
        else:
            os.replace(tmp, dest)
    except OSError as exc:
        _remove(tmp)
        raise OutputError(dest, _why(exc)) from None


def atomic_write(path: str | Path, write: Callable[[Path], object]) -> Path:
    """Call ``write(tmp_path)`` then rename the temporary file onto ``path``.

    The temporary file lives in the same folder (same file system) and is removed if
    ``write`` raises.  An ``OSError`` (full disk, file size limit, read-only folder)
    becomes an :class:`OutputError` naming ``path``.
    """
    dest = Path(path)
    _commit(_stage(dest, write), dest)
    return dest


class OutputSet:
    """The outputs of one command: write all, then rename all.

    Use as a context manager; :meth:`add` writes an output to its temporary file at once
    (so a full disk shows on the first output that does not fit), and leaving the block
    without an error renames every temporary file onto its destination.  An error
    anywhere in the block removes every temporary file and leaves all destinations as they
    were.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with OutputSet() as out:
    ...     _ = out.add(d / "a.txt", lambda tmp: tmp.write_text("a"))
    ...     _ = out.add(d / "b.txt", lambda tmp: tmp.write_text("b"))
    >>> sorted(p.name for p in d.iterdir())
    ['a.txt', 'b.txt']
    """

    def __init__(self) -> None:
        self._staged: list[tuple[Path, Path]] = []

    def add(self, path: str | Path, write: Callable[[Path], object], *,
            directory: bool = False) -> Path:
        """Stage one output (``write(tmp)`` fills the temporary path); return ``path``."""
        dest = Path(path)
        if any(d == dest for d, _ in self._staged):
            raise ValueError(f"{dest}: the same output is staged twice")
        self._staged.append((dest, _stage(dest, write, directory=directory)))
        return dest

    def discard(self) -> None:
        """Remove every staged temporary file."""
        for _, tmp in self._staged:
            _remove(tmp)
        self._staged.clear()

    def commit(self) -> list[Path]:
        """Rename every staged output into place (in the order staged)."""
        done = []
        try:
            while self._staged:
                dest, tmp = self._staged[0]
                _commit(tmp, dest)
                self._staged.pop(0)
                done.append(dest)
        finally:
            self.discard()
        return done

    def __enter__(self) -> OutputSet:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.commit()
        else:
            self.discard()


def same_file(a: str | Path, b: str | Path) -> bool:
    """True when two paths name the same file: equal resolved paths, or, when both exist,
    the same device and inode (a hard link, a symlink, another spelling)."""
    pa, pb = Path(a), Path(b)
    try:
        if pa.resolve() == pb.resolve():
            return True
    except (OSError, RuntimeError):  # a symlink loop
        pass
    try:
        sa, sb = pa.stat(), pb.stat()
    except OSError:
        return False
    return (sa.st_dev, sa.st_ino) == (sb.st_dev, sb.st_ino)


def check_outputs(outputs: Iterable[tuple[str, str | Path]],
                  inputs: Iterable[tuple[str, str | Path]] = ()) -> None:
    """Refuse outputs that are one of the inputs or one another.

    Parameters
    ----------
    outputs, inputs : iterable of (role, path)
        ``role`` names the option in the message (e.g. ``"--scan-output"``).

    Raises
    ------
    ValueError
        Naming both paths, before anything is written.
    """
    outs = [(r, Path(p)) for r, p in outputs if p is not None]
    ins = [(r, Path(p)) for r, p in inputs if p is not None]
    for ro, po in outs:
        for ri, pi in ins:
            if same_file(po, pi):
                raise ValueError(f"{po}: the {ro} is the same file as the {ri} {pi}; "
                                 "refusing to overwrite an input")
    for i, (ra, pa) in enumerate(outs):
        for rb, pb in outs[i + 1:]:
            if same_file(pa, pb):
                raise ValueError(f"{pa}: the {ra} and the {rb} are the same file")


def safe_file_stem(text: str, /) -> str:
    """A file-name stem for any text (e.g. a record id): unchanged when it is short and made
    of letters, digits, ``.``, ``_``, ``-``, ``+``, ``@`` and ``=``; otherwise the safe
    characters cut to :data:`MAX_STEM_BYTES` plus 12 hex digits of the text's SHA-256, so
    that distinct ids keep distinct names.

    Examples
    --------
    >>> safe_file_stem("sw01")
    'sw01'
    >>> len(safe_file_stem("x" * 300)) <= MAX_STEM_BYTES + 13
    True
    >>> safe_file_stem("a/b") != safe_file_stem("a_b")
    True
    """
    s = str(text)
    ok = re.fullmatch(r"[A-Za-z0-9._+@=-]+", s) is not None and not s.startswith(".")
    if ok and len(s.encode()) <= MAX_STEM_BYTES:
        return s
    clean = re.sub(r"[^A-Za-z0-9._+@=-]+", "_", s).lstrip(".")[:MAX_STEM_BYTES]
    digest = hashlib.sha256(s.encode("utf-8", "surrogatepass")).hexdigest()[:12]
    return f"{clean}-{digest}" if clean else digest
