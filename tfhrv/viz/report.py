"""One self-contained HTML report of a scan: figures as embedded PNG, inline CSS, no script
and no external reference of any kind, readable on a laptop and printable.

Sections (HTML ids): ``caution-top``, ``summary``, ``quality``, ``verdict``, ``exponents``,
``time-resolved``, ``circadian``, ``decision-table``, ``methods``, ``provenance``,
``caution-bottom``.  Every piece of text that comes from a file (record id, reasons,
attributes, parameters) is escaped with :func:`html.escape`.

Literature values appear as context only: they are population findings from particular
cohorts, not a verdict on the person recorded.  DOIs of the references are given as
recalled (from memory).
"""

from __future__ import annotations

import base64
import datetime as dt
import html
import io
import json
import time
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from tfhrv.calibration.calibrate import interval_text
from tfhrv.core.caution import CAUTION
from tfhrv.viz.figkit import _parameters, draw_each

__all__ = ["SECTIONS", "build_report", "write_report"]

#: Section ids in document order.
SECTIONS = ("caution-top", "summary", "quality", "verdict", "exponents", "time-resolved",
            "circadian", "decision-table", "methods", "provenance", "caution-bottom")

_CSS = """
:root { --ink:#1a1a1a; --muted:#555; --rule:#d0d0d0; --accent:#0072B2; --warn:#D55E00; }
* { box-sizing: border-box; }
body { font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial,
       sans-serif; color: var(--ink); max-width: 1080px; margin: 0 auto; padding: 1.2rem 1.5rem; }
h1 { font-size: 1.6rem; margin: .4rem 0 .2rem; }
h2 { font-size: 1.2rem; margin: 2rem 0 .6rem; padding-bottom: .2rem;
     border-bottom: 2px solid var(--rule); }
h3 { font-size: 1rem; margin: 1.2rem 0 .4rem; }
p.sub { color: var(--muted); margin-top: 0; }
.caution { border: 2px solid var(--warn); background: #fff5ec; padding: .7rem 1rem;
           border-radius: 4px; font-weight: 600; }
.verdict { display: inline-block; padding: .1rem .6rem; border-radius: 3px; color: #fff;
           font-weight: 700; }
.v-fit { background: #00795a; } .v-fit-with-cautions { background: #8a6d00; }
.v-unfit { background: #b34700; } .v-n-a { background: #777; }
.context { border-left: 4px solid var(--accent); background: #f2f7fb; padding: .5rem 1rem; }
table { border-collapse: collapse; margin: .4rem 0 1rem; font-size: .9rem; }
th, td { border-bottom: 1px solid var(--rule); padding: .25rem .6rem; text-align: left;
         vertical-align: top; }
th { background: #f3f3f3; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
figure { margin: 1rem 0 1.6rem; }
figure img { width: 100%; height: auto; border: 1px solid #eee; }
figcaption { color: var(--muted); font-size: .88rem; margin-top: .3rem; }
pre { background: #f6f6f6; padding: .6rem; overflow-x: auto; font-size: .8rem;
      white-space: pre-wrap; word-break: break-word; }
ul.refs li { margin-bottom: .2rem; }
nav ol { columns: 2; font-size: .9rem; }
footer { margin-top: 2rem; color: var(--muted); font-size: .85rem; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  nav { display: none; }
  h2 { break-after: avoid; }
  figure, table, .caution, .context { break-inside: avoid; }
  figure img { border: none; }
  a { color: inherit; text-decoration: none; }
}
@page { size: A4; margin: 14mm; }
"""

_VERDICT_WORDS = {
    "fit": "The record is fit for a classical whole-record FFT power-law slope.",
    "fit-with-cautions": "A whole-record FFT power-law slope can be computed, but read it with "
                         "the cautions listed below.",
    "unfit": "The record is not fit for a classical whole-record FFT power-law slope; use "
             "the recommended estimator instead.",
}

_EXPONENTS = (
    ("alpha1", "DFA α1", "short-range DFA exponent", "4–16 beats"),
    ("alpha2", "DFA α2", "intermediate-range DFA exponent", "16–64 beats"),
    ("alpha_long", "DFA α long", "long-range DFA exponent", "64 beats to a quarter of the "
                                                           "record"),
    ("beta_spectral", "β (FFT slope)", "spectral exponent, PSD ~ 1/f^β", "band in Hz below"),
    ("beta_wavelet", "β (wavelet)", "Abry–Veitch log-scale regression, trend-robust",
     "octaves used in the fit"),
)

_CONTEXT = (
    "Published values are conventional slopes of the fitted line: compare them with the "
    "'slope before calibration' column. The bias-corrected value is the exponent of the "
    "process of the calibration model (fGn below α = 1; 1/f^β noise or fBm above, see "
    "methods) that would give this slope on average; for α1 it can differ from the slope "
    "by about 0.05–0.1.",
    "DFA α1 of healthy adults is typically about 1.0–1.2 and lower in congestive heart "
    "failure (Peng et al. 1995).",
    "The 24-h power-law slope corresponds to β near 1 in healthy middle-aged adults and is "
    "steeper (β ≥ 1.5, slope ≤ −1.5) in cardiac disease and old age; a steep slope predicted "
    "mortality in elderly people (Huikuri et al. 1998).",
    "α1 < 0.75 was associated with higher mortality in survivors of myocardial infarction "
    "with depressed left-ventricular function (Huikuri et al. 2000).",
)

