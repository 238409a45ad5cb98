"""Readers for beat-interval exports: one value per line, delimited tables, EDF+ annotations.

The format is found by sniffing the content (gzip is detected by its magic bytes, EDF by
its fixed header); every choice can be forced by an option.  Every problem a user can
cause raises :class:`tfhrv.core.errors.RecordFormatError` naming the file, the line (1-based,
in the decompressed text) and the problem.

Text formats
------------
Lines starting with ``#`` are comments; a comment of the form ``# key: value`` is kept as
metadata, and ``# start: <ISO 8601 timestamp or HH:MM[:SS]>`` and ``# record: <id>`` are
understood.  Blank lines are skipped.

*One value per line*: inter-beat intervals, in ms or s.  The unit is inferred from the
median (200-3000 -> ms, 0.2-3 -> s); anything else is ambiguous and needs ``units=``.

*Delimited table with a header*: comma, semicolon or tab; a decimal comma is accepted
when the delimiter is a semicolon or tab.  Columns are found by name (case-insensitive,
a unit in brackets or after an underscore is read):

========== ==============================================================================
role       accepted names
========== ==============================================================================
beat time  beat_time_s, time_s, time, t, beat_time, elapsed_s, seconds, time_ms (ms)
clock      timestamp, clock, datetime, date_time, wall_clock, clock_time
interval   rr_ms, nn_ms, ibi_ms, interval_ms, rr_s, nn_s, ibi_s, interval_s, rr, nn, ibi,
           interval
label      label, beat_label, annotation, beat_type, type, code
========== ==============================================================================

At least a beat-time, clock or interval column is needed.  With intervals only, beat
times are their running sum; with beat times only, intervals are their differences.
Two columns that could play the same role (``rr`` and ``nn``; a name repeated) are
refused as ambiguous; name the one to use.  When both beat times and intervals are given
they must agree: a beat time may not advance by less than the interval that ends on it
(10 % or 20 ms tolerance, common practice for timestamp rounding), and the median step
must be within 10 % of the median interval (a longer step is a gap); otherwise the units
of one column are wrong and the file is refused at the first line that disagrees.

Lines end only at ``\n`` or ``\r\n``; a Unicode line or paragraph separator, a NEL or
any other control character inside the text is refused with its line.

Limits
------
A recording may span at most ``max_span_s`` (default
:data:`tfhrv.signal.recording.MAX_SPAN_S`, 31 days; common practice); a beat time or an
interval sum beyond it is refused at its line, so that no work grows with what a single
number claims.

Clock time
----------
Timestamps with a UTC offset keep their offsets per beat (a change of offset moves the
clock hours).  Naive timestamps are local clock time; with ``tz`` (an IANA name such as
``Europe/Berlin``) they are read in that zone, through daylight-saving changes: a
spring-forward change leaves no invented gap, and the repeated hour of a fall-back change
is read as the second showing when the first would go backwards.

EDF+
----
Beat annotations are TAL annotations whose text is a beat label code (see
:data:`tfhrv.signal.recording.KNOWN_LABELS`) or ``R``/``beat`` (read as ``N``).  The start is the
EDF header's start date and time.  Other annotations are counted in the metadata.
"""

from __future__ import annotations

import datetime as dt
import gzip
import io
import re
import warnings
import zlib
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import numpy as np

from tfhrv.core.errors import RecordFormatError, UnknownLabelWarning
from tfhrv.core.files import short_text
from tfhrv.signal.clock import LocalClock, load_zone, localize
from tfhrv.signal.recording import KNOWN_LABELS, MAX_SPAN_S, Recording

__all__ = ["read_recording", "parse_start"]

Format = Literal["auto", "values", "table", "edf"]
Units = Literal["ms", "s"]

_TIME_NAMES = ("beat_time_s", "time_s", "time", "t", "beat_time", "elapsed_s", "seconds", "time_ms")
_CLOCK_NAMES = ("timestamp", "clock", "datetime", "date_time", "wall_clock", "clock_time")
_INTERVAL_NAMES = (
    "rr_ms", "nn_ms", "ibi_ms", "interval_ms", "rr_s", "nn_s", "ibi_s", "interval_s",
    "rr", "nn", "ibi", "interval",
)
_LABEL_NAMES = ("label", "beat_label", "annotation", "beat_type", "type", "code")
_EDF_BEAT_ALIASES = {"R": "N", "beat": "N", "BEAT": "N"}
_MAX_BYTES = 2_000_000_000


