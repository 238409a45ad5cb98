"""The in-memory recording: beat times, intervals, labels, clock start, metadata."""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

__all__ = ["SINUS_LABELS", "KNOWN_LABELS", "MAX_SPAN_S", "Recording"]

#: Longest recording span accepted by default, s (31 days).  Common practice: multi-day
#: ambulatory ECG recordings last up to about 14 days; twice that leaves room for long
#: research recordings while refusing a beat time such as 1e9 s (31 years) that would make
#: the work grow with what a number claims instead of with the data.  The readers and
#: :func:`tfhrv.signal.clean.clean` take a ``max_span_s`` option for the rare valid case.
MAX_SPAN_S: float = 31 * 86400.0

#: Beat label codes treated as sinus (normal) beats.
SINUS_LABELS: frozenset[str] = frozenset({"N"})
#: Every label code the readers know: ``N`` normal; ``V`` ventricular ectopic; ``A``/``S``
#: supraventricular ectopic; ``F`` fusion; ``J`` junctional; ``E`` ventricular escape;
#: ``Q`` unclassifiable; ``X`` artifact.  Unknown codes are kept, warned about once and
#: treated as non-sinus.
KNOWN_LABELS: frozenset[str] = frozenset({"N", "V", "A", "S", "F", "J", "E", "Q", "X"})


@dataclass(frozen=True, slots=True)
class Recording:
    """A beat-interval recording, validated on construction.

    One entry per inter-beat interval: ``beat_time_s[i]`` is the time of the beat that
    ends interval ``i`` (seconds from the start of the recording), ``rr_ms[i]`` is that
    interval in milliseconds and ``labels[i]`` the annotation code of the ending beat.
    An interval that spans an unreadable stretch is kept as it is (it may be minutes or
    hours long); :func:`tfhrv.signal.clean.clean` detects it as a gap.

    Parameters
    ----------
    beat_time_s : array of float
        Strictly increasing beat times in s from the recording start, all >= 0.
    rr_ms : array of float
        Intervals in ms, all finite and > 0.
    labels : array of str
        Beat label codes, one per interval (see :data:`KNOWN_LABELS`).
    start : datetime.datetime or datetime.time or None
        Wall-clock time of ``beat_time_s == 0``: a full timestamp (naive means local clock
        time), a time of day only when the source gives no date, or ``None`` if unknown.
    record_id : str
        Identifier of the record.
    source : str or None
        The file it was read from.
    metadata : mapping
        Anything else the reader found (units inferred, columns used, header fields).
    clock : LocalClock or None
        UTC offsets over the record when they are known (an IANA zone, or the offsets of
        the file's timestamps); clock hours are then local civil time through a change.

    Raises
    ------
    ValueError
        On inconsistent lengths, non-finite or non-positive intervals, beat times that go
        backwards or repeat, or an empty recording.
    """

    beat_time_s: np.ndarray
    rr_ms: np.ndarray
    labels: np.ndarray
    start: dt.datetime | dt.time | None = None
    record_id: str = "record"
    source: str | None = None
    metadata: Mapping[str, Any] = field(default_factory=dict)
    clock: Any = None

    def __post_init__(self) -> None:
        t = np.array(self.beat_time_s, dtype=np.float64)
        rr = np.array(self.rr_ms, dtype=np.float64)
        lab = np.array(self.labels, dtype=str)
        if t.ndim != 1 or rr.ndim != 1 or lab.ndim != 1:
            raise ValueError("beat_time_s, rr_ms and labels must be 1-D")
        if not (t.size == rr.size == lab.size):
            raise ValueError(
                f"beat_time_s, rr_ms and labels must have one entry per interval, "
                f"got {t.size}, {rr.size} and {lab.size}"
            )
        if t.size == 0:
            raise ValueError("a recording needs at least one interval")
        if not np.all(np.isfinite(t)) or not np.all(np.isfinite(rr)):
            raise ValueError("beat times and intervals must be finite")
        if np.any(rr <= 0):
            first = int(np.argmax(rr <= 0))
            raise ValueError(f"intervals must be > 0 ms (first bad index {first})")
        if t[0] < 0:
            raise ValueError("beat times must be >= 0 s")
        steps = np.diff(t)
        if np.any(steps <= 0):
            raise ValueError(
                f"beat times must increase strictly (index {int(np.argmax(steps <= 0)) + 1})"
            )
        if self.start is not None and not isinstance(self.start, dt.datetime | dt.time):
            raise TypeError(f"start must be a datetime, a time or None, got {self.start!r}")
        if self.clock is not None:
            from tfhrv.signal.clock import LocalClock

            if not isinstance(self.clock, LocalClock):
                raise TypeError(f"clock must be a LocalClock or None, got {self.clock!r}")
            if not isinstance(self.start, dt.datetime):
                raise ValueError("a clock (UTC offsets) needs a start with a date")
        for name, arr in (("beat_time_s", t), ("rr_ms", rr), ("labels", lab)):
            arr.flags.writeable = False
            object.__setattr__(self, name, arr)
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))

    @property
    def n_beats(self) -> int:
        """Number of intervals."""
        return int(self.rr_ms.size)

    @property
    def duration_s(self) -> float:
        """Recorded span in s: from the beat that opens the first interval to the last beat."""
        return float(self.beat_time_s[-1] - (self.beat_time_s[0] - self.rr_ms[0] / 1000.0))

    @property
    def has_date(self) -> bool:
        """True when the start is a full timestamp (not only a time of day)."""
        return isinstance(self.start, dt.datetime)

    def with_start(self, start: dt.datetime | dt.time | None, clock: Any = None) -> Recording:
        """Return a copy with another wall-clock start (and its clock, if any)."""
        return Recording(
            self.beat_time_s, self.rr_ms, self.labels, start=start,
            record_id=self.record_id, source=self.source, metadata=dict(self.metadata),
            clock=clock,
        )

    def clock_hours(self, elapsed_s: Any, /) -> np.ndarray | None:
        """Local clock hour (0-24) at elapsed times (s), or None when the start is unknown.

        Through a daylight-saving change when :attr:`clock` knows the offsets.
        """
        if self.start is None:
            return None
        e = np.asarray(elapsed_s, dtype=np.float64)
        if self.clock is not None:
            return self.clock.clock_hours(self.start, e)
        tod = self.start.time() if isinstance(self.start, dt.datetime) else self.start
        h0 = tod.hour + tod.minute / 60 + tod.second / 3600 + tod.microsecond / 3.6e9
        return (h0 + e / 3600.0) % 24.0

    @classmethod
    def from_intervals(
        cls,
        rr_ms: Any,
        /,
        *,
        labels: Any = None,
        start: dt.datetime | dt.time | None = None,
        record_id: str = "record",
        source: str | None = None,
        metadata: Mapping[str, Any] | None = None,
    ) -> Recording:
        """Build a recording from intervals alone; beat times are their running sum."""
        rr = np.asarray(rr_ms, dtype=np.float64)
        lab = np.full(rr.shape, "N") if labels is None else np.asarray(labels, dtype=str)
        return cls(
            np.cumsum(rr) / 1000.0, rr, lab, start=start, record_id=record_id,
            source=source, metadata=metadata or {},
        )
