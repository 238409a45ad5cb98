"""Calibrated multifractal estimates and their place in the scan.

Expected values: (a) theory - c2 = 0 and width 0 for monofractal fGn, c2 = -lambda^2 for
the multifractal random walk (Bacry, Delour & Muzy 2001, Phys Rev E 64:026103); (c)
Monte-Carlo spreads measured when the tests were written (quoted beside each check).
"""

import numpy as np
import pytest

from tfhrv.analysis.multifractal_fits import (
    MF_DECISION,
    MF_ESTIMATORS,
    empty_multifractal,
    window_multifractal,
)
from tfhrv.calibration.multifractal import (
    _at_length,
    _null_cells,
    estimate_multifractal,
    load_multifractal_table,
)
from tfhrv.estimators.multifractal import mfdfa
from tfhrv.stationarity.battery import CATEGORIES
from tfhrv.synth import fgn
from tfhrv.synth.multifractal import mrw


def test_decision_table_covers_every_category():
    assert set(MF_DECISION) == set(CATEGORIES)
    assert {p for p, _ in MF_DECISION.values()} <= set(MF_ESTIMATORS)
    assert MF_DECISION["too-short"][0] == "none"


def test_table_shapes():
    t = load_multifractal_table()
    assert t.null_c2.shape[:3] == (*t.betas.shape, t.lengths.size)
    assert t.null_h.shape[:4] == t.null_c2.shape and t.null_h.shape[4] == t.q.size
    assert t.mrw_c2.shape[:2] == (t.lambda2.size, t.lengths.size)
    assert t.lengths.min() <= 4000 and t.lengths.max() >= 100000
    assert t.null_c2.shape[-1] >= 100  # replicates per cell


@pytest.mark.parametrize("seed", [1, 2])
def test_monofractal_fgn_not_called_multifractal(seed):
    # (a) fGn is monofractal: c2 = 0, so 0 is in the interval and p is not small
    # (c) false-positive rate at 5 % measured by scripts/validate_multifractal.py
    est = estimate_multifractal(800 + 50 * fgn(14000, 0.8, rng=seed))
    assert est.c2_pvalue > 0.05
    assert est.c2_ci[0] <= 0.0 <= est.c2_ci[1]
    assert abs(est.c1 - 0.8) < 0.1  # c1 = H for the profile of fGn


def test_mrw_detected_and_covered():
    # (a) c2 = -0.1 for lambda^2 = 0.1; (c) at 40000 beats the raw c2 SD is about 0.01,
    # so the test has power near 1
    est = estimate_multifractal(800 + 50 * mrw(40000, 0.1, rng=7))
    assert est.c2_pvalue < 0.05
    assert est.c2_ci[0] <= -0.1 <= est.c2_ci[1]
    assert est.width_ci[0] > 0


def test_level_shift_biases_the_estimates():
    # measured (documented in tfhrv.analysis.multifractal_fits, "drifting"): a 3-SD level
    # shift half-way through 16000 beats of fGn moves the MF-DFA width from about 0 to
    # about -0.2 (4 replicates: -0.16..-0.25 against -0.02..0.09 without)
    clean, shifted = [], []
    for s in range(3):
        x = fgn(16000, 0.7, rng=s)
        clean.append(mfdfa(x).width)
        shifted.append(mfdfa(x + np.where(np.arange(16000) >= 8000, 3.0, 0.0)).width)
    assert np.mean(shifted) < np.mean(clean) - 0.1


def test_window_values_follow_the_category():
    v = empty_multifractal(3)
    x = 800 + 50 * fgn(5000, 0.7, rng=3)
    window_multifractal(v, 0, x, "stationary")
    window_multifractal(v, 1, x, "drifting")
    window_multifractal(v, 2, x[:3000], "stationary")
    assert MF_ESTIMATORS[v["mf_estimator"][0]] == "both"
    assert MF_ESTIMATORS[v["mf_estimator"][1]] == "none"
    assert np.isfinite(v["c2"][1])  # stored, but not primary
    assert np.isnan(v["c2"][2]) and "fewer than 4000" in v["mf_reason"][2]
    assert v["mf_h"].shape == (3, 21) and v["mf_h_ci"].shape == (3, 21, 2)


