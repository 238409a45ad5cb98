"""Cohort runs: manifest checks, in-process vs 2-process dask, failures, resume, kill, stats."""

from __future__ import annotations

import hashlib
import itertools
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from dataclasses import replace
from pathlib import Path

import h5netcdf
import numpy as np
import pandas as pd
import pytest
import xarray as xr
from scipy import stats

from tfhrv.analysis.pipeline import EXPONENTS, ScanOptions
from tfhrv.circadian.days import CircadianOptions
from tfhrv.cli import main as cli_main
from tfhrv.cohort.run import (
    CohortOptions,
    ManifestError,
    benjamini_hochberg,
    cliffs_delta,
    cliffs_delta_ci,
    compare_groups,
    parameter_hash,
    read_manifest,
    run_cohort,
)
from tfhrv.synth import simulate_recording, write_recording_csv

# Small, fast options: few surrogates and bootstrap resamples (the numbers are still the
# full pipeline's; only the Monte-Carlo sizes shrink).
FAST = CohortOptions(scan=ScanOptions(n_surrogates=9), circadian=CircadianOptions(n_boot=99),
                     n_boot=199)
PROFILES = ("day-worker", "heart-failure", "day-worker")
ENV = {**os.environ, "OPENBLAS_NUM_THREADS": "1"}


@pytest.fixture(scope="module")
def study_dir(tmp_path_factory) -> Path:
    """Three 2.4-h synthetic records, one garbage file, and a manifest naming all four."""
    d = tmp_path_factory.mktemp("cohort")
    (d / "data").mkdir()
    for i, prof in enumerate(PROFILES):
        sim = simulate_recording(days=0.1, profile=prof, record_id=f"s{i}", rng=100 + i)
        write_recording_csv(sim, d / "data" / f"s{i}.csv", truth_sidecar=False)
    (d / "data" / "garbage.csv").write_bytes(b"\x00\x17 not a beat file \xff")
    rows = [f"data/s{i}.csv,s{i},{'hf' if p == 'heart-failure' else 'ctl'},{40 + i},"
            for i, p in enumerate(PROFILES)]
    (d / "manifest.csv").write_text("path,record,group,age,note\n" + "\n".join(rows)
                                    + "\ndata/garbage.csv,junk,ctl,60,broken\n")
    return d


@pytest.fixture(scope="module")
def sequential(study_dir):
    return run_cohort(study_dir / "manifest.csv", study_dir / "seq", workers=0,
                      options=FAST, progress=False)


# ------------------------------------------------------------------ manifest validation


def test_manifest_errors_name_each_row(tmp_path):
    (tmp_path / "a.csv").write_text("rr_ms\n800\n810\n")
    (tmp_path / "m.csv").write_text(
        "path,record,group,start_time_of_day\n"
        "a.csv,r1,x,08:00\n"        # line 2: fine
        ",r2,x,\n"                  # line 3: empty path
        "missing.csv,r3,x,\n"       # line 4: no such file
        "a.csv,r1,y,\n"             # line 5: duplicate record id
        "a.csv,r5,y,25:99\n")       # line 6: bad start
    with pytest.raises(ManifestError) as info:
        read_manifest(tmp_path / "m.csv")
    lines = [ln for ln, _ in info.value.problems]
    assert lines == [3, 4, 5, 6]
    assert str(info.value).startswith(f"{tmp_path / 'm.csv'}, line 3: empty path")
    assert "duplicate record id 'r1' (first on line 2)" in str(info.value)
    (tmp_path / "nopath.csv").write_text("file,record\na.csv,r1\n")
    with pytest.raises(ManifestError, match=r"nopath.csv, line 1: manifest has no 'path'"):
        read_manifest(tmp_path / "nopath.csv")