def parse_start(text: str) -> dt.datetime | dt.time:
    """Parse a start given as an ISO 8601 timestamp or a time of day ``HH:MM[:SS[.f]]``.

    Raises
    ------
    ValueError
        If ``text`` is neither.

    Examples
    --------
    >>> parse_start("2026-03-02T07:30:00")
    datetime.datetime(2026, 3, 2, 7, 30)
    >>> parse_start("08:04")
    datetime.time(8, 4)
    """
    s = str(text).strip()
    if re.fullmatch(r"\d{1,2}:\d{2}(:\d{2}(\.\d+)?)?", s):
        parts = s.split(":")
        h, m = int(parts[0]), int(parts[1])
        sec = float(parts[2]) if len(parts) == 3 else 0.0
        if not (0 <= h < 24 and 0 <= m < 60 and 0 <= sec < 60):
            raise ValueError(f"time of day out of range: {s!r}")
        whole = int(sec)
        return dt.time(h, m, whole, int(round((sec - whole) * 1e6)) % 1_000_000)
    try:
        return dt.datetime.fromisoformat(s.replace(" ", "T", 1) if "T" not in s else s)
    except ValueError:
        raise ValueError(
            f"start must be an ISO 8601 timestamp or a time of day HH:MM[:SS], got {s!r}"
        ) from None


def read_recording(
    path: str | Path,
    /,
    *,
    fmt: Format = "auto",
    units: Units | None = None,
    delimiter: str | None = None,
    decimal: Literal[".", ","] | None = None,
    time_column: str | None = None,
    clock_column: str | None = None,
    interval_column: str | None = None,
    label_column: str | None = None,
    start: str | dt.datetime | dt.time | None = None,
    record_id: str | None = None,
    tz: str | None = None,
    max_span_s: float = MAX_SPAN_S,
) -> Recording:
    """Read a beat-interval file (plain or gzip) into a :class:`~tfhrv.signal.recording.Recording`.

    Parameters
    ----------
    path : str or Path
        The file.  It is only read, never modified.
    fmt : {"auto", "values", "table", "edf"}
        Force a format instead of sniffing it.
    units : {"ms", "s"}, optional
        Unit of the intervals (and of a beat-time column named without a unit).
    delimiter, decimal : str, optional
        Force the table delimiter and the decimal mark.
    time_column, clock_column, interval_column, label_column : str, optional
        Column names to use instead of the documented defaults.
    start : str, datetime or time, optional
        Wall-clock start; overrides the file's own.
    record_id : str, optional
        Identifier; by default the file's ``# record:`` comment or the file name stem.
    tz : str, optional
        IANA time zone of the naive clock times (file timestamps and ``start``), e.g.
        ``"Europe/Berlin"``; needs a start with a date.  Clock hours are then local civil
        time through daylight-saving changes.
    max_span_s : float, default :data:`tfhrv.signal.recording.MAX_SPAN_S` (31 days)
        Longest accepted span from the recording start to the last beat, s.

    Returns
    -------
    Recording

    Raises
    ------
    RecordFormatError
        For every problem in the file, with the line number where it applies.
    """
    p = Path(path)
    name = str(path)
    if fmt not in ("auto", "values", "table", "edf"):
        raise ValueError(f"fmt must be one of ('auto', 'values', 'table', 'edf'), got {fmt!r}")
    if units not in (None, "ms", "s"):
        raise ValueError(f"units must be one of ('ms', 's'), got {units!r}")
    try:
        max_span = float(max_span_s)
    except (TypeError, ValueError):
        raise TypeError(f"max_span_s must be a number, got {max_span_s!r}") from None
    if not (np.isfinite(max_span) and max_span > 0):
        raise ValueError(f"max_span_s must be finite and > 0, got {max_span_s!r}")
    zone = load_zone(tz) if tz is not None else None
    if not p.exists():
        raise RecordFormatError(name, "no such file")
    if p.is_dir():
        raise RecordFormatError(name, "is a directory, not a recording file")
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise RecordFormatError(name, f"cannot be read ({exc.strerror})") from None
    if raw[:2] == b"\x1f\x8b":
        raw = _gunzip(raw, name)
    if not raw.strip():
        raise RecordFormatError(name, "is empty")
    stem = p.name
    for suffix in (".gz", ".csv", ".tsv", ".txt", ".edf"):
        stem = stem.removesuffix(suffix)
    start_override = _coerce_start(start, name)
    if fmt == "edf" or (fmt == "auto" and _looks_like_edf(raw)):
        rec = _read_edf(raw, name, max_span)
    else:
        text = _decode(raw, name)
        rec = _read_text(
            text, name, fmt=fmt, units=units, delimiter=delimiter, decimal=decimal,
            columns=(time_column, clock_column, interval_column, label_column),
            max_span=max_span, zone=zone,
        )
    unknown = rec.metadata.get("unknown_labels")
    if unknown:
        warnings.warn(
            f"{name}: unknown beat label code(s) {sorted(unknown)} ({sum(unknown.values())} "
            "beats) kept and treated as non-sinus",
            UnknownLabelWarning, stacklevel=2,
        )
    start_value = start_override if start_override is not None else rec.start
    clock = rec.clock if start_override is None else None
    start_value, clock = _apply_zone(start_value, clock, zone, rec, name)
    rid = record_id or str(rec.metadata.get("record") or stem)
    meta = dict(rec.metadata)
    if clock is not None:
        meta["time_zone"] = clock.zone or "offsets from the file"
    try:
        return Recording(
            rec.beat_time_s, rec.rr_ms, rec.labels, start=start_value, record_id=rid,
            source=name, metadata=meta, clock=clock,
        )
    except (TypeError, ValueError) as exc:
        raise RecordFormatError(name, str(exc)) from None


