"""What ``tfhrv inspect`` reports: quality, stationarity per window, the FFT-slope verdict.

Numpy layer only (no xarray), so that screening a cohort stays fast.
"""

from __future__ import annotations

import datetime as dt
from collections import Counter
from dataclasses import dataclass

import numpy as np

from tfhrv.analysis.pipeline import RecordAnalysis, ScanOptions, analyse_record
from tfhrv.analysis.record import RecordAssessment
from tfhrv.core.progress import SILENT, Progress
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
                   progress: Progress = SILENT, workers: int = 1) -> Inspection:
    """Run the stationarity battery on every window of both tiers and judge the record
    (:func:`~tfhrv.analysis.pipeline.analyse_record` with ``detail="battery"``; ``workers``
    processes share the windows, without changing the results).

    ``progress`` (default: silent) is told each window and the whole-record stage.
    """
    return Inspection(analyse_record(cleaned, options=options, detail="battery",
                                     progress=progress, workers=workers))


def _fit_dict(fit) -> dict | None:
    if fit is None:
        return None
    return {"value": fit.exponent, "ci": list(fit.ci), "se": fit.se,
            "slope": fit.slope_exponent, "kind": fit.kind, "n_obs": fit.n_obs,
            "withheld": fit.withheld,
            "fit_range": list(fit.fit_range), "fit_units": fit.fit_units}


def _missing_reason(path: str, ins: Inspection) -> str:
    """Why a value of :func:`inspection_dict` is null."""
    q = ins.cleaned.quality
    if path.startswith("verdict_detail.checks."):
        return "could not be computed on this record (see verdict_detail.cautions)"
    if path.startswith("quality."):
        return f"not computable from {q.n_kept} kept NN intervals"
    fit = (ins.assessment.fits.get(path.split(".")[1])
           if path.startswith(("exponents.", "block_intervals.")) else None)
    if fit is not None and fit.withheld:  # the fit stands, the data hold no exponent
        return f"withheld, {fit.withheld}"
    if path.startswith("exponents.") and ".ci[" in path:
        return ("open interval end: the calibration cannot bound the exponent on this side "
                "at this length")
    if path.startswith("exponents."):
        return (f"not estimable on this record ({q.n_kept} NN intervals, "
                f"{q.recorded_s / 3600:.2g} h recorded): too short for the fit range, or "
                "too few scales in it")
    return "not a finite number"


def inspection_dict(ins: Inspection, /) -> dict:
    """Summary for JSON with a top-level ``verdict`` field; strict JSON (RFC 8259).

    Values that are not finite numbers are None (JSON ``null``), as is the exponent that
    could not be estimated; ``missing`` maps the path of each such value (dotted keys) to
    the reason.
    """
    from tfhrv.core.jsonsafe import to_strict

    cleaned = ins.cleaned
    rec = cleaned.recording
    start = rec.start.isoformat() if rec.start is not None else None
    v = ins.assessment.verdict
    nulls: dict[str, str] = {}
    out = to_strict(_inspection_fields(ins, rec, start, v), reasons=nulls)
    missing = {k: _missing_reason(k, ins) for k in nulls}
    missing.update({f"exponents.{k}": _missing_reason(f"exponents.{k}", ins)
                    for k, f in ins.assessment.fits.items() if f is None})
    out["missing"] = dict(sorted(missing.items()))
    return out


