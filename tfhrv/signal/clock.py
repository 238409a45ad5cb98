"""Local civil time of a recording: UTC offsets that change during the record.

Beat times are kept as elapsed physical seconds (what the heart did); the clock on the
wall may jump (daylight-saving changes).  :class:`LocalClock` holds the UTC offset as a
step function of elapsed time, either from an IANA time zone (standard library
:mod:`zoneinfo`) or from the offsets written in a file's timestamps, so that the clock
hour of any instant is local civil time, through the change.

Standard library and numpy only.
"""

from __future__ import annotations

import datetime as dt
import zoneinfo
from dataclasses import dataclass

import numpy as np

from tfhrv.core.validation import readonly

__all__ = ["LocalClock", "load_zone", "localize"]

_UTC = dt.UTC


def load_zone(name: str, /) -> zoneinfo.ZoneInfo:
    """The IANA time zone ``name`` (e.g. ``"Europe/Berlin"``), or a ``ValueError``.

    Examples
    --------
    >>> load_zone("Europe/Berlin").key
    'Europe/Berlin'
    """
    text = str(name).strip()
    if not text or len(text) > 64 or text.startswith(("/", ".")) or ".." in text:
        raise ValueError(f"time zone must be an IANA name such as 'Europe/Berlin', "
                         f"got {name!r}")
    try:
        return zoneinfo.ZoneInfo(text)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
        raise ValueError(f"time zone must be an IANA name such as 'Europe/Berlin', "
                         f"got {name!r}") from None


def localize(naive: dt.datetime, zone: dt.tzinfo, /, *, after: dt.datetime | None = None
             ) -> dt.datetime:
    """Attach ``zone`` to a naive local time.

    A time the clocks skipped (spring forward) raises ``ValueError``.  A time the clocks
    showed twice (fall back) is the first showing, unless that would not be later than
    ``after`` (an aware instant), in which case it is the second: a beat-by-beat clock
    column passes the previous beat as ``after``.

    Examples
    --------
    >>> z = load_zone("Europe/Berlin")
    >>> a = localize(dt.datetime(2026, 10, 25, 2, 30), z)
    >>> b = localize(dt.datetime(2026, 10, 25, 2, 10), z, after=a)
    >>> (b.astimezone(dt.UTC) - a.astimezone(dt.UTC)).total_seconds()
    2400.0
    """
    first = naive.replace(tzinfo=zone, fold=0)
    second = naive.replace(tzinfo=zone, fold=1)
    u0, u1 = first.astimezone(_UTC), second.astimezone(_UTC)
    if u0 != u1:
        back0 = u0.astimezone(zone).replace(tzinfo=None)
        if back0 != naive:  # skipped by the clocks: fold picks one side of the gap
            raise ValueError(f"local time {naive.isoformat()} does not exist in "
                             f"{getattr(zone, 'key', zone)} (the clocks jumped forward)")
        if after is not None and u0 <= after.astimezone(_UTC) < u1:
            return second
    return first