def test_length_interpolation_and_null_cells():
    # location-scale interpolation in log n: exact at a tabulated length, in between
    # the mean and log SD are linear in log n
    rng = np.random.default_rng(0)
    lengths = np.array([1000.0, 10000.0])
    reps = np.stack([rng.standard_normal(500) * 2 + 1, rng.standard_normal(500) * 0.5 - 1])
    np.testing.assert_allclose(_at_length(reps, lengths, 1000), reps[0], rtol=1e-12)
    mid = _at_length(reps, lengths, np.sqrt(1000 * 10000))  # half-way in log n
    m, sd = reps.mean(axis=1), reps.std(axis=1, ddof=1)
    np.testing.assert_allclose(mid.mean(), m.mean(), rtol=1e-9)
    np.testing.assert_allclose(mid.std(ddof=1), np.sqrt(sd[0] * sd[1]), rtol=1e-9)
    betas = np.array([[0.0, 0.5, 1.0, 1.5], [0.0, 0.4, 0.8, 0.96]])
    assert _null_cells(betas, 0.9) == [(0, 1), (0, 2), (1, 2), (1, 3)]
    assert _null_cells(betas, 1.4) == [(0, 2), (0, 3)]


def test_circadian_uses_primary_windows_only():
    # c2 enters the day/night contrast and cosinor only where the category makes it
    # primary (leaders or both), the width where MF-DFA is primary (mfdfa or both)
    import xarray as xr

    from tfhrv.circadian.days import _series

    codes = [MF_ESTIMATORS.index(e) for e in ("none", "leaders", "mfdfa", "both")]
    ds = xr.Dataset({"c2": ("time", [-0.1, -0.2, -0.3, -0.4]),
                     "mf_width": ("time", [0.1, 0.2, 0.3, 0.4]),
                     "mf_estimator": ("time", np.array(codes, dtype=np.int8))})
    tree = xr.DataTree.from_dict({"/long": ds})
    np.testing.assert_array_equal(_series(tree, "long", "c2"), [np.nan, -0.2, np.nan, -0.4])
    np.testing.assert_array_equal(_series(tree, "long", "mf_width"),
                                  [np.nan, np.nan, 0.3, 0.4])
    old = xr.DataTree.from_dict({"/long": ds.drop_vars(["c2", "mf_estimator"])})
    assert np.isnan(_series(old, "long", "c2")).all()  # files from before issue #20


def test_switched_off_leaves_the_rest_unchanged():
    # ScanOptions(multifractal=False) (--no-multifractal) must drop only the multifractal
    # estimates: every other per-window value and the verdict are identical to the default
    # run, and each 4-h window and the report sentence say why the estimates are missing.
    import datetime as dt
    import json

    from tfhrv.analysis.multifractal_fits import MULTIFRACTAL_OFF
    from tfhrv.analysis.pipeline import ScanOptions, analyse_record
    from tfhrv.dataset.build import build_tree
    from tfhrv.signal.clean import clean
    from tfhrv.signal.recording import Recording
    from tfhrv.viz.multifractal import multifractal_sentence

    nn = 800.0 + 50.0 * fgn(30_000, 0.8, rng=11)  # about 6.7 h: three 4-h windows
    rec = Recording.from_intervals(nn, start=dt.datetime(2026, 3, 2, 8, 0), record_id="mf-off")
    cleaned = clean(rec)
    on = analyse_record(cleaned, options=ScanOptions(), workers=1)
    off = analyse_record(cleaned, options=ScanOptions(multifractal=False), workers=1)
    assert on.multifractal is not None and off.multifractal is None
    mf = set(empty_multifractal(1))
    for tier in ("short", "long"):
        a, b = getattr(on, tier).values, getattr(off, tier).values
        for name in a:
            if name in mf:
                continue
            np.testing.assert_array_equal(a[name], b[name], err_msg=name)
    assert np.isfinite(on.long.values["mf_h"]).any()
    assert not np.isfinite(off.long.values["mf_h"]).any()
    assert set(off.long.values["mf_reason"]) == {MULTIFRACTAL_OFF}
    assert on.assessment.verdict == off.assessment.verdict
    tree = build_tree(off)
    assert json.loads(tree.attrs["parameters"])["scan"]["multifractal"] is False
    assert "switched off" in multifractal_sentence(tree)
    assert "c2 =" in multifractal_sentence(build_tree(on))