def _apply_zone(start, clock, zone, rec: Recording, name: str):
    """The start as an aware time and the clock of UTC offsets, when they can be known."""
    if zone is None:
        if isinstance(start, dt.datetime) and start.tzinfo is not None and clock is None:
            clock = LocalClock.fixed(start.utcoffset().total_seconds())
        return start, clock
    if not isinstance(start, dt.datetime):
        raise RecordFormatError(
            name, "a time zone needs a start with a date (daylight-saving changes depend "
            "on it); give one with --start YYYY-MM-DDTHH:MM or in the file")
    try:
        start = (localize(start, zone) if start.tzinfo is None else start.astimezone(zone))
    except ValueError as exc:
        raise RecordFormatError(name, f"start: {exc}") from None
    return start, LocalClock.from_zone(zone, start, float(rec.beat_time_s[-1]))


# --------------------------------------------------------------------------- helpers


def _coerce_start(start, name: str) -> dt.datetime | dt.time | None:
    if start is None or isinstance(start, dt.datetime | dt.time):
        return start
    try:
        return parse_start(start)
    except ValueError as exc:
        raise RecordFormatError(name, str(exc)) from None


def _gunzip(raw: bytes, name: str) -> bytes:
    try:
        out = gzip.decompress(raw)
    except (EOFError, OSError, zlib.error) as exc:
        raise RecordFormatError(name, f"gzip data is damaged or truncated ({exc})") from None
    if len(out) > _MAX_BYTES:
        raise RecordFormatError(name, "decompressed size exceeds 2 GB")
    return out


def _looks_like_edf(raw: bytes) -> bool:
    return len(raw) >= 256 and raw[:8] == b"0       " and raw[184:192].strip().isdigit()


def _decode(raw: bytes, name: str) -> str:
    if b"\x00" in raw[:65536]:
        raise RecordFormatError(name, "holds binary data (NUL bytes), not a text export")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise RecordFormatError(
            name, "holds bytes that are not UTF-8 text (binary or garbage data?)", line=line
        ) from None
    bad = re.search(r"[\x01-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u2028\u2029]", text)
    if bad:
        line = text.count("\n", 0, bad.start()) + 1
        raise RecordFormatError(name, f"holds a control or line-separator character "
                                f"(U+{ord(bad.group()):04X}); not a plain text export",
                                line=line)
    return text


class _Lines:
    """Non-comment, non-blank lines with their 1-based line numbers and the metadata."""

    def __init__(self, text: str) -> None:
        self.ends_with_newline = text.endswith("\n")
        # lines end only at \n (and \r\n): str.splitlines would also split at U+2028,
        # U+0085 and others, turning one line into two
        parts = text.split("\n")
        if parts and parts[-1] == "":
            parts.pop()
        stripped = [line.strip() for line in parts]
        skip = [i for i, s in enumerate(stripped) if not s or s[0] == "#"]
        self.metadata: dict[str, str] = {}
        for i in skip:
            m = re.match(r"#\s*([A-Za-z_][\w -]*?)\s*:\s*(.*)$", stripped[i])
            if m:
                key = m.group(1).strip().lower().replace(" ", "_")
                self.metadata[key] = m.group(2).strip()
        if skip:
            dropped = set(skip)
            keep = [i for i in range(len(stripped)) if i not in dropped]
            self.numbers = [i + 1 for i in keep]
            self.lines = [stripped[i] for i in keep]
        else:
            self.numbers = list(range(1, len(stripped) + 1))
            self.lines = stripped


