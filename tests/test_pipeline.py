"""One record pipeline: ``inspect`` shows a subset of what ``scan`` computes, never a
different answer; failures that are not a documented lack of data propagate.

Source of truth: the open records of ``../shared/data/open-rr`` (PhysioNet nsr2db, chf2db,
nsrdb; Goldberger et al., Circulation 2000;101:e215) analysed both ways.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from tfhrv.analysis import pipeline
from tfhrv.analysis.inspection import inspect_record, inspection_dict
from tfhrv.analysis.pipeline import EXPONENTS, ScanOptions, analyse_record
from tfhrv.analysis.verdict import FitnessThresholds
from tfhrv.dataset.build import build_tree
from tfhrv.dataset.schema import validate
from tfhrv.io.readers import read_recording
from tfhrv.signal.clean import clean
from tfhrv.synth import fgn

RECORDS = ("nsr2db/nsr021.csv.gz", "chf2db/chf206.csv.gz", "nsrdb/16273.csv.gz")


@pytest.mark.parametrize("name", RECORDS)
def test_inspect_equals_scan_on_open_records(open_rr, name):
    cleaned = clean(read_recording(open_rr / name))
    options = ScanOptions(thresholds=FitnessThresholds(max_gap_s=2400.0))
    ins = inspect_record(cleaned, options=options)
    full = analyse_record(cleaned, options=options, detail="full")
    tree = validate(build_tree(full))
    # same verdict, reasons and cautions
    assert ins.assessment.verdict == full.assessment.verdict
    assert tree["/record"].attrs["verdict"] == ins.assessment.verdict.verdict
    # same categories per window in both tiers
    for tier in ("short", "long"):
        a, b = getattr(ins.analysis, tier), getattr(full, tier)
        np.testing.assert_array_equal(a.categories, b.categories)
        np.testing.assert_array_equal(tree[f"/{tier}"]["stationarity"].values, b.categories)
    # same whole-record exponents, in the inspect JSON and in the file
    exps = inspection_dict(ins)["exponents"]
    for name_ in EXPONENTS:
        value = exps[name_]["value"] if exps[name_] else np.nan
        np.testing.assert_allclose(float(tree["/record"][name_]), value, rtol=0, atol=0)
        if exps[name_]:
            np.testing.assert_allclose(float(tree["/record"][name_ + "_slope"]),
                                       exps[name_]["slope"], rtol=0, atol=0)


def test_inspect_json_gives_the_withholding_reason_of_its_nulls(open_rr):
    # chf216 (PhysioNet chf2db): the whole-record spectral slope is withheld (the log-log
    # points depart from one line); the nulls it leaves in the JSON must say so, not "too
    # short for the fit range" or "open interval end"
    d = inspection_dict(inspect_record(clean(read_recording(open_rr / "chf2db/chf216.csv.gz"))))
    withheld = {k: v["withheld"] for k, v in d["exponents"].items() if v and v["withheld"]}
    assert withheld
    for name, why in withheld.items():
        keys = [k for k in d["missing"]
                if k.startswith((f"exponents.{name}.", f"block_intervals.{name}."))]
        assert f"exponents.{name}.value" in keys
        assert all(d["missing"][k] == f"withheld, {why}" for k in keys), keys


def test_battery_detail_has_no_per_window_values(rng):
    from tfhrv.signal.recording import Recording

    rr = 800 + 40 * fgn(6000, 0.8, rng=rng)
    rec = Recording.from_intervals(rr)
    res = analyse_record(clean(rec), detail="battery")
    assert res.short.values == {} and res.fluctuation is None
    with pytest.raises(ValueError, match="detail must be 'full'"):
        build_tree(res)


def test_unexpected_error_propagates(monkeypatch, rng):
    # A fault inside an estimator that is not a documented lack of data must not become
    # an empty window (it used to be swallowed as NaN).
    from tfhrv.signal.recording import Recording

    def broken(*args, **kwargs):
        raise ZeroDivisionError("injected fault")

    monkeypatch.setattr(pipeline, "periodogram_psd", broken)
    rr = 800 + 40 * fgn(6000, 0.8, rng=rng)
    with pytest.raises(ZeroDivisionError, match="injected fault"):
        analyse_record(clean(Recording.from_intervals(rr)), detail="full")


@pytest.mark.parametrize("detail", ["battery", "full"])
def test_workers_do_not_change_results(monkeypatch, rng, detail):
    # Every window is analysed by the same code with its own seed whichever process runs
    # it: the serial analysis is the reference, and the forked one must equal it exactly.
    from tfhrv.signal.recording import Recording

    if "fork" not in __import__("multiprocessing").get_all_start_methods():
        pytest.skip("no fork start method")
    monkeypatch.setattr(pipeline, "_MIN_PARALLEL_BEATS", 0)
    rr = 800 + 40 * fgn(6000, 0.8, rng=rng)
    options = ScanOptions(long=replace(pipeline.LONG, window_s=1800.0, hop_s=900.0))
    cleaned = clean(Recording.from_intervals(rr))
    calls = []  # the caller's own work runs once in either path (while_waiting)
    a = analyse_record(cleaned, options=options, detail=detail,
                       while_waiting=lambda: calls.append("serial"))
    b = analyse_record(cleaned, options=options, detail=detail, workers=2,
                       while_waiting=lambda: calls.append("forked"))
    assert calls == ["serial", "forked"]
    assert repr(a.assessment) == repr(b.assessment)
    for tier in ("short", "long"):
        ta, tb = getattr(a, tier), getattr(b, tier)
        assert len(ta.windows) > 1
        assert repr(ta.battery) == repr(tb.battery)
        np.testing.assert_array_equal(ta.categories, tb.categories)
        assert ta.values.keys() == tb.values.keys()
        for name, va in ta.values.items():
            vb = tb.values[name]
            assert va.dtype == vb.dtype and not vb.flags.writeable
            if va.dtype.kind == "O":
                assert list(va) == list(vb)
            else:
                np.testing.assert_array_equal(va, vb)
