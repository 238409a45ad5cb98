"""Which estimator is primary for a window, and whether a record is fit for an FFT slope.

The decision table lives here and only here; the README, ``tfhrv inspect --explain`` and
the report print it from :data:`DECISION_TABLE`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from tfhrv.calibration.calibrate import calibrate, class_statistic
from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.dfa import Fluctuation
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.presets import DFA_PRESETS, estimate, estimate_dfa, long_band
from tfhrv.signal.clean import CleanResult

__all__ = [
    "DECISION_TABLE",
    "RECORD_PRESETS",
    "RecordAssessment",
    "assess_record",
    "WITHHOLD_LIMITS",
    "calibrated_fit",
    "calibrated_fits",
    "withhold_reason",
    "ESTIMATORS",
    "Choice",
    "FitnessThresholds",
    "VERDICTS",
    "Verdict",
    "choose_estimator",
    "explain_table",
    "fitness_verdict",
]

Estimator = Literal["spectral", "wavelet", "dfa", "none"]
#: Estimator codes in the order used for ``flag_values`` in the DataTree.
ESTIMATORS: tuple[str, ...] = ("none", "spectral", "wavelet", "dfa")
#: Verdict codes in the order used for ``flag_values`` in the DataTree.
VERDICTS: tuple[str, ...] = ("fit", "fit-with-cautions", "unfit")


@dataclass(frozen=True, slots=True)
class _Rule:
    valid: tuple[str, ...]
    reason: str


#: category -> (estimators whose assumptions hold there, reason).  Among the valid
#: estimators that could be computed on the window, the one with the narrowest calibrated
#: 95 % interval (in beta units) is primary; ties go to the earlier one.  Sources:
#: Eke et al. 2002 (classify noise vs motion before choosing a method); Abry & Veitch 1998
#: (wavelets with N vanishing moments ignore polynomial trends of degree < N); Hu et al. 2001
#: and Kantelhardt et al. 2001 (DFA of order q removes polynomial trends of degree q in the
#: profile, i.e. of degree q - 1 in the NN series, and copes with non-stationary
#: increments); Kwiatkowski et al. 1992 and Said & Dickey 1984 for the ADF/KPSS reading
#: (see tfhrv.stationarity.battery).
DECISION_TABLE: dict[str, _Rule] = {
    "stationary": _Rule(
        ("spectral", "wavelet", "dfa"),
        "stationary (no drift or slope beyond surrogates; KPSS level kept, or its "
        "rejection explained by long memory): the periodogram "
        "slope's assumptions hold, as do the others'; the most precise is primary",
    ),
    "trend": _Rule(
        ("wavelet",),
        "trend-stationary: a trend leaks into the low-frequency periodogram and bends DFA-1; "
        "wavelets with N vanishing moments (default 3) ignore polynomial trends of degree < N",
    ),
    "unit-root": _Rule(
        ("dfa", "wavelet"),
        "difference-stationary (fBm-like, unit root not rejected): the periodogram of a motion "
        "is biased by leakage; DFA and wavelets handle non-stationary increments",
    ),
    "drifting": _Rule(
        ("wavelet", "dfa"),
        "mean or SD drifts beyond what surrogates with the same spectrum show: the periodogram "
        "is distorted; local wavelet energies and DFA are robust to slow drift",
    ),
    "inconclusive": _Rule(
        ("dfa", "wavelet"),
        "the unit-root and stationarity tests disagree or lack power: DFA and wavelets make "
        "fewer assumptions than the periodogram",
    ),
    "too-short": _Rule((), "too few NN intervals for any estimator"),
}


@dataclass(frozen=True, slots=True)
class Choice:
    """The primary estimator of one window and why."""

    estimator: str
    reason: str


def choose_estimator(category: str, /, *, available: Mapping[str, float]) -> Choice:
    """Pick the primary estimator for a window.

    Parameters
    ----------
    category : str
        Stationarity category of the window (see :data:`tfhrv.stationarity.battery.CATEGORIES`).
    available : mapping of str to float
        Estimators that produced a finite exponent on this window, with the width of their
        calibrated 95 % interval in beta units (NaN when unknown).

    Returns
    -------
    Choice

    Examples
    --------
    >>> choose_estimator("trend", available={"spectral": 0.2, "wavelet": 0.3}).estimator
    'wavelet'
    >>> choose_estimator("stationary", available={"spectral": 0.5, "dfa": 0.2}).estimator
    'dfa'
    """
    if category not in DECISION_TABLE:
        raise ValueError(f"category must be one of {tuple(DECISION_TABLE)!r}, got {category!r}")
    rule = DECISION_TABLE[category]
    if not rule.valid:
        return Choice("none", rule.reason)
    usable = [e for e in rule.valid if e in available]
    if not usable:
        return Choice("none", rule.reason + f"; none of {', '.join(rule.valid)} computable here")

    def width(e: str) -> float:
        w = float(available[e])
        return w if np.isfinite(w) else np.inf

    best = min(usable, key=lambda e: (width(e), rule.valid.index(e)))
    note = f" ({best}: narrowest interval)" if len(usable) > 1 else ""
    return Choice(best, rule.reason + note)


def explain_table() -> str:
    """The decision table as aligned text (for ``--explain``, the README and the report)."""
    rows = [("category", "valid estimators", "reason")]
    rows += [(c, ", ".join(r.valid) or "none", r.reason) for c, r in DECISION_TABLE.items()]
    w0 = max(len(r[0]) for r in rows)
    w1 = max(len(r[1]) for r in rows)
    lines = [f"{a:<{w0}}  {b:<{w1}}  {c}" for a, b, c in rows]
    lines.append("Among the valid estimators computed on a window, the one with the narrowest "
                 "calibrated 95 % interval is primary.")
    return "\n".join(lines)


@dataclass(frozen=True, slots=True)
class FitnessThresholds:
    """Thresholds of the whole-record FFT-slope fitness verdict.

    Defaults and their sources:

    - ``min_cycles`` = 8 and ``caution_cycles`` = 4: periods of the lowest fitted
      frequency that the record spans.  The Task Force 1996 asks for about 10 periods of
      a band's lower limit (from memory); the classical 1e-4 Hz band of a 24-h record has
      8.6, and 24 h is the accepted length for it (common practice), so 8 is the fit
      limit; 4-8 is a caution and below 4 unfit.
    - ``min_coverage`` = 0.75 analysable share (the Task Force 1996 asks for >= 18 h of
      analysable data in a 24-h record, from memory).
    - ``max_gap_s`` = 1800 s unfit, 600 s caution (common practice: a gap longer than
      one period of the highest fitted frequency, 100 s, distorts the band; a 30-min gap
      removes almost a fifth of a 2.8-h period).
    - ``max_ectopic`` = 0.10 unfit, 0.01 caution (Peltola et al. 2004 found that even
      0.25 % unedited premature beats change alpha1; edited records tolerate more;
      common practice).
    - ``max_nonstationary`` = 0.5 unfit, 0.25 caution share of long-tier windows whose
      category is not stationary (common practice).
    - ``linearity_alpha`` = 0.01 and ``max_excess_scatter`` = 0.1 (log10 units): the binned
      log-log points depart from one line when the lack-of-fit test against the known
      scatter of log periodogram ordinates (Geweke & Porter-Hudak 1983; Monte-Carlo null,
      see :func:`tfhrv.estimators.spectral.spectral_exponent`) has p < 0.01; that is a
      caution, and unfit when the RMS departure beyond the scatter also exceeds 0.1
      decade (26 % in power; our choice).  On pure power-law noise the test rejects 1 % of
      records at 0.01 (100 records each at beta 0, 1, 2).  r^2 is reported but not graded:
      with one or two ordinates in the lowest bins a pure power law gives r^2 of only
      0.8-0.9, which is why an r^2 threshold of 0.9 (common practice) flagged most clean
      synthetic records (``scripts/validate_verdict.py``).
      ``curvature_alpha`` = 0.01 for the quadratic-term check (common practice).
    - ``max_beta_disagreement`` = 0.3 between the FFT beta and the wavelet beta (about
      three times the calibrated SE of a 24-h estimate; common practice).
    """

    min_cycles: float = 8.0
    caution_cycles: float = 4.0
    min_coverage: float = 0.75
    caution_coverage: float = 0.9
    max_gap_s: float = 1800.0
    caution_gap_s: float = 600.0
    max_ectopic: float = 0.10
    caution_ectopic: float = 0.01
    max_nonstationary: float = 0.5
    caution_nonstationary: float = 0.25
    linearity_alpha: float = 0.01
    max_excess_scatter: float = 0.1
    curvature_alpha: float = 0.01
    max_beta_disagreement: float = 0.3


@dataclass(frozen=True, slots=True)
class Verdict:
    """Whole-record FFT-slope fitness: ``fit``, ``fit-with-cautions`` or ``unfit``."""

    verdict: str
    reasons: tuple[str, ...]
    cautions: tuple[str, ...]
    recommended: str
    checks: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        """JSON-friendly form."""
        return {
            "verdict": self.verdict,
            "reasons": list(self.reasons),
            "cautions": list(self.cautions),
            "recommended_estimator": self.recommended,
            "checks": self.checks,
        }


def fitness_verdict(
    *,
    duration_s: float,
    band_hz: tuple[float, float],
    coverage: float,
    longest_gap_s: float,
    ectopic_fraction: float,
    nonstationary_share: float,
    r_squared: float,
    curvature_pvalue: float,
    lack_of_fit_pvalue: float,
    excess_scatter: float,
    beta_spectral: float,
    beta_wavelet: float,
    thresholds: FitnessThresholds | None = None,
) -> Verdict:
    """Decide whether a whole record is fit for a classical FFT power-law slope.

    Every check that fails adds a reason (``unfit``) or a caution
    (``fit-with-cautions``); NaN inputs (a quantity that could not be computed) add a
    caution saying so.  The recommended estimator is ``spectral`` when fit, otherwise the
    wavelet estimator (trend-robust) or DFA when the record is a motion (beta > 1.5), and
    ``none`` when not even the wavelet exponent could be estimated (a record of minutes).
    The recommendation is for the whole-record long-range slope; each window's primary
    estimator is chosen separately (:func:`choose_estimator`), so the two can differ.

    Examples
    --------
    >>> v = fitness_verdict(duration_s=86400, band_hz=(1e-4, 1e-2), coverage=0.98,
    ...     longest_gap_s=20, ectopic_fraction=0.001, nonstationary_share=0.1, r_squared=0.97,
    ...     curvature_pvalue=0.3, lack_of_fit_pvalue=0.4, excess_scatter=0.0,
    ...     beta_spectral=1.05, beta_wavelet=1.0)
    >>> v.verdict
    'fit'
    """
    th = thresholds or FitnessThresholds()
    reasons: list[str] = []
    cautions: list[str] = []
    cycles = duration_s * band_hz[0]

    def grade(value, bad, caution, fail_msg, caution_msg, *, higher_is_bad=True):
        if not np.isfinite(value):
            cautions.append(fail_msg.split(":")[0] + ": could not be computed")
            return
        is_bad = value > bad if higher_is_bad else value < bad
        is_caution = value > caution if higher_is_bad else value < caution
        if is_bad:
            reasons.append(fail_msg)
        elif is_caution:
            cautions.append(caution_msg)

    need_h = th.min_cycles / band_hz[0] / 3600.0
    length = (f"{duration_s / 3600:.1f} h" if duration_s >= 3600
              else f"{duration_s / 60:.1f} min")
    if cycles < th.caution_cycles:
        reasons.append(f"duration: the record ({length}) spans {cycles:.1f} periods of "
                       f"the lowest fitted frequency {band_hz[0]:g} Hz (need >= "
                       f"{th.min_cycles:g}, i.e. >= {need_h:.1f} h)")
    elif cycles < th.min_cycles:
        cautions.append(f"duration: only {cycles:.1f} periods of {band_hz[0]:g} Hz in "
                        f"{length} (>= {th.min_cycles:g} recommended, i.e. >= "
                        f"{need_h:.1f} h)")
    grade(coverage, th.min_coverage, th.caution_coverage,
          f"coverage: {100 * coverage:.0f} % analysable (< {100 * th.min_coverage:.0f} %)",
          f"coverage: {100 * coverage:.0f} % analysable (< {100 * th.caution_coverage:.0f} %)",
          higher_is_bad=False)
    grade(longest_gap_s, th.max_gap_s, th.caution_gap_s,
          f"gap: longest unreadable stretch {longest_gap_s / 60:.0f} min "
          f"(> {th.max_gap_s / 60:.0f} min)",
          f"gap: longest unreadable stretch {longest_gap_s / 60:.0f} min "
          f"(> {th.caution_gap_s / 60:.0f} min)")
    grade(ectopic_fraction, th.max_ectopic, th.caution_ectopic,
          f"ectopy: {100 * ectopic_fraction:.1f} % non-sinus beats "
          f"(> {100 * th.max_ectopic:.0f} %)",
          f"ectopy: {100 * ectopic_fraction:.1f} % non-sinus beats "
          f"(> {100 * th.caution_ectopic:.0f} %); removed and interpolated")
    grade(nonstationary_share, th.max_nonstationary, th.caution_nonstationary,
          f"stationarity: {100 * nonstationary_share:.0f} % of long windows non-stationary "
          f"(> {100 * th.max_nonstationary:.0f} %)",
          f"stationarity: {100 * nonstationary_share:.0f} % of long windows non-stationary "
          f"(> {100 * th.caution_nonstationary:.0f} %)")
    if not np.isfinite(lack_of_fit_pvalue):
        cautions.append("linearity: the lack-of-fit test could not be computed")
    elif lack_of_fit_pvalue < th.linearity_alpha:
        text = (f"linearity: the binned log-log points depart from one line beyond "
                f"periodogram scatter (p = {lack_of_fit_pvalue:.2g}, RMS excess "
                f"{excess_scatter:.2f} decade, R^2 {r_squared:.2f})")
        (reasons if excess_scatter > th.max_excess_scatter else cautions).append(text)
    if np.isfinite(curvature_pvalue) and curvature_pvalue < th.curvature_alpha:
        cautions.append(f"linearity: significant curvature on log-log axes "
                        f"(p = {curvature_pvalue:.2g}); the band is not one power law")
    diff = abs(beta_spectral - beta_wavelet)
    grade(diff, th.max_beta_disagreement, th.max_beta_disagreement,
          f"agreement: FFT beta {beta_spectral:.2f} vs wavelet beta {beta_wavelet:.2f} "
          f"(differ by > {th.max_beta_disagreement:g})", "")
    cls = ("unknown" if not np.isfinite(beta_wavelet)
           else "fGn" if beta_wavelet < 1 else "fBm" if beta_wavelet > 1 else "1/f")
    if cls == "fBm" and beta_wavelet > 1.5:
        cautions.append(f"class: wavelet beta {beta_wavelet:.2f} > 1.5, a motion (fBm-like); "
                        "the periodogram of a motion is biased by leakage (Eke et al. 2000)")
    verdict = "unfit" if reasons else "fit-with-cautions" if cautions else "fit"
    if verdict == "fit":
        recommended = "spectral"
    elif not np.isfinite(beta_wavelet):
        recommended = "none"  # no long-range exponent could be estimated on this record
    elif cls == "fBm" and beta_wavelet > 1.5:
        recommended = "dfa"
    else:
        recommended = "wavelet"
    checks = {
        "cycles_of_lowest_frequency": cycles,
        "coverage": coverage,
        "longest_gap_s": longest_gap_s,
        "ectopic_fraction": ectopic_fraction,
        "nonstationary_share": nonstationary_share,
        "r_squared": r_squared,
        "lack_of_fit_pvalue": lack_of_fit_pvalue,
        "excess_scatter": excess_scatter,
        "curvature_pvalue": curvature_pvalue,
        "beta_spectral": beta_spectral,
        "beta_wavelet": beta_wavelet,
        "process_class": cls,
    }
    return Verdict(verdict, tuple(reasons), tuple(cautions), recommended,
                   {k: (float(v) if isinstance(v, int | float | np.floating) else v)
                    for k, v in checks.items()})


#: When the data hold no exponent to report (the reason codes of
#: :func:`withhold_reason`).  ``max_filled``: share of the analysed series filled in by
#: interpolation across gaps (beyond half, the interpolation, not the heart, makes the
#: slope; common practice).  ``max_dfa_rms``: RMS departure (log10 units, weighted) of
#: the DFA points from their line; measured on the open long-term records
#: (``scripts/withhold_limits.py``): over 560 windows of 300 beats the largest was
#: 0.074 for alpha1 and 0.114 for alpha2, over 600 fGn series (H 0.1-0.99) 0.035 and
#: 0.066, while a 12-beat sinusoid gives 0.13 for alpha1.  ``linearity_alpha`` and
#: ``max_excess_scatter``: the spectral lack-of-fit test against the known scatter of
#: log periodogram ordinates (Geweke & Porter-Hudak 1983), the same limits as the
#: FFT-slope verdict (:class:`FitnessThresholds`).
WITHHOLD_LIMITS: dict[str, float] = {
    "max_filled": 0.5,
    "max_dfa_rms_alpha1": 0.1,
    "max_dfa_rms_alpha2": 0.15,
    "max_dfa_rms_alpha_long": 0.15,
    "linearity_alpha": 0.01,
    "max_excess_scatter": 0.1,
}


def _dfa_rms(fit: ScalingFit) -> float:
    used = np.asarray(fit.used, dtype=bool)
    x, y, w = fit.x[used], fit.y[used], fit.weights[used]
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(w) & (w > 0)
    if ok.sum() < 3:
        return float("nan")
    r = y[ok] - (fit.intercept + fit.slope_exponent * x[ok])
    return float(np.sqrt(np.average(r * r, weights=w[ok])))


def withhold_reason(preset: str, fit: ScalingFit, /) -> str:
    """Why a fitted slope is not an exponent to report, or ``""`` when it is.

    Reason codes (the text after the colon explains it):

    - ``filled``: more than half of the analysed series was interpolated across gaps
      (``options["interpolated_fraction"]`` of the resampled spectral presets);
    - ``no-power-law``: the points depart from one line beyond their scatter: the
      spectral lack-of-fit test (p < 0.01 and RMS excess > 0.1 decade), or for DFA an RMS
      departure above :data:`WITHHOLD_LIMITS` ``max_dfa_rms_<preset>``.

    Examples
    --------
    >>> from tfhrv.estimators.presets import estimate
    >>> k = np.arange(3000)
    >>> withhold_reason("alpha1", estimate("alpha1", 800 + 50 * np.sin(2 * np.pi * k / 12)))
    ... # doctest: +ELLIPSIS
    'no-power-law: ...'
    """
    lim = WITHHOLD_LIMITS
    filled = float(fit.options.get("interpolated_fraction", 0.0) or 0.0)
    if filled > lim["max_filled"]:
        return (f"filled: {100 * filled:.0f} % of the analysed series is interpolated across "
                f"gaps (> {100 * lim['max_filled']:.0f} %); the slope would describe the "
                "interpolation")
    p, excess = fit.lack_of_fit_pvalue, fit.excess_scatter
    if (np.isfinite(p) and p < lim["linearity_alpha"] and np.isfinite(excess)
            and excess > lim["max_excess_scatter"]):
        return (f"no-power-law: the log-log points depart from one line beyond their scatter "
                f"(lack-of-fit p = {p:.2g}, RMS excess {excess:.2f} decade)")
    key = f"max_dfa_rms_{preset}"
    if preset in DFA_PRESETS and key in lim:
        rms = _dfa_rms(fit)
        if np.isfinite(rms) and rms > lim[key]:
            return (f"no-power-law: log F(n) departs from one line by {rms:.3f} decade RMS "
                    f"(> {lim[key]:g}); the series holds a rhythm or a change of regime, not "
                    "one scaling exponent")
    return ""


def _withheld(fit: ScalingFit, reason: str) -> ScalingFit:
    """The fit with its exponent removed and the reason kept (the curve stays)."""
    from dataclasses import replace

    nan = float("nan")
    return replace(fit, exponent=nan, se=nan, ci=(nan, nan), slope_exponent=nan,
                   withheld=reason, options={**fit.options, "withheld_slope": fit.slope_exponent})


def calibrated_fit(preset: str, nn_ms: np.ndarray, /, *, beat_time_s: np.ndarray | None = None,
                   order: int = 1, vanishing_moments: int = 3,
                   calibration_model: str = "powerlaw",
                   class_stat: float | None = None) -> ScalingFit | None:
    """Run a preset (:mod:`tfhrv.estimators.presets`) and calibrate it under
    ``calibration_model`` (:mod:`tfhrv.calibration.calibrate`; ``class_stat`` is computed
    from ``nn_ms`` when the model needs it and none is given).

    Returns None when the series cannot support the preset (the estimator raised
    :class:`~tfhrv.core.errors.InsufficientDataError`: too short, too few scales, constant),
    and a fit without exponent (NaN, ``withheld`` giving the reason) when the data hold no
    exponent to report (:func:`withhold_reason`); every other error propagates.
    """
    try:
        raw = estimate(preset, nn_ms, beat_time_s=beat_time_s, order=order,
                       vanishing_moments=vanishing_moments)
    except InsufficientDataError:
        return None
    if not np.isfinite(raw.exponent):
        return None
    if reason := withhold_reason(preset, raw):
        return _withheld(raw, reason)
    if calibration_model == "fgn-fbm" and class_stat is None:
        class_stat = class_statistic(nn_ms)
    return calibrate(raw, estimator=preset, n=int(np.size(nn_ms)), model=calibration_model,
                     class_stat=class_stat)


def calibrated_fits(presets: dict[str, str], nn_ms: np.ndarray, /, *,
                    beat_time_s: np.ndarray | None = None, order: int = 1,
                    vanishing_moments: int = 3, dfa_scales: np.ndarray | None = None,
                    calibration_model: str = "powerlaw",
                    ) -> tuple[dict[str, ScalingFit | None], Fluctuation | None]:
    """Several calibrated presets on one series (name -> preset), the DFA ones from a
    shared fluctuation function (:func:`tfhrv.estimators.presets.estimate_dfa`).

    Gives the same fits as :func:`calibrated_fit` preset by preset. Returns the fits
    (None where the series cannot support a preset) and the fluctuation function, which
    also holds F(n) at ``dfa_scales`` when given (None if no DFA could be computed).
    """
    dfa_names = {v: p for v, p in presets.items() if p in DFA_PRESETS}
    raw_dfa: dict = {}
    fl = None
    try:
        raw_dfa, fl = estimate_dfa(tuple(dfa_names.values()), nn_ms, order=order,
                                   extra_scales=dfa_scales)
    except InsufficientDataError:
        pass
    out: dict[str, ScalingFit | None] = {}
    n = int(np.size(nn_ms))
    stat = class_statistic(nn_ms) if calibration_model == "fgn-fbm" else None
    for var, preset in presets.items():
        if preset in DFA_PRESETS:
            raw = raw_dfa.get(preset)
            ok = raw is not None and np.isfinite(raw.exponent)
            reason = withhold_reason(preset, raw) if ok else ""
            out[var] = (None if not ok else _withheld(raw, reason) if reason else
                        calibrate(raw, estimator=preset, n=n, model=calibration_model,
                                  class_stat=stat))
        else:
            out[var] = calibrated_fit(preset, nn_ms, beat_time_s=beat_time_s, order=order,
                                      vanishing_moments=vanishing_moments,
                                      calibration_model=calibration_model, class_stat=stat)
    return out, fl


#: exponent name -> preset for the whole record (and the long tier).
RECORD_PRESETS: dict[str, str] = {
    "alpha1": "alpha1",
    "alpha2": "alpha2",
    "alpha_long": "alpha_long",
    "beta_spectral": "beta_spectral_long",
    "beta_wavelet": "beta_wavelet_long",
}


@dataclass(frozen=True, slots=True)
class RecordAssessment:
    """Whole-record exponents (calibrated fits, None where not computable) and the
    FFT-slope fitness verdict."""

    fits: dict
    verdict: Verdict
    band_hz: tuple[float, float] | None


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
) -> RecordAssessment:
    """Whole-record exponents and the FFT-slope fitness verdict.

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
    """
    from tfhrv.stationarity.battery import CATEGORIES

    q = cleaned.quality
    nn, tt = cleaned.nn_ms, cleaned.nn_time_s
    fits, _ = calibrated_fits(RECORD_PRESETS, nn, beat_time_s=tt, order=order,
                              vanishing_moments=vanishing_moments,
                              calibration_model=calibration_model)
    cats = np.asarray(long_categories)
    valid = cats != CATEGORIES.index("too-short")
    nonstat = (float(np.mean(cats[valid] != CATEGORIES.index("stationary")))
               if valid.any() else float("nan"))
    spec = fits["beta_spectral"]

    def value(name: str) -> float:
        f = fits[name]
        return float(f.exponent) if f is not None else float("nan")

    verdict = fitness_verdict(
        duration_s=q.recorded_s, band_hz=band_hz, coverage=q.coverage,
        longest_gap_s=q.longest_gap_s, ectopic_fraction=q.ectopic_fraction,
        nonstationary_share=nonstat,
        r_squared=spec.r_squared if spec is not None else float("nan"),
        curvature_pvalue=spec.curvature_pvalue if spec is not None else float("nan"),
        lack_of_fit_pvalue=spec.lack_of_fit_pvalue if spec is not None else float("nan"),
        excess_scatter=spec.excess_scatter if spec is not None else float("nan"),
        beta_spectral=value("beta_spectral"), beta_wavelet=value("beta_wavelet"),
        thresholds=thresholds,
    )
    try:
        used_band = long_band(q.recorded_s)
    except InsufficientDataError:
        used_band = None
    return RecordAssessment(fits, verdict, used_band)