def _read_text(text, name, *, fmt, units, delimiter, decimal, columns, max_span, zone
               ) -> Recording:
    body = _Lines(text)
    if not body.lines:
        raise RecordFormatError(name, "holds no data lines (only comments or blank lines)")
    first = body.lines[0]
    is_header = bool(re.search(r"[A-Za-z_]", first)) and not _is_number_token(first)
    if fmt == "values" or (fmt == "auto" and not is_header and _single_token(first)):
        rec = _read_values(body, name, units=units, decimal=decimal, max_span=max_span)
    elif fmt == "table" or is_header:
        if not is_header:
            raise RecordFormatError(
                name, "a table needs a header line naming its columns", line=body.numbers[0]
            )
        rec = _read_table(body, name, units=units, delimiter=delimiter, decimal=decimal,
                          columns=columns, max_span=max_span, zone=zone)
    else:
        raise RecordFormatError(
            name,
            "has several values per line but no header; add a header naming the columns "
            "(e.g. beat_time_s,rr_ms,label)",
            line=body.numbers[0],
        )
    start = None
    if "start" in body.metadata:
        try:
            start = parse_start(body.metadata["start"])
        except ValueError as exc:
            raise RecordFormatError(name, f"comment 'start': {exc}") from None
    meta = {**body.metadata, **rec.metadata}
    return Recording(rec.beat_time_s, rec.rr_ms, rec.labels, start=rec.start or start,
                     metadata=meta, clock=rec.clock if rec.start else None)


def _is_number_token(s: str) -> bool:
    return bool(re.fullmatch(r"[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?|[+-]?(nan|inf|infinity)",
                             s.strip(), flags=re.IGNORECASE))


def _single_token(line: str) -> bool:
    return not re.search(r"[;\t ]", line.strip()) and (line.count(",") <= 1)


def _to_floats(tokens: Sequence[str], numbers: Sequence[int], name: str, what: str,
               decimal_comma: bool) -> np.ndarray:
    toks = [t.strip().replace(",", ".") for t in tokens] if decimal_comma else tokens
    try:
        vals = np.array(toks, dtype=np.float64)
    except ValueError:
        for tok, ln in zip(toks, numbers, strict=True):
            try:
                float(tok)
            except ValueError:
                raise RecordFormatError(
                    name, f"{short_text(str(tok).strip())} in {what} is not a number", line=ln
                ) from None
        raise  # pragma: no cover - numpy and float() agree on what parses
    bad = ~np.isfinite(vals)
    if bad.any():
        i = int(np.argmax(bad))
        raise RecordFormatError(name, f"{short_text(toks[i].strip())} in {what} is not a "
                                "finite number", line=numbers[i])
    return vals


def _infer_units(values: np.ndarray, name: str, what: str) -> Units:
    med = float(np.median(values))
    if 200.0 <= med <= 3000.0:
        return "ms"
    if 0.2 <= med <= 3.0:
        return "s"
    raise RecordFormatError(
        name,
        f"cannot tell the unit of {what} (median {med:g} is neither a plausible interval in ms "
        "nor in s); give the unit with --units ms or --units s",
    )


def _check_mixed_units(vals: np.ndarray, unit: Units, numbers: Sequence[int], name: str) -> None:
    if unit == "ms":
        bad = vals < 20.0
        if bad.any():
            i = int(np.argmax(bad))
            raise RecordFormatError(
                name, f"mixed units: interval {vals[i]:g} looks like seconds while the file "
                "is in ms", line=numbers[i])
    else:
        big = (vals >= 200.0) & (vals <= 3000.0)
        run = big[1:] & big[:-1]
        if run.any():
            i = int(np.argmax(run)) + 1
            raise RecordFormatError(
                name, f"mixed units: interval {vals[i]:g} looks like ms while the file is in s",
                line=numbers[i])


