"""Windowing in clock time, the per-window work, and the time x scale DataTree.

Two tiers by default: ``short`` (5-min windows, 5-min hop) for short-term scaling
(alpha1 range, 4-16 beats) and ``long`` (4-h windows, 1-h hop) for long-range scaling
(about 1e-3 to 1e-2 Hz), plus the whole-record group ``/record``.  Windows are aligned to
the clock (multiples of the hop from midnight) when the start time is known.
"""

from __future__ import annotations

import datetime as dt
import json
import warnings
from dataclasses import asdict, dataclass, field

import numpy as np
import xarray as xr

from tfhrv.analysis.policy import (
    ESTIMATORS,
    RECORD_PRESETS,
    assess_record,
    calibrated_fits,
    choose_estimator,
)
from tfhrv.analysis.windows import LONG, SHORT, TierSpec, tier_stationarity, tier_windows
from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.dfa import Fluctuation, dfa_fluctuation, local_slopes
from tfhrv.estimators.loglog import ScalingFit, convert_exponent
from tfhrv.estimators.spectral import TASK_FORCE_BANDS, band_powers, periodogram_psd
from tfhrv.estimators.wavelet import logscale_diagram
from tfhrv.signal.clean import CleanResult, Reason
from tfhrv.signal.resample import resample_even
from tfhrv.stationarity.battery import CATEGORIES

__all__ = ["ScanOptions", "scan"]

BANDS = tuple(TASK_FORCE_BANDS)
BOUNDS = ("lower", "upper")
EXPONENTS = ("beta_spectral", "beta_wavelet", "alpha1", "alpha2", "alpha_long")


@dataclass(frozen=True, slots=True)
class ScanOptions:
    """Every option of :func:`scan` (stored as JSON in the output file).

    ``record_band_hz`` is the classical band whose whole-record FFT slope is judged;
    ``n_surrogates`` the surrogates per window of the drift test; ``seed`` the base seed of
    the surrogates (window w uses seed + w); ``*_psd_fs_hz`` the resampling rates of the
    stored spectra (4 Hz for 5-min windows, common practice; 1 Hz for long windows);
    ``calibration_model`` the model of the calibrated intervals ("powerlaw" or "fgn-fbm",
    :mod:`tfhrv.calibration.calibrate`).
    """

    short: TierSpec = SHORT
    long: TierSpec = LONG
    record_band_hz: tuple[float, float] = (1e-4, 1e-2)
    dfa_order: int = 1
    vanishing_moments: int = 3
    n_surrogates: int = 99
    seed: int = 20100819
    short_psd_fs_hz: float = 4.0
    long_psd_fs_hz: float = 1.0
    calibration_model: str = "powerlaw"

    def as_dict(self) -> dict:
        """Plain dictionary (JSON-friendly)."""
        return asdict(self)


# ------------------------------------------------------------------ per-window work


def _try(func, *args, **kwargs):
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return func(*args, **kwargs)
    except (InsufficientDataError, ValueError, np.linalg.LinAlgError):
        return None


_TIER_PRESETS = {
    "short": {"alpha1": "alpha1", "alpha2": "alpha2", "beta_spectral": "beta_spectral_short",
              "beta_wavelet": "beta_wavelet_short"},
    "long": RECORD_PRESETS,
}


def _window_fits(nn: np.ndarray, t: np.ndarray, tier: TierSpec, opt: ScanOptions,
                 dfa_scales: np.ndarray | None
                 ) -> tuple[dict[str, ScalingFit | None], Fluctuation | None]:
    return calibrated_fits(_TIER_PRESETS[tier.scale], nn, beat_time_s=t, order=opt.dfa_order,
                           vanishing_moments=opt.vanishing_moments, dfa_scales=dfa_scales,
                           calibration_model=opt.calibration_model)


