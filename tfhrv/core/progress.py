"""Progress reporting: stages and bars on a text stream, or nothing at all.

Long steps (the per-window loop, the cohort records) take a :class:`Progress` object and
call it; the default :data:`SILENT` does nothing, so library users see no output unless
they ask for it.  :class:`TextProgress` writes to a stream (the command line gives it
``sys.stderr``, never ``sys.stdout``, so machine-readable output stays clean): a line per
stage with the time since the start, and a bar for loops that redraws in place when the
stream is a terminal and prints one line at the end otherwise.

Numpy layer: this module imports nothing but the standard library.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Iterable, Iterator
from typing import TextIO, TypeVar

__all__ = ["SILENT", "Progress", "TextProgress"]

T = TypeVar("T")


class Progress:
    """The no-op reporter and the interface every reporter follows.

    ``stage(name)`` announces a step; ``start(total, label)``, ``advance(n)`` and
    ``finish()`` drive a bar; ``track(iterable, total=..., label=...)`` wraps a loop and
    advances once per item, after the loop body for that item has run (also when it
    ``continue``-s).
    """

    def stage(self, name: str, /) -> None:
        """A new step begins."""

    def start(self, total: int, label: str, /) -> None:
        """A loop of ``total`` items begins."""

    def advance(self, n: int = 1, /) -> None:
        """``n`` more items are done."""

    def update(self, done: int, total: int | None = None, /) -> None:
        """``done`` items (of ``total``, when it changed) are finished: an absolute count,
        for a source that reports totals rather than steps (e.g. a dask scheduler)."""

    def finish(self) -> None:
        """The current loop is over."""

    def note(self, text: str, /) -> None:
        """A free-form line (e.g. a record that failed)."""

    def track(self, items: Iterable[T], /, *, total: int, label: str) -> Iterator[T]:
        """Yield ``items`` and advance the bar after each one."""
        self.start(total, label)
        try:
            for item in items:
                yield item
                self.advance()
        finally:
            self.finish()


#: The default reporter: does nothing.
SILENT = Progress()


def _clock(seconds: float) -> str:
    s = int(seconds)
    return f"{s // 3600}:{s // 60 % 60:02d}:{s % 60:02d}" if s >= 3600 else \
        f"{s // 60}:{s % 60:02d}" if s >= 60 else f"{seconds:.1f} s"


class TextProgress(Progress):
    """Stages and bars as text on ``stream`` (default ``sys.stderr``).

    Parameters
    ----------
    stream : file-like, optional
        Where to write (default: ``sys.stderr`` at the time of each write).
    prefix : str, default "tfhrv"
        Start of every line.
    width : int, default 28
        Characters of the bar.
    interactive : bool, optional
        Redraw the bar in place (carriage return) at most every ``interval_s`` seconds;
        default: when ``stream`` is a terminal.  Otherwise a loop prints a single line
        when it ends.
    interval_s : float, default 0.1
        Shortest time between two redraws of an interactive bar.

    Examples
    --------
    >>> import io
    >>> out = io.StringIO()
    >>> p = TextProgress(out, interactive=False)
    >>> p.stage("read")
    >>> sum(p.track(range(3), total=3, label="windows"))
    3
    >>> lines = out.getvalue().splitlines()
    >>> lines[0].endswith("read"), "windows" in lines[1] and "3/3" in lines[1]
    (True, True)
    """

    def __init__(self, stream: TextIO | None = None, /, *, prefix: str = "tfhrv",
                 width: int = 28, interactive: bool | None = None,
                 interval_s: float = 0.1) -> None:
        self._stream = stream
        self.prefix = prefix
        self.width = int(width)
        if interactive is None:
            isatty = getattr(self.stream, "isatty", None)
            try:
                interactive = bool(isatty()) if isatty is not None else False
            except (ValueError, OSError):
                interactive = False
        self.interactive = interactive
        self.interval_s = float(interval_s)
        self.t0 = time.perf_counter()
        self._total = 0
        self._done = 0
        self._label = ""
        self._loop_t0 = self.t0
        self._last_draw = -1.0
        self._drawn = False

    @property
    def stream(self) -> TextIO:
        return self._stream if self._stream is not None else sys.stderr

    def _write(self, text: str) -> None:
        try:
            self.stream.write(text)
            self.stream.flush()
        except (OSError, ValueError):  # closed or broken stream: progress is never fatal
            pass

    def _clear(self) -> None:
        if self._drawn:
            self._write("\r\033[K")
            self._drawn = False

    def stage(self, name: str, /) -> None:
        self._clear()
        self._write(f"{self.prefix}: [{_clock(time.perf_counter() - self.t0):>7}] {name}\n")

    def note(self, text: str, /) -> None:
        self._clear()
        self._write(f"{self.prefix}: {text}\n")

    def start(self, total: int, label: str, /) -> None:
        self._total, self._done, self._label = max(int(total), 0), 0, label
        self._loop_t0 = time.perf_counter()
        self._last_draw = -1.0
        if self.interactive:
            self._draw(force=True)

    def advance(self, n: int = 1, /) -> None:
        self._done += int(n)
        if self.interactive:
            self._draw()

    def update(self, done: int, total: int | None = None, /) -> None:
        if total is not None:
            self._total = max(int(total), 0)
        self._done = int(done)
        if self.interactive:
            self._draw()

    def finish(self) -> None:
        if self.interactive:
            self._draw(force=True)
            self._write("\n")
            self._drawn = False
        else:
            self._write(self._line() + "\n")

    def _line(self) -> str:
        total = self._total
        frac = min(self._done / total, 1.0) if total else 1.0
        fill = int(round(self.width * frac))
        bar = "#" * fill + "-" * (self.width - fill)
        el = time.perf_counter() - self._loop_t0
        eta = ""
        if 0 < self._done < total:
            eta = f", about {_clock(el / self._done * (total - self._done))} left"
        return (f"{self.prefix}: {self._label} [{bar}] {self._done}/{total} "
                f"({_clock(el)}{eta})")

    def _draw(self, *, force: bool = False) -> None:
        now = time.perf_counter()
        if not force and now - self._last_draw < self.interval_s:
            return
        self._last_draw = now
        self._write("\r\033[K" + self._line())
        self._drawn = True
