"""The output file, declared once: every group, variable, dimension, unit, long_name, flag.

The DataTree writer (:mod:`tfhrv.dataset.build`) builds every variable through
:func:`variable`, so nothing undeclared can reach a file; figures, the report and the cohort
read names, units and categories from here; :func:`validate` checks any file against it
(used when a scan file is opened, and by the tests).

Naming: an exponent ``X`` (``beta_spectral``, ``beta_wavelet``, ``alpha1``, ``alpha2``,
``alpha_long``) is the calibrated, bias-corrected value; ``X_slope`` is the slope of the
fitted log-log line expressed as the exponent, before calibration (the conventional value
that published ranges refer to); ``X_se`` and ``X_ci`` are the calibrated standard error
and 95 % interval.  Units are CF strings (``"1"`` for dimensionless).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from types import MappingProxyType
from typing import TYPE_CHECKING

import numpy as np

from tfhrv.analysis.multifractal_fits import MF_ESTIMATORS
from tfhrv.analysis.pipeline import EXPONENTS
from tfhrv.analysis.policy import ESTIMATORS
from tfhrv.analysis.verdict import VERDICTS
from tfhrv.estimators.spectral import TASK_FORCE_BANDS
from tfhrv.signal.clean import Reason
from tfhrv.stationarity.battery import CATEGORIES

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

__all__ = [
    "BANDS",
    "BOUNDS",
    "CATEGORIES",
    "ESTIMATORS",
    "EXPONENTS",
    "GROUPS",
    "OPTIONAL_GROUPS",
    "SchemaError",
    "VERDICTS",
    "Variable",
    "exponent_label",
    "validate",
    "variable",
]

BANDS: tuple[str, ...] = tuple(TASK_FORCE_BANDS)
BOUNDS: tuple[str, ...] = ("lower", "upper")


@dataclass(frozen=True, slots=True)
class Variable:
    """One declared variable: name, dimensions, CF units, long_name, and for categorical
    variables the category names (``flag_values`` are 0..n-1, or ``flag_codes``)."""

    name: str
    dims: tuple[str, ...]
    units: str | None
    long_name: str
    flags: tuple[str, ...] | None = None
    flag_codes: tuple[int, ...] | None = None
    required: bool = True

    def attrs(self) -> dict:
        """The CF attributes written with the variable."""
        out: dict = {"long_name": self.long_name}
        if self.units is not None:
            out["units"] = self.units
        if self.flags is not None:
            codes = self.flag_codes or tuple(range(len(self.flags)))
            out["flag_values"] = np.asarray(codes, dtype=np.int8 if max(codes) < 128
                                            else np.uint8)
            out["flag_meanings"] = " ".join(f.replace("-", "_") for f in self.flags)
        return out


_EXPONENT_TEXT = {
    "beta_spectral": "spectral exponent beta from the log-binned periodogram",
    "beta_wavelet": "spectral exponent beta from the wavelet log-scale diagram",
    "alpha1": "DFA exponent over 4-16 beats",
    "alpha2": "DFA exponent over 16-64 beats",
    "alpha_long": "DFA exponent over 64 beats to a quarter of the series, at most 4096",
}


def exponent_label(name: str) -> str:
    """What an exponent variable is, in words (for figures, tables and the report)."""
    return _EXPONENT_TEXT[name]


def _exponent_family(name: str, dim: tuple[str, ...], where: str) -> list[Variable]:
    text = _EXPONENT_TEXT[name] + where
    return [
        Variable(name, dim, "1", text + ", calibrated (bias-corrected)"),
        Variable(name + "_se", dim, "1", "calibrated standard error of " + text),
        Variable(name + "_ci", (*dim, "bound"), "1", "95 % calibrated interval of " + text),
        Variable(name + "_slope", dim, "1", text + ", slope of the fitted line before "
                 "calibration (the value published ranges refer to)"),
    ]


def _coords_tier() -> list[Variable]:
    return [
        Variable("time", ("time",), None, "window centre (clock time, or time from start)"),
        Variable("elapsed", ("time",), "s", "time from recording start"),
        Variable("clock_hour", ("time",), "h", "clock time of day", required=False),
        Variable("band", ("band",), None, "Task Force 1996 frequency band"),
        Variable("band_low_hz", ("band",), "Hz", "lower limit of the band"),
        Variable("band_high_hz", ("band",), "Hz", "upper limit of the band"),
        Variable("bound", ("bound",), None, "interval bound"),
        Variable("frequency", ("frequency",), "Hz", "frequency"),
        Variable("scale", ("scale",), "beats", "DFA box size"),
        Variable("octave", ("octave",), "1", "wavelet octave j (scale 2^j beats)"),
    ]


def _tier() -> list[Variable]:
    t = ("time",)
    out = _coords_tier() + [
        Variable("nn_mean_ms", t, "ms", "mean NN interval"),
        Variable("nn_sd_ms", t, "ms", "SD of NN intervals (SDNN)"),
        Variable("coverage", t, "1", "share of the window covered by NN intervals"),
        Variable("n_beats", t, "1", "number of NN intervals"),
        Variable("ectopic_fraction", t, "1", "share of beats labelled non-sinus"),
        Variable("psd", ("time", "frequency"), "ms2 Hz-1",
                 "power spectral density of the NN series (log-binned periodogram)"),
        Variable("band_power", ("time", "band"), "ms2",
                 "power in the Task Force 1996 frequency band"),
        Variable("total_power", t, "ms2", "total power up to 0.4 Hz"),
        Variable("fluctuation", ("time", "scale"), "ms", "DFA fluctuation function F(n)"),
        Variable("local_alpha", ("time", "scale"), "1", "local DFA exponent d log F / d log n"),
        Variable("wavelet_energy", ("time", "octave"), "ms2",
                 "mean squared wavelet detail coefficient per octave"),
        Variable("adf_stat", t, "1", "augmented Dickey-Fuller statistic (constant)"),
        Variable("adf_pvalue", t, "1", "ADF p-value (MacKinnon 1994)"),
        Variable("kpss_stat", t, "1", "KPSS statistic (level null)"),
        Variable("kpss_pvalue", t, "1", "KPSS p-value, clipped to [0.01, 0.10] by the table"),
        Variable("mean_drift", t, "1", "spread of sub-window means over pooled within-SD "
                 "(of the window's normal scores)"),
        Variable("sd_drift", t, "1", "largest over smallest sub-window SD (of the window's "
                 "normal scores)"),
        Variable("drift_pvalue", t, "1",
                 "p-value of the drift statistics against phase-randomised surrogates"),
        Variable("stationarity", t, None, "stationarity category of the window",
                 flags=CATEGORIES),
        Variable("estimator", t, None, "primary estimator of the window", flags=ESTIMATORS),
        Variable("reason", t, None, "why the primary estimator was chosen"),
        Variable("exponent", t, "1", "primary scaling exponent in beta units (PSD ~ 1/f^beta)"),
        Variable("exponent_se", t, "1", "calibrated standard error of the primary exponent "
                 "in beta units"),
        Variable("exponent_ci", ("time", "bound"), "1",
                 "95 % calibrated interval of the primary exponent in beta units"),
    ]
    for name in EXPONENTS:
        out += _exponent_family(name, t, "")
    return out


def _record() -> list[Variable]:
    out = [
        Variable("bound", ("bound",), None, "interval bound"),
        Variable("scale", ("scale",), "beats", "DFA box size", required=False),
        Variable("octave", ("octave",), "1", "wavelet octave j (scale 2^j beats)",
                 required=False),
        Variable("verdict", (), None, "whole-record FFT-slope fitness verdict", flags=VERDICTS),
        Variable("coverage", (), "1", "analysable share of the recorded time"),
        Variable("share_kept", (), "1", "share of intervals kept as NN"),
        Variable("ectopic_fraction", (), "1", "share of beats labelled non-sinus"),
        Variable("longest_gap_s", (), "s", "longest stretch not covered by NN intervals"),
        Variable("nn_mean_ms", (), "ms", "mean NN interval"),
        Variable("nn_sd_ms", (), "ms", "SD of NN intervals (SDNN)"),
        Variable("rmssd_ms", (), "ms", "root mean square of successive NN differences"),
        Variable("recorded_h", (), "h", "recorded time (first to last beat)"),
        Variable("analysable_h", (), "h", "sum of the NN intervals kept"),
        Variable("hourly_coverage", ("hour",), "1", "share of each elapsed hour covered by NN"),
        Variable("fluctuation", ("scale",), "ms", "DFA fluctuation function F(n), whole record",
                 required=False),
        Variable("wavelet_y", ("octave",), "1",
                 "bias-corrected log2 wavelet energy y_j, whole record", required=False),
        Variable("wavelet_y_var", ("octave",), "1", "variance of y_j (Abry & Veitch 1998)",
                 required=False),
        Variable("nonstationary_share", (), "1", "share of analysable long-tier windows "
                 "whose stationarity category is not stationary", required=False),
        Variable("level_effect", (), "1", "change of the whole-record FFT beta when the "
                 "largest level changes are regressed out, beyond a power-law null "
                 "(beta units)", required=False),
        Variable("level_effect_ci", ("bound",), "1",
                 "95 % interval of level_effect under the power-law null", required=False),
        Variable("level_change_time", ("level_change",), "s", "time of each regressed-out "
                 "level change from the start of the resampled series", required=False),
        Variable("level_change_step", ("level_change",), "ms",
                 "size of each regressed-out level change", required=False),
    ]
    for name in EXPONENTS:
        text = _EXPONENT_TEXT[name]
        out += [
            Variable(name + "_block_se", (), "1", f"standard error of {text} over 4-h blocks "
                     "(jackknife or subseries; heterogeneity through the day included)",
                     required=False),
            Variable(name + "_block_ci", ("bound",), "1", f"95 % interval of {text} over "
                     "4-h blocks (jackknife or subseries)", required=False),
        ]
        fam = _exponent_family(name, (), " (whole record)")
        point = (f"{name}_point",)
        out += [Variable(v.name, v.dims, v.units, v.long_name, required=False) for v in fam]
        out += [
            Variable(f"{name}_fit_x", point, None,
                     "log10 frequency (Hz), log10 box size (beats) or wavelet octave j",
                     required=False),
            Variable(f"{name}_fit_y", point, "1",
                     "log10 PSD, log10 F(n) or y_j of the fitted curve", required=False),
            Variable(f"{name}_fit_used", point, None, "point entered the fit",
                     flags=("not_used", "used"), required=False),
            Variable(f"{name}_intercept", (), "1", f"intercept of the {name} log-log line",
                     required=False),
        ]
    return out


def _multifractal(dim: tuple[str, ...], where: str, *, required: bool) -> list[Variable]:
    """Multifractal variables (:mod:`tfhrv.analysis.multifractal_fits`): wavelet-leader
    log-cumulants c1 and c2 (Wendt, Abry & Jaffard 2007) and MF-DFA-2 h(q), f(alpha) and
    width (Kantelhardt et al. 2002), with calibrated intervals."""
    b, q = (*dim, "bound"), (*dim, "q")
    out = [
        Variable("c1", dim, "1", "wavelet-leader log-cumulant c1 (about the mean Hoelder "
                 "exponent of the integrated NN series)" + where),
        Variable("c1_ci", b, "1", "95 % interval of c1 (SD of the monofractal null; not "
                 "bias-corrected)" + where),
        Variable("c2", dim, "1", "wavelet-leader log-cumulant c2 (0 for a monofractal, < 0 "
                 "for a multifractal), calibrated" + where),
        Variable("c2_ci", b, "1", "95 % calibrated interval of c2 (Neyman belt over the "
                 "multifractal random walk)" + where),
        Variable("c2_slope", dim, "1", "c2 before calibration (slope of the log-leader "
                 "variance against ln 2^j)" + where),
        Variable("c2_pvalue", dim, "1", "one-sided p-value of c2 < 0 against the "
                 "monofractal null" + where),
        Variable("mf_width", dim, "1", "MF-DFA singularity spectrum width alpha(q=-5) - "
                 "alpha(q=5), calibrated" + where),
        Variable("mf_width_ci", b, "1", "95 % calibrated interval of mf_width" + where),
        Variable("mf_width_slope", dim, "1", "MF-DFA spectrum width before calibration"
                 + where),
        Variable("mf_h", q, "1", "MF-DFA-2 generalised Hurst exponent h(q)" + where),
        Variable("mf_h_ci", (*q, "bound"), "1", "95 % interval of h(q) (SD of the "
                 "monofractal null; not bias-corrected)" + where),
        Variable("mf_alpha", q, "1", "Hoelder exponent alpha(q) = d tau / d q, tau(q) = "
                 "q h(q) - 1" + where),
        Variable("mf_f", q, "1", "singularity spectrum f(alpha(q))" + where),
    ]
    out = [Variable(v.name, v.dims, v.units, v.long_name, required=required) for v in out]
    if dim:
        out += [
            Variable("mf_estimator", dim, None, "multifractal estimate primary in the "
                     "window (by its stationarity category)", flags=MF_ESTIMATORS,
                     required=required),
            Variable("mf_reason", dim, None, "why the multifractal estimate is or is not "
                     "primary", required=required),
        ]
    return [Variable("q", ("q",), "1", "moment order q", required=required), *out]


def _circadian() -> list[Variable]:
    """The ``/circadian`` group (:func:`tfhrv.circadian.days.circadian_dataset`): one row
    per (tier, variable, day) of the day/night contrast and cosinor table.  Values are in
    the units of the row's variable (ms for ``nn_mean_ms``/``nn_sd_ms``, ms² for the band
    powers, 1 for exponents and c2), so those columns carry no single ``units``."""
    r = ("row",)
    own = " (units of the row's variable)"
    out = [
        Variable("row", r, None, "table row"),
        Variable("tier", r, None, "window tier of the row (short or long)"),
        Variable("variable", r, None, "per-window variable of the row"),
        Variable("day", r, None, "'all' (pooled) or the day number"),
        Variable("period_source", r, None, "where the night/rest and day periods came from"),
        Variable("day_mean", r, None, "mean over day windows" + own),
        Variable("night_mean", r, None, "mean over night/rest windows" + own),
        Variable("difference", r, None, "night - day difference" + own),
        Variable("difference_low", r, None, "lower end of the 95 % moving-block bootstrap "
                 "interval of the difference" + own),
        Variable("difference_high", r, None, "upper end of the 95 % moving-block bootstrap "
                 "interval of the difference" + own),
        Variable("effect_size", r, "1", "Hedges' g of the night - day difference"),
        Variable("n_day", r, "1", "day windows used"),
        Variable("n_night", r, "1", "night/rest windows used"),
        Variable("n_excluded", r, "1", "windows left out (no value or low coverage)"),
        Variable("contrast_note", r, None, "why the contrast is missing, if it is"),
        Variable("acrophase_reference", r, None, "clock time or hours from start"),
    ]
    for suffix, model in (("", "24-h cosinor"), ("2", "24 + 12 h cosinor")):
        if not suffix:
            out += [Variable("mesor", r, None, f"MESOR of the {model}" + own),
                    Variable("mesor_low", r, None, "lower 95 % limit of the MESOR" + own),
                    Variable("mesor_high", r, None, "upper 95 % limit of the MESOR" + own)]
        out += [
            Variable("amplitude" + suffix, r, None, f"amplitude of the {model}" + own),
            Variable("amplitude_low" + suffix, r, None,
                     f"lower 95 % limit of the {model} amplitude" + own),
            Variable("amplitude_high" + suffix, r, None,
                     f"upper 95 % limit of the {model} amplitude" + own),
            Variable("acrophase_h" + suffix, r, "h", f"acrophase of the {model}"),
            Variable("acrophase_low" + suffix, r, "h",
                     f"lower 95 % limit of the {model} acrophase"),
            Variable("acrophase_high" + suffix, r, "h",
                     f"upper 95 % limit of the {model} acrophase"),
            Variable("cosinor_p" + suffix, r, "1",
                     f"p-value of the zero-amplitude F-test of the {model} (ordinary least "
                     "squares, windows taken as independent: too small for autocorrelated "
                     "windows)"),
        ]
    w = ("short_window",)
    for name, what in (("short_night", "night/rest"), ("short_day", "day")):
        out.append(Variable(name, w, None, f"short window lies in the {what} period used by "
                            "the contrasts", flags=("no", "yes")))
    return [replace(v, required=False) for v in out]


def _nn() -> list[Variable]:
    b = ("beat",)
    return [
        Variable("beat_time_s", b, "s", "time of the ending beat"),
        Variable("rr_ms", b, "ms", "inter-beat interval"),
        Variable("label", b, None, "beat label code"),
        Variable("reason", b, None, "cleaning verdict of the interval",
                 flags=tuple(r.name.lower() for r in Reason),
                 flag_codes=tuple(int(r) for r in Reason)),
    ]


def _index(vars_: list[Variable]) -> MappingProxyType:
    return MappingProxyType({v.name: v for v in vars_})


#: group path -> {variable name -> Variable}; the groups every scan file has.
GROUPS: MappingProxyType = MappingProxyType({
    "/nn": _index(_nn()),
    "/short": _index(_tier()),
    "/long": _index(_tier() + _multifractal(("time",), "", required=True)),
    "/record": _index(_record() + _multifractal((), ", whole record", required=False)),
})
#: group path -> {variable name -> Variable}; groups a file may have.  When present, the
#: declared variables it holds are checked (dimensions, units, flags); none is required and
#: other variables are allowed, so that files of earlier releases stay readable.
OPTIONAL_GROUPS: MappingProxyType = MappingProxyType({"/circadian": _index(_circadian())})
#: Root attributes every scan file carries (provenance).
ROOT_ATTRS: tuple[str, ...] = ("Conventions", "tfhrv_version", "source_file", "source_sha256",
                               "parameters", "created", "caution", "history", "record_id",
                               "clock", "start")


def variable(group: str, name: str, data, /, *, dims: tuple[str, ...] | None = None
             ) -> tuple[tuple[str, ...], object, dict]:
    """``(dims, data, attrs)`` of a declared variable, ready for ``xarray.Dataset``.

    Raises ``KeyError`` for a name the schema does not declare (so nothing undeclared is
    written).  ``dims`` may be given for variables whose dimension name is per exponent.
    """
    decl = (GROUPS.get(group) or OPTIONAL_GROUPS[group])[name]
    return (decl.dims if dims is None else dims), data, decl.attrs()


class SchemaError(ValueError):
    """A file does not follow the scan-file schema; ``problems`` lists what is wrong."""

    def __init__(self, path: str, problems: list[str]) -> None:
        self.path = str(path)
        self.problems = tuple(problems)
        shown = "; ".join(problems[:5]) + (f"; and {len(problems) - 5} more"
                                           if len(problems) > 5 else "")
        super().__init__(f"{path}: not a tfhrv scan file: {shown}")


def problems(tree: xr.DataTree, /) -> list[str]:
    """Everything in ``tree`` that departs from the schema (empty when it conforms)."""
    out: list[str] = []
    missing_attrs = [a for a in ROOT_ATTRS if a not in tree.attrs]
    if missing_attrs:
        out.append("root attributes missing: " + ", ".join(missing_attrs))
    present = {g: d for g, d in OPTIONAL_GROUPS.items() if g.strip("/") in tree.children}
    for group, decls in {**GROUPS, **present}.items():
        if group.strip("/") not in tree.children:
            out.append(f"group {group} missing")
            continue
        ds = tree[group].to_dataset()
        for name, decl in decls.items():
            if name not in ds.variables:
                if decl.required:
                    out.append(f"{group}/{name} missing")
                continue
            var = ds[name]
            if var.dims != decl.dims:
                out.append(f"{group}/{name} has dimensions {var.dims}, expected {decl.dims}")
            if decl.units is not None and var.attrs.get("units") != decl.units:
                out.append(f"{group}/{name} has units {var.attrs.get('units')!r}, "
                           f"expected {decl.units!r}")
            if decl.flags is not None and var.size and np.issubdtype(var.dtype, np.integer):
                codes = decl.flag_codes or tuple(range(len(decl.flags)))
                bad = ~np.isin(var.values, codes)
                if bad.any():
                    out.append(f"{group}/{name} holds codes outside its flags")
        undeclared = sorted(set(ds.variables) - set(decls))
        if undeclared and group in GROUPS:  # an optional group of an older file may differ
            out.append(f"{group} has undeclared variables: " + ", ".join(undeclared[:5]))
    return out


def validate(tree: xr.DataTree, /, *, path: str = "<tree>") -> xr.DataTree:
    """Return ``tree`` if it follows the schema; raise :class:`SchemaError` naming ``path``
    and what is missing or wrong otherwise."""
    found = problems(tree)
    if found:
        raise SchemaError(path, found)
    return tree
