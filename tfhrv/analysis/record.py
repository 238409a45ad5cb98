"""The whole-record assessment: exponents, block intervals, the measured effect of the
level changes on the FFT slope, and the FFT-slope verdict.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tfhrv.analysis.consequence import (
    BLOCK_S,
    BlockInterval,
    LevelChangeEffect,
    level_change_effect,
    slope_jackknife,
    subseries_interval,
)
from tfhrv.analysis.fits import RECORD_PRESETS, calibrated_fits
from tfhrv.analysis.verdict import FitnessThresholds, Verdict, fitness_verdict
from tfhrv.core.errors import InsufficientDataError
from tfhrv.core.specfun import stdtrit
from tfhrv.estimators.presets import estimate, estimate_dfa, long_band
from tfhrv.signal.clean import CleanResult
from tfhrv.signal.resample import resample_even

__all__ = [
    "RecordAssessment",
    "RecordMeasures",
    "assess_record",
    "record_measures",
]

@dataclass(frozen=True, slots=True)
class RecordAssessment:
    """Whole-record exponents (calibrated fits, None where not computable), the
    FFT-slope fitness verdict, the measured effect of the level changes on the FFT slope
    and the model-free block intervals of the exponents.

    Attributes
    ----------
    fits : dict
        Exponent name (:data:`RECORD_PRESETS`) -> calibrated :class:`ScalingFit` or None.
    verdict : Verdict
    band_hz : (float, float) or None
        Fit band of the FFT slope.
    effect : LevelChangeEffect or None
        :func:`tfhrv.analysis.consequence.level_change_effect` (None where the record is
        too short).
    block : dict
        Exponent name -> :class:`tfhrv.analysis.consequence.BlockInterval` or None: the
        interval that includes the heterogeneity through the day (4-h blocks).
    """

    fits: dict
    verdict: Verdict
    band_hz: tuple[float, float] | None
    effect: LevelChangeEffect | None = None
    block: dict = field(default_factory=dict)


def _block_intervals(nn: np.ndarray, tt: np.ndarray, fits: dict, even, band, order: int,
                     vanishing_moments: int) -> dict:
    """Model-free intervals over 4-h blocks: the subseries interval (Carlstein 1986) for
    the DFA exponents, whose scales fit inside a block, and the delete-a-block jackknife
    (Künsch 1989) for the wavelet and FFT betas, whose coarsest scales do not."""
    out: dict = {name: None for name in RECORD_PRESETS}
    # 4-h blocks by beat time; a last block shorter than half a block joins the one before
    edges = np.append(np.arange(tt[0], tt[-1], BLOCK_S), np.inf)
    idx = np.searchsorted(tt, edges)
    parts = [(int(a), int(b)) for a, b in zip(idx[:-1], idx[1:], strict=True) if b - a > 0]
    if len(parts) >= 2 and tt[-1] - tt[parts[-1][0]] < BLOCK_S / 2:
        parts.pop()
        parts[-1] = (parts[-1][0], tt.size)
    dfa_names = ("alpha1", "alpha2", "alpha_long")
    per_block = {n: [] for n in dfa_names}
    for a, b in parts:
        try:
            raw, _ = estimate_dfa(dfa_names, nn[a:b], order=order)
        except InsufficientDataError:  # a block too short for a DFA range
            raw = {}
        for n in dfa_names:
            f = raw.get(n)
            per_block[n].append(f.exponent if f is not None else np.nan)
    for n in dfa_names:
        if fits.get(n) is not None:
            out[n] = subseries_interval(np.asarray(per_block[n]), estimate=fits[n].exponent)
    wf = fits.get("beta_wavelet")
    if wf is not None and len(parts) >= 3:
        loo = []
        for a, b in parts:
            rest = np.concatenate([nn[:a], nn[b:]])
            try:
                loo.append(estimate("beta_wavelet_long", rest,
                                    vanishing_moments=vanishing_moments).exponent)
            except InsufficientDataError:
                loo.append(np.nan)
        v = np.asarray(loo)
        if np.all(np.isfinite(v)):
            k = v.size
            se = float(np.sqrt((k - 1) / k * np.sum((v - v.mean()) ** 2)))
            qt = stdtrit(k - 1, 0.975)
            out["beta_wavelet"] = BlockInterval(wf.exponent, se, (wf.exponent - qt * se,
                                                wf.exponent + qt * se),
                                                tuple(v.tolist()), k, "jackknife")
    sf = fits.get("beta_spectral")
    if sf is not None and even is not None and band is not None:
        try:
            out["beta_spectral"] = slope_jackknife(even.value_ms, band_hz=band,
                                                   fs_hz=even.fs_hz, gap=even.interpolated,
                                                   estimate=sf.exponent)
        except InsufficientDataError:
            pass
    return out


@dataclass(frozen=True, slots=True)
class RecordMeasures:
    """What the whole-record assessment measures before judging: the calibrated fits,
    the FFT-slope band used, the level-change effect and the block intervals (see
    :class:`RecordAssessment`).  They do not depend on the window battery, so the pipeline
    computes them alongside the windows."""

    fits: dict
    band_hz: tuple[float, float] | None
    effect: LevelChangeEffect | None
    block: dict


def record_measures(
    cleaned: CleanResult,
    /,
    *,
    order: int = 1,
    vanishing_moments: int = 3,
    calibration_model: str = "powerlaw",
) -> RecordMeasures:
    """Whole-record calibrated fits, level-change effect on the FFT slope and block
    intervals (the parts of :func:`assess_record` that do not need the window battery)."""
    q = cleaned.quality
    nn, tt = cleaned.nn_ms, cleaned.nn_time_s
    fits, _ = calibrated_fits(RECORD_PRESETS, nn, beat_time_s=tt, order=order,
                              vanishing_moments=vanishing_moments,
                              calibration_model=calibration_model)
    try:
        used_band = long_band(q.recorded_s)
    except InsufficientDataError:
        used_band = None
    even = effect = None
    if used_band is not None and nn.size >= 16:
        try:
            even = resample_even(tt, nn, fs_hz=1.0, max_gap_s=3.0)
            effect = level_change_effect(even.value_ms, band_hz=used_band, fs_hz=even.fs_hz,
                                         gap=even.interpolated)
        except InsufficientDataError:
            effect = None
    block = _block_intervals(nn, tt, fits, even, used_band, order, vanishing_moments)
    return RecordMeasures(fits, used_band, effect, block)


def assess_record(
    cleaned: CleanResult,
    /,
    *,
    long_categories: np.ndarray,
    band_hz: tuple[float, float] = (1e-4, 1e-2),
    order: int = 1,
    vanishing_moments: int = 3,
    thresholds: FitnessThresholds | None = None,
    calibration_model: str = "powerlaw",
    measures: RecordMeasures | None = None,
) -> RecordAssessment:
    """Whole-record exponents, the effect of the level changes on the FFT slope, the
    block intervals and the FFT-slope fitness verdict.

    Parameters
    ----------
    cleaned : CleanResult
    long_categories : array of int
        Stationarity category codes of the long-tier windows
        (index into :data:`tfhrv.stationarity.battery.CATEGORIES`).
    band_hz : (float, float)
        The classical band whose FFT slope is being judged.
    calibration_model : {"powerlaw", "fgn-fbm"}
        The calibration model of the exponents (:mod:`tfhrv.calibration.calibrate`).
    measures : RecordMeasures, optional
        :func:`record_measures` of this record with the same options, when already
        computed (the pipeline computes it alongside the windows).
    """
    from tfhrv.stationarity.battery import CATEGORIES

    q = cleaned.quality
    if measures is None:
        measures = record_measures(cleaned, order=order, vanishing_moments=vanishing_moments,
                                   calibration_model=calibration_model)
    fits, effect = measures.fits, measures.effect
    cats = np.asarray(long_categories)
    valid = cats != CATEGORIES.index("too-short")
    nonstat = (float(np.mean(cats[valid] != CATEGORIES.index("stationary")))
               if valid.any() else float("nan"))
    spec = fits["beta_spectral"]

    def value(name: str, attr: str = "exponent") -> float:
        f = fits[name]
        return float(getattr(f, attr)) if f is not None else float("nan")

    nan = float("nan")
    verdict = fitness_verdict(
        duration_s=q.recorded_s, band_hz=band_hz, coverage=q.coverage,
        longest_gap_s=q.longest_gap_s, ectopic_fraction=q.ectopic_fraction,
        nonstationary_share=nonstat,
        r_squared=spec.r_squared if spec is not None else nan,
        curvature_pvalue=spec.curvature_pvalue if spec is not None else nan,
        lack_of_fit_pvalue=spec.lack_of_fit_pvalue if spec is not None else nan,
        excess_scatter=spec.excess_scatter if spec is not None else nan,
        beta_spectral=value("beta_spectral"), beta_wavelet=value("beta_wavelet"),
        beta_spectral_se=value("beta_spectral", "se"),
        beta_wavelet_se=value("beta_wavelet", "se"),
        level_effect=effect.effect if effect is not None else nan,
        level_effect_ci=effect.ci if effect is not None else (nan, nan),
        thresholds=thresholds,
    )
    return RecordAssessment(fits, verdict, measures.band_hz, effect, measures.block)