def _at_scales(fl: Fluctuation, scales: np.ndarray) -> Fluctuation:
    """The fluctuation function at a subset of its scales."""
    idx = np.searchsorted(fl.scales, scales)
    return Fluctuation(scales=fl.scales[idx], fluctuation=fl.fluctuation[idx], order=fl.order,
                       n_obs=fl.n_obs, n_boxes=fl.n_boxes[idx])


def _as_beta(fit: ScalingFit) -> tuple[float, tuple[float, float]]:
    """Exponent and interval of a fit in beta units (beta = 2 alpha - 1)."""
    def beta(v: float) -> float:
        return convert_exponent(v, kind=fit.kind).beta

    return beta(fit.exponent), (beta(fit.ci[0]), beta(fit.ci[1]))


_PRIMARY_SOURCE = {
    "short": {"spectral": "beta_spectral", "wavelet": "beta_wavelet", "dfa": "alpha1"},
    "long": {"spectral": "beta_spectral", "wavelet": "beta_wavelet", "dfa": "alpha_long"},
}


@dataclass
class _TierArrays:
    n: int
    scales: np.ndarray
    octaves: np.ndarray
    freqs: np.ndarray
    values: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        n, ns, no, nf = self.n, self.scales.size, self.octaves.size, self.freqs.size
        nan = np.nan
        v = self.values
        for name in ("nn_mean", "nn_sd", "coverage", "ectopic_fraction", "total_power",
                     "adf_stat", "adf_pvalue", "kpss_stat", "kpss_pvalue", "mean_drift",
                     "sd_drift", "drift_pvalue", "exponent", "exponent_se"):
            v[name] = np.full(n, nan)
        v["n_beats"] = np.zeros(n, dtype=np.int32)
        for name in EXPONENTS:
            v[name] = np.full(n, nan)
            v[name + "_se"] = np.full(n, nan)
            v[name + "_ci"] = np.full((n, 2), nan)
            v[name + "_raw"] = np.full(n, nan)
        v["exponent_ci"] = np.full((n, 2), nan)
        v["band_power"] = np.full((n, len(BANDS)), nan)
        v["psd"] = np.full((n, nf), nan)
        v["fluctuation"] = np.full((n, ns), nan)
        v["local_alpha"] = np.full((n, ns), nan)
        v["wavelet_energy"] = np.full((n, no), nan)
        v["stationarity"] = np.full(n, CATEGORIES.index("too-short"), dtype=np.int8)
        v["estimator"] = np.zeros(n, dtype=np.int8)
        v["reason"] = np.full(n, "", dtype=object)


