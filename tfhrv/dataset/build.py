"""The scan file built from the record pipeline's results.

Groups ``/nn``, ``/short``, ``/long`` and ``/record``, every variable declared in
:mod:`tfhrv.dataset.schema`; the root carries the provenance.  The numbers come from
:func:`tfhrv.analysis.pipeline.analyse_record`; nothing is computed here but labels.
:func:`build_groups` gives plain numpy groups (what ``tfhrv scan`` writes, without
importing xarray); :func:`build_tree` the same content as an ``xarray.DataTree``.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from tfhrv.analysis.multifractal_fits import SHORT_NOTE
from tfhrv.analysis.pipeline import (
    EXPONENTS,
    RecordAnalysis,
    ScanOptions,
    TierAnalysis,
    analyse_record,
)
from tfhrv.analysis.verdict import VERDICTS
from tfhrv.core.caution import CAUTION
from tfhrv.core.progress import SILENT, Progress
from tfhrv.dataset.groups import Group, as_datatree
from tfhrv.dataset.netcdf import file_sha256
from tfhrv.dataset.schema import BANDS, BOUNDS, variable
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.multifractal import DEFAULT_Q
from tfhrv.estimators.spectral import TASK_FORCE_BANDS
from tfhrv.signal.clean import CleanResult

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

__all__ = ["build_groups", "build_tree", "provenance", "scan"]


def provenance(*, source: str | None, parameters: dict, history: str) -> dict:
    """Root attributes: version, input, parameters as JSON, the SHA-256 of the calibration
    tables, creation time, caution."""
    from tfhrv import __version__
    from tfhrv.calibration.calibrate import table_sha256
    from tfhrv.calibration.multifractal import multifractal_table_sha256

    return {
        "Conventions": "CF-1.10",
        "title": "tfhrv time-resolved scaling analysis",
        "tfhrv_version": __version__,
        "source_file": "" if source is None else Path(source).name,
        "source_sha256": "" if source is None or not Path(source).exists()
        else file_sha256(source),
        "parameters": json.dumps(parameters, sort_keys=True, default=str),
        "calibration_table_sha256": table_sha256(),
        "multifractal_table_sha256": multifractal_table_sha256(),
        "created": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
        "caution": CAUTION,
        "history": history,
    }


def _time_coords(group: str, elapsed_s: np.ndarray, rec) -> dict:
    start = rec.start
    td = (np.round(elapsed_s * 1e3)).astype("int64").astype("timedelta64[ms]")
    coords = {"elapsed": variable(group, "elapsed", elapsed_s)}
    dims, _, attrs = variable(group, "time", None)
    if isinstance(start, dt.datetime):
        base = np.datetime64(start.replace(tzinfo=None), "ms")
        coords["time"] = (dims, base + td, {
            **attrs, "long_name": "window centre (clock time at the start's UTC offset; "
                                  "clock_hour is local civil time)"})
    else:
        coords["time"] = (dims, td, {**attrs, "long_name": "window centre (time from start)"})
    if start is not None:  # local civil time, through daylight-saving changes
        coords["clock_hour"] = variable(group, "clock_hour", rec.clock_hours(elapsed_s))
    return coords


def _tier_dataset(tier: TierAnalysis, rec, group: str) -> Group:
    data = {}
    for name, val in tier.values.items():
        data[name] = variable(group, name, val.astype(str) if val.dtype == object else val)
    coords = _time_coords(group, tier.centres_s, rec)
    coords.update({
        "band": variable(group, "band", list(BANDS)),
        "band_low_hz": variable(group, "band_low_hz", [TASK_FORCE_BANDS[b][0] for b in BANDS]),
        "band_high_hz": variable(group, "band_high_hz",
                                 [TASK_FORCE_BANDS[b][1] for b in BANDS]),
        "bound": variable(group, "bound", list(BOUNDS)),
        "frequency": variable(group, "frequency", tier.frequencies),
        "scale": variable(group, "scale", tier.scales),
        "octave": variable(group, "octave", tier.octaves),
    })
    if "mf_h" in tier.values:
        coords["q"] = variable(group, "q", DEFAULT_Q)
    return Group(data, coords, {"window_s": tier.spec.window_s, "hop_s": tier.spec.hop_s,
                                "scale_target": tier.spec.scale,
                                "multifractal": (multifractal_attrs() if "mf_h" in tier.values
                                                 else SHORT_NOTE)})


def _fit_curve(name: str, fit: ScalingFit) -> dict:
    """The points behind a whole-record fit, so that a figure can redraw fit and line."""
    g = "/record"
    return {
        f"{name}_fit_x": variable(g, f"{name}_fit_x", np.asarray(fit.x)),
        f"{name}_fit_y": variable(g, f"{name}_fit_y", np.asarray(fit.y)),
        f"{name}_fit_used": variable(g, f"{name}_fit_used", np.asarray(fit.used, dtype=np.int8)),
        f"{name}_intercept": variable(g, f"{name}_intercept", float(fit.intercept)),
        f"{name}_slope": variable(g, f"{name}_slope", float(fit.slope_exponent)),
    }


def _record_dataset(analysis: RecordAnalysis) -> Group:
    g = "/record"
    cleaned = analysis.cleaned
    q = cleaned.quality
    fits, verdict = analysis.assessment.fits, analysis.assessment.verdict
    data = {}
    for name in EXPONENTS:
        f = fits[name]
        nan = float("nan")
        data[name] = variable(g, name, float(f.exponent) if f is not None else nan)
        data[name][2]["withheld"] = f.withheld if f is not None else ""
        data[name + "_se"] = variable(g, name + "_se", float(f.se) if f is not None else nan)
        data[name + "_ci"] = variable(g, name + "_ci", np.asarray(
            f.ci if f is not None else (nan, nan), dtype=np.float64))
        if f is not None:
            data.update(_fit_curve(name, f))
    fl, diag = analysis.fluctuation, analysis.logscale
    coords = {"bound": variable(g, "bound", list(BOUNDS))}
    if fl is not None:
        data["fluctuation"] = variable(g, "fluctuation", fl.fluctuation)
        data["fluctuation"][2]["long_name"] = (f"DFA-{analysis.options.dfa_order} fluctuation "
                                               "function F(n), whole record")
        coords["scale"] = variable(g, "scale", fl.scales)
    if diag is not None:
        data["wavelet_y"] = variable(g, "wavelet_y", diag.y)
        data["wavelet_y_var"] = variable(g, "wavelet_y_var", diag.variance)
        coords["octave"] = variable(g, "octave", diag.octaves)
    dims, code, attrs = variable(g, "verdict", np.int8(VERDICTS.index(verdict.verdict)))
    attrs.update({"reasons": json.dumps(list(verdict.reasons)),
                  "cautions": json.dumps(list(verdict.cautions)),
                  "recommended_estimator": verdict.recommended,
                  "checks": json.dumps(verdict.checks, default=float)})
    data["verdict"] = (dims, code, attrs)
    data.update(_consequence_vars(analysis.assessment))
    if analysis.multifractal is not None:
        data.update(_multifractal_vars(analysis.multifractal))
        coords["q"] = variable(g, "q", analysis.multifractal.q)
    qd = q.as_dict()
    for key in ("coverage", "share_kept", "ectopic_fraction", "longest_gap_s", "nn_mean_ms",
                "nn_sd_ms", "rmssd_ms", "recorded_h", "analysable_h"):
        data[key] = variable(g, key, float(qd[key]))
    data["hourly_coverage"] = variable(g, "hourly_coverage", q.hourly_coverage)
    band = analysis.assessment.band_hz
    return Group(data, coords, {"verdict": verdict.verdict,
                                "beta_spectral_band_hz": list(band) if band else [],
                                "removed": json.dumps(qd["removed"]),
                                "record_id": cleaned.recording.record_id})


def multifractal_attrs() -> str:
    """How the multifractal variables were computed (group attribute)."""
    return ("MF-DFA-2 (Kantelhardt et al. 2002) over 16 to min(1024, N/10) beats, q = -5..5; "
            "wavelet leaders on db3 (Wendt, Abry & Jaffard 2007) over the octaves of the "
            "wavelet exponent; c2 and mf_width calibrated against the multifractal random "
            "walk, c2_pvalue against the monofractal null (tfhrv/data/multifractal.npz); "
            "primary by the stationarity category (mf_estimator)")


def _multifractal_vars(est) -> dict:
    """The whole-record multifractal variables (:mod:`tfhrv.analysis.multifractal_fits`)."""
    g = "/record"
    vals = {"c1": est.c1, "c1_ci": est.c1_ci, "c2": est.c2, "c2_ci": est.c2_ci,
            "c2_slope": est.c2_slope, "c2_pvalue": est.c2_pvalue, "mf_width": est.width,
            "mf_width_ci": est.width_ci, "mf_width_slope": est.width_slope, "mf_h": est.h,
            "mf_h_ci": est.h_ci, "mf_alpha": est.alpha, "mf_f": est.f}
    return {k: variable(g, k, np.asarray(v, dtype=np.float64)) for k, v in vals.items()}


def _consequence_vars(assessment) -> dict:
    """The measured effect of the level changes on the FFT slope and the block intervals
    (:mod:`tfhrv.analysis.consequence`)."""
    g = "/record"
    nan = float("nan")
    e = assessment.effect
    ch = assessment.verdict.checks
    out = {
        "nonstationary_share": variable(g, "nonstationary_share",
                                        float(ch.get("nonstationary_share", nan))),
        "level_effect": variable(g, "level_effect", e.effect if e is not None else nan),
        "level_effect_ci": variable(g, "level_effect_ci",
                                    np.asarray(e.ci if e is not None else (nan, nan))),
        "level_change_time": variable(g, "level_change_time", np.asarray(
            e.change_s if e is not None else (), float)),
        "level_change_step": variable(g, "level_change_step", np.asarray(
            e.step_ms if e is not None else (), float)),
    }
    for name in EXPONENTS:
        b = assessment.block.get(name)
        method = b.method if b is not None else "none"
        out[name + "_block_se"] = variable(g, name + "_block_se", b.se if b is not None else nan)
        out[name + "_block_se"][2]["method"] = method
        out[name + "_block_ci"] = variable(g, name + "_block_ci", np.asarray(
            b.ci if b is not None else (nan, nan)))
        out[name + "_block_ci"][2]["method"] = method
    return out


def _nn_dataset(cleaned: CleanResult) -> Group:
    rec = cleaned.recording
    g = "/nn"
    return Group({
        "beat_time_s": variable(g, "beat_time_s", rec.beat_time_s),
        "rr_ms": variable(g, "rr_ms", rec.rr_ms),
        "label": variable(g, "label", rec.labels.astype(str)),
        "reason": variable(g, "reason", cleaned.reason),
    })


def build_groups(analysis: RecordAnalysis, /) -> dict[str, Group]:
    """The scan file's groups (path -> :class:`~tfhrv.dataset.groups.Group`, numpy only)
    from a full record analysis.

    Parameters
    ----------
    analysis : RecordAnalysis
        Output of :func:`tfhrv.analysis.pipeline.analyse_record` with ``detail="full"``.
    """
    if analysis.detail != "full":
        raise ValueError(f"analysis.detail must be 'full' to build a scan file, "
                         f"got {analysis.detail!r}")
    cleaned, opt = analysis.cleaned, analysis.options
    rec = cleaned.recording
    params = {"scan": opt.as_dict(), "clean": {
        "min_ms": cleaned.options.min_ms, "max_ms": cleaned.options.max_ms,
        "max_relative_change": cleaned.options.max_relative_change,
        "reference_beats": cleaned.options.reference_beats,
        "gap_min_s": cleaned.options.gap_min_s}}
    attrs = provenance(source=rec.source, parameters=params, history="tfhrv scan")
    attrs["record_id"] = rec.record_id
    attrs["clock"] = ("timestamp" if isinstance(rec.start, dt.datetime)
                      else "time-of-day" if rec.start is not None else "unknown")
    attrs["start"] = rec.start.isoformat() if rec.start is not None else ""
    clock = rec.clock
    attrs["time_zone"] = "" if clock is None else clock.zone or "UTC offsets of the file"
    attrs["utc_offset_changes"] = json.dumps([] if clock is None else clock.changes())
    return {"/": Group(attrs=attrs), "/nn": _nn_dataset(cleaned),
            "/short": _tier_dataset(analysis.short, rec, "/short"),
            "/long": _tier_dataset(analysis.long, rec, "/long"),
            "/record": _record_dataset(analysis)}


def build_tree(analysis: RecordAnalysis, /) -> xr.DataTree:
    """The scan file's DataTree from a full record analysis (:func:`build_groups` as an
    ``xarray.DataTree``)."""
    return as_datatree(build_groups(analysis))


def scan(cleaned: CleanResult, /, *, options: ScanOptions | None = None,
         progress: Progress = SILENT, workers: int = 1) -> xr.DataTree:
    """Time-resolved scaling analysis of a cleaned recording, as a DataTree.

    Parameters
    ----------
    cleaned : CleanResult
        Output of :func:`tfhrv.signal.clean.clean`.
    options : ScanOptions, optional
    progress : tfhrv.core.progress.Progress, optional
        Told each stage and each window (default: silent).
    workers : int, default 1
        Processes sharing the windows (:func:`~tfhrv.analysis.pipeline.analyse_record`);
        the results do not depend on it.

    Returns
    -------
    xarray.DataTree
        Groups ``/nn``, ``/short``, ``/long`` and ``/record`` (declared in
        :mod:`tfhrv.dataset.schema`).  Root attributes carry the provenance.
    """
    return build_tree(analyse_record(cleaned, options=options, detail="full",
                                     progress=progress, workers=workers))
