"""The record pipeline: one way to analyse a cleaned recording (numpy layer).

``tfhrv inspect``, ``scan``, ``report`` and ``cohort`` all call :func:`analyse_record`, so a
record is analysed one way.  ``inspect`` asks for the battery and the whole-record
assessment only (``detail="battery"``); ``scan`` adds the per-window fits, spectra and
fluctuation functions (``detail="full"``).  The battery, the categories and the
whole-record verdict are the same in both, by construction.

Two tiers by default: ``short`` (5-min windows, 5-min hop) for short-term scaling (alpha1
range, 4-16 beats) and ``long`` (4-h windows, 1-h hop) for long-range scaling (about 1e-3
to 1e-2 Hz).  Windows are aligned to the clock when the start time is known
(:mod:`tfhrv.analysis.windows`).

Only documented numerical conditions leave a value missing: a series too short or too
sparse for an estimator raises :class:`~tfhrv.core.errors.InsufficientDataError`, which
becomes NaN; any other error propagates.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import asdict, dataclass, field
from types import MappingProxyType
from typing import Literal

import numpy as np

from tfhrv.analysis.fits import RECORD_PRESETS, calibrated_fits
from tfhrv.analysis.multifractal_fits import (
    MULTIFRACTAL_OFF,
    empty_multifractal,
    record_multifractal,
    window_multifractal,
)
from tfhrv.analysis.policy import ESTIMATORS, choose_estimator
from tfhrv.analysis.record import RecordAssessment, assess_record, record_measures
from tfhrv.analysis.verdict import FitnessThresholds
from tfhrv.analysis.windows import (
    LONG,
    SHORT,
    TierSpec,
    Window,
    category_codes,
    tier_stationarity,
    tier_windows,
)
from tfhrv.calibration.multifractal import MultifractalEstimate
from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.progress import SILENT, Progress
from tfhrv.core.validation import check_choice, check_int
from tfhrv.estimators.dfa import Fluctuation, dfa_fluctuation, local_slopes
from tfhrv.estimators.loglog import ScalingFit, convert_exponent
from tfhrv.estimators.spectral import TASK_FORCE_BANDS, band_powers, periodogram_psd
from tfhrv.estimators.wavelet import LogscaleDiagram, logscale_diagram
from tfhrv.signal.clean import CleanResult
from tfhrv.signal.resample import resample_even
from tfhrv.stationarity.battery import CATEGORIES, StationarityResult

__all__ = [
    "EXPONENTS",
    "RecordAnalysis",
    "ScanOptions",
    "TierAnalysis",
    "analyse_record",
]

#: The exponents computed per window and for the whole record.
EXPONENTS: tuple[str, ...] = ("beta_spectral", "beta_wavelet", "alpha1", "alpha2", "alpha_long")
#: Per-window statistics of the stationarity battery (fields of StationarityResult).
BATTERY_FIELDS: tuple[str, ...] = ("adf_stat", "adf_pvalue", "kpss_stat", "kpss_pvalue",
                                   "mean_drift", "sd_drift", "drift_pvalue")


@dataclass(frozen=True, slots=True)
class ScanOptions:
    """Every option of the record analysis (stored as JSON in the output file).

    ``record_band_hz`` is the classical band whose whole-record FFT slope is judged;
    ``n_surrogates`` the surrogates per window of the drift test; ``seed`` the base seed of
    the surrogates (window w uses seed + w); ``*_psd_fs_hz`` the resampling rates of the
    stored spectra (4 Hz for 5-min windows, common practice; 1 Hz for long windows);
    ``calibration_model`` the model of the calibrated intervals ("powerlaw" or "fgn-fbm",
    :mod:`tfhrv.calibration.calibrate`); ``thresholds`` those of the FFT-slope verdict;
    ``multifractal`` False leaves out the multifractal estimates of the 4-h windows and the
    whole record (:mod:`tfhrv.analysis.multifractal_fits`; about a tenth of the work of a
    24-h scan), their variables then missing with the reason.
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
    thresholds: FitnessThresholds = field(default_factory=FitnessThresholds)
    multifractal: bool = True

    def as_dict(self) -> dict:
        """Plain dictionary (JSON-friendly)."""
        return asdict(self)