def _check_truncated(body: _Lines, name: str, n_fields: int, sep: str | None) -> None:
    last = body.lines[-1]
    count = len(last.split(sep)) if sep else 1
    if not body.ends_with_newline and count < n_fields:
        raise RecordFormatError(name, "the last line is truncated (too few fields)",
                                line=body.numbers[-1])


def _check_span(t: np.ndarray, numbers: Sequence[int], name: str, max_span: float,
                what: str) -> None:
    """Refuse a record whose beats reach past ``max_span`` s from its start."""
    over = ~(t <= max_span)  # also NaN/inf from an overflowing sum
    if over.any():
        i = int(np.argmax(over))
        raise RecordFormatError(
            name, f"{what} reaches {t[i]:.6g} s from the start, beyond the limit of "
            f"{max_span / 86400:g} days ({max_span:g} s); physiologically impossible for one "
            "recording (a unit or typing error?); for a longer valid record raise the limit "
            "with --max-span-days", line=numbers[i])


def _read_values(body: _Lines, name: str, *, units, decimal, max_span) -> Recording:
    for ln, line in zip(body.numbers, body.lines, strict=True):
        if not _single_token(line):
            raise RecordFormatError(name, f"expected one value per line, got "
                                    f"{short_text(line, 40)}", line=ln)
    decimal_comma = decimal == "," or (decimal is None and any("," in s for s in body.lines[:50]))
    vals = _to_floats(body.lines, body.numbers, name, "the intervals", decimal_comma)
    _check_positive(vals, body.numbers, name)
    unit = units or _infer_units(vals, name, "the intervals")
    _check_mixed_units(vals, unit, body.numbers, name)
    rr = vals * (1000.0 if unit == "s" else 1.0)
    t = np.cumsum(rr) / 1000.0
    _check_span(t, body.numbers, name, max_span, "the running sum of the intervals")
    _check_increasing(t, body.numbers, name)
    labels = np.full(rr.size, "N")
    meta = {"format": "values", "interval_unit": unit, "units_inferred": units is None}
    return Recording(t, rr, labels, metadata=meta)


def _check_increasing(t: np.ndarray, numbers: Sequence[int], name: str) -> None:
    """Refuse beat times that repeat in floating point (a huge value swallowing the next)."""
    steps = np.diff(t)
    bad = ~(steps > 0)
    if bad.any():
        i = int(np.argmax(bad)) + 1
        raise RecordFormatError(name, f"beat time does not advance ({t[i - 1]:.17g} then "
                                f"{t[i]:.17g} s; an interval too small next to a huge one?)",
                                line=numbers[i])


def _check_agreement(t: np.ndarray, rr_ms: np.ndarray, numbers: Sequence[int], name: str,
                     tcol: str, rcol: str) -> None:
    """Beat times and intervals given together must describe the same beats."""
    if t.size < 3:
        return
    step = np.diff(t)
    rr_s = rr_ms[1:] / 1000.0
    ratio = float(np.median(step / rr_s))
    if not 0.9 <= ratio <= 1.1:
        raise RecordFormatError(
            name, f"beat times in column {tcol!r} and intervals in column {rcol!r} disagree: "
            f"the median beat-time step is {ratio:.3g} times the median interval (one of the "
            "two columns is in other units than its name says?)", line=numbers[1])
    short = step < rr_s - np.maximum(0.1 * rr_s, 0.02)
    if short.any():
        i = int(np.argmax(short))
        raise RecordFormatError(
            name, f"beat time advances {step[i]:.4g} s but the interval ending on that beat "
            f"is {rr_s[i]:.4g} s (column {tcol!r} vs {rcol!r})", line=numbers[i + 1])


def _check_positive(vals: np.ndarray, numbers: Sequence[int], name: str) -> None:
    bad = vals <= 0
    if bad.any():
        i = int(np.argmax(bad))
        raise RecordFormatError(name, f"interval {vals[i]:g} is not > 0", line=numbers[i])


def _norm(col: str) -> str:
    c = col.strip().strip('"').strip("'").lower()
    c = re.sub(r"\s*[\[(]\s*(ms|s|sec|seconds|msec)\s*[\])]\s*$", lambda m: "_" + m.group(1), c)
    c = c.replace("sec", "s") if c.endswith("_sec") else c
    c = c.replace("msec", "ms")
    return re.sub(r"[\s-]+", "_", c)