@dataclass(frozen=True, slots=True)
class LocalClock:
    """UTC offset as a step function of elapsed time.

    Attributes
    ----------
    change_s : numpy.ndarray
        Elapsed times (s from the recording start) at which the offset changes; the
        first is ``-inf`` (the offset at the start).
    offset_s : numpy.ndarray
        UTC offset (s, east positive) from each change on.
    zone : str
        IANA zone name, or ``""`` when the offsets come from the file's timestamps.

    Examples
    --------
    >>> z = load_zone("Europe/Berlin")
    >>> start = dt.datetime(2026, 3, 29, 0, 0, tzinfo=z)
    >>> c = LocalClock.from_zone(z, start, 6 * 3600.0)
    >>> c.change_s.tolist(), c.offset_s.tolist()  # 02:00 CET is 2 h after midnight
    ([-inf, 7200.0], [3600.0, 7200.0])
    >>> c.clock_hours(start, np.array([5400.0, 9000.0])).tolist()  # 01:30, then 03:30
    [1.5, 3.5]
    """

    change_s: np.ndarray
    offset_s: np.ndarray
    zone: str = ""

    def __post_init__(self) -> None:
        c = np.array(self.change_s, dtype=np.float64)
        o = np.array(self.offset_s, dtype=np.float64)
        if c.ndim != 1 or c.shape != o.shape or c.size == 0:
            raise ValueError("change_s and offset_s must be 1-D of the same non-zero length")
        if not (c[0] == -np.inf and np.all(np.diff(c) > 0) and np.all(np.isfinite(o))):
            raise ValueError("change_s must start at -inf and increase; offsets finite")
        object.__setattr__(self, "change_s", readonly(c))
        object.__setattr__(self, "offset_s", readonly(o))

    @classmethod
    def fixed(cls, offset_s: float, /) -> LocalClock:
        """A clock whose offset never changes."""
        return cls(np.array([-np.inf]), np.array([float(offset_s)]))

    @classmethod
    def from_offsets(cls, elapsed_s: np.ndarray, offset_s: np.ndarray, /) -> LocalClock:
        """From one offset per instant (e.g. per beat of a timestamp column): the offset
        changes at the first instant that carries a new value."""
        t = np.asarray(elapsed_s, dtype=np.float64)
        o = np.asarray(offset_s, dtype=np.float64)
        new = np.flatnonzero(np.diff(o) != 0) + 1
        return cls(np.concatenate([[-np.inf], t[new]]), np.concatenate([o[:1], o[new]]))

    @classmethod
    def from_zone(cls, zone: zoneinfo.ZoneInfo, start: dt.datetime, span_s: float, /
                  ) -> LocalClock:
        """The offsets of ``zone`` over ``[0, span_s]`` from the aware ``start``.

        Work grows with the span (one probe per hour, then a bisection to the second per
        change), which the readers bound (:data:`tfhrv.signal.recording.MAX_SPAN_S`).
        """
        t0 = start.astimezone(_UTC)

        def off(sec: float) -> float:
            return (t0 + dt.timedelta(seconds=sec)).astimezone(zone).utcoffset().total_seconds()

        n = int(np.ceil(max(float(span_s), 0.0) / 3600.0)) + 1
        probes = [off(3600.0 * k) for k in range(n + 1)]
        changes, offsets = [-np.inf], [probes[0]]
        for k in range(n):
            if probes[k + 1] != probes[k]:
                lo, hi = 3600.0 * k, 3600.0 * (k + 1)
                while hi - lo > 0.5:
                    mid = 0.5 * (lo + hi)
                    lo, hi = (mid, hi) if off(mid) == probes[k] else (lo, mid)
                changes.append(float(np.ceil(hi)))
                offsets.append(probes[k + 1])
        return cls(np.array(changes), np.array(offsets), getattr(zone, "key", str(zone)))

    def offset_at(self, elapsed_s: np.ndarray, /) -> np.ndarray:
        """UTC offset (s) at each elapsed time (e.g. per beat)."""
        i = np.searchsorted(self.change_s, np.asarray(elapsed_s, dtype=np.float64),
                            side="right") - 1
        return self.offset_s[np.clip(i, 0, None)]

    def clock_hours(self, start: dt.datetime | dt.time, elapsed_s: np.ndarray, /) -> np.ndarray:
        """Local civil clock hour (0-24) at each elapsed time, ``start`` being the clock
        time of elapsed 0 (at the offset in force then)."""
        tod = start.time() if isinstance(start, dt.datetime) else start
        h0 = tod.hour + tod.minute / 60 + tod.second / 3600 + tod.microsecond / 3.6e9
        e = np.asarray(elapsed_s, dtype=np.float64)
        shift = (self.offset_at(e) - self.offset_at(np.array([0.0]))[0]) / 3600.0
        return (h0 + e / 3600.0 + shift) % 24.0

    def changes(self) -> list[list[float]]:
        """``[[elapsed_s, offset_s], ...]`` of every change after the start (JSON-friendly)."""
        return [[float(c), float(o)] for c, o in zip(self.change_s[1:], self.offset_s[1:],
                                                     strict=True)]