_REFERENCES = (
    "Kantelhardt JW, Zschiegner SA, Koscielny-Bunde E, Havlin S, Bunde A, Stanley HE. "
    "Multifractal detrended fluctuation analysis of nonstationary time series. Physica A "
    "2002;316:87–114. doi:10.1016/S0378-4371(02)01383-3",
    "Wendt H, Abry P, Jaffard S. Bootstrap for empirical multifractal analysis. IEEE Signal "
    "Process Mag 2007;24(4):38–48. doi:10.1109/MSP.2007.4286563",
    "Bacry E, Delour J, Muzy JF. Multifractal random walk. Phys Rev E 2001;64:026103. "
    "doi:10.1103/PhysRevE.64.026103",
    "Ivanov PCh, Amaral LAN, Goldberger AL, Havlin S, Rosenblum MG, Struzik ZR, Stanley HE. "
    "Multifractality in human heartbeat dynamics. Nature 1999;399:461–465. "
    "doi:10.1038/20924",
    "Task Force of the ESC and NASPE. Heart rate variability: standards of measurement, "
    "physiological interpretation, and clinical use. Circulation 1996;93:1043–1065. "
    "doi:10.1161/01.CIR.93.5.1043",
    "Peng C-K, Havlin S, Stanley HE, Goldberger AL. Quantification of scaling exponents and "
    "crossover phenomena in nonstationary heartbeat time series. Chaos 1995;5:82–87. "
    "doi:10.1063/1.166141",
    "Kantelhardt JW, Koscielny-Bunde E, Rego HHA, Havlin S, Bunde A. Detecting long-range "
    "correlations with detrended fluctuation analysis. Physica A 2001;295:441–454. "
    "doi:10.1016/S0378-4371(01)00144-3",
    "Abry P, Veitch D. Wavelet analysis of long-range-dependent traffic. IEEE Trans Inf Theory "
    "1998;44:2–15. doi:10.1109/18.650984",
    "Kobayashi M, Musha T. 1/f fluctuation of heartbeat period. IEEE Trans Biomed Eng "
    "1982;29:456–457 (from memory).",
    "Geweke J, Porter-Hudak S. The estimation and application of long memory time series "
    "models. J Time Ser Anal 1983;4:221–238. doi:10.1111/j.1467-9892.1983.tb00371.x",
    "Timmer J, König M. On generating power law noise. Astron Astrophys 1995;300:707–710.",
    "Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95–101. "
    "doi:10.1093/biomet/74.1.95",
    "Eke A, Herman P, Bassingthwaighte JB, et al. Physiological time series: distinguishing "
    "fractal noises from motions. Pflugers Arch 2000;439:403–415. doi:10.1007/s004249900135",
    "Said SE, Dickey DA. Testing for unit roots in autoregressive-moving average models of "
    "unknown order. Biometrika 1984;71:599–607. doi:10.1093/biomet/71.3.599",
    "Kwiatkowski D, Phillips PCB, Schmidt P, Shin Y. Testing the null hypothesis of "
    "stationarity against the alternative of a unit root. J Econometrics 1992;54:159–178. "
    "doi:10.1016/0304-4076(92)90104-Y",
    "Theiler J, Eubank S, Longtin A, Galdrikian B, Farmer JD. Testing for nonlinearity in time "
    "series: the method of surrogate data. Physica D 1992;58:77–94. "
    "doi:10.1016/0167-2789(92)90102-S",
    "Schreiber T, Schmitz A. Improved surrogate data for nonlinearity tests. Phys Rev Lett "
    "1996;77:635–638. doi:10.1103/PhysRevLett.77.635",
    "Nelson W, Tong YL, Lee J-K, Halberg F. Methods for cosinor-rhythmometry. Chronobiologia "
    "1979;6:305–323.",
    "Cornelissen G. Cosinor-based rhythmometry. Theor Biol Med Model 2014;11:16. "
    "doi:10.1186/1742-4682-11-16",
    "Künsch HR. The jackknife and the bootstrap for general stationary observations. Ann Stat "
    "1989;17:1217–1241. doi:10.1214/aos/1176347265",
    "Hedges LV. Distribution theory for Glass's estimator of effect size and related "
    "estimators. J Educ Stat 1981;6:107–128. doi:10.3102/10769986006002107",
    "Huikuri HV, Mäkikallio TH, Airaksinen KEJ, et al. Power-law relationship of heart rate "
    "variability as a predictor of mortality in the elderly. Circulation 1998;97:2031–2036. "
    "doi:10.1161/01.CIR.97.20.2031",
    "Huikuri HV, Mäkikallio TH, Peng C-K, et al. Fractal correlation properties of R-R "
    "interval dynamics and mortality in patients with depressed left ventricular function "
    "after an acute myocardial infarction. Circulation 2000;101:47–53. "
    "doi:10.1161/01.CIR.101.1.47",
    "Wong B. Points of view: Color blindness. Nat Methods 2011;8:441. doi:10.1038/nmeth.1618",
)

