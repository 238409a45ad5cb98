"""Options of the day/night analysis and the sleep-log reader (no numpy, xarray or pandas).

Kept apart from :mod:`tfhrv.circadian.days` so that the command line can take the options
and read a sleep log before the heavier imports of the analysis itself.
"""

from __future__ import annotations

import csv
import datetime as dt
from dataclasses import dataclass
from pathlib import Path

from tfhrv.core.errors import RecordFormatError

__all__ = ["CircadianOptions", "read_sleep_log", "sleep_log_records"]


@dataclass(frozen=True, slots=True)
class CircadianOptions:
    """Options of the circadian analysis.

    ``night_hours``/``day_hours`` are clock windows (start, end) in hours, wrapping past
    midnight when start > end; ``period`` = "auto" uses the clock when the start is known
    and the inferred rest period otherwise, "clock" insists on the clock, "inferred" always
    infers.  ``rest_hours`` is the length of the inferred rest block; ``block_hours`` the
    bootstrap block length (about an hour, to respect autocorrelation; never less than the
    tier's window length, so that overlapping windows are resampled together); ``min_coverage``
    the share of a window that must hold NN intervals for it to count.
    """

    night_hours: tuple[float, float] = (0.0, 6.0)
    day_hours: tuple[float, float] = (10.0, 20.0)
    period: str = "auto"
    rest_hours: float = 6.0
    block_hours: float = 1.0
    n_boot: int = 999
    min_coverage: float = 0.5
    seed: int = 0

    def __post_init__(self) -> None:
        if self.period not in ("auto", "clock", "inferred"):
            raise ValueError(
                f"period must be one of ('auto', 'clock', 'inferred'), got {self.period!r}")
        for name in ("night_hours", "day_hours"):
            a, b = getattr(self, name)
            if not (0 <= a <= 24 and 0 <= b <= 24) or a == b:
                raise ValueError(f"{name} must be two different clock hours in [0, 24], "
                                 f"got {(a, b)!r}")


_SLEEP_LOG_COLUMNS = {"record", "rest_start", "rest_end"}


def _sleep_log_rows(p: Path, fh) -> csv.DictReader:
    """A DictReader over an open sleep log whose header has every required column."""
    reader = csv.DictReader(fh)
    missing = _SLEEP_LOG_COLUMNS - set(reader.fieldnames or ())
    if missing:
        raise RecordFormatError(str(p), f"sleep log lacks column(s) {sorted(missing)}", line=1)
    return reader


def sleep_log_records(path: str | Path, /) -> set[str]:
    """The record ids a sleep-log CSV has rows for (header checked, rows not parsed)."""
    p = Path(path)
    if not p.is_file():
        raise RecordFormatError(str(p), "no such sleep-log file")
    with p.open(newline="", encoding="utf-8-sig") as fh:
        return {(row.get("record") or "").strip() for row in _sleep_log_rows(p, fh)}


def read_sleep_log(path: str | Path, record_id: str, /) -> list[tuple[dt.datetime, dt.datetime]]:
    """Rest periods of one record from a sleep-log CSV.

    The CSV has a header with columns ``record``, ``rest_start`` and ``rest_end`` (ISO 8601
    timestamps); one row per rest period.  Rows of other records are ignored.

    Raises
    ------
    RecordFormatError
        Naming the file and line of a bad row, or when the record has no row.
    """
    p = Path(path)
    if not p.is_file():
        raise RecordFormatError(str(p), "no such sleep-log file")
    out = []
    try:
        with p.open(newline="", encoding="utf-8-sig") as fh:
            reader = _sleep_log_rows(p, fh)
            for row in reader:
                i = reader.line_num
                if None in row or any(v is None for v in row.values()):
                    raise RecordFormatError(str(p), "row has a different number of fields "
                                            "than the header", line=i)
                if row["record"].strip() != record_id:
                    continue
                try:
                    a = dt.datetime.fromisoformat(row["rest_start"].strip())
                    b = dt.datetime.fromisoformat(row["rest_end"].strip())
                except ValueError:
                    raise RecordFormatError(str(p), "rest_start/rest_end must be ISO 8601 "
                                            "timestamps", line=i) from None
                if (a.tzinfo is None) != (b.tzinfo is None):
                    raise RecordFormatError(str(p), "rest_start and rest_end mix a UTC "
                                            "offset and a naive time", line=i)
                if b <= a:
                    raise RecordFormatError(str(p), "rest_end is not after rest_start",
                                            line=i)
                out.append((a, b))
    except UnicodeDecodeError:
        raise RecordFormatError(str(p), "is not a UTF-8 text (CSV) file") from None
    except csv.Error as exc:
        raise RecordFormatError(str(p), f"is not a readable CSV file ({exc})") from None
    if not out:
        raise RecordFormatError(str(p), f"no rest period for record {record_id!r}")
    return out
