"""What ``tfhrv inspect`` reports: a plain dictionary and its short text rendering."""

from __future__ import annotations

import datetime as dt

import numpy as np

from tfhrv.clean import CleanResult

__all__ = ["format_inspection", "inspection_dict"]


def inspection_dict(cleaned: CleanResult, /) -> dict:
    """JSON-friendly summary of a cleaned recording."""
    rec = cleaned.recording
    start = rec.start.isoformat() if rec.start is not None else None
    return {
        "record": rec.record_id,
        "source": rec.source,
        "start": start,
        "start_kind": ("timestamp" if isinstance(rec.start, dt.datetime)
                       else "time-of-day" if rec.start is not None else "unknown"),
        "quality": cleaned.quality.as_dict(),
        "cleaning": {
            "min_ms": cleaned.options.min_ms,
            "max_ms": cleaned.options.max_ms,
            "max_relative_change": cleaned.options.max_relative_change,
            "gap_min_s": cleaned.options.gap_min_s,
        },
    }


def _hms(seconds: float) -> str:
    s = int(round(seconds))
    h, rem = divmod(s, 3600)
    m, sec = divmod(rem, 60)
    return f"{h}h{m:02d}m" if h else f"{m}m{sec:02d}s"


def _hour_bar(cov: np.ndarray) -> str:
    ticks = " .:-=+*#"
    return "".join(ticks[min(7, int(np.floor(c * 7.999)))] if c < 1 else "#" for c in cov)


def format_inspection(cleaned: CleanResult, /) -> str:
    """A short block a researcher can read at a glance."""
    rec = cleaned.recording
    q = cleaned.quality
    start = rec.start.isoformat() if rec.start is not None else "unknown (elapsed time only)"
    removed = ", ".join(f"{k.replace('_', ' ')} {v}" for k, v in q.removed.items() if v) or "none"
    lines = [
        f"record     {rec.record_id}   ({rec.source})",
        f"start      {start}",
        f"recorded   {_hms(q.recorded_s)}   analysable {_hms(q.analysable_s)} "
        f"({100 * q.coverage:.1f} %)",
        f"intervals  {q.n_intervals:,} read, {q.n_kept:,} kept as NN ({100 * q.share_kept:.1f} %)",
        f"removed    {removed}",
        f"ectopy     {100 * q.ectopic_share:.2f} % of beats labelled non-sinus",
        f"gaps       {q.n_gaps} uncovered stretches >= {cleaned.options.gap_min_s:g} s; "
        f"longest {_hms(q.longest_gap_s)}",
        f"NN         mean {q.nn_mean_ms:.0f} ms, SDNN {q.sdnn_ms:.0f} ms, "
        f"RMSSD {q.rmssd_ms:.0f} ms",
        f"coverage   per hour |{_hour_bar(q.hourly_coverage)}|  (# full, blank empty)",
    ]
    return "\n".join(lines)