_METHODS = (
    "Multifractal scaling (4-h windows and the whole record; not on 5-min windows, too "
    "short): MF-DFA-2 h(q), q = -5..5, over 16 to min(1024, N/10) beats, and the "
    "Legendre-transformed spectrum f(α) with its width (Kantelhardt et al. 2002); "
    "wavelet-leader log-cumulants c1 and c2 on db3 (Wendt, Abry & Jaffard 2007), c2 = 0 "
    "for a monofractal and < 0 for a multifractal. c2 and the width are calibrated "
    "against the multifractal random walk (Bacry, Delour & Muzy 2001), the p-value of "
    "c2 < 0 against monofractal 1/f^β noise of the record's exponent.",
    "Cleaning: non-sinus beats and the intervals next to them are removed, as are intervals "
    "outside the physiological range and sudden relative changes; stretches without beats "
    "are gaps (parameters below).",
    "Windows: 5-min windows (short tier) and 4-h windows with a 1-h hop (long tier) on the "
    "clock; windows with too little coverage are left empty.",
    "Spectral exponent β: log-binned periodogram of the evenly resampled NN series and a "
    "straight-line fit of log PSD on log frequency (Kobayashi & Musha 1982; Task Force 1996 "
    "bands); its linearity is tested against the scatter of log periodogram ordinates "
    "(Geweke & Porter-Hudak 1983).",
    "Wavelet β: log-scale diagram with a weighted fit over octaves; wavelets with 3 "
    "vanishing moments ignore polynomial trends of degree < 3 (Abry & Veitch 1998).",
    "DFA: fluctuation of the integrated, box-wise detrended series; α1 over 4–16 beats, α2 "
    "over 16–64 beats, long-range α above (Peng et al. 1995; Kantelhardt et al. 2001).",
    "{calibration}",
    "Stationarity: ADF (Said & Dickey 1984), KPSS (Kwiatkowski et al. 1992) and mean/SD "
    "drift against phase-randomised surrogates (Theiler et al. 1992; Schreiber & Schmitz "
    "1996); the category chooses the primary estimator (decision table).",
    "Circadian: night − day differences with a moving-block bootstrap interval (Künsch 1989), "
    "Hedges' g (Hedges 1981), single and 24 + 12 h cosinor (Nelson et al. 1979; Cornelissen "
    "2014).",
    "Figures use the Okabe–Ito colour-blind-safe palette (Wong 2011).",
)


# ------------------------------------------------------------------ small helpers


def _e(value) -> str:
    return html.escape(str(value), quote=True)


def _num(value, digits: int = 2, *, scale: float = 1.0, unit: str = "") -> str:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return "n/a"
    if not np.isfinite(v):
        return "n/a"
    text = f"{v * scale:.{digits}f}"
    if text.startswith("-") and float(text) == 0:  # no "-0" or "-0.00"
        text = text[1:]
    return text + unit


def _scalar(ds: xr.Dataset | None, name: str) -> float:
    if ds is None or name not in ds:
        return float("nan")
    v = np.asarray(ds[name].values, float)
    return float(v) if v.size == 1 else float("nan")


def _ci(ds: xr.Dataset | None, name: str, digits: int = 2) -> str:
    if ds is None or f"{name}_ci" not in ds:
        return "n/a"
    lo, hi = (float(v) for v in np.asarray(ds[f"{name}_ci"].values, float))
    return interval_text(lo, hi, digits=digits)


def _json(text, default):
    try:
        return json.loads(text) if isinstance(text, str) and text else default
    except ValueError:
        return default


def _table(header: list[str], rows: list[list[str]], *, numeric: set[int] = frozenset(),
           cls: str = "") -> str:
    """HTML table; cells must already be escaped."""
    head = "".join(f"<th scope=\"col\">{h}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td class=\"num\">{c}</td>" if i in numeric else f"<td>{c}</td>"
                         for i, c in enumerate(r)) + "</tr>" for r in rows)
    attr = f" class=\"{cls}\"" if cls else ""
    return f"<table{attr}><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _png(fig, dpi: float) -> str:
    buf = io.BytesIO()
    # zlib level 1: a few % larger files, encoding about three times faster (common practice)
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None},
                pil_kwargs={"compress_level": 1})
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _figure(fig, dpi: float, alt: str, caption: str) -> str:
    return (f"<figure><img src=\"data:image/png;base64,{_png(fig, dpi)}\" alt=\"{_e(alt)}\">"
            f"<figcaption>{_e(caption)}</figcaption></figure>")


def _ds(tree: xr.DataTree, name: str) -> xr.Dataset | None:
    return tree[name].to_dataset() if name in tree.children else None


# ------------------------------------------------------------------ sections


def _summary(tree: xr.DataTree, rec: xr.Dataset | None) -> str:
    a = tree.attrs
    clock = a.get("clock", "unknown")
    start = a.get("start", "") or "unknown"
    verdict = rec.attrs.get("verdict", "n/a") if rec is not None else "n/a"
    rec_est = _verdict_attrs(rec).get("recommended_estimator", "n/a")
    words = _VERDICT_WORDS.get(verdict, "No whole-record verdict is stored in this file.")
    rows = [
        ["record", _e(a.get("record_id", ""))],
        ["source file", _e(a.get("source_file", "") or "n/a")],
        ["start", _e(start) + ("" if clock == "timestamp" else f" (clock: {_e(clock)})")],
        ["recorded", _num(_scalar(rec, "recorded_h"), 1, unit=" h")],
        ["analysable", _num(_scalar(rec, "analysable_h"), 1, unit=" h")],
        ["whole-record DFA α1", f"{_num(_scalar(rec, 'alpha1'))} {_ci(rec, 'alpha1')}"],
        ["whole-record wavelet β",
         f"{_num(_scalar(rec, 'beta_wavelet'))} {_ci(rec, 'beta_wavelet')}"],
    ]
    cls = "v-" + verdict.replace(" ", "-").replace("/", "-")
    return (
        "<section id=\"summary\"><h2>Summary</h2>"
        f"<p>FFT-slope fitness: <span class=\"verdict {_e(cls)}\">{_e(verdict)}</span> — "
        f"{_e(words)} Recommended estimator: <strong>{_e(rec_est)}</strong>.</p>"
        + _table(["item", "value"], rows) + "</section>")