def _pick(header: list[str], wanted: str | None, names: Sequence[str], name: str,
          role: str, option: str) -> int | None:
    normed = [_norm(h) for h in header]
    if wanted is not None:
        w = _norm(wanted)
        if w not in normed:
            raise RecordFormatError(
                name, f"no column named {short_text(wanted)} for the {role} (columns: "
                f"{short_text(', '.join(header), 200)})", line=1)
        if normed.count(w) > 1:
            raise RecordFormatError(name, f"the header names column {short_text(wanted)} "
                                    f"{normed.count(w)} times", line=1)
        return normed.index(w)
    found = [i for i, h in enumerate(normed) if h in names]
    if len(found) > 1:
        cols = " and ".join(short_text(header[i], 40) for i in found)
        raise RecordFormatError(
            name, f"ambiguous columns: {cols} could each be the {role}; say which with "
            f"{option}", line=1)
    return found[0] if found else None


def _sniff_delimiter(header: str) -> str:
    counts = {d: header.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=counts.get)
    return best if counts[best] > 0 else ","


@dataclass(frozen=True, slots=True)
class _TableColumns:
    """Where the columns of a table export are: its delimiter, header and the index of the
    beat-time, clock, interval and label columns (None when absent)."""

    sep: str
    header: list[str]
    time: int | None
    clock: int | None
    interval: int | None
    label: int | None


def _table_columns(body: _Lines, name: str, delimiter, columns) -> _TableColumns:
    """The delimiter (given or sniffed from the header) and the columns the table holds."""
    sep = delimiter or _sniff_delimiter(body.lines[0])
    header = [h.strip() for h in body.lines[0].split(sep)]
    if len(header) > 64:
        raise RecordFormatError(name, f"the header has {len(header)} columns (at most 64 "
                                "are read); is this a beat-interval table?", line=body.numbers[0])
    if len(body.lines) < 2:
        raise RecordFormatError(name, "has a header but no data rows", line=body.numbers[0])
    want_time, want_clock, want_interval, want_label = columns
    found = _TableColumns(
        sep, header,
        _pick(header, want_time, _TIME_NAMES, name, "beat time", "--time-column"),
        _pick(header, want_clock, _CLOCK_NAMES, name, "clock timestamp", "--clock-column"),
        _pick(header, want_interval, _INTERVAL_NAMES, name, "interval", "--interval-column"),
        _pick(header, want_label, _LABEL_NAMES, name, "beat label", "--label-column"))
    if found.time is None and found.clock is None and found.interval is None:
        raise RecordFormatError(
            name, "no beat-time, clock or interval column found among "
            f"{short_text(', '.join(header), 200)}; name them (e.g. beat_time_s, rr_ms, "
            "label) or use --time-column/--interval-column", line=body.numbers[0])
    return found


def _table_fields(body: _Lines, name: str, sep: str, n_fields: int) -> list[list[str]]:
    """The data rows split into columns, after checking that every row has the header's
    number of fields (the first row that has not is named)."""
    _check_truncated(body, name, n_fields, sep)
    rows, numbers = body.lines[1:], body.numbers[1:]
    counts = np.fromiter((r.count(sep) for r in rows), dtype=np.int64, count=len(rows))
    wrong = counts != n_fields - 1
    if wrong.any():
        i = int(np.argmax(wrong))
        raise RecordFormatError(
            name, f"expected {n_fields} fields as in the header, got {counts[i] + 1}",
            line=numbers[i])
    flat = sep.join(rows).split(sep)
    return [flat[k::n_fields] for k in range(n_fields)]


def _table_intervals(tokens: list[str], column: str, numbers: list[int], name: str,
                     units, decimal_comma: bool, meta: dict) -> np.ndarray:
    """The interval column in ms: units from ``units``, the column name (``_s``/``_ms``)
    or the values, checked positive and not mixing seconds and milliseconds."""
    rr_raw = _to_floats(tokens, numbers, name, f"column {column!r}", decimal_comma)
    _check_positive(rr_raw, numbers, name)
    hname = _norm(column)
    unit = units or ("s" if hname.endswith("_s") else "ms" if hname.endswith("_ms") else None)
    unit = unit or _infer_units(rr_raw, name, f"column {column!r}")
    meta["interval_unit"] = unit
    _check_mixed_units(rr_raw, unit, numbers, name)
    return rr_raw * (1000.0 if unit == "s" else 1.0)


