"""Decision table and FFT-slope fitness verdict."""

from __future__ import annotations

import pytest

from tfhrv.analysis.policy import DECISION_TABLE, choose_estimator, explain_table, fitness_verdict
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
        ({"nonstationary_share": 0.8}, "stationarity"),
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
    assert any("could not be computed" in c for c in v2.cautions)


def test_motion_class_recommends_dfa():
    v = fitness_verdict(**{**GOOD, "beta_spectral": 2.0, "beta_wavelet": 1.9})
    assert v.checks["process_class"] == "fBm"
    assert v.verdict == "fit-with-cautions" and v.recommended == "dfa"
