"""Whether a whole record is fit for a classical FFT power-law slope: the rules.

:func:`fitness_verdict` judges the measured quantities by the declarative table
:data:`RULES` (each rule: the check, the quantity, its caution and unfit limits, the
message and the source); non-stationarity is judged by its measured consequence for the
slope (:mod:`tfhrv.analysis.consequence`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "FitnessThresholds",
    "RULES",
    "Rule",
    "VERDICTS",
    "Verdict",
    "fitness_verdict",
]

#: Verdict codes in the order used for ``flag_values`` in the DataTree.
VERDICTS: tuple[str, ...] = ("fit", "fit-with-cautions", "unfit")


@dataclass(frozen=True, slots=True)
class FitnessThresholds:
    """Thresholds of the whole-record FFT-slope fitness verdict (used by :data:`RULES`).

    Defaults and their sources:

    - ``min_cycles`` = 8 and ``caution_cycles`` = 4: periods of the classical band's
      lower edge (1e-4 Hz) that the record spans (the slope itself is fitted from
      max(1e-4 Hz, 10 / duration), so that the record always spans 10 periods of the
      lowest frequency that enters the fit).  The Task Force 1996 asks for about 10 periods of
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
      stationary above which a caution states the measured effect (common practice),
      given only when that effect is measurable (its 95 % interval excludes 0) or could
      not be measured.  The share alone never makes a record unfit, and drift that does
      not measurably move the slope is not a caution: on real 24-h records most 4-h
      windows drift (sleep, activity) while the slope barely moves
      (``docs/validation_verdict.md``), and a caution every record carries tells nothing.
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
         "duration: the record ({length}) spans {cycles:.1f} periods of {low_hz:g} Hz, the "
         "lower edge of the classical band (need >= {limit:g}; {min_cycles:g} periods take "
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
         applies="effect_measurable_within_margin", scale=100.0),
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

#: What a caution says when its quantity is not a finite number.
_NOT_COMPUTED = {
    "level_effect_excess": "the effect of the level changes could not be computed",
    "disagreement": ("the FFT and wavelet betas could not be compared (one of them is "
                     "missing or withheld)"),
    "lack_of_fit_pvalue": "the lack-of-fit test of the FFT slope could not be computed",
    "excess_scatter": "the scatter of the FFT slope's points could not be computed",
    "curvature_pvalue": "the curvature test of the FFT slope could not be computed",
    "beta_wavelet": "the wavelet beta could not be computed",
    "nonstationary_share": ("the share of non-stationary 4-h windows could not be computed "
                            "(no analysable 4-h window)"),
}

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
    ...     beta_spectral=1.05, beta_wavelet=1.0, level_effect=0.09,
    ...     level_effect_ci=(0.02, 0.16))
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
        # the drift caution speaks only when the level changes demonstrably move the slope
        # (its interval excludes 0) or when their effect could not be measured: drift that
        # moves nothing is reported (checks, inspect's stationarity lines), not a caution
        "effect_measurable_within_margin": not (abs(level_effect) > margin) and (
            not np.isfinite(level_effect) or not (lo <= 0.0 <= hi)),
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
                what = _NOT_COMPUTED.get(
                    rule.quantity, f"{rule.quantity.replace('_', ' ')} could not be computed")
                cautions.append(f"{rule.name}: {what}")
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