def _check_beat_times(t: np.ndarray, numbers: list[int], name: str, max_span: float, *,
                      from_clock: bool) -> None:
    """Beat times must increase and stay within ``max_span``."""
    steps = np.diff(t)
    bad = steps <= 0
    if bad.any():
        i = int(np.argmax(bad)) + 1
        kind = "repeats" if steps[i - 1] == 0 else "goes backwards"
        hint = ("; if the clocks fell back for daylight saving, give the time zone "
                "with --tz" if from_clock and kind == "goes backwards" else "")
        raise RecordFormatError(name, f"beat time {kind} ({t[i - 1]:g} then {t[i]:g})"
                                + hint, line=numbers[i])
    _check_span(t, numbers, name, max_span, "a beat time")


def _table_labels(tokens: list[str], n_intervals: int, name: str, meta: dict) -> np.ndarray:
    """The beat labels, one per interval (a label column that also labels the first beat,
    which ends no interval, loses its first entry)."""
    labels = np.char.strip(np.char.strip(np.array(tokens, dtype=str)), '"')
    if n_intervals < labels.size:
        labels = labels[1:]
    return _check_labels(labels, name, meta)


def _read_table(body: _Lines, name: str, *, units, delimiter, decimal, columns, max_span,
                zone) -> Recording:
    """A delimited table with a header: beat times, clock times and/or intervals, and
    optionally labels (columns found by name, :func:`_table_columns`)."""
    col = _table_columns(body, name, delimiter, columns)
    header, numbers = col.header, body.numbers[1:]
    cols = _table_fields(body, name, col.sep, len(header))
    i_time, i_clock, i_rr = col.time, col.clock, col.interval
    sample = [tok for i in (i_time, i_rr) if i is not None for tok in cols[i][:50]]
    decimal_comma = decimal == "," or (decimal is None and col.sep != "," and any(
        "," in tok for tok in sample))
    meta: dict[str, object] = {"format": "table", "delimiter": col.sep,
                               "columns": ",".join(header)}
    # a "time" column holding clock strings is a clock column
    if i_time is not None and i_clock is None and ":" in cols[i_time][0]:
        i_clock, i_time = i_time, None
    rr = None
    if i_rr is not None:
        rr = _table_intervals(cols[i_rr], header[i_rr], numbers, name, units, decimal_comma,
                              meta)
    start = t = clock = None
    if i_clock is not None:
        t, start, clock = _clock_to_seconds(cols[i_clock], numbers, name, rr, zone, max_span)
        meta["time_source"] = f"clock column {header[i_clock]!r}"
    elif i_time is not None:
        t = _to_floats(cols[i_time], numbers, name, f"column {header[i_time]!r}", decimal_comma)
        if _norm(header[i_time]).endswith("_ms"):
            t = t / 1000.0
        meta["time_source"] = f"column {header[i_time]!r}"
    if t is not None:
        _check_beat_times(t, numbers, name, max_span, from_clock=i_clock is not None)
        if rr is not None and i_clock is None:
            _check_agreement(t, rr, numbers, name, header[i_time], header[i_rr])
    if rr is None:
        rr = np.diff(t) * 1000.0
        t = t[1:]
        numbers = numbers[1:]
        if rr.size == 0:
            raise RecordFormatError(name, "needs at least two beat times to form an interval")
        meta["intervals_from"] = "beat time differences"
    elif t is None:
        t = np.cumsum(rr) / 1000.0
        _check_span(t, numbers, name, max_span, "the running sum of the intervals")
        _check_increasing(t, numbers, name)
    if t[0] < 0:
        raise RecordFormatError(name, f"beat time {t[0]:g} s is negative", line=numbers[0])
    labels = (_table_labels(cols[col.label], rr.size, name, meta) if col.label is not None
              else np.full(rr.size, "N"))
    return Recording(t, rr, labels, start=start, metadata=meta,
                     clock=clock if isinstance(start, dt.datetime) else None)


def _check_labels(labels: np.ndarray, name: str, meta: dict) -> np.ndarray:
    empty = labels == ""
    if empty.any():
        labels = labels.copy()
        labels[empty] = "Q"
    uniq, counts = np.unique(labels, return_counts=True)
    unknown = {str(u): int(c) for u, c in zip(uniq, counts, strict=True) if u not in KNOWN_LABELS}
    if unknown:
        meta["unknown_labels"] = unknown
    return labels


