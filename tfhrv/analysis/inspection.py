"""What ``tfhrv inspect`` reports: quality, stationarity per window, the FFT-slope verdict.

Numpy layer only (no xarray), so that screening a cohort stays fast.
"""

from __future__ import annotations

import datetime as dt
from collections import Counter
from dataclasses import dataclass

import numpy as np

from tfhrv.analysis.pipeline import RecordAnalysis, ScanOptions, analyse_record
from tfhrv.analysis.policy import RecordAssessment
from tfhrv.signal.clean import CleanResult

__all__ = ["Inspection", "format_inspection", "inspect_record", "inspection_dict"]


@dataclass(frozen=True, slots=True)
class Inspection:
    """Quality, per-tier stationarity category counts and the whole-record assessment.

    A view of :class:`~tfhrv.analysis.pipeline.RecordAnalysis` (``analysis``) run with
    ``detail="battery"``: the same battery, categories and verdict that a scan computes.
    """

    analysis: RecordAnalysis

    @property
    def cleaned(self) -> CleanResult:
        """The cleaned recording."""
        return self.analysis.cleaned

    @property
    def assessment(self) -> RecordAssessment:
        """Whole-record exponents and the FFT-slope verdict."""
        return self.analysis.assessment

    @property
    def tiers(self) -> dict:
        """Per tier: window length and hop (s), number of windows, counts per category."""
        return {name: {"window_s": t.spec.window_s, "hop_s": t.spec.hop_s,
                       "n_windows": len(t.windows), "categories": t.category_counts()}
                for name, t in (("short", self.analysis.short), ("long", self.analysis.long))}


def inspect_record(cleaned: CleanResult, /, *, options: ScanOptions | None = None,
                   workers: int = 1) -> Inspection:
    """Run the stationarity battery on every window of both tiers and judge the record
    (:func:`~tfhrv.analysis.pipeline.analyse_record` with ``detail="battery"``; ``workers``
    processes share the windows, without changing the results)."""
    return Inspection(analyse_record(cleaned, options=options, detail="battery",
                                     workers=workers))


def _fit_dict(fit) -> dict | None:
    if fit is None:
        return None
    return {"value": fit.exponent, "ci": list(fit.ci), "se": fit.se,
            "slope": fit.slope_exponent, "kind": fit.kind, "n_obs": fit.n_obs,
            "fit_range": list(fit.fit_range), "fit_units": fit.fit_units}


def inspection_dict(ins: Inspection, /) -> dict:
    """JSON-friendly summary with a top-level ``verdict`` field."""
    cleaned = ins.cleaned
    rec = cleaned.recording
    start = rec.start.isoformat() if rec.start is not None else None
    v = ins.assessment.verdict
    return {
        "record": rec.record_id,
        "source": rec.source,
        "verdict": v.verdict,
        "verdict_detail": v.as_dict(),
        "start": start,
        "start_kind": ("timestamp" if isinstance(rec.start, dt.datetime)
                       else "time-of-day" if rec.start is not None else "unknown"),
        "quality": cleaned.quality.as_dict(),
        "stationarity": ins.tiers,
        "exponents": {k: _fit_dict(f) for k, f in ins.assessment.fits.items()},
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
    return "".join("#" if c >= 1 else ticks[min(7, int(np.floor(c * 8)))] for c in cov)


def _span(s: float) -> str:
    return f"{s / 3600:g} h" if s >= 3600 else f"{s / 60:g} min"


def _exp(fit, name: str) -> str:
    if fit is None:
        return f"{name} n/a"
    from tfhrv.calibration.calibrate import interval_text

    ci = interval_text(*fit.ci)
    return f"{name} {fit.exponent:.2f} {'[interval n/a]' if ci == 'n/a' else ci}"


def format_inspection(ins: Inspection, /) -> str:
    """A short block a researcher can read at a glance."""
    cleaned = ins.cleaned
    rec = cleaned.recording
    q = cleaned.quality
    start = rec.start.isoformat() if rec.start is not None else "unknown (elapsed time only)"
    removed = ", ".join(f"{k.replace('_', ' ')} {v}" for k, v in q.removed.items() if v) or "none"
    lines = [
        f"record        {rec.record_id}   ({rec.source})",
        f"start         {start}",
        f"recorded      {_hms(q.recorded_s)}   analysable {_hms(q.analysable_s)} "
        f"({100 * q.coverage:.1f} %)",
        f"intervals     {q.n_intervals:,} read, {q.n_kept:,} kept as NN "
        f"({100 * q.share_kept:.1f} %)",
        f"removed       {removed}",
        f"ectopy        {100 * q.ectopic_fraction:.2f} % of beats labelled non-sinus",
        f"gaps          {q.n_gaps} uncovered stretches >= {cleaned.options.gap_min_s:g} s; "
        f"longest {_hms(q.longest_gap_s)}",
        f"NN            mean {q.nn_mean_ms:.0f} ms, SDNN {q.nn_sd_ms:.0f} ms, "
        f"RMSSD {q.rmssd_ms:.0f} ms",
        f"coverage      per hour |{_hour_bar(q.hourly_coverage)}|  (# full, blank empty)",
    ]
    for name, t in ins.tiers.items():
        cats = Counter({k: v for k, v in t["categories"].items() if v})
        analysable = t["n_windows"] - t["categories"]["too-short"]
        parts = ", ".join(f"{k} {v}" for k, v in cats.items() if k != "too-short")
        label = "stationarity" if name == "short" else ""
        lines.append(f"{label:<14}{name} windows "
                     f"({_span(t['window_s'])}, hop {_span(t['hop_s'])}): {analysable} of "
                     f"{t['n_windows']} analysable" + (f": {parts}" if parts else ""))
    a = ins.assessment
    v = a.verdict
    lines.append(f"FFT slope     {v.verdict.upper()}   (classical 1e-4 to 1e-2 Hz whole-record "
                 f"slope; recommended estimator: {v.recommended})")
    for r in v.reasons:
        lines.append(f"  reason      {r}")
    for c in v.cautions:
        lines.append(f"  caution     {c}")
    f = a.fits
    lines.append("exponents     " + "   ".join([_exp(f["beta_spectral"], "beta FFT"),
                                             _exp(f["beta_wavelet"], "beta wavelet")]))
    lines.append(" " * 14 + "   ".join([_exp(f["alpha1"], "alpha1"),
                                             _exp(f["alpha2"], "alpha2"),
                                             _exp(f["alpha_long"], "alpha long")]))
    lines.append(" " * 14 + "(bias-corrected values with calibrated 95 % intervals)")
    slopes = [f"{label} {f[key].slope_exponent:.2f}" for key, label in (
        ("beta_spectral", "beta FFT"), ("beta_wavelet", "beta wavelet"), ("alpha1", "alpha1"),
        ("alpha2", "alpha2"), ("alpha_long", "alpha long")) if f[key] is not None]
    if slopes:
        lines.append("slopes        " + "   ".join(slopes))
        lines.append(" " * 14 + "(fitted slopes before calibration: the values published "
                     "ranges refer to)")
    lines.append(" " * 14 + "research use only, not a diagnosis")
    return "\n".join(lines)
