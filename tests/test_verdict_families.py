"""A few seeds of the synthetic families of ``scripts/validate_verdict.py``.

The full table (100 seeds per family) is ``docs/validation_verdict.md``; here a handful of
seeds per family checks the same expectations with tolerances that a working battery and
verdict meet almost surely and a broken one does not.  Seeds differ from the script's.

Sources: background noise is exact fGn (Davies & Harte 1987) or Timmer & Koenig (1995)
1/f^beta noise; the gap limit (30 min, common practice) and the ectopy limits (Peltola et
al. 2004 for the caution; common practice for unfit) are documented in
``tfhrv.analysis.policy.FitnessThresholds``.
"""

from __future__ import annotations

import pytest

from tfhrv.analysis.inspection import inspect_record
from tfhrv.signal.clean import clean
from validation.families import ALARMS, record, record_outcome, window_category

SEEDS = range(8)


def test_clean_windows_rarely_alarm_and_stated_injections_are_detected():
    # full run: clean beta <= 1.2 alarms <= 10 %; stated sizes detected >= 90 %.  With 8
    # seeds: at most 2 alarms among clean windows (binomial P < 0.04 at a true 0.10) and
    # at least 6 of 8 detections (P < 0.04 at a true 0.90).
    clean_alarms = sum(window_category(1.0, None, 0.0, s) in ALARMS for s in SEEDS)
    assert clean_alarms <= 2
    for kind, size in (("shift", 6.0), ("linear", 4.0), ("variance", 2.0)):
        hits = sum(window_category(1.0, kind, size, s) in ALARMS for s in SEEDS)
        assert hits >= 6, (kind, hits)


def test_u_shaped_trend_is_a_documented_blind_spot_of_the_drift_test():
    # one smooth cycle over the window: phase-randomised surrogates reproduce it, so a
    # moderate u-shape passes as stationary (docs/validation_verdict.md) -- a test that
    # would notice if the battery's behaviour changed
    assert sum(window_category(0.6, "u-shape", 4.0, s) in ALARMS for s in SEEDS) <= 2


@pytest.mark.parametrize(
    ("options", "allowed", "topic"),
    [
        ({"gap_min": 45.0}, {"unfit"}, "gap"),  # longer than the 30-min limit: never fit
        ({"gap_min": 20.0}, {"fit-with-cautions", "unfit"}, "gap"),
        ({"ectopic": 0.20}, {"unfit"}, "ectopy"),
        ({"hours": 6.0}, {"unfit"}, "duration"),
    ],
)
def test_record_defects_are_named_in_the_verdict(options, allowed, topic):
    for seed in (11, 12):
        out = record_outcome(record(seed=seed, **options))
        assert out.verdict in allowed
        assert any(r.startswith(topic) for r in out.reasons + out.cautions), out


def test_clean_record_is_not_unfit_and_family_verdict_equals_inspect():
    rec = record(beta=1.0, seed=21)
    out = record_outcome(rec)
    assert out.verdict in ("fit", "fit-with-cautions"), out
    # record_outcome runs only the long tier; the verdict is the one tfhrv inspect gives
    assert inspect_record(clean(rec)).assessment.verdict.verdict == out.verdict