def _clock_to_seconds(tokens, numbers, name, rr, zone, max_span):
    stamps: list[dt.datetime] = []
    day = dt.date(2000, 1, 1)
    time_only = None
    prev_tod = None
    prev_aware = None
    for tok, ln in zip(tokens, numbers, strict=True):
        s = tok.strip().strip('"')
        try:
            v = parse_start(s)
        except ValueError:
            raise RecordFormatError(name, f"clock time {short_text(s, 40)} is not a timestamp "
                                    "or HH:MM:SS", line=ln) from None
        is_tod = isinstance(v, dt.time)
        if time_only is None:
            time_only = is_tod
            if is_tod and zone is not None:
                raise RecordFormatError(name, "a time zone needs dates in the clock column "
                                        "(daylight-saving changes depend on them)", line=ln)
        elif time_only != is_tod:
            raise RecordFormatError(name, "clock column mixes dates and bare times of day",
                                    line=ln)
        if is_tod:
            back = prev_tod is not None and _tod_seconds(prev_tod) - _tod_seconds(v) > 43200
            if back:
                day = day + dt.timedelta(days=1)  # midnight rollover
            prev_tod = v
            stamps.append(dt.datetime.combine(day, v))
        elif zone is not None:
            try:
                v = localize(v, zone, after=prev_aware) if v.tzinfo is None else v
            except ValueError as exc:
                raise RecordFormatError(name, str(exc), line=ln) from None
            prev_aware = v
            stamps.append(v)
        else:
            stamps.append(v)
    aware = [s.tzinfo is not None for s in stamps]
    if any(aware) and not all(aware):
        raise RecordFormatError(name, "clock column mixes time zones and naive times")
    first = stamps[0]
    clock = None
    if all(aware):
        utc = [s.astimezone(dt.UTC) for s in stamps]
        secs = np.array([(u - utc[0]).total_seconds() for u in utc])
        offsets = np.array([s.utcoffset().total_seconds() for s in stamps])
    else:
        secs = np.array([(s - first).total_seconds() for s in stamps])
    lead = (rr[0] / 1000.0) if rr is not None else 0.0
    _check_span(secs + lead, numbers, name, max_span, "a clock time")
    origin = first - dt.timedelta(seconds=lead)
    if all(aware):
        if zone is not None:
            origin = origin.astimezone(dt.UTC).astimezone(zone)
            clock = LocalClock.from_zone(zone, origin, float(secs[-1] + lead))
        else:
            clock = LocalClock.from_offsets(secs + lead, offsets)
    start = origin.time() if time_only else origin
    return secs + lead, start, clock


def _tod_seconds(t: dt.time) -> float:
    return t.hour * 3600 + t.minute * 60 + t.second + t.microsecond / 1e6


def _read_edf(raw: bytes, name: str, max_span: float) -> Recording:
    import edfio

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            edf = edfio.read_edf(io.BytesIO(raw))
            annotations = list(edf.annotations)
            startdate = edf.startdate
            starttime = edf.starttime
    except Exception as exc:  # edfio raises several types for damaged headers
        raise RecordFormatError(name, f"is not a readable EDF+ file ({exc})") from None
    onsets, labels, other = [], [], 0
    for ann in annotations:
        text = ann.text.strip()
        code = _EDF_BEAT_ALIASES.get(text, text)
        if code in KNOWN_LABELS or (len(code) == 1 and code.isalpha() and code.isupper()):
            onsets.append(float(ann.onset))
            labels.append(code)
        else:
            other += 1
    if len(onsets) < 2:
        raise RecordFormatError(name, "EDF+ file has fewer than two beat annotations")
    order = np.argsort(onsets, kind="stable")
    t = np.asarray(onsets)[order]
    if not np.all(np.isfinite(t)) or t[0] < 0:
        raise RecordFormatError(name, "EDF+ beat annotation onsets must be finite and >= 0")
    _check_span(t, [None] * t.size, name, max_span, "a beat annotation")
    lab = np.asarray(labels, dtype=str)[order]
    steps = np.diff(t)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        raise RecordFormatError(name, f"two beat annotations at the same time ({t[i]:g} s)")
    meta: dict[str, object] = {"format": "edf+", "other_annotations": other}
    lab = _check_labels(lab[1:], name, meta)
    start = None
    try:
        if startdate is not None and starttime is not None:
            start = dt.datetime.combine(startdate, starttime)
    except Exception:  # anonymised dates raise in edfio
        start = starttime
    return Recording(t[1:], steps * 1000.0, lab, start=start, metadata=meta)