def test_command_reports_bad_manifest_before_work(tmp_path, capsys):
    (tmp_path / "m.csv").write_text("path,record\nnot_there.csv,r1\n")
    out = tmp_path / "out"
    assert cli_main(["cohort", str(tmp_path / "m.csv"), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.strip().endswith("m.csv, line 2: no such file 'not_there.csv'")
    assert len(err.strip().splitlines()) == 1
    assert not out.exists()  # nothing started


def test_open_records_manifest_reads(open_rr):
    """The real manifest of the open records (Goldberger et al. 2000 databases)."""
    entries = read_manifest(open_rr / "records.csv")
    assert len(entries) == 8
    assert {e.group for e in entries} == {"healthy", "heart-failure"}
    by_id = {e.record: e for e in entries}
    assert by_id["16265"].start == "08:04:00" and by_id["nsr001"].start is None
    assert all(e.path.is_file() for e in entries)
    assert dict(by_id["chf201"].extra) == {"database": "chf2db", "age": "55", "sex": "M"}


# ------------------------------------------------------------------ one run


def test_failure_isolated_and_outputs_written(sequential, study_dir):
    out = study_dir / "seq"
    fails = pd.read_csv(out / "failures.csv")
    assert fails[["record", "stage"]].values.tolist() == [["junk", "read"]]
    assert "garbage.csv" in fails["error"].iloc[0]
    assert sorted(p.name for p in (out / "records").iterdir()) == ["s0.nc", "s1.nc", "s2.nc"]
    assert sequential.count("done") == 3 and sequential.count("failed") == 1
    entries = {e.record: e for e in read_manifest(study_dir / "manifest.csv")}
    for rid in ("s0", "s1", "s2"):
        with h5netcdf.File(out / "records" / f"{rid}.nc", "r") as f:
            assert set(f.groups) == {"nn", "short", "long", "record", "circadian"}
            # provenance checked with hashlib, independently of tfhrv.io.file_sha256
            data = (study_dir / "data" / f"{rid}.csv").read_bytes()
            assert f.attrs["source_sha256"] == hashlib.sha256(data).hexdigest()
            assert f.attrs["parameter_hash"] == parameter_hash(FAST, entries[rid])
    for name in ("study.parquet", "study.csv", "comparison.csv", "comparison.png"):
        assert (out / name).stat().st_size > 0
    assert not list(out.rglob("*.part"))


def test_study_table_carries_tree_values(sequential, study_dir):
    study = pd.read_parquet(study_dir / "seq" / "study.parquet")
    assert study["record"].tolist() == ["s0", "s1", "s2", "junk"]
    assert study["status"].tolist() == ["ok", "ok", "ok", "failed (read)"]
    assert study["age"].dtype == np.float64 and study["note"].tolist()[-1] == "broken"
    row = study.set_index("record").loc["s1"]
    with xr.open_datatree(study_dir / "seq" / "records" / "s1.nc", engine="h5netcdf") as t:
        rec = t["/record"].to_dataset()
        rhythm = t["/circadian"].to_dataset().to_dataframe()
        for name in EXPONENTS:
            np.testing.assert_allclose(row[name], float(rec[name]), rtol=0, atol=0)
            np.testing.assert_allclose([row[name + "_ci_lower"], row[name + "_ci_upper"]],
                                       rec[name + "_ci"].values, rtol=0, atol=0)
        for name in ("nn_sd_ms", "rmssd_ms", "coverage", "longest_gap_s"):
            assert row[name] == float(rec[name])
        # the measured effect of the level changes and the block intervals (issue 15)
        for name in ("level_effect", "nonstationary_share"):
            np.testing.assert_allclose(row[name], float(rec[name]), rtol=0, atol=0)
        np.testing.assert_allclose([row["level_effect_ci_lower"], row["level_effect_ci_upper"]],
                                   rec["level_effect_ci"].values, rtol=0, atol=0)
        np.testing.assert_allclose([row["alpha1_block_ci_lower"], row["alpha1_block_ci_upper"]],
                                   rec["alpha1_block_ci"].values, rtol=0, atol=0)
        assert rec["level_effect"].attrs["long_name"] and rec["alpha1_block_se"].attrs["units"]
        assert row["verdict"] == rec.attrs["verdict"]
    pooled = rhythm[(rhythm["day"] == "all") & (rhythm["variable"] == "alpha1")].iloc[0]
    assert row["alpha1_day"] == pooled["day_mean"]
    assert row["period_source"] == pooled["period_source"] == "clock"
    # the CSV holds the same numbers (full precision)
    csv = pd.read_csv(study_dir / "seq" / "study.csv")
    np.testing.assert_allclose(csv["alpha1"], study["alpha1"], rtol=1e-15, equal_nan=True)


def test_short_exponents_zarr_matches_windows(sequential, study_dir):
    z = xr.open_zarr(study_dir / "seq" / "short_exponents.zarr").load()
    assert z["alpha1"].dims == ("record", "time_of_day")
    assert z.sizes == {"record": 3, "time_of_day": 288}
    assert list(z["record"].values) == ["s0", "s1", "s2"]
    with xr.open_datatree(study_dir / "seq" / "records" / "s2.nc", engine="h5netcdf") as t:
        short = t["/short"].to_dataset()
        frame = pd.DataFrame({"bin": (short["clock_hour"].values * 12).astype(int),
                              "alpha1": short["alpha1"].values}).dropna()
    expected = frame.groupby("bin")["alpha1"].mean()  # pandas, not the module's bincount
    got = z["alpha1"].sel(record="s2").values
    np.testing.assert_allclose(got[expected.index], expected.values, rtol=1e-12)
    assert np.isnan(np.delete(got, expected.index)).all()


def test_resume_skips_and_rerun_after_input_change(sequential, study_dir, tmp_path):
    out = study_dir / "seq"
    before = {p.name: p.stat().st_mtime_ns for p in (out / "records").iterdir()}
    again = run_cohort(study_dir / "manifest.csv", out, workers=0, options=FAST,
                       progress=False)
    assert again.count("skipped") == 3 and again.count("done") == 0
    assert again.count("failed") == 1  # the garbage file is tried again and fails again
    assert {p.name: p.stat().st_mtime_ns for p in (out / "records").iterdir()} == before
    pd.testing.assert_frame_equal(again.study, sequential.study)
    pd.testing.assert_frame_equal(again.comparison, sequential.comparison)
    # a copied study resumes by content; a changed input file is run again
    copy = tmp_path / "copy"
    shutil.copytree(study_dir, copy, ignore=shutil.ignore_patterns("kill"))
    with (copy / "data" / "s1.csv").open("a") as fh:
        fh.write("# edited: true\n")
    moved = run_cohort(copy / "manifest.csv", copy / "seq", workers=0, options=FAST,
                       progress=False)
    status = {r["record"]: r["status"] for r in moved.records}
    assert status == {"s0": "skipped", "s1": "done", "s2": "skipped", "junk": "failed"}


def test_parameter_hash_changes_with_options(study_dir):
    e = read_manifest(study_dir / "manifest.csv")[0]
    h = parameter_hash(FAST, e)
    assert h == parameter_hash(CohortOptions(scan=ScanOptions(n_surrogates=9),
                                             circadian=CircadianOptions(n_boot=99)), e)
    assert h != parameter_hash(CohortOptions(), e)
    assert h != parameter_hash(FAST, replace(e, start="07:00"))
    assert h == parameter_hash(FAST, replace(e, group="other", extra=()))  # not an input


def test_killed_run_resumed_on_local_cluster(sequential, study_dir, tmp_path):
    """SIGKILL the run's process group after its first output file, then resume on a real
    2-process LocalCluster: every record is done exactly once and the study table equals
    the uninterrupted in-process run."""
    out = tmp_path / "kill"
    code = textwrap.dedent(f"""
        from tfhrv.cohort.run import CohortOptions, run_cohort
        from tfhrv.circadian.days import CircadianOptions
        from tfhrv.analysis.pipeline import ScanOptions
        opt = CohortOptions(scan=ScanOptions(n_surrogates=9), circadian=CircadianOptions(n_boot=99),
                            n_boot=199)
        run_cohort({str(study_dir / 'manifest.csv')!r}, {str(out)!r}, workers=0, options=opt)
    """)
    log = tmp_path / "killed_run.log"
    with log.open("w") as fh:
        proc = subprocess.Popen([sys.executable, "-c", code], env=ENV, start_new_session=True,
                                stdout=fh, stderr=subprocess.STDOUT)
    deadline = time.monotonic() + 300
    try:
        while not list((out / "records").glob("*.nc")) and time.monotonic() < deadline:
            assert proc.poll() is None, f"the run ended before the kill:\n{log.read_text()}"
            time.sleep(0.05)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    first = {p.name.removesuffix(".nc") for p in (out / "records").glob("*.nc")}
    assert 1 <= len(first) < 3, log.read_text()  # killed midway
    # a write cut short leaves a temporary file like this one; it must not count
    (out / "records" / ".s2.nc.deadbeef.part").write_bytes(b"half a file")
    # with the usual dashboard port taken by another program: no warning may reach the
    # user (pytest turns warnings into errors), the cluster simply does not use it
    import socket

    with socket.socket() as holder:
        try:
            holder.bind(("127.0.0.1", 8787))
            holder.listen()
        except OSError:  # already held by something else: the condition holds anyway
            pass
        again = run_cohort(study_dir / "manifest.csv", out, workers=2, options=FAST,
                           progress=False)
    status = {r["record"]: r["status"] for r in again.records}
    assert {r for r, s in status.items() if s == "skipped"} == first, again.records
    assert {r for r, s in status.items() if s == "done"} == {"s0", "s1", "s2"} - first
    assert status["junk"] == "failed"
    ran = {r["pid"] for r in again.records if r["status"] != "skipped"}
    assert os.getpid() not in ran and -1 not in ran  # in dask worker processes
    assert not list(out.rglob("*.part"))
    assert sorted(p.name for p in (out / "records").iterdir()) == ["s0.nc", "s1.nc", "s2.nc"]
    pd.testing.assert_frame_equal(again.study, sequential.study)
    pd.testing.assert_frame_equal(again.comparison, sequential.comparison)
    pd.testing.assert_frame_equal(again.failures, sequential.failures)
    for rid in ("s0", "s1", "s2"):  # every output opens with plain xarray
        with xr.open_datatree(out / "records" / f"{rid}.nc", engine="h5netcdf") as tree:
            assert tree["/record"]["alpha1"].size == 1
    rid = sorted({"s0", "s1", "s2"} - first)[0]  # one run on the cluster: same file content
    for group in ("short", "record", "circadian"):
        with (xr.open_dataset(study_dir / "seq" / "records" / f"{rid}.nc", group=group) as a,
              xr.open_dataset(out / "records" / f"{rid}.nc", group=group) as b):
            xr.testing.assert_identical(a, b)


def test_folder_and_glob_input(study_dir):
    by_glob = read_manifest(str(study_dir / "data" / "s*.csv"))
    assert [e.record for e in by_glob] == ["s0", "s1", "s2"]
    assert all(e.group == "" and e.path.is_file() for e in by_glob)
    by_folder = read_manifest(study_dir / "data")
    assert [e.record for e in by_folder] == ["garbage", "s0", "s1", "s2"]


# ------------------------------------------------------------------ statistics


def test_cliffs_delta_is_rescaled_mann_whitney_u(rng):
    """delta = 2 U / (n m) - 1 (Cliff 1993), U from scipy.stats.mannwhitneyu (ties 1/2)."""
    for n, m in ((5, 7), (12, 9), (30, 25)):
        x = rng.integers(0, 6, n).astype(float)  # many ties on purpose
        y = rng.integers(1, 7, m).astype(float)
        u = stats.mannwhitneyu(x, y).statistic
        assert cliffs_delta(x, y) == pytest.approx(2 * u / (n * m) - 1, rel=0, abs=1e-12)
    assert cliffs_delta([3, 4], [1, 2]) == 1.0 and cliffs_delta([1, 2], [3, 4]) == -1.0


def test_mann_whitney_p_matches_exact_enumeration(rng):
    """Two-sided exact p from all C(9, 4) splits (Mann & Whitney 1947 null distribution)."""
    a = np.array([1.1, 2.3, 2.9, 4.0])
    b = np.array([3.1, 4.4, 5.2, 6.0, 6.5])
    pooled = np.concatenate([a, b])

    def u_of(idx):
        sel = np.zeros(pooled.size, bool)
        sel[list(idx)] = True
        return np.sum(pooled[sel][:, None] > pooled[~sel][None, :])

    u_obs = u_of(range(4))
    null = np.array([u_of(c) for c in itertools.combinations(range(9), 4)])
    centre = 4 * 5 / 2
    p_exact = np.mean(np.abs(null - centre) >= abs(u_obs - centre))
    table = pd.DataFrame({"group": ["a"] * 4 + ["b"] * 5, "v": pooled})
    res = compare_groups(table, n_boot=99, rng=0).iloc[0]
    assert res["mannwhitney_u"] == u_obs
    np.testing.assert_allclose(res["p_value"], p_exact, rtol=1e-12)
    assert res["median_a"] == np.median(a) and res["median_b"] == np.median(b)
    assert res["cliffs_delta_ci_lower"] <= res["cliffs_delta"] <= res["cliffs_delta_ci_upper"]


def test_benjamini_hochberg_against_statsmodels(rng):
    from statsmodels.stats.multitest import multipletests

    p = rng.uniform(0, 0.2, 40) ** 2
    p[[3, 17]] = np.nan
    ok = np.isfinite(p)
    expected = multipletests(p[ok], method="fdr_bh")[1]  # independent implementation
    got = benjamini_hochberg(p)
    np.testing.assert_allclose(got[ok], expected, rtol=1e-12)
    assert np.isnan(got[~ok]).all()
    # Benjamini & Hochberg (1995) worked example, 15 p-values (from memory): 4 rejected
    # at q = 0.05.
    example = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459,
               0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.0]
    assert int(np.sum(benjamini_hochberg(example) <= 0.05)) == 4


def test_cliffs_delta_interval_matches_scipy_bootstrap(rng):
    """Percentile interval vs scipy.stats.bootstrap (independent resampling, 4000 each).

    Tolerance 0.06: about 4 Monte-Carlo standard errors of a 2.5 % quantile of 4000
    resamples for a statistic with SD ~0.2 (sqrt(q (1-q) / B) / density ~ 0.01 each).
    """
    x = rng.normal(0.5, 1, 14)
    y = rng.normal(0.0, 1, 11)
    ours = cliffs_delta_ci(x, y, n_boot=4000, rng=1)

    def delta(a, b, axis=-1):
        return np.sign(np.expand_dims(a, -1) - np.expand_dims(b, -2)).mean(axis=(-1, -2))

    ref = stats.bootstrap((x, y), delta, n_resamples=4000, method="percentile",
                          vectorized=True, rng=np.random.default_rng(2)).confidence_interval
    np.testing.assert_allclose(ours, (ref.low, ref.high), atol=0.06)
    assert cliffs_delta_ci(x, y, n_boot=500, rng=3) == cliffs_delta_ci(x, y, n_boot=500, rng=3)


def test_documented_manifest_example_is_valid():
    """docs/manifest_example.csv names the shipped demo files and passes validation."""
    docs = Path(__file__).resolve().parents[1] / "docs" / "manifest_example.csv"
    entries = read_manifest(docs)
    assert [e.record for e in entries] == ["sw01", "sw02", "sw03"]
    assert [e.group for e in entries] == ["day-shift", "night-shift", "comparison"]
    assert entries[1].start == "2024-03-05T19:40:00" and entries[0].start is None
    assert dict(entries[0].extra)["shift_pattern"] == "days 07:00-15:00"