def _verdict_attrs(rec: xr.Dataset | None) -> dict:
    if rec is None or "verdict" not in rec:
        return {}
    return dict(rec["verdict"].attrs)


def _quality(rec: xr.Dataset | None) -> str:
    if rec is None:
        return ("<section id=\"quality\"><h2>Data quality</h2><p>No whole-record group in "
                "this file.</p></section>")
    rows = [
        ["coverage of the record by NN intervals", _num(_scalar(rec, "coverage"), 1, scale=100,
                                                        unit=" %")],
        ["intervals kept", _num(_scalar(rec, "share_kept"), 1, scale=100, unit=" %")],
        ["ectopic (non-sinus) share", _num(_scalar(rec, "ectopic_fraction"), 2, scale=100,
                                           unit=" %")],
        ["longest gap", _num(_scalar(rec, "longest_gap_s"), 1, scale=1 / 60, unit=" min")],
        ["mean NN", _num(_scalar(rec, "nn_mean_ms"), 0, unit=" ms")],
        ["SDNN", _num(_scalar(rec, "nn_sd_ms"), 1, unit=" ms")],
        ["RMSSD", _num(_scalar(rec, "rmssd_ms"), 1, unit=" ms")],
        ["recorded", _num(_scalar(rec, "recorded_h"), 2, unit=" h")],
        ["analysable", _num(_scalar(rec, "analysable_h"), 2, unit=" h")],
    ]
    removed = _json(rec.attrs.get("removed", ""), {})
    if isinstance(removed, dict):
        rows += [[f"removed: {k.replace('_', ' ')}", _e(v)] for k, v in removed.items()]
    out = _table(["measure", "value"], [[_e(r[0]), r[1]] for r in rows], numeric={1})
    if "hourly_coverage" in rec:
        hc = np.asarray(rec["hourly_coverage"].values, float)
        cells = [[f"{i}–{i + 1}", _num(v, 0, scale=100, unit=" %")] for i, v in enumerate(hc)]
        low = [c for c, v in zip(cells, hc, strict=True) if not v >= 0.8]
        out += (f"<p>Hours from the start with less than 80 % coverage: "
                f"{len(low)} of {hc.size}.</p>")
        if low:
            out += _table(["hour from start", "coverage"], low, numeric={1})
    return f"<section id=\"quality\"><h2>Data quality</h2>{out}</section>"


_RECOMMENDED_WHY = {
    "spectral": "the record is fit, so the classical FFT slope itself",
    "wavelet": "the trend-robust wavelet slope, since the record is not fit for the FFT slope",
    "dfa": "DFA, since the record behaves as a motion (wavelet β > 1.5)",
    "none": "none: no long-range exponent can be estimated on a record this short",
}


def _recommendation_note(tree: xr.DataTree | None, recommended: str) -> str:
    """Why the whole-record recommendation can differ from the windows' primary estimators."""
    counts = ""
    long = _ds(tree, "long") if tree is not None else None
    if long is not None and "estimator" in long and long.sizes.get("time", 0):
        from tfhrv.analysis.policy import ESTIMATORS

        codes = np.asarray(long["estimator"].values, int)
        n = {e: int(np.sum(codes == i)) for i, e in enumerate(ESTIMATORS)}
        parts = [f"{e} {k}" for e, k in n.items() if k and e != "none"]
        if parts:
            counts = (f" In this record the {codes.size} long windows chose: "
                      f"{', '.join(parts)}" + (f" ({n['none']} without an estimate)"
                                                if n.get("none") else "") + ".")
    why = _RECOMMENDED_WHY.get(recommended, recommended)
    return ("The recommendation is for the whole-record long-range slope (1e-4 to 1e-2 Hz) "
            f"and follows the verdict and the record's class: {why}. Each window's primary "
            "estimator is chosen separately, from that window's stationarity category and "
            "the narrowest calibrated interval among the estimators valid there (decision "
            f"table below), so the two can differ.{counts}")


def _verdict(rec: xr.Dataset | None, tree: xr.DataTree | None = None) -> str:
    va = _verdict_attrs(rec)
    verdict = rec.attrs.get("verdict", "n/a") if rec is not None else "n/a"
    reasons = _json(va.get("reasons", ""), [])
    cautions = _json(va.get("cautions", ""), [])
    checks = _json(va.get("checks", ""), {})
    band = np.asarray(rec.attrs.get("beta_spectral_band_hz", []) if rec is not None else [],
                      float).ravel()

    def items(xs):
        return "<ul>" + "".join(f"<li>{_e(x)}</li>" for x in xs) + "</ul>" if xs else \
            "<p>none</p>"

    out = (f"<p>Verdict: <strong>{_e(verdict)}</strong>. "
           f"{_e(_VERDICT_WORDS.get(verdict, ''))} Recommended estimator: "
           f"<strong>{_e(va.get('recommended_estimator', 'n/a'))}</strong>.</p>"
           f"<p>{_e(_recommendation_note(tree, str(va.get('recommended_estimator', ''))))}</p>")
    if band.size == 2:
        out += (f"<p>Band judged: {band[0]:.2g}–{band[1]:.2g} Hz (the classical 24-h "
                "power-law band, common practice).</p>")
    out += _effect_text(rec)
    out += "<h3>Reasons (each makes the record unfit)</h3>" + items(reasons)
    out += "<h3>Cautions</h3>" + items(cautions)
    if isinstance(checks, dict) and checks:
        rows = [[_e(_CHECKS.get(k, (k.replace("_", " "), None))[0]), _e(_check_value(k, v))]
                for k, v in checks.items()]
        out += "<h3>Checks behind the verdict</h3>" + _table(["check", "value"], rows,
                                                            numeric={1})
    return f"<section id=\"verdict\"><h2>FFT-slope fitness verdict</h2>{out}</section>"