@dataclass(frozen=True, slots=True)
class TierAnalysis:
    """One tier of windows: the windows, their battery results and (``detail="full"``)
    the per-window values.

    ``values`` maps each per-window variable name (see :mod:`tfhrv.dataset.schema`) to an
    array whose first axis is the window; it is empty for ``detail="battery"``.
    ``scales``, ``octaves`` and ``frequencies`` are the tier's common grids.
    """

    spec: TierSpec
    windows: tuple[Window, ...]
    battery: tuple[StationarityResult | None, ...]
    categories: np.ndarray
    centres_s: np.ndarray
    scales: np.ndarray
    octaves: np.ndarray
    frequencies: np.ndarray
    values: Mapping[str, np.ndarray]

    def category_counts(self) -> dict[str, int]:
        """Number of windows per stationarity category."""
        return {c: int(np.sum(self.categories == i)) for i, c in enumerate(CATEGORIES)}


@dataclass(frozen=True, slots=True)
class RecordAnalysis:
    """Everything the pipeline computed on one record.

    ``fluctuation`` and ``logscale`` are the whole-record DFA fluctuation function and
    wavelet log-scale diagram, ``multifractal`` the whole-record multifractal estimates
    (:mod:`tfhrv.analysis.multifractal_fits`) (``detail="full"`` only; None otherwise or
    when the record is too short for them).
    """

    cleaned: CleanResult
    options: ScanOptions
    detail: str
    short: TierAnalysis
    long: TierAnalysis
    assessment: RecordAssessment
    fluctuation: Fluctuation | None
    logscale: LogscaleDiagram | None
    multifractal: MultifractalEstimate | None = None  # whole record, detail="full" only


def _or_none(func, *args, **kwargs):
    """``func(...)``, or None when the data are too short or sparse for it (documented
    numerical condition); every other error propagates."""
    try:
        with np.errstate(divide="ignore", invalid="ignore"):
            return func(*args, **kwargs)
    except InsufficientDataError:
        return None


_TIER_PRESETS = {
    "short": {"alpha1": "alpha1", "alpha2": "alpha2", "beta_spectral": "beta_spectral_short",
              "beta_wavelet": "beta_wavelet_short"},
    "long": RECORD_PRESETS,
}
_PRIMARY_SOURCE = {
    "short": {"spectral": "beta_spectral", "wavelet": "beta_wavelet", "dfa": "alpha1"},
    "long": {"spectral": "beta_spectral", "wavelet": "beta_wavelet", "dfa": "alpha_long"},
}


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


def _empty_values(n: int, scales: np.ndarray, octaves: np.ndarray, freqs: np.ndarray,
                  scale: str = "short") -> dict[str, np.ndarray]:
    nan = np.nan
    v: dict[str, np.ndarray] = {}
    for name in ("nn_mean_ms", "nn_sd_ms", "coverage", "ectopic_fraction", "total_power",
                 *BATTERY_FIELDS, "exponent", "exponent_se"):
        v[name] = np.full(n, nan)
    v["n_beats"] = np.zeros(n, dtype=np.int32)
    for name in EXPONENTS:
        v[name] = np.full(n, nan)
        v[name + "_se"] = np.full(n, nan)
        v[name + "_ci"] = np.full((n, 2), nan)
        v[name + "_slope"] = np.full(n, nan)
    v["exponent_ci"] = np.full((n, 2), nan)
    v["band_power"] = np.full((n, len(TASK_FORCE_BANDS)), nan)
    v["psd"] = np.full((n, freqs.size), nan)
    v["fluctuation"] = np.full((n, scales.size), nan)
    v["local_alpha"] = np.full((n, scales.size), nan)
    v["wavelet_energy"] = np.full((n, octaves.size), nan)
    v["stationarity"] = np.full(n, CATEGORIES.index("too-short"), dtype=np.int8)
    v["estimator"] = np.zeros(n, dtype=np.int8)
    v["reason"] = np.full(n, "", dtype=object)
    if scale == "long":  # multifractal: long windows only (analysis.multifractal_fits)
        v.update(empty_multifractal(n))
    return v


