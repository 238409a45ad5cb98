"""Decision table and FFT-slope fitness verdict."""

from __future__ import annotations

import pytest

from tfhrv.analysis.policy import DECISION_TABLE, choose_estimator, explain_table
from tfhrv.analysis.verdict import fitness_verdict
from tfhrv.stationarity.battery import CATEGORIES

GOOD = dict(duration_s=86400.0, band_hz=(1e-4, 1e-2), coverage=0.98, longest_gap_s=30.0,
            ectopic_fraction=0.002, nonstationary_share=0.1, r_squared=0.97,
            curvature_pvalue=0.4, lack_of_fit_pvalue=0.3, excess_scatter=0.0,
            beta_spectral=1.05, beta_wavelet=1.0)


def test_table_covers_every_category_and_never_picks_fft_for_nonstationary():
    assert set(DECISION_TABLE) == set(CATEGORIES)
    for cat in ("trend", "unit-root", "drifting", "inconclusive", "too-short"):
        assert "spectral" not in DECISION_TABLE[cat].valid
    assert DECISION_TABLE["stationary"].valid[0] == "spectral"


def test_most_precise_valid_estimator_wins():
    narrow_fft = {"spectral": 0.1, "wavelet": 0.3, "dfa": 0.2}
    assert choose_estimator("stationary", available=narrow_fft).estimator == "spectral"
    # a narrow FFT interval never wins where the FFT is not valid
    assert choose_estimator("drifting", available=narrow_fft).estimator == "dfa"
    assert choose_estimator("trend", available={"spectral": 0.1, "dfa": 0.1}).estimator == "none"
    assert choose_estimator("too-short", available=narrow_fft).estimator == "none"
    text = explain_table()
    assert all(c in text for c in CATEGORIES)


def test_clean_record_is_fit():
    v = fitness_verdict(**GOOD)
    assert v.verdict == "fit" and v.recommended == "spectral" and not v.reasons


@pytest.mark.parametrize(
    ("change", "fragment"),
    [
        ({"longest_gap_s": 2 * 3600.0}, "gap"),  # a two-hour unreadable stretch
        ({"coverage": 0.6}, "coverage"),
        ({"ectopic_fraction": 0.2}, "ectopy"),
        ({"nonstationary_share": 0.8, "level_effect": 0.3, "level_effect_ci": (0.2, 0.4)},
         "level changes"),
        ({"duration_s": 4 * 3600.0}, "duration"),
        ({"lack_of_fit_pvalue": 1e-5, "excess_scatter": 0.2}, "linearity"),
        ({"beta_spectral": 1.6, "beta_wavelet": 1.0}, "agreement"),
    ],
)
def test_each_failed_check_makes_unfit_with_its_reason(change, fragment):
    v = fitness_verdict(**{**GOOD, **change})
    assert v.verdict == "unfit"
    assert any(r.startswith(fragment) for r in v.reasons), v.reasons
    assert v.recommended in ("wavelet", "dfa")


def test_linearity_is_judged_by_lack_of_fit_not_r_squared():
    # a low R^2 alone is what periodogram scatter gives a pure power law (spectral_exponent
    # Notes); a significant but small departure is a caution, a large one unfit
    assert fitness_verdict(**{**GOOD, "r_squared": 0.8}).verdict == "fit"
    small = fitness_verdict(**{**GOOD, "lack_of_fit_pvalue": 1e-4, "excess_scatter": 0.05})
    assert small.verdict == "fit-with-cautions"
    assert any(c.startswith("linearity") for c in small.cautions)


def test_cautions_and_missing_values():
    v = fitness_verdict(**{**GOOD, "longest_gap_s": 900.0, "curvature_pvalue": 1e-4})
    assert v.verdict == "fit-with-cautions"
    assert any(c.startswith("gap") for c in v.cautions)
    assert any(c.startswith("linearity") for c in v.cautions)
    v2 = fitness_verdict(**{**GOOD, "beta_wavelet": float("nan")})
    assert v2.verdict == "fit-with-cautions"
    assert any(c.startswith("agreement: the FFT and wavelet betas could not be compared")
               for c in v2.cautions), v2.cautions
    assert not any("_" in c.split(":")[1] for c in v2.cautions)  # no internal names
    # a record without one analysable 4-h window: the stationarity caution says so in words
    v3 = fitness_verdict(**{**GOOD, "nonstationary_share": float("nan")})
    assert any(c.startswith("stationarity: the share of non-stationary 4-h windows could not "
                            "be computed") for c in v3.cautions), v3.cautions


def test_motion_class_recommends_dfa():
    v = fitness_verdict(**{**GOOD, "beta_spectral": 2.0, "beta_wavelet": 1.9})
    assert v.checks["process_class"] == "fBm"
    assert v.verdict == "fit-with-cautions" and v.recommended == "dfa"