def _pvalue(v: float) -> str:
    return "< 0.001" if v < 0.001 else f"{v:.3f}"


#: check of the verdict -> (label, formatter of a finite value)
_CHECKS = {
    "cycles_of_lowest_frequency": ("periods of the classical band's lower edge (1e-4 Hz) "
                                   "in the record",
                                   lambda v: f"{v:.1f}"),
    "coverage": ("analysable share of the record", lambda v: f"{100 * v:.1f} %"),
    "longest_gap_s": ("longest unreadable stretch",
                      lambda v: f"{v / 60:.1f} min" if v >= 60 else f"{v:.0f} s"),
    "ectopic_fraction": ("non-sinus (ectopic) beats",
                      lambda v: f"{100 * v:.2f} %" if v >= 1e-4 or v == 0 else "< 0.01 %"),
    "nonstationary_share": ("long windows not stationary", lambda v: f"{100 * v:.0f} %"),
    "r_squared": ("R² of the log-log spectral fit", lambda v: f"{v:.3f}"),
    "lack_of_fit_pvalue": ("lack-of-fit p (points vs one line)", _pvalue),
    "excess_scatter": ("RMS departure beyond periodogram scatter",
                       lambda v: f"{v:.3f} decade"),
    "curvature_pvalue": ("curvature p (quadratic term)", _pvalue),
    "beta_spectral": ("β from the FFT slope (calibrated)", lambda v: f"{v:.2f}"),
    "beta_wavelet": ("β from the wavelet (calibrated)", lambda v: f"{v:.2f}"),
    "process_class": ("class by wavelet β (fGn < 1 < fBm)", str),
}


def _check_value(key: str, value) -> str:
    """A check of the verdict with its unit and a sensible number of digits."""
    fmt = _CHECKS.get(key, (None, lambda v: f"{v:.3g}"))[1]
    if isinstance(value, int | float) and not isinstance(value, bool):
        v = float(value)
        return fmt(v) if np.isfinite(v) else "n/a"
    return str(value)


def _effect_text(rec: xr.Dataset | None) -> str:
    """The measured effect of the level changes on the FFT slope, and the block intervals."""
    if rec is None or "level_effect" not in rec:
        return ""
    eff = float(rec["level_effect"].values)
    ci = np.asarray(rec["level_effect_ci"].values, float)
    steps = np.asarray(rec["level_change_step"].values, float) if \
        "level_change_step" in rec else np.array([])
    share = float(rec["nonstationary_share"].values) if "nonstationary_share" in rec \
        else float("nan")
    checks = _json(_verdict_attrs(rec).get("checks", ""), {})
    margin = float(checks.get("level_effect_margin", float("nan"))) \
        if isinstance(checks, dict) else float("nan")
    out = "<h3>Measured effect of the non-stationarity on the FFT slope</h3>"
    if np.isfinite(eff):
        out += (f"<p>Regressing out the {steps.size} largest level changes "
                f"({_e(', '.join(f'{v:+.0f} ms' for v in steps))}) moves the whole-record FFT "
                f"beta by <strong>{eff:+.2f}</strong> (95 % interval under a power-law null "
                f"{ci[0]:+.2f} to {ci[1]:+.2f}); the record is unfit when this exceeds "
                f"&plusmn;{margin:.2f}, the half-width of the calibrated 95 % interval of "
                "its FFT beta. "
                + (f"{100 * share:.0f} % of the 4-h windows drift." if np.isfinite(share)
                   else "") + "</p>")
    else:
        out += "<p>The effect could not be measured on this record.</p>"
    rows = []
    for name in ("beta_spectral", "beta_wavelet", "alpha1", "alpha2", "alpha_long"):
        if name + "_block_ci" not in rec or name not in rec:
            continue
        b = np.asarray(rec[name + "_block_ci"].values, float)
        c = np.asarray(rec[name + "_ci"].values, float)
        if not np.all(np.isfinite(b)):
            continue
        rows.append([_e(name), f"{float(rec[name].values):.2f}",
                     _e(f"{c[0]:.2f} to {c[1]:.2f}"), _e(f"{b[0]:.2f} to {b[1]:.2f}")])
    if rows:
        out += ("<p>Two intervals per exponent: the calibrated one assumes one stationary "
                "process; the block one (4-h blocks: jackknife for the betas, subseries for "
                "DFA; Künsch 1989, Carlstein 1986) includes how the exponent varies through "
                "the day. Quote the block interval for a whole-record value.</p>")
        out += _table(["exponent", "value", "calibrated 95 %", "through the day 95 %"], rows,
                      numeric={1})
    return out


def _fit_range(rec: xr.Dataset | None, name: str) -> str:
    """The range a whole-record fit actually used, from its stored points."""
    if rec is None or f"{name}_fit_x" not in rec or f"{name}_fit_used" not in rec:
        return ""
    x = np.asarray(rec[f"{name}_fit_x"].values, float)
    used = np.asarray(rec[f"{name}_fit_used"].values).astype(bool) & np.isfinite(x)
    if not used.any():
        return ""
    lo, hi = x[used].min(), x[used].max()
    if name == "beta_wavelet":
        return f"octaves {lo:.0f}–{hi:.0f}"
    if name == "beta_spectral":
        return f"{10 ** lo:.2g}–{10 ** hi:.2g} Hz"
    return f"{10 ** lo:.0f}–{10 ** hi:.0f} beats"