def _tier_grids(tier: TierSpec, mean_rr_s: float, fs: float
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    beats = max(64, int(tier.window_s / max(mean_rr_s, 0.3)))
    hi = max(16, beats // 4)
    n_sc = int(np.ceil(12 * np.log10(hi / 4))) + 1
    scales = np.unique(np.rint(np.geomspace(4, hi, n_sc)).astype(np.int64))
    n_oct = max(2, int(np.log2(beats)) - 2)
    octaves = np.arange(1, n_oct + 1)
    f_lo = 3.0 / tier.window_s
    freqs = np.geomspace(f_lo, fs / 2, int(np.ceil(10 * np.log10(fs / 2 / f_lo))) + 1)
    return scales, octaves, freqs


def _binned_psd(freq: np.ndarray, psd: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Mean PSD in log-spaced bins centred (geometrically) on ``grid``."""
    edges = np.sqrt(grid[1:] * grid[:-1])
    edges = np.concatenate([[grid[0] ** 2 / edges[0]], edges, [grid[-1] ** 2 / edges[-1]]])
    idx = np.searchsorted(edges, freq) - 1
    ok = (idx >= 0) & (idx < grid.size) & (freq > 0)
    sums = np.bincount(idx[ok], weights=psd[ok], minlength=grid.size)
    counts = np.bincount(idx[ok], minlength=grid.size)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = sums / counts
    out[counts == 0] = np.nan
    return out


def _analyse_tier(cleaned: CleanResult, tier: TierSpec, opt: ScanOptions
                  ) -> tuple[xr.Dataset, np.ndarray]:
    rec = cleaned.recording
    windows = tier_windows(cleaned, tier)
    battery = tier_stationarity(windows, n_surrogates=opt.n_surrogates, seed=opt.seed)
    keep = cleaned.keep
    mean_rr = float(np.mean(rec.rr_ms[keep])) / 1000.0 if keep.any() else 0.8
    fs = opt.short_psd_fs_hz if tier.scale == "short" else opt.long_psd_fs_hz
    scales, octaves, freqs = _tier_grids(tier, mean_rr, fs)
    arr = _TierArrays(len(windows), scales, octaves, freqs)
    v = arr.values
    # Task Force 1996: a band needs about 10 periods of its lower limit; ULF needs 24 h.
    band_ok = np.array([tier.window_s >= 10.0 / lo if lo > 0 else False
                        for lo, _ in TASK_FORCE_BANDS.values()])
    for w, (win, st) in enumerate(zip(windows, battery, strict=True)):
        nn, tt = win.nn_ms, win.time_s
        v["n_beats"][w] = win.n_beats
        v["coverage"][w] = win.coverage
        v["ectopic_fraction"][w] = win.ectopic_fraction
        if nn.size:
            v["nn_mean"][w] = nn.mean()
            v["nn_sd"][w] = nn.std(ddof=1) if nn.size > 1 else np.nan
        if st is None:
            v["reason"][w] = (f"too-short: {100 * win.coverage:.0f} % coverage, {nn.size} NN "
                              f"intervals (needs {100 * tier.min_coverage:.0f} % and "
                              f"{tier.min_beats})")
            continue
        for name in ("adf_stat", "adf_pvalue", "kpss_stat", "kpss_pvalue", "mean_drift",
                     "sd_drift", "drift_pvalue"):
            v[name][w] = getattr(st, name)
        v["stationarity"][w] = CATEGORIES.index(st.category)
        usable = scales[scales <= nn.size // 4]
        fits, fl = _window_fits(nn, tt, tier, opt, usable if usable.size >= 3 else None)
        for name, fit in fits.items():
            if fit is not None and np.isfinite(fit.exponent):
                v[name][w] = fit.exponent
                v[name + "_se"][w] = fit.se
                v[name + "_ci"][w] = fit.ci
                v[name + "_raw"][w] = fit.raw_exponent
        available = {}
        for est, src in _PRIMARY_SOURCE[tier.scale].items():
            if np.isfinite(v[src][w]):
                lo, hi = _as_beta(fits[src])[1]
                available[est] = hi - lo
        choice = choose_estimator(st.category, available=available)
        v["estimator"][w] = ESTIMATORS.index(choice.estimator)
        v["reason"][w] = f"{st.category}: {choice.reason}"
        if choice.estimator != "none":
            src = _PRIMARY_SOURCE[tier.scale][choice.estimator]
            beta, ci = _as_beta(fits[src])
            v["exponent"][w] = beta
            v["exponent_ci"][w] = ci
            v["exponent_se"][w] = fits[src].se * (1 if fits[src].kind == "beta" else 2)
        even = _try(resample_even, tt, nn, fs_hz=fs)
        if even is not None:
            spec = _try(periodogram_psd, even.value_ms, fs_hz=even.fs_hz)
            if spec is not None:
                v["psd"][w] = _binned_psd(spec.frequency_hz, spec.psd, freqs)
                bp = _try(band_powers, spec)
                if bp is not None:
                    v["band_power"][w] = np.where(band_ok, bp.power, np.nan)
                    v["total_power"][w] = bp.total_power
        if usable.size >= 3 and fl is not None:
            la = local_slopes(_at_scales(fl, usable))
            v["fluctuation"][w, : usable.size] = la.fluctuation
            v["local_alpha"][w, : usable.size] = la.slopes
        diag = _try(logscale_diagram, nn, vanishing_moments=opt.vanishing_moments)
        if diag is not None:
            m = np.minimum(diag.octaves.size, octaves.size)
            v["wavelet_energy"][w, :m] = diag.energy[:m]
    centres = np.array([win.start_s for win in windows]) + tier.window_s / 2
    return _tier_dataset(arr, centres, rec.start, tier), v["stationarity"]


def _time_coords(elapsed_s: np.ndarray, start) -> dict:
    td = (np.round(elapsed_s * 1e3)).astype("int64").astype("timedelta64[ms]")
    coords: dict = {"elapsed": ("time", elapsed_s, {"units": "s",
                                                     "long_name": "time from recording start"})}
    if isinstance(start, dt.datetime):
        base = np.datetime64(start.replace(tzinfo=None), "ms")
        coords["time"] = ("time", base + td, {"long_name": "window centre (clock time)"})
    else:
        coords["time"] = ("time", td, {"long_name": "window centre (time from start)"})
    if start is not None:
        tod = start.time() if isinstance(start, dt.datetime) else start
        h0 = tod.hour + tod.minute / 60 + tod.second / 3600
        coords["clock_hour"] = ("time", (h0 + elapsed_s / 3600.0) % 24.0,
                                {"units": "h", "long_name": "clock time of day"})
    return coords


_ATTRS = {
    "nn_mean": ("ms", "mean NN interval"),
    "nn_sd": ("ms", "SD of NN intervals"),
    "coverage": ("1", "share of the window covered by NN intervals"),
    "n_beats": ("1", "number of NN intervals"),
    "ectopic_fraction": ("1", "share of beats labelled non-sinus"),
    "psd": ("ms2 Hz-1", "power spectral density of the NN series (log-binned periodogram)"),
    "band_power": ("ms2", "power in the Task Force 1996 frequency band"),
    "total_power": ("ms2", "total power up to 0.4 Hz"),
    "fluctuation": ("ms", "DFA fluctuation function F(n)"),
    "wavelet_energy": ("ms2", "mean squared wavelet detail coefficient per octave"),
    "local_alpha": ("1", "local DFA exponent d log F / d log n"),
    "beta_spectral": ("1", "spectral exponent beta from the log-binned periodogram"),
    "beta_wavelet": ("1", "spectral exponent beta from the wavelet log-scale diagram"),
    "alpha1": ("1", "DFA exponent over 4-16 beats"),
    "alpha2": ("1", "DFA exponent over 16-64 beats"),
    "alpha_long": ("1", "DFA exponent over 64 beats to a quarter of the window"),
    "adf_stat": ("1", "augmented Dickey-Fuller statistic (constant)"),
    "adf_pvalue": ("1", "ADF p-value (MacKinnon 1994)"),
    "kpss_stat": ("1", "KPSS statistic (level null)"),
    "kpss_pvalue": ("1", "KPSS p-value, clipped to [0.01, 0.10] by the table"),
    "mean_drift": ("1", "spread of sub-window means over pooled within-SD"),
    "sd_drift": ("1", "largest over smallest sub-window SD"),
    "drift_pvalue": ("1", "p-value of the drift statistics against phase-randomised surrogates"),
    "exponent": ("1", "primary scaling exponent in beta units (PSD ~ 1/f^beta)"),
    "reason": ("", "why the primary estimator was chosen"),
}


def _tier_dataset(arr: _TierArrays, centres: np.ndarray, start, tier: TierSpec) -> xr.Dataset:
    v = arr.values
    data = {}
    for name, val in v.items():
        if name in ("stationarity", "estimator", "reason"):
            continue
        if val.ndim == 1:
            dims = ("time",)
        elif name.endswith("_ci"):
            dims = ("time", "bound")
        else:
            dims = {"band_power": ("time", "band"), "psd": ("time", "frequency"),
                    "fluctuation": ("time", "scale"), "local_alpha": ("time", "scale"),
                    "wavelet_energy": ("time", "octave")}[name]
        base = name.removesuffix("_ci").removesuffix("_se").removesuffix("_raw")
        units, long_name = _ATTRS.get(base, ("1", base))
        if name.endswith("_raw"):
            long_name = (long_name + " before calibration: the slope of the fitted line, the "
                         "conventional value that published ranges refer to")
        elif name.endswith("_se"):
            long_name = "standard error (calibrated) of " + long_name
        elif name.endswith("_ci"):
            long_name = "95 % calibrated confidence interval of " + long_name
        data[name] = (dims, val, {"units": units, "long_name": long_name})
    data["stationarity"] = ("time", v["stationarity"], {
        "long_name": "stationarity category of the window",
        "flag_values": np.arange(len(CATEGORIES), dtype=np.int8),
        "flag_meanings": " ".join(c.replace("-", "_") for c in CATEGORIES)})
    data["estimator"] = ("time", v["estimator"], {
        "long_name": "primary estimator of the window",
        "flag_values": np.arange(len(ESTIMATORS), dtype=np.int8),
        "flag_meanings": " ".join(ESTIMATORS)})
    data["reason"] = ("time", v["reason"].astype(str), {"long_name": _ATTRS["reason"][1]})
    coords = _time_coords(centres, start)
    coords.update({
        "band": ("band", list(BANDS), {"long_name": "Task Force 1996 frequency band"}),
        "band_low_hz": ("band", [TASK_FORCE_BANDS[b][0] for b in BANDS], {"units": "Hz"}),
        "band_high_hz": ("band", [TASK_FORCE_BANDS[b][1] for b in BANDS], {"units": "Hz"}),
        "bound": ("bound", list(BOUNDS)),
        "frequency": ("frequency", arr.freqs, {"units": "Hz", "long_name": "frequency"}),
        "scale": ("scale", arr.scales, {"units": "beats", "long_name": "DFA box size"}),
        "octave": ("octave", arr.octaves, {"units": "1",
                                           "long_name": "wavelet octave j (scale 2^j beats)"}),
    })
    ds = xr.Dataset(data, coords=coords)
    ds.attrs.update({"window_s": tier.window_s, "hop_s": tier.hop_s, "scale_target": tier.scale})
    return ds


# ------------------------------------------------------------------ whole record


def _record_dataset(cleaned: CleanResult, long_categories: np.ndarray, opt: ScanOptions
                    ) -> xr.Dataset:
    rec = cleaned.recording
    q = cleaned.quality
    assessment = assess_record(cleaned, long_categories=long_categories,
                               band_hz=opt.record_band_hz, order=opt.dfa_order,
                               vanishing_moments=opt.vanishing_moments,
                               calibration_model=opt.calibration_model)
    fits, verdict = assessment.fits, assessment.verdict

    def val(name):
        f = fits[name]
        return float(f.exponent) if f is not None else float("nan")

    data = {}
    for name in EXPONENTS:
        f = fits[name]
        units, long_name = _ATTRS[name]
        data[name] = ((), val(name), {"units": units, "long_name": long_name + " (whole record)"})
        data[name + "_se"] = ((), f.se if f is not None else np.nan,
                              {"units": units, "long_name": "standard error of " + name})
        data[name + "_ci"] = (("bound",), np.asarray(f.ci if f is not None else (np.nan,) * 2),
                              {"units": units, "long_name": "95 % calibrated interval of " + name})
        data.update(_fit_curve(name, f))
    nn = cleaned.nn_ms
    fl = _try(dfa_fluctuation, nn, order=opt.dfa_order)
    if fl is not None:
        data["fluctuation"] = (("scale",), fl.fluctuation, {
            "units": "ms", "long_name": f"DFA-{opt.dfa_order} fluctuation function F(n), "
            "whole record"})
    diag = _try(logscale_diagram, nn, vanishing_moments=opt.vanishing_moments)
    if diag is not None:
        data["wavelet_y"] = (("octave",), diag.y, {
            "units": "1", "long_name": "bias-corrected log2 wavelet energy y_j, whole record"})
        data["wavelet_y_var"] = (("octave",), diag.variance, {
            "units": "1", "long_name": "variance of y_j (Abry & Veitch 1998)"})
    verdicts = ("fit", "fit-with-cautions", "unfit")
    data["verdict"] = ((), np.int8(verdicts.index(verdict.verdict)), {
        "long_name": "whole-record FFT-slope fitness verdict",
        "flag_values": np.arange(3, dtype=np.int8),
        "flag_meanings": " ".join(v.replace("-", "_") for v in verdicts),
        "reasons": json.dumps(list(verdict.reasons)),
        "cautions": json.dumps(list(verdict.cautions)),
        "recommended_estimator": verdict.recommended,
        "checks": json.dumps(verdict.checks, default=float),
    })
    data.update(_consequence_vars(assessment))
    qd = q.as_dict()
    for key in ("coverage", "share_kept", "ectopic_share", "longest_gap_s", "nn_mean_ms",
                "sdnn_ms", "rmssd_ms", "recorded_h", "analysable_h"):
        data[key] = ((), float(qd[key]), {"long_name": key.replace("_", " ")})
    data["hourly_coverage"] = (("hour",), q.hourly_coverage,
                               {"units": "1", "long_name": "share of each hour covered by NN"})
    coords = {"bound": ("bound", list(BOUNDS))}
    if fl is not None:
        coords["scale"] = ("scale", fl.scales, {"units": "beats", "long_name": "DFA box size"})
    if diag is not None:
        coords["octave"] = ("octave", diag.octaves, {
            "units": "1", "long_name": "wavelet octave j (scale 2^j beats)"})
    ds = xr.Dataset(data, coords=coords)
    band = assessment.band_hz
    ds.attrs.update({"verdict": verdict.verdict,
                     "beta_spectral_band_hz": list(band) if band else [],
                     "removed": json.dumps(qd["removed"]), "record_id": rec.record_id})
    return ds


def _consequence_vars(assessment) -> dict:
    """The measured effect of the level changes on the FFT slope and the block intervals
    (:mod:`tfhrv.analysis.consequence`)."""
    nan = float("nan")
    e = assessment.effect
    ch = assessment.verdict.checks
    out = {
        "nonstationary_share": ((), float(ch.get("nonstationary_share", nan)), {
            "units": "1", "long_name": "share of analysable long-tier windows whose "
            "stationarity category is not stationary"}),
        "level_effect": ((), e.effect if e is not None else nan, {
            "units": "1", "long_name": "change of the whole-record FFT beta when the largest "
            "level changes are regressed out, beyond a power-law null (beta units)"}),
        "level_effect_ci": (("bound",), np.asarray(e.ci if e is not None else (nan, nan)), {
            "units": "1", "long_name": "95 % interval of level_effect under the power-law "
            "null"}),
        "level_change_time": (("level_change",), np.asarray(
            e.change_s if e is not None else (), float), {
            "units": "s", "long_name": "time of each regressed-out level change from the "
            "start of the resampled series"}),
        "level_change_step": (("level_change",), np.asarray(
            e.step_ms if e is not None else (), float), {
            "units": "ms", "long_name": "size of each regressed-out level change"}),
    }
    for name in EXPONENTS:
        b = assessment.block.get(name)
        method = b.method if b is not None else "none"
        out[name + "_block_se"] = ((), b.se if b is not None else nan, {
            "units": "1", "long_name": f"standard error of {name} over 4-h blocks "
            f"({method}; heterogeneity through the day included)"})
        out[name + "_block_ci"] = (("bound",), np.asarray(b.ci if b is not None
                                                          else (nan, nan)), {
            "units": "1", "long_name": f"95 % interval of {name} over 4-h blocks ({method})"})
    return out


_CURVE_AXES = {"Hz": ("log10 frequency", "Hz"), "beats": ("log10 box size", "beats"),
               "octave": ("wavelet octave j", "1")}


def _fit_curve(name: str, fit: ScalingFit | None) -> dict:
    """The points behind a whole-record fit, so that a figure can redraw fit and line."""
    if fit is None:
        return {}
    dim = f"{name}_point"
    xname, xunits = _CURVE_AXES[fit.fit_units]
    return {
        f"{name}_fit_x": ((dim,), np.asarray(fit.x), {"units": xunits, "long_name": xname}),
        f"{name}_fit_y": ((dim,), np.asarray(fit.y), {
            "units": "1", "long_name": "log10 PSD, log10 F(n) or y_j of the fitted curve"}),
        f"{name}_fit_used": ((dim,), np.asarray(fit.used, dtype=np.int8), {
            "long_name": "point entered the fit", "flag_values": np.array([0, 1], np.int8),
            "flag_meanings": "not_used used"}),
        f"{name}_intercept": ((), float(fit.intercept), {
            "units": "1", "long_name": f"intercept of the {name} log-log line"}),
        f"{name}_raw": ((), float(fit.raw_exponent), {
            "units": "1", "long_name": f"{name} before calibration (slope of the fitted line)"}),
    }


def _nn_dataset(cleaned: CleanResult) -> xr.Dataset:
    rec = cleaned.recording
    return xr.Dataset(
        {
            "beat_time_s": ("beat", rec.beat_time_s, {"units": "s",
                                                      "long_name": "time of the ending beat"}),
            "rr_ms": ("beat", rec.rr_ms, {"units": "ms", "long_name": "inter-beat interval"}),
            "label": ("beat", rec.labels.astype(str), {"long_name": "beat label code"}),
            "reason": ("beat", cleaned.reason, {
                "long_name": "cleaning verdict of the interval",
                "flag_values": np.array([int(r) for r in Reason], dtype=np.uint8),
                "flag_meanings": Reason.meanings()}),
        }
    )


def scan(cleaned: CleanResult, /, *, options: ScanOptions | None = None) -> xr.DataTree:
    """Time-resolved scaling analysis of a cleaned recording.

    Parameters
    ----------
    cleaned : CleanResult
        Output of :func:`tfhrv.signal.clean.clean`.
    options : ScanOptions, optional

    Returns
    -------
    xarray.DataTree
        Groups ``/nn``, ``/short``, ``/long`` and ``/record`` (see the DataTree section
        of the README).  Root attributes carry the provenance.
    """
    from tfhrv.dataset.netcdf import provenance

    opt = options or ScanOptions()
    rec = cleaned.recording
    short, _ = _analyse_tier(cleaned, opt.short, opt)
    long, long_cat = _analyse_tier(cleaned, opt.long, opt)
    record = _record_dataset(cleaned, long_cat, opt)
    params = {"scan": opt.as_dict(), "clean": {
        "min_ms": cleaned.options.min_ms, "max_ms": cleaned.options.max_ms,
        "max_relative_change": cleaned.options.max_relative_change,
        "reference_beats": cleaned.options.reference_beats,
        "gap_min_s": cleaned.options.gap_min_s}}
    root = xr.Dataset(attrs=provenance(source=rec.source, parameters=params,
                                       history="tfhrv scan"))
    root.attrs["record_id"] = rec.record_id
    root.attrs["clock"] = ("timestamp" if isinstance(rec.start, dt.datetime)
                           else "time-of-day" if rec.start is not None else "unknown")
    root.attrs["start"] = rec.start.isoformat() if rec.start is not None else ""
    return xr.DataTree.from_dict({"/": root, "/nn": _nn_dataset(cleaned), "/short": short,
                                  "/long": long, "/record": record})