def test_nonstationary_share_alone_is_a_caution_stating_the_measured_effect():
    # issue 15: drift in most 4-h windows with a small but measurable effect on the slope
    # (interval excludes 0) is a caution, not unfit; the caution states the effect
    v = fitness_verdict(**{**GOOD, "nonstationary_share": 0.7, "level_effect": 0.09,
                           "level_effect_ci": (0.02, 0.16)})
    assert v.verdict == "fit-with-cautions"
    assert v.cautions == ("stationarity: drift in 70 % of 4-h windows; regressing out the "
                          "level changes moves the FFT beta by +0.09 [+0.02, +0.16], inside "
                          "its interval (+/-0.20)",)
    # drift that does not measurably move the slope (interval includes 0) is no caution
    v = fitness_verdict(**{**GOOD, "nonstationary_share": 0.7, "level_effect": 0.04,
                           "level_effect_ci": (-0.05, 0.13)})
    assert v.verdict == "fit" and v.checks["nonstationary_share"] == 0.7
    # an effect that could not be measured on a drifting record is a caution
    v = fitness_verdict(**{**GOOD, "nonstationary_share": 0.7, "level_effect": float("nan"),
                           "level_effect_ci": (float("nan"), float("nan"))})
    assert v.verdict == "fit-with-cautions"
    assert any("could not be" in c for c in v.cautions)
    # an effect beyond the half-width of the calibrated interval of the FFT beta (1.96 SE;
    # 0.2 when the SE is unknown) is unfit whatever the share
    v = fitness_verdict(**{**GOOD, "level_effect": -0.25, "level_effect_ci": (-0.35, -0.15)})
    assert v.verdict == "unfit" and v.reasons[0].startswith("level changes")
    v = fitness_verdict(**{**GOOD, "level_effect": -0.15, "level_effect_ci": (-0.25, -0.05),
                           "beta_spectral_se": 0.05})
    assert v.verdict == "unfit" and "+/-0.10" in v.reasons[0]
    v = fitness_verdict(**{**GOOD, "level_effect": -0.15, "level_effect_ci": (-0.25, -0.05),
                           "beta_spectral_se": 0.11})
    assert v.verdict == "fit"
    # unknown effect where the record drifts: said so
    v = fitness_verdict(**{**GOOD, "nonstationary_share": 0.7})
    assert any("could not be" in c for c in v.cautions)


def test_agreement_is_judged_against_the_interval_of_the_difference():
    # difference 0.25 with SEs 0.05 and 0.04: interval [0.12, 0.38] lies beyond 0.10 -> unfit
    v = fitness_verdict(**{**GOOD, "beta_spectral": 1.25, "beta_wavelet": 1.0,
                           "beta_spectral_se": 0.05, "beta_wavelet_se": 0.04})
    assert v.verdict == "unfit" and v.reasons[0].startswith("agreement")
    # the same difference with SEs 0.11 and 0.07 (a 24-h record): interval includes 0 -> fit
    v = fitness_verdict(**{**GOOD, "beta_spectral": 1.25, "beta_wavelet": 1.0,
                           "beta_spectral_se": 0.11, "beta_wavelet_se": 0.07})
    assert v.verdict == "fit"
    # excludes 0 but not wholly beyond 0.10 -> caution
    v = fitness_verdict(**{**GOOD, "beta_spectral": 1.2, "beta_wavelet": 1.0,
                           "beta_spectral_se": 0.06, "beta_wavelet_se": 0.05})
    assert v.verdict == "fit-with-cautions" and v.cautions[0].startswith("agreement")


def test_rules_table_names_existing_thresholds_and_quantities():
    from tfhrv.analysis.verdict import RULES, FitnessThresholds

    fields = set(FitnessThresholds.__slots__) | {"zero"}
    for rule in RULES:
        assert rule.caution in fields | {None} and rule.unfit in fields | {None}
        assert rule.worse in ("high", "low") and rule.source
    # every message template formats with the quantities of a record that fails everything
    bad = {**GOOD, "duration_s": 3600.0, "coverage": 0.5, "longest_gap_s": 7200.0,
           "ectopic_fraction": 0.3, "nonstationary_share": 0.9, "lack_of_fit_pvalue": 1e-5,
           "excess_scatter": 0.3, "curvature_pvalue": 1e-5, "beta_spectral": 2.5,
           "beta_wavelet": 1.6, "level_effect": 0.5, "level_effect_ci": (0.4, 0.6)}
    v = fitness_verdict(**bad)
    names = {r.split(":")[0] for r in v.reasons + v.cautions}
    # (the share caution is left out where the level-change effect is already unfit)
    assert names == {"duration", "coverage", "gap", "ectopy", "level changes", "linearity",
                     "agreement", "class"}
    v = fitness_verdict(**{**bad, "level_effect": 0.1, "level_effect_ci": (0.02, 0.18)})
    assert any(c.startswith("stationarity") for c in v.cautions)