def _p(value) -> str:
    v = float(value)
    return "n/a" if not np.isfinite(v) else "&lt; 0.001" if v < 0.001 else f"{v:.3f}"


def _with_ci(v, lo, hi, digits: int) -> str:
    """'v [lo, hi]', or just 'v' (or 'n/a') when the interval is missing."""
    if not np.isfinite(float(v)):
        return "n/a"
    if not (np.isfinite(float(lo)) and np.isfinite(float(hi))):
        return _num(v, digits)
    return f"{_num(v, digits)} [{_num(lo, digits)}, {_num(hi, digits)}]"


from tfhrv.circadian.days import UNITS as _UNITS  # noqa: E402  (one list of units)


def _exponents(rec: xr.Dataset | None) -> str:
    rows = []
    for name, label, meaning, rng in _EXPONENTS:
        rows.append([_e(label), _e(meaning), _e(_fit_range(rec, name) or rng),
                     _num(_scalar(rec, name)),
                     _ci(rec, name), _num(_scalar(rec, f"{name}_se"), 3),
                     _num(_scalar(rec, f"{name}_slope"))])
    table = _table(["exponent", "what", "fit range (points used)", "value",
                    "95 % calibrated CI", "SE", "slope before calibration"], rows,
                   numeric={3, 4, 5, 6})
    ctx = "".join(f"<li>{_e(c)}</li>" for c in _CONTEXT)
    return (
        "<section id=\"exponents\"><h2>Whole-record exponents</h2>"
        "<p>Values are bias-corrected; intervals are calibrated by simulation (see methods). "
        "In beta units, α = (β + 1)/2.</p>" + table +
        "<div class=\"context\"><h3>Literature reference ranges — context only</h3><ul>"
        + ctx + "</ul><p><strong>These are population findings from particular cohorts, "
        "measured with particular methods; they are not a verdict on this person and "
        "not a diagnosis.</strong></p></div></section>")


def _circadian_tables(table: pd.DataFrame | None, skipped: str = "") -> str:
    if table is None or table.empty:
        if skipped:
            return f"<p>No day/night table: {_e(skipped)}.</p>"
        return ("<p>No day/night table: run <code>tfhrv circadian</code> on the scan file, or "
                "the record is too short.</p>")
    t = table.copy()
    t["day"] = t["day"].astype(str)
    pooled = t[t["day"] == "all"]
    src = _e(pooled["period_source"].iloc[0]) if len(pooled) else "n/a"
    ref = str(pooled["acrophase_reference"].iloc[0]) if len(pooled) else "clock"
    clock = ref == "clock"

    def dig(var):
        return 0 if var in ("nn_mean_ms", "nn_sd_ms", "lf_power", "hf_power") else 2

    def ph(v):
        v = float(v)
        if not np.isfinite(v):
            return "n/a"
        if not clock:
            return f"{v:.1f} h"
        m = int(round(v * 60)) % 1440
        return f"{m // 60:02d}:{m % 60:02d}"

    rows = []
    for _, r in pooled.iterrows():
        d = dig(r["variable"])
        lo, hi = r.get("acrophase_low", np.nan), r.get("acrophase_high", np.nan)
        phase = ph(r.get("acrophase_h", np.nan))
        if np.isfinite(float(lo)) and np.isfinite(float(hi)):
            phase += f" [{ph(lo)}–{ph(hi)}]"
        rows.append([
            _e(f"{r['variable']} ({r['tier']})"), _e(_UNITS.get(r["variable"], "–")),
            _num(r["day_mean"], d), _num(r["night_mean"], d),
            _with_ci(r["difference"], r["difference_low"], r["difference_high"], d),
            _num(r["effect_size"]), _num(r.get("mesor", np.nan), d),
            _with_ci(r.get("amplitude", np.nan), r.get("amplitude_low", np.nan),
                     r.get("amplitude_high", np.nan), d),
            _e(phase), _p(r.get("cosinor_p", np.nan))])
    out = (f"<p>Day and night from: <strong>{src}</strong>; acrophase given as "
           f"{_e(ref)}. Difference = night − day with a moving-block bootstrap 95 % interval; "
           "g = Hedges' effect size; single-component 24-h cosinor (acrophase interval only "
           "where the amplitude is significant). The cosinor p-value is an ordinary "
           "least-squares F-test that takes the windows as independent: for autocorrelated "
           "windows it is too small, so read it as descriptive. <em>exponent</em> is each "
           "window's primary exponent in β units.</p>")
    out += _table(["variable (tier)", "unit", "day mean", "night mean",
                   "night − day [95 % CI]", "g", "MESOR", "amplitude [95 % CI]",
                   "acrophase [95 % CI]", "cosinor p"], rows, numeric={2, 3, 4, 5, 6, 7, 8, 9})
    per_day = t[t["day"] != "all"]
    if len(per_day):
        rows = [[_e(f"{r['variable']} ({r['tier']})"), _e(r["day"]),
                 _num(r["day_mean"], dig(r["variable"])),
                 _num(r["night_mean"], dig(r["variable"])),
                 _with_ci(r["difference"], r["difference_low"], r["difference_high"],
                          dig(r["variable"])),
                 _e(int(r["n_day"])) if np.isfinite(r["n_day"]) else "n/a",
                 _e(int(r["n_night"])) if np.isfinite(r["n_night"]) else "n/a",
                 _e(r.get("contrast_note", "") if str(r.get("contrast_note", "")) != "nan"
                    else "")]
                for _, r in per_day.iterrows()]
        out += "<h3>Per day (noon to noon)</h3>" + _table(
            ["variable (tier)", "day", "day mean", "night mean", "night − day [95 % CI]",
             "n day", "n night", "note"], rows, numeric={2, 3, 4, 5, 6})
    return out


