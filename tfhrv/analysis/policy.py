"""Which estimator is primary for a window, and whether a record is fit for an FFT slope.

The decision table lives here and only here; the README, ``tfhrv inspect --explain`` and
the report print it from :data:`DECISION_TABLE`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from scipy import special

from tfhrv.analysis.consequence import (
    BLOCK_S,
    BlockInterval,
    LevelChangeEffect,
    level_change_effect,
    slope_jackknife,
    subseries_interval,
)
from tfhrv.calibration.calibrate import calibrate, class_statistic
from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.dfa import Fluctuation
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.presets import DFA_PRESETS, estimate, estimate_dfa, long_band
from tfhrv.signal.clean import CleanResult
from tfhrv.signal.resample import resample_even

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
    "RULES",
    "Rule",
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
    """Thresholds of the whole-record FFT-slope fitness verdict (used by :data:`RULES`).

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
    - ``level_effect_ses`` = 1.96: unfit when regressing out the record's level changes
      moves the FFT slope (:func:`tfhrv.analysis.consequence.level_change_effect`) by more
      than 1.96 calibrated SEs of the record's own FFT beta, i.e. by more than the
      half-width of its calibrated 95 % interval (about 0.2 for a 24-h record): a larger
      distortion would by itself carry the undistorted value outside the interval that
      is reported.  ``fallback_level_margin`` = 0.2 when the SE is unknown (the 24-h
      value).  Chosen on the synthetic truth (``docs/validation_verdict.md``): with the
      effect's measurement error (SD about 0.05) a margin of 0.10 (the published
      healthy vs post-infarction difference in mean beta, Bigger et al. 1996, from
      memory) is below what one record can resolve, and agreed with the true
      distortion in only about 80 % of the synthetic records.
    - ``caution_nonstationary`` = 0.25: share of long-tier windows whose category is not
      stationary above which a caution states the measured effect (common practice).
      The share alone no longer makes a record unfit: on real 24-h records most 4-h
      windows drift (sleep, activity) while the slope barely moves (issue 15,
      ``docs/validation_verdict.md``).
    - ``linearity_alpha`` = 0.01 and ``max_excess_scatter`` = 0.1 (log10 units): the binned
      log-log points depart from one line when the lack-of-fit test against the known
      scatter of log periodogram ordinates (Geweke & Porter-Hudak 1983; Monte-Carlo null,
      see :func:`tfhrv.estimators.spectral.spectral_exponent`) has p < 0.01; that is a
      caution, and unfit when the RMS departure beyond the scatter also exceeds 0.1
      decade (26 % in power; our choice).  r^2 is reported but not graded (an r^2 >= 0.9
      rule, common practice, flagged most clean synthetic records).
      ``curvature_alpha`` = 0.01 for the quadratic-term check (common practice).
    - ``max_beta_disagreement`` = 0.10: the FFT and wavelet betas disagree when the 95 %
      interval of their difference (calibrated SEs, :func:`tfhrv.analysis.consequence.
      difference_interval`) excludes 0 (caution) and lies wholly more than 0.10 from 0
      (unfit; 0.10 is the published difference in mean beta between healthy people and
      patients after myocardial infarction, about 1.06 vs 1.15, Bigger et al. 1996, from
      memory).  When an SE is unknown the interval half-width
      falls back to ``fallback_disagreement`` = 0.3 (about three calibrated SEs of a
      24-h estimate; common practice).
    - ``motion_beta`` = 1.5: wavelet beta above which the record is a motion (fBm-like)
      whose periodogram is biased by leakage (Eke et al. 2000); common practice.
    """

    min_cycles: float = 8.0
    caution_cycles: float = 4.0
    min_coverage: float = 0.75
    caution_coverage: float = 0.9
    max_gap_s: float = 1800.0
    caution_gap_s: float = 600.0
    max_ectopic: float = 0.10
    caution_ectopic: float = 0.01
    level_effect_ses: float = 1.96
    fallback_level_margin: float = 0.2
    caution_nonstationary: float = 0.25
    linearity_alpha: float = 0.01
    max_excess_scatter: float = 0.1
    curvature_alpha: float = 0.01
    max_beta_disagreement: float = 0.10
    fallback_disagreement: float = 0.3
    motion_beta: float = 1.5


@dataclass(frozen=True, slots=True)
class Rule:
    """One row of the verdict table.

    Attributes
    ----------
    name : str
        The check's name; every message starts with it.
    quantity : str
        Key of the measured quantity (:func:`fitness_verdict` builds them).
    caution, unfit : str or None
        Name of the :class:`FitnessThresholds` field holding the limit (None: no such
        level).  The limit is crossed when the quantity is below it (``worse="low"``) or
        above it (``worse="high"``).
    worse : {"high", "low"}
    message : str
        Template formatted with the measured quantities, ``limit`` (the crossed limit,
        scaled by ``scale``) and the thresholds.
    source : str
    applies : str or None
        Key of a boolean quantity; the rule is judged only where it is True.
    scale : float
        Factor for the limit in the message (100 for shares printed in %).
    """

    name: str
    quantity: str
    caution: str | None
    unfit: str | None
    worse: str
    message: str
    source: str
    applies: str | None = None
    scale: float = 1.0


#: The whole-record FFT-slope verdict, one rule per check (see docs/METHODS.md section 12).
RULES: tuple[Rule, ...] = (
    Rule("duration", "cycles", "min_cycles", "caution_cycles", "low",
         "duration: the record ({length}) spans {cycles:.1f} periods of the lowest fitted "
         "frequency {low_hz:g} Hz (need >= {limit:g}; {min_cycles:g} periods take "
         "{need_h:.1f} h)",
         "Task Force 1996 (about 10 periods of a band's lower limit, from memory); 24 h "
         "is the accepted length (common practice)"),
    Rule("coverage", "coverage", "caution_coverage", "min_coverage", "low",
         "coverage: {coverage_pct:.0f} % analysable (< {limit:.0f} %)",
         "Task Force 1996: >= 18 of 24 h analysable (from memory); 90 % common practice",
         scale=100.0),
    Rule("gap", "longest_gap_s", "caution_gap_s", "max_gap_s", "high",
         "gap: longest unreadable stretch {longest_gap_min:.0f} min (> {limit:.0f} min)",
         "common practice", scale=1 / 60),
    Rule("ectopy", "ectopic_fraction", "caution_ectopic", "max_ectopic", "high",
         "ectopy: {ectopic_pct:.1f} % non-sinus beats (> {limit:g} %); removed and "
         "interpolated", "Peltola et al. 2004 (caution); common practice (unfit)",
         scale=100.0),
    Rule("level changes", "level_effect_excess", None, "zero", "high",
         "level changes: regressing out the {n_changes} largest level changes moves the "
         "FFT beta by {level_effect:+.2f} [{level_lo:+.2f}, {level_hi:+.2f}], beyond the "
         "half-width of its calibrated 95 % interval (+/-{level_margin:.2f})",
         "the calibrated interval of the record's FFT beta (1.96 SE); validated on "
         "synthetic records with a known distortion"),
    Rule("stationarity", "nonstationary_share", "caution_nonstationary", None, "high",
         "stationarity: drift in {nonstationary_pct:.0f} % of 4-h windows; regressing out "
         "the level changes moves the FFT beta by {level_effect:+.2f} [{level_lo:+.2f}, "
         "{level_hi:+.2f}], {level_inside}", "common practice (the 25 % share)",
         applies="effect_within_margin", scale=100.0),
    Rule("linearity", "lack_of_fit_pvalue", "linearity_alpha", None, "low",
         "linearity: the binned log-log points depart from one line beyond periodogram "
         "scatter (p = {lack_of_fit_pvalue:.2g}, RMS excess {excess_scatter:.2f} decade, "
         "R^2 {r_squared:.2f})", "Geweke & Porter-Hudak 1983 (the scatter); 0.01 our choice",
         applies="small_excess"),
    Rule("linearity", "excess_scatter", None, "max_excess_scatter", "high",
         "linearity: the binned log-log points depart from one line beyond periodogram "
         "scatter (p = {lack_of_fit_pvalue:.2g}, RMS excess {excess_scatter:.2f} decade, "
         "R^2 {r_squared:.2f})", "0.1 decade (26 % in power) our choice",
         applies="lack_of_fit"),
    Rule("linearity", "curvature_pvalue", "curvature_alpha", None, "low",
         "linearity: significant curvature on log-log axes (p = {curvature_pvalue:.2g}); "
         "the band is not one power law", "common practice", applies="curvature_known"),
    Rule("agreement", "disagreement", None, "max_beta_disagreement", "high",
         "agreement: FFT beta {beta_spectral:.2f} vs wavelet beta {beta_wavelet:.2f}, "
         "difference {beta_difference:+.2f} [{difference_lo:+.2f}, {difference_hi:+.2f}] "
         "(wholly beyond +/-{limit:.2f})",
         "interval of the difference (calibrated SEs); 0.10 from Bigger et al. 1996 "
         "(group difference, from memory)"),
    Rule("agreement", "disagreement_caution", "zero", None, "high",
         "agreement: FFT beta {beta_spectral:.2f} vs wavelet beta {beta_wavelet:.2f}, "
         "difference {beta_difference:+.2f} [{difference_lo:+.2f}, {difference_hi:+.2f}] "
         "excludes 0", "interval of the difference", applies="not_disagreeing"),
    Rule("class", "beta_wavelet", "motion_beta", None, "high",
         "class: wavelet beta {beta_wavelet:.2f} > {limit:g}, a motion (fBm-like); the "
         "periodogram of a motion is biased by leakage (Eke et al. 2000)",
         "Eke et al. 2000; the 1.5 cut is common practice", applies="wavelet_known"),
)

_Z95 = 1.959963984540054


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


def _crossed(value: float, limit: float, worse: str) -> bool:
    return value > limit if worse == "high" else value < limit


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
    beta_spectral_se: float = float("nan"),
    beta_wavelet_se: float = float("nan"),
    level_effect: float = float("nan"),
    level_effect_ci: tuple[float, float] = (float("nan"), float("nan")),
    n_changes: int = 2,
    thresholds: FitnessThresholds | None = None,
) -> Verdict:
    """Decide whether a whole record is fit for a classical FFT power-law slope.

    The measured quantities are judged by the rules of :data:`RULES`, in order: a rule
    whose unfit limit is crossed adds a reason (``unfit``), one whose caution limit is
    crossed adds a caution (``fit-with-cautions``); a NaN quantity adds the caution
    "could not be computed" (only for the level-change effect where the record drifts).
    Non-stationarity is judged by its consequence: ``level_effect``
    (:func:`tfhrv.analysis.consequence.level_change_effect`) beyond
    the margin is unfit; a large non-stationary share alone is a caution that
    states the effect.  The margin is the half-width of the calibrated 95 % interval of
    the FFT beta (``level_effect_ses`` x ``beta_spectral_se``).  The recommended
    estimator is ``spectral`` when fit, otherwise the wavelet estimator (trend-robust),
    or DFA when the record is a motion (wavelet beta > 1.5).

    Examples
    --------
    >>> v = fitness_verdict(duration_s=86400, band_hz=(1e-4, 1e-2), coverage=0.98,
    ...     longest_gap_s=20, ectopic_fraction=0.001, nonstationary_share=0.1, r_squared=0.97,
    ...     curvature_pvalue=0.3, lack_of_fit_pvalue=0.4, excess_scatter=0.0,
    ...     beta_spectral=1.05, beta_wavelet=1.0)
    >>> v.verdict
    'fit'
    >>> v = fitness_verdict(duration_s=86400, band_hz=(1e-4, 1e-2), coverage=0.98,
    ...     longest_gap_s=20, ectopic_fraction=0.001, nonstationary_share=0.7, r_squared=0.97,
    ...     curvature_pvalue=0.3, lack_of_fit_pvalue=0.4, excess_scatter=0.0,
    ...     beta_spectral=1.05, beta_wavelet=1.0, level_effect=0.04,
    ...     level_effect_ci=(-0.05, 0.13))
    >>> v.verdict, v.cautions[0][:42]
    ('fit-with-cautions', 'stationarity: drift in 70 % of 4-h windows')
    """
    th = thresholds or FitnessThresholds()
    nan = float("nan")
    d = beta_spectral - beta_wavelet
    se_d = float(np.hypot(beta_spectral_se, beta_wavelet_se))
    half = _Z95 * se_d if np.isfinite(se_d) else th.fallback_disagreement
    excess = abs(d) - half
    lo, hi = (float(level_effect_ci[0]), float(level_effect_ci[1]))
    margin = (th.level_effect_ses * beta_spectral_se if np.isfinite(beta_spectral_se)
              else th.fallback_level_margin)
    inside = f"inside its interval (+/-{margin:.2f})"
    q = {
        "cycles": duration_s * band_hz[0], "low_hz": band_hz[0],
        "length": (f"{duration_s / 3600:.1f} h" if duration_s >= 3600
                   else f"{duration_s / 60:.1f} min"),
        "min_cycles": th.min_cycles, "need_h": th.min_cycles / band_hz[0] / 3600.0,
        "coverage": coverage, "coverage_pct": 100 * coverage,
        "longest_gap_s": longest_gap_s, "longest_gap_min": longest_gap_s / 60.0,
        "ectopic_fraction": ectopic_fraction,
        "ectopic_pct": 100 * ectopic_fraction,
        "nonstationary_share": nonstationary_share,
        "nonstationary_pct": 100 * nonstationary_share,
        "level_effect": level_effect, "level_effect_excess": abs(level_effect) - margin,
        "level_margin": margin,
        "level_lo": lo, "level_hi": hi, "level_inside": inside, "n_changes": n_changes,
        "r_squared": r_squared, "lack_of_fit_pvalue": lack_of_fit_pvalue,
        "excess_scatter": excess_scatter, "curvature_pvalue": curvature_pvalue,
        "beta_spectral": beta_spectral, "beta_wavelet": beta_wavelet,
        "beta_difference": d, "difference_lo": d - half, "difference_hi": d + half,
        "disagreement": excess, "disagreement_caution": excess,
        "small_excess": not (excess_scatter > th.max_excess_scatter),
        "lack_of_fit": bool(lack_of_fit_pvalue < th.linearity_alpha),
        "curvature_known": bool(np.isfinite(curvature_pvalue)),
        "wavelet_known": bool(np.isfinite(beta_wavelet)),
        "not_disagreeing": not (excess > th.max_beta_disagreement),
        "effect_within_margin": not (abs(level_effect) > margin),
    }
    limits = {f: getattr(th, f) for f in th.__slots__} | {"zero": 0.0}
    reasons: list[str] = []
    cautions: list[str] = []
    seen_nan: set[str] = set()
    for rule in RULES:
        if rule.applies is not None and not q[rule.applies]:
            continue
        value = q[rule.quantity]
        if not np.isfinite(value):
            quiet = rule.name in ("level changes", "agreement") and not (
                nonstationary_share > th.caution_nonstationary or rule.name == "agreement")
            if rule.name not in seen_nan and not quiet:
                what = ("the effect of the level changes" if rule.name == "level changes"
                        else rule.quantity.replace("_", " "))
                cautions.append(f"{rule.name}: {what} could not be computed")
                seen_nan.add(rule.name)
            continue
        for level, out in ((rule.unfit, reasons), (rule.caution, cautions)):
            if level is None or not _crossed(value, limits[level], rule.worse):
                continue
            if rule.name == "stationarity" and not np.isfinite(level_effect):
                text = (f"stationarity: drift in {100 * nonstationary_share:.0f} % of 4-h "
                        "windows; its effect on the FFT beta could not be measured")
            else:
                text = rule.message.format(**q, limit=limits[level] * rule.scale)
            out.append(text)
            break
    verdict = "unfit" if reasons else "fit-with-cautions" if cautions else "fit"
    cls = ("unknown" if not np.isfinite(beta_wavelet)
           else "fGn" if beta_wavelet < 1 else "fBm" if beta_wavelet > 1 else "1/f")
    if verdict == "fit":
        recommended = "spectral"
    elif not np.isfinite(beta_wavelet):
        recommended = "none"  # no long-range exponent could be estimated on this record
    elif cls == "fBm" and beta_wavelet > th.motion_beta:
        recommended = "dfa"
    else:
        recommended = "wavelet"
    checks = {
        "cycles_of_lowest_frequency": q["cycles"],
        "coverage": coverage,
        "longest_gap_s": longest_gap_s,
        "ectopic_fraction": ectopic_fraction,
        "nonstationary_share": nonstationary_share,
        "level_effect": level_effect,
        "level_effect_ci": [lo, hi],
        "level_effect_margin": margin,
        "r_squared": r_squared,
        "lack_of_fit_pvalue": lack_of_fit_pvalue,
        "excess_scatter": excess_scatter,
        "curvature_pvalue": curvature_pvalue,
        "beta_spectral": beta_spectral,
        "beta_wavelet": beta_wavelet,
        "beta_difference": d,
        "beta_difference_ci": [d - half, d + half] if np.isfinite(d) else [nan, nan],
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
            qt = float(special.stdtrit(k - 1, 0.975))
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
    return RecordAssessment(fits, verdict, used_band, effect, block)