def _inspection_fields(ins: Inspection, rec, start, v) -> dict:
    cleaned = ins.cleaned
    return {
        "record": rec.record_id,
        "source": rec.source,
        "verdict": v.verdict,
        "verdict_detail": v.as_dict(),
        "start": start,
        "time_zone": (rec.clock.zone or "UTC offsets of the file") if rec.clock else None,
        "start_kind": ("timestamp" if isinstance(rec.start, dt.datetime)
                       else "time-of-day" if rec.start is not None else "unknown"),
        "quality": cleaned.quality.as_dict(),
        "stationarity": ins.tiers,
        "exponents": {k: _fit_dict(f) for k, f in ins.assessment.fits.items()},
        "level_change_effect": (ins.assessment.effect.as_dict()
                                if ins.assessment.effect is not None else None),
        "block_intervals": {k: (b.as_dict() if b is not None else None)
                            for k, b in ins.assessment.block.items()},
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


#: characters of the hourly coverage bar: character k stands for a coverage in
#: [k/8, (k+1)/8), the last one also for full hours
_TICKS = " .:-=+*#"


def _hour_bar(cov: np.ndarray) -> str:
    return "".join(_TICKS[-1] if c >= 1 else _TICKS[min(7, max(0, int(np.floor(c * 8))))]
                   for c in np.nan_to_num(np.asarray(cov, float)))


def _hour_legend() -> str:
    """What every character of :func:`_hour_bar` means, in percent coverage of the hour."""
    parts = [f"{c if c != ' ' else 'blank'} {'>=' if k else '<'} "
             f"{100 * max(k, 1) / 8:.1f}".rstrip("0").rstrip(".")
             for k, c in reversed(list(enumerate(_TICKS)))]
    return ", ".join(parts) + " % of the hour covered"


def _span(s: float) -> str:
    return f"{s / 3600:g} h" if s >= 3600 else f"{s / 60:g} min"


def _exp(fit, name: str) -> str:
    if fit is None:
        return f"{name} n/a"
    if fit.withheld:
        return f"{name} none ({fit.withheld.split(':')[0]})"
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
        f"coverage      per hour |{_hour_bar(q.hourly_coverage)}|",
        f"              ({_hour_legend()})",
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
    lines.append(" " * 14 + "(the recommendation is for the whole-record long-range slope; "
                 "each window's primary")
    lines.append(" " * 14 + "estimator is chosen separately, by its stationarity category and "
                 "narrowest interval: tfhrv scan)")
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
    for key, label in (("beta_spectral", "beta FFT"), ("beta_wavelet", "beta wavelet"),
                       ("alpha1", "alpha1"), ("alpha2", "alpha2"), ("alpha_long", "alpha long")):
        if f[key] is not None and f[key].withheld:
            lines.append(f"  no exponent {label}: {f[key].withheld}")
    blk = [f"{label} [{b.ci[0]:.2f}, {b.ci[1]:.2f}]" for key, label in (
        ("beta_spectral", "beta FFT"), ("beta_wavelet", "beta wavelet"), ("alpha1", "alpha1"),
        ("alpha2", "alpha2"), ("alpha_long", "alpha long"))
        if (b := a.block.get(key)) is not None and np.isfinite(b.se)
        and np.all(np.isfinite(b.ci))]
    if blk:
        lines.append("through day   " + "   ".join(blk))
        lines.append(" " * 14 + "(95 % intervals over 4-h blocks, heterogeneity through the day "
                     "included: quote these)")
    e = a.effect
    if e is not None:
        lines.append(f"level effect  {e.effect:+.2f} [{e.ci[0]:+.2f}, {e.ci[1]:+.2f}] on the "
                     f"FFT beta from {len(e.step_ms)} level changes ("
                     + ", ".join(f"{s:+.0f} ms" for s in e.step_ms) + ")")
    slopes = [f"{label} {f[key].slope_exponent:.2f}" for key, label in (
        ("beta_spectral", "beta FFT"), ("beta_wavelet", "beta wavelet"), ("alpha1", "alpha1"),
        ("alpha2", "alpha2"), ("alpha_long", "alpha long"))
        if f[key] is not None and not f[key].withheld]
    if slopes:
        lines.append("slopes        " + "   ".join(slopes))
        lines.append(" " * 14 + "(fitted slopes before calibration: the values published "
                     "ranges refer to)")
    lines.append(" " * 14 + "research use only, not a diagnosis")
    return "\n".join(lines)