def _decision_table(tree: xr.DataTree) -> str:
    import dataclasses

    from tfhrv.analysis.policy import DECISION_TABLE, explain_table

    counts = {}
    for tier in ("short", "long"):
        ds = _ds(tree, tier)
        if ds is not None and "stationarity" in ds:
            codes = np.asarray(ds["stationarity"].values, int)
            counts[tier] = [int(np.sum(codes == i)) for i in range(len(DECISION_TABLE))]
    # columns follow the rule's fields, so the report tracks tfhrv.analysis.policy as it evolves
    names = [f.name for f in dataclasses.fields(next(iter(DECISION_TABLE.values())))]
    rows = []
    for i, (cat, rule) in enumerate(DECISION_TABLE.items()):
        cells = [_e(cat)]
        for name in names:
            v = getattr(rule, name)
            cells.append(_e(", ".join(v) or "none" if isinstance(v, tuple) else v))
        cells.append(_e(" / ".join(str(c[i]) for c in counts.values()) if counts else "n/a"))
        rows.append(cells)
    tiers = " / ".join(counts) if counts else "tiers"
    notes = explain_table().splitlines()[len(DECISION_TABLE) + 1:]
    header = ["category"] + [n.replace("_", " ") for n in names] + [f"windows here ({tiers})"]
    return ("<section id=\"decision-table\"><h2>Estimator decision table</h2>"
            "<p>Each window's stationarity category decides which estimators are valid and "
            "which exponent is primary; the others are kept as cross-checks. "
            + " ".join(_e(n) for n in notes) + "</p>"
            + _table([_e(h) for h in header], rows, numeric={len(header) - 1}) + "</section>")


def _provenance(tree: xr.DataTree) -> str:
    a = dict(tree.attrs)
    params = a.pop("parameters", "")
    rows = [[_e(k), _e(v)] for k, v in a.items()]
    try:
        pretty = json.dumps(json.loads(params), indent=2, sort_keys=True)
    except (TypeError, ValueError):
        pretty = str(params)
    return ("<section id=\"provenance\"><h2>Parameters and provenance</h2>"
            + _table(["attribute", "value"], rows)
            + f"<h3>Parameters</h3><pre>{_e(pretty)}</pre></section>")


# ------------------------------------------------------------------ public API


#: the calibration sentence of the methods list, per calibration model
_CALIBRATION_TEXT = {
    "powerlaw": "Calibrated intervals (model 'powerlaw'): bias and 95 % Neyman intervals from "
    "simulations of fractional Gaussian noise (alpha < 1; Davies & Harte 1987) and 1/f^β "
    "noise (alpha > 1; Timmer & König 1995) on a grid of exponents and lengths; heart-period "
    "fluctuations are modelled as 1/f-type noise across alpha = 1 (Kobayashi & Musha 1982).",
    "fgn-fbm": "Calibrated intervals (model 'fgn-fbm'): bias and 95 % Neyman intervals from "
    "simulations of fractional Gaussian noise (alpha < 1) and fractional Brownian motion "
    "(alpha > 1; Davies & Harte 1987), conditional on the noise/motion class read from DFA "
    "at the longest scales (Eke et al. 2000).",
}


def _calibration_model(tree: xr.DataTree) -> str:
    model = _parameters(tree, "scan").get("calibration_model", "powerlaw")
    return model if model in _CALIBRATION_TEXT else "powerlaw"