def _window_values(v: dict, w: int, win: Window, st: StationarityResult | None,
                   tier: TierSpec, opt: ScanOptions, grids: tuple, band_ok: np.ndarray
                   ) -> None:
    """Fill row ``w`` of the per-window arrays ``v``."""
    scales, octaves, freqs = grids
    nn, tt = win.nn_ms, win.time_s
    v["n_beats"][w] = win.n_beats
    v["coverage"][w] = win.coverage
    v["ectopic_fraction"][w] = win.ectopic_fraction
    if nn.size:
        v["nn_mean_ms"][w] = nn.mean()
        v["nn_sd_ms"][w] = nn.std(ddof=1) if nn.size > 1 else np.nan
    if st is None:
        v["reason"][w] = (f"too-short: {100 * win.coverage:.0f} % coverage, {nn.size} NN "
                          f"intervals (needs {100 * tier.min_coverage:.0f} % and "
                          f"{tier.min_beats})")
        return
    for name in BATTERY_FIELDS:
        v[name][w] = getattr(st, name)
    v["stationarity"][w] = CATEGORIES.index(st.category)
    usable = scales[scales <= nn.size // 4]
    fits, fl = calibrated_fits(_TIER_PRESETS[tier.scale], nn, beat_time_s=tt,
                               order=opt.dfa_order, vanishing_moments=opt.vanishing_moments,
                               dfa_scales=usable if usable.size >= 3 else None,
                               calibration_model=opt.calibration_model)
    for name, fit in fits.items():
        if fit is not None and np.isfinite(fit.exponent):
            v[name][w] = fit.exponent
            v[name + "_se"][w] = fit.se
            v[name + "_ci"][w] = fit.ci
            v[name + "_slope"][w] = fit.slope_exponent
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
    fs = opt.short_psd_fs_hz if tier.scale == "short" else opt.long_psd_fs_hz
    even = _or_none(resample_even, tt, nn, fs_hz=fs)
    if even is not None:
        spec = _or_none(periodogram_psd, even.value_ms, fs_hz=even.fs_hz)
        if spec is not None:
            v["psd"][w] = _binned_psd(spec.frequency_hz, spec.psd, freqs)
            bp = _or_none(band_powers, spec)
            if bp is not None:
                v["band_power"][w] = np.where(band_ok, bp.power, np.nan)
                v["total_power"][w] = bp.total_power
    if usable.size >= 3 and fl is not None:
        la = local_slopes(_at_scales(fl, usable))
        v["fluctuation"][w, : usable.size] = la.fluctuation
        v["local_alpha"][w, : usable.size] = la.slopes
    wfit = fits["beta_wavelet"]
    if wfit is not None:  # the fit holds the energies of its log-scale diagram
        energy = np.asarray(wfit.options["energy"])
    else:
        diag = _or_none(logscale_diagram, nn, vanishing_moments=opt.vanishing_moments)
        energy = diag.energy if diag is not None else np.empty(0)
    m = np.minimum(energy.size, octaves.size)
    v["wavelet_energy"][w, :m] = energy[:m]
    if tier.scale == "long":
        if opt.multifractal:
            window_multifractal(v, w, nn, st.category, vanishing_moments=opt.vanishing_moments)
        else:
            v["mf_reason"][w] = MULTIFRACTAL_OFF


def _band_ok(tier: TierSpec) -> np.ndarray:
    # Task Force 1996: a band needs about 10 periods of its lower limit; ULF needs 24 h.
    return np.array([tier.window_s >= 10.0 / lo if lo > 0 else False
                     for lo, _ in TASK_FORCE_BANDS.values()])


def _tier_grids_of(cleaned: CleanResult, tier: TierSpec, opt: ScanOptions) -> tuple:
    keep = cleaned.keep
    mean_rr = float(np.mean(cleaned.recording.rr_ms[keep])) / 1000.0 if keep.any() else 0.8
    fs = opt.short_psd_fs_hz if tier.scale == "short" else opt.long_psd_fs_hz
    return _tier_grids(tier, mean_rr, fs)


def _window_block(tier: TierSpec, windows: list[Window], start: int, stop: int,
                  opt: ScanOptions, grids: tuple, full: bool
                  ) -> tuple[list[StationarityResult | None], dict]:
    """Battery (window ``w`` uses seed ``opt.seed + w``, as :func:`tier_stationarity`)
    and, for ``full``, the per-window values of windows ``start:stop`` as a table of
    ``stop - start`` rows (one transfer per block, not per window)."""
    battery = [tier_stationarity([windows[w]], n_surrogates=opt.n_surrogates,
                                 seed=opt.seed + w)[0] for w in range(start, stop)]
    values: dict[str, np.ndarray] = {}
    if full:
        values = _empty_values(stop - start, *grids, tier.scale)
        band_ok = _band_ok(tier)
        for i, st in enumerate(battery):
            _window_values(values, i, windows[start + i], st, tier, opt, grids, band_ok)
    return battery, values


def _assemble_tier(tier: TierSpec, windows: list[Window], battery: list, blocks: list,
                   grids: tuple, full: bool) -> TierAnalysis:
    """A tier from its battery results and its value blocks ``(first window, table)``."""
    values: dict[str, np.ndarray] = {}
    if full:
        values = _empty_values(len(windows), *grids, tier.scale)
        for start, block in blocks:
            for name, arr in values.items():
                arr[start: start + block[name].shape[0]] = block[name]
        for arr in values.values():
            arr.flags.writeable = False
    centres = np.array([win.start_s for win in windows]) + tier.window_s / 2
    return TierAnalysis(tier, tuple(windows), tuple(battery), category_codes(battery),
                        centres, *grids, MappingProxyType(values))


def _analyse_tier(cleaned: CleanResult, tier: TierSpec, opt: ScanOptions, *, full: bool,
                  progress: Progress) -> TierAnalysis:
    windows = tier_windows(cleaned, tier)
    battery = tier_stationarity(windows, n_surrogates=opt.n_surrogates, seed=opt.seed,
                                progress=progress,
                                label=f"stationarity battery, {tier.scale} windows")
    grids = _tier_grids_of(cleaned, tier, opt)
    values: dict[str, np.ndarray] = {}
    if full:
        values = _empty_values(len(windows), *grids, tier.scale)
        band_ok = _band_ok(tier)
        rows = progress.track(zip(windows, battery, strict=True), total=len(windows),
                              label=f"fits, {tier.scale} windows")
        for w, (win, st) in enumerate(rows):
            _window_values(values, w, win, st, tier, opt, grids, band_ok)
        for arr in values.values():
            arr.flags.writeable = False
    centres = np.array([win.start_s for win in windows]) + tier.window_s / 2
    return TierAnalysis(tier, tuple(windows), tuple(battery), category_codes(battery),
                        centres, *grids, MappingProxyType(values))


#: What forked workers read (set by the parent just before forking; never pickled).
_FORK_STATE: dict = {}
#: Fewest analysable beats over all windows for which forking workers pays (common
#: practice: below it, process start-up and result transfer cost more than they save).
_MIN_PARALLEL_BEATS = 20_000
#: Beats per job of the worker pool: short windows travel in blocks of about this many
#: beats (a 5-min window has about 400), long windows one by one.
_JOB_BEATS = 6_000


def _record_parts(cleaned: CleanResult, opt: ScanOptions, full: bool) -> tuple:
    """The whole-record work that does not need the window battery: the measures of the
    assessment and (``full``) the record's fluctuation function, log-scale diagram and
    multifractal estimates (:mod:`tfhrv.analysis.multifractal_fits`)."""
    measures = record_measures(cleaned, order=opt.dfa_order,
                               vanishing_moments=opt.vanishing_moments,
                               calibration_model=opt.calibration_model)
    fl = diag = mf = None
    if full:
        nn = cleaned.nn_ms
        fl = _or_none(dfa_fluctuation, nn, order=opt.dfa_order)
        diag = _or_none(logscale_diagram, nn, vanishing_moments=opt.vanishing_moments)
        if opt.multifractal:
            mf = record_multifractal(nn, vanishing_moments=opt.vanishing_moments)
    return measures, fl, diag, mf


def _fork_job(job: tuple[str, int, int]) -> tuple[str, int, int, object]:
    name, start, stop = job
    st = _FORK_STATE
    if name == "record":
        return name, start, stop, _record_parts(st["cleaned"], st["opt"], st["full"])
    return name, start, stop, _window_block(st["tiers"][name], st["windows"][name], start,
                                            stop, st["opt"], st["grids"][name], st["full"])


def _blocks(windows: list[Window]) -> list[tuple[int, int]]:
    """Consecutive ranges of windows holding about :data:`_JOB_BEATS` beats each."""
    out, start, beats = [], 0, 0
    for w, win in enumerate(windows):
        beats += win.n_beats
        if beats >= _JOB_BEATS:
            out.append((start, w + 1))
            start, beats = w + 1, 0
    if start < len(windows):
        out.append((start, len(windows)))
    return out


def _analyse_tiers_parallel(cleaned: CleanResult, opt: ScanOptions, full: bool,
                            workers: int, progress: Progress,
                            while_waiting: Callable[[], object] | None = None
                            ) -> tuple | None:
    """Both tiers and the whole-record parts (:func:`_record_parts`), shared among
    ``workers`` forked processes, or None when forking is unavailable or does not pay.
    Every window is computed by the same function with the same seed as in the serial
    path, so results are identical.  ``while_waiting`` runs in this process once the
    workers have their jobs (it would otherwise wait idle for them)."""
    import multiprocessing as mp

    if "fork" not in mp.get_all_start_methods():
        return None
    tiers = {"short": opt.short, "long": opt.long}
    windows = {n: tier_windows(cleaned, t) for n, t in tiers.items()}
    beats = sum(w.n_beats for ws in windows.values() for w in ws if w.analysable)
    if beats < _MIN_PARALLEL_BEATS:
        return None
    grids = {n: _tier_grids_of(cleaned, t, opt) for n, t in tiers.items()}
    # the whole record first, then the largest jobs, so that the last to finish are small
    jobs = [(n, a, b) for n, ws in windows.items() for a, b in _blocks(ws)]
    jobs.sort(key=lambda j: -sum(w.n_beats for w in windows[j[0]][j[1]:j[2]]))
    jobs.insert(0, ("record", 0, 0))
    _FORK_STATE.update(tiers=tiers, windows=windows, grids=grids, opt=opt, full=full,
                       cleaned=cleaned)
    done = []
    progress.start(sum(len(ws) for ws in windows.values()), f"windows ({workers} processes)")
    try:
        with mp.get_context("fork").Pool(workers) as pool:
            results = pool.imap_unordered(_fork_job, jobs)
            if while_waiting is not None:
                while_waiting()
            for res in results:
                done.append(res)
                progress.advance(res[2] - res[1])
    finally:
        progress.finish()
        _FORK_STATE.clear()
    battery = {n: [None] * len(ws) for n, ws in windows.items()}
    blocks: dict[str, list] = {n: [] for n in windows}
    record = None
    for name, start, stop, res in done:
        if name == "record":
            record = res
        else:
            battery[name][start:stop] = res[0]
            blocks[name].append((start, res[1]))
    short, long = (_assemble_tier(tiers[n], windows[n], battery[n], blocks[n], grids[n], full)
                   for n in ("short", "long"))
    return short, long, record


def analyse_record(cleaned: CleanResult, /, *, options: ScanOptions | None = None,
                   detail: Literal["battery", "full"] = "full", workers: int = 1,
                   progress: Progress = SILENT,
                   while_waiting: Callable[[], object] | None = None) -> RecordAnalysis:
    """Analyse one cleaned recording: windows, battery, fits, whole-record verdict.

    Parameters
    ----------
    cleaned : CleanResult
        Output of :func:`tfhrv.signal.clean.clean`.
    options : ScanOptions, optional
        Every option of the analysis (defaults: :class:`ScanOptions`).
    detail : {"full", "battery"}
        ``"battery"`` runs the stationarity battery on every window of both tiers and the
        whole-record assessment (what ``tfhrv inspect`` shows); ``"full"`` adds the
        per-window fits, spectra, fluctuation functions and wavelet energies and the
        whole-record curves (what ``tfhrv scan`` writes).
    workers : int, default 1
        Processes among which the windows are shared (forked, POSIX only; 1 = this
        process).  The results do not depend on it: every window is analysed by the same
        code with its own seed.  The command line uses the available cores for a single
        record; a cohort keeps 1 per record and runs records in parallel instead.
    progress : tfhrv.core.progress.Progress, optional
        Told each window and stage (default: silent).
    while_waiting : callable, optional
        Work of the caller's that does not depend on the analysis (for example the imports
        and the matplotlib warm-up of ``tfhrv report``): run in this process while forked
        workers compute the windows, where it would otherwise wait idle; after the
        analysis when there are no workers.

    Returns
    -------
    RecordAnalysis
    """
    check_choice(detail, "detail", ("battery", "full"))
    opt = options or ScanOptions()
    full = detail == "full"
    workers = check_int(workers, "workers", minimum=1)
    parallel = (_analyse_tiers_parallel(cleaned, opt, full, workers, progress, while_waiting)
                if workers > 1 else None)
    if parallel is None:
        short = _analyse_tier(cleaned, opt.short, opt, full=full, progress=progress)
        long = _analyse_tier(cleaned, opt.long, opt, full=full, progress=progress)
        progress.stage("whole-record fits and FFT-slope verdict")
        measures, fl, diag, mf = _record_parts(cleaned, opt, full)
        if while_waiting is not None:
            while_waiting()
    else:
        short, long, (measures, fl, diag, mf) = parallel
    assessment = assess_record(cleaned, long_categories=long.categories,
                               band_hz=opt.record_band_hz, order=opt.dfa_order,
                               vanishing_moments=opt.vanishing_moments,
                               thresholds=opt.thresholds,
                               calibration_model=opt.calibration_model, measures=measures)
    return RecordAnalysis(cleaned, opt, detail, short, long, assessment, fl, diag, mf)