def build_report(tree: xr.DataTree, /, *, circadian_table: pd.DataFrame | None = None,
                 dpi: float = 110.0, progress=None, started: float | None = None,
                 workers: int = 1) -> str:
    """The HTML report of one scan, as a string.

    Parameters
    ----------
    tree : xarray.DataTree
        Output of :func:`tfhrv.dataset.build.scan`, optionally with the ``/circadian`` group.
    circadian_table : pandas.DataFrame, optional
        Output of :func:`tfhrv.circadian.days.circadian_table`; by default the ``/circadian``
        group of ``tree`` is used when present.
    dpi : float, default 110
        Resolution of the embedded PNG figures.
    progress : tfhrv.core.progress.Progress, optional
        Told each figure (default: silent).
    started : float, optional
        ``time.perf_counter()`` when the work behind the report began (the command line
        passes its own start); the footer then gives the time from there, the command's
        own run time.  Without it, the footer gives the time to draw the figures and write the
        HTML, and says so.
    workers : int, default 1
        Processes drawing the figures (forked, POSIX only); the report does not depend
        on it.

    Returns
    -------
    str
        One HTML5 document with inline CSS and figures as ``data:image/png;base64`` URIs;
        no scripts and no external references.  Section ids are :data:`SECTIONS`.
    """
    from tfhrv import __version__
    from tfhrv.viz import figures as plots

    t0 = time.perf_counter()
    rec = _ds(tree, "record")
    if circadian_table is None and "circadian" in tree.children:
        circadian_table = tree["circadian"].to_dataset().to_dataframe().reset_index(drop=True)
    rid = str(tree.attrs.get("record_id", ""))
    caution = _e(CAUTION)
    specs = (
        ("overview", plots.overview, "NN intervals and exponent tracks over time",
         "NN intervals (grey), 5-min mean (black), removed beats (ticks), gaps (grey spans), "
         "non-stationary windows (orange strip) and night/rest period (blue); below, α1 of "
         "5-min windows and the long-window exponent as α with calibrated 95 % intervals."),
        ("scale_short", plots.scale_map, "time by scale map of the local DFA exponent",
         "Local DFA exponent α(n) per 5-min window and box size; white = 1 (1/f), blue "
         "below (towards 0.5, uncorrelated), red above (towards 1.5, Brownian-like); grey = "
         "no estimate. The colour range is fitted to this record's values and stated above "
         "the map (tfhrv figures --alpha-range fixes it to compare records)."),
        ("scale_long", lambda t: plots.scale_map(t, tier="long"),
         "time by scale map of the local DFA exponent, long windows",
         "The same for 4-h windows (1-h hop), reaching longer box sizes."),
        ("stationarity", plots.stationarity_timeline, "stationarity category per window",
         "Stationarity category and primary estimator of every window."),
        ("circadian", plots.circadian, "exponents against clock time with cosinor fits",
         "Exponents against the 24-h clock with a single-component cosinor; the band is "
         "pointwise from the least-squares covariance and too narrow for autocorrelated "
         "windows."),
        ("spectrum", plots.spectrum, "whole-record power spectrum with the fitted line",
         "Log-binned whole-record periodogram, fit band (yellow), fitted line and residuals; "
         "dotted lines: Task Force band limits."),
        ("dfa", plots.dfa, "whole-record DFA fluctuation function",
         "F(n) with the α1, α2 and long-range lines; below, the local slope."),
        ("logscale", plots.logscale, "wavelet log-scale diagram",
         "y_j with ±1.96 SD bars and the weighted line over the octaves used."),
        ("multifractal", plots.multifractal_spectrum, "multifractal spectrum h(q) and f(α)",
         "Left: MF-DFA-2 h(q) of the whole record with the 95 % interval of a monofractal "
         "of the same exponent (band) and of each 4-h window (blue: primary for its "
         "stationarity category; grey: not). A flat h(q) is monofractal. Right: f(α), "
         "with the calibrated c2 and width."),
    )
    drawn = draw_each(specs, lambda sp: _figure(sp[1](tree), dpi, sp[2], sp[3]),
                      workers=workers, progress=progress)
    figs = dict(zip((sp[0] for sp in specs), drawn, strict=True))
    created = dt.datetime.now(dt.UTC).isoformat(timespec="seconds")
    refs = "".join(f"<li>{_e(r)}</li>" for r in _REFERENCES)
    calibration = _CALIBRATION_TEXT[_calibration_model(tree)]
    methods = "".join(f"<li>{_e(m.replace('{calibration}', calibration))}</li>"
                      for m in _METHODS)
    nav = "".join(f"<li><a href=\"#{s}\">{_e(s.replace('-', ' '))}</a></li>"
                  for s in SECTIONS[1:-1])
    parts = [
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">",
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">",
        f"<title>tfhrv report — {_e(rid)}</title><style>{_CSS}</style></head><body>",
        f"<div id=\"caution-top\" class=\"caution\" role=\"note\">{caution}</div>",
        f"<h1>Scaling analysis of record {_e(rid)}</h1>",
        f"<p class=\"sub\">tfhrv {_e(__version__)} · report built {_e(created)}</p>",
        f"<nav><ol>{nav}</ol></nav>",
        _summary(tree, rec), _quality(rec), _verdict(rec, tree), _exponents(rec),
        "<section id=\"time-resolved\"><h2>Time-resolved figures</h2>",
        figs["overview"], figs["scale_short"], figs["scale_long"], figs["stationarity"],
        "<h3>Whole-record fits</h3>", figs["spectrum"], figs["dfa"], figs["logscale"],
        "<h3>Multifractal scaling</h3>",
        f"<p class=\"mf-sentence\">{_e(plots.multifractal_sentence(tree))}</p>",
        figs["multifractal"],
        "</section>",
        "<section id=\"circadian\"><h2>Day/night contrasts and 24-h rhythm</h2>",
        figs["circadian"],
        _circadian_tables(circadian_table, str(tree.attrs.get("circadian_skipped", ""))),
        "</section>",
        _decision_table(tree),
        f"<section id=\"methods\"><h2>Methods</h2><ul>{methods}</ul>"
        f"<h3>References</h3><ul class=\"refs\">{refs}</ul></section>",
        _provenance(tree),
        f"<div id=\"caution-bottom\" class=\"caution\" role=\"note\">{caution}</div>",
        f"<footer>{_e(_build_time(t0, started))} by tfhrv {_e(__version__)}."
        "</footer></body></html>",
    ]
    return "\n".join(parts)


def _build_time(t0: float, started: float | None) -> str:
    now = time.perf_counter()
    if started is not None:
        return (f"Analysis and report took {now - started:.1f} s from the start of the "
                "command (loading, reading, cleaning, scanning, circadian analysis, figures "
                "and HTML)")
    return f"Figures and HTML built in {now - t0:.1f} s (the analysis before it not counted)"


def write_report(tree: xr.DataTree, path: str | Path, /, *,
                 circadian_table: pd.DataFrame | None = None, dpi: float = 110.0,
                 progress=None, started: float | None = None, outputs=None,
                 workers: int = 1) -> Path:
    """Build the report and write it atomically (temporary file, then ``os.replace``), or
    stage it in ``outputs`` (a :class:`tfhrv.core.files.OutputSet`).

    Returns
    -------
    Path
        The file written.
    """
    from tfhrv.core.files import atomic_write

    text = build_report(tree, circadian_table=circadian_table, dpi=dpi, progress=progress,
                        started=started, workers=workers)
    if progress is not None:
        progress.stage(f"write {path}")

    def write(tmp):
        Path(tmp).write_text(text, encoding="utf-8")

    return outputs.add(path, write) if outputs is not None else atomic_write(path, write)
