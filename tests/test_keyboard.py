"""What a researcher meets at the keyboard: progress on stderr only, strict JSON, the same
day/night options on every verb that runs the circadian analysis, the renamed verb and its
alias, clear messages for short records, the per-window export, readable numbers.

Strict JSON is checked with the standard library's parser told to reject the non-standard
constants (RFC 8259 has no NaN or Infinity); PNG and Parquet files with their own
specifications' readers (PNG signature; pyarrow).
"""

from __future__ import annotations

import datetime as dt
import io
import json
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from tfhrv.analysis.pipeline import ScanOptions
from tfhrv.cli import build_parser, main
from tfhrv.core.progress import SILENT, Progress, TextProgress
from tfhrv.dataset.build import scan
from tfhrv.dataset.netcdf import open_tree, write_tree
from tfhrv.signal.clean import clean
from tfhrv.synth import simulate_recording, write_recording_csv

ROOT = Path(__file__).resolve().parents[1]
FAST = ScanOptions(n_surrogates=9)


def _strict(text: str):
    def reject(name):
        raise ValueError(f"non-standard JSON constant {name}")

    return json.loads(text, parse_constant=reject)


class Counting(Progress):
    def __init__(self):
        self.stages, self.loops, self.advanced = [], [], 0

    def stage(self, name, /):
        self.stages.append(name)

    def start(self, total, label, /):
        self.loops.append((label, total))

    def advance(self, n=1, /):
        self.advanced += n


@pytest.fixture(scope="module")
def sim():
    return simulate_recording(days=0.3, start=dt.datetime(2026, 3, 2, 20, 0), rng=3,
                              record_id="kb")


@pytest.fixture(scope="module")
def recording_file(sim, tmp_path_factory):
    path = tmp_path_factory.mktemp("rec") / "kb.csv.gz"
    write_recording_csv(sim, path)
    return path


@pytest.fixture(scope="module")
def scanned(sim):
    p = Counting()
    return scan(clean(sim.recording), options=FAST, progress=p), p


@pytest.fixture(scope="module")
def scan_file(scanned, tmp_path_factory):
    path = tmp_path_factory.mktemp("scan") / "kb.nc"
    write_tree(scanned[0], path)
    return path


# ---------------------------------------------------------------- 1. progress


def test_scan_reports_every_window_in_each_loop(scanned):
    tree, p = scanned
    n = tree["/short"].sizes["time"] + tree["/long"].sizes["time"]
    assert [label for label, _ in p.loops] == [
        "stationarity battery, short windows", "fits, short windows",
        "stationarity battery, long windows", "fits, long windows"]
    assert p.advanced == 2 * n  # once per window in the battery, once in the fits
    assert any("whole-record" in s for s in p.stages)


def test_text_progress_bar_and_silent_default():
    out = io.StringIO()
    p = TextProgress(out, interactive=True, interval_s=0.0)
    assert list(p.track(range(4), total=4, label="records")) == [0, 1, 2, 3]
    text = out.getvalue()
    assert "\r" in text and "4/4" in text and text.endswith("\n")
    assert list(SILENT.track([1, 2], total=2, label="x")) == [1, 2]
    # absolute counts, as dask's scheduler feed reports them (tfhrv.cohort.run._dask_bar)
    out = io.StringIO()
    p = TextProgress(out, interactive=True, interval_s=0.0)
    p.start(5, "records")
    p.update(3, 5)
    assert out.getvalue().rsplit("\r", 1)[-1].count("3/5") == 1


def test_progress_goes_to_stderr_and_json_stays_strict(recording_file, capsys):
    assert main(["inspect", str(recording_file), "--json", "--progress"]) == 0
    cap = capsys.readouterr()
    data = _strict(cap.out)  # stdout is only the JSON document
    assert "tfhrv: [" in cap.err and "read" in cap.err
    assert main(["inspect", str(recording_file), "--json", "--quiet"]) == 0
    assert capsys.readouterr().err == ""
    # 7 h: the classical whole-record band is not estimable; null with its reason beside
    nulls = [k for k, v in data["exponents"].items() if v is None]
    for k in nulls:
        assert f"exponents.{k}" in data["missing"]
    assert "NaN" not in cap.out and "Infinity" not in cap.out


# ---------------------------------------------------------------- 2 and 3. options, verb


@pytest.mark.parametrize("verb", ["circadian", "report", "demo", "cohort"])
def test_day_night_options_on_every_verb_that_needs_them(verb):
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "verb").choices[verb]
    opts = {o for a in sub._actions for o in a.option_strings}
    assert {"--night", "--day", "--period", "--rest-hours", "--sleep-log"} <= opts
    assert {"--progress", "--quiet"} <= opts


def test_rhythm_is_a_hidden_alias_with_a_deprecation_message(scan_file, tmp_path, capsys):
    helptext = build_parser().format_help()
    assert "circadian" in helptext and "rhythm" not in helptext
    f = tmp_path / "a.nc"
    f.write_bytes(scan_file.read_bytes())
    assert main(["rhythm", str(f), "-q"]) == 0
    cap = capsys.readouterr()
    assert "tfhrv: warning: 'tfhrv rhythm' is now 'tfhrv circadian'" in cap.err
    assert (tmp_path / "a.circadian.csv").is_file()
    assert "circadian" in open_tree(f).children


def test_older_file_with_a_rhythm_group_reads_as_circadian(scan_file, tmp_path):
    tree = open_tree(scan_file)
    tree["/rhythm"] = xr.DataTree(xr.Dataset({"x": ("row", [1.0, 2.0])}))
    old = write_tree(tree, tmp_path / "old.nc")
    back = open_tree(old)
    assert "circadian" in back.children and "rhythm" not in back.children
    np.testing.assert_array_equal(back["/circadian"]["x"].values, [1.0, 2.0])


# ---------------------------------------------------------------- 6. export


def test_export_one_row_per_window_with_a_dictionary(scan_file, tmp_path, capsys):
    out = tmp_path / "w.csv"
    assert main(["export", str(scan_file), "-o", str(out), "-q"]) == 0
    table = pd.read_csv(out)
    tree = open_tree(scan_file)
    short = tree["/short"].to_dataset()
    n_short, n_long = short.sizes["time"], tree["/long"].sizes["time"]
    assert len(table) == n_short + n_long
    assert list(table["tier"].unique()) == ["short", "long"]
    s = table[table["tier"] == "short"]
    np.testing.assert_allclose(s["alpha1"], short["alpha1"].values, rtol=1e-5, equal_nan=True)
    np.testing.assert_allclose(s["alpha1_lower"], short["alpha1_ci"].values[:, 0], rtol=1e-5,
                               equal_nan=True)
    np.testing.assert_allclose(s["clock_hour"], short["clock_hour"].values, rtol=1e-5)
    for col in ("time", "elapsed_s", "clock_hour", "exponent", "exponent_lower",
                "exponent_upper", "alpha1_slope", "beta_wavelet_se", "stationarity",
                "estimator", "coverage"):
        assert col in table.columns, col
    assert set(s["estimator"]) <= {"none", "spectral", "wavelet", "dfa"}
    dictionary = pd.read_csv(tmp_path / "w.dictionary.csv", keep_default_na=False)
    assert list(dictionary["column"]) == list(table.columns)
    units = dict(zip(dictionary["column"], dictionary["units"], strict=True))
    assert units["nn_mean_ms"] == "ms" and units["elapsed_s"] == "s" and units["alpha1"] == "1"
    pq = tmp_path / "w.parquet"
    assert main(["export", str(scan_file), "-o", str(pq), "--tier", "long", "-q"]) == 0
    import pyarrow.parquet as papq

    back = papq.read_table(pq).to_pandas()
    assert len(back) == n_long and (back["tier"] == "long").all()
    assert main(["export", str(scan_file), "-o", str(tmp_path / "w.xlsx")]) == 2


# ---------------------------------------------------------------- 7. numbers and labels


def test_circadian_text_table_has_units_aligned_rows_and_no_negative_zero():
    from tfhrv.circadian.days import fixed, format_circadian

    row = {"tier": "short", "day": "all", "period_source": "clock",
           "acrophase_reference": "clock", "day_mean": 1.0, "night_mean": 1.0,
           "difference": -0.001, "difference_low": -0.004, "difference_high": 0.002,
           "effect_size": -0.0001, "mesor": 1.0, "amplitude": 0.1, "amplitude_low": 0.05,
           "amplitude_high": 0.15, "acrophase_h": 15.0, "acrophase_low": 14.0,
           "acrophase_high": 16.0, "cosinor_p": 0.01}
    table = pd.DataFrame([{**row, "variable": "beta_wavelet"},
                          {**row, "variable": "nn_mean_ms", "difference": -0.3}])
    text = format_circadian(table)
    assert "-0.00" not in text and " -0 " not in text and "[-0," not in text
    lines = text.splitlines()
    body = [ln for ln in lines[3:]]
    assert "unit" in lines[1] and " ms " in body[1]
    # every numeric column ends at the same place on every line
    assert len({len(ln) for ln in lines[1:2] + body}) == 1
    assert fixed(-0.0004, 3) == "0.000" and fixed(-0.4, 0) == "0"


def test_report_number_helpers_drop_negative_zero_and_label_checks():
    from tfhrv.viz.report import _CHECKS, _check_value, _num

    assert _num(-0.3, 0) == "0" and _num(-0.004) == "0.00"
    assert _check_value("longest_gap_s", 2540.0) == "42.3 min"
    assert _check_value("coverage", 0.9186) == "91.9 %"
    assert _check_value("ectopic_fraction", 5.565e-05) == "< 0.01 %"
    assert _check_value("r_squared", float("nan")) == "n/a"
    assert "_" not in "".join(label for label, _ in _CHECKS.values())


def test_duration_reason_gives_hours():
    from tfhrv.analysis.verdict import fitness_verdict

    v = fitness_verdict(duration_s=74000, band_hz=(1e-4, 1e-2), coverage=0.98,
                        longest_gap_s=20, ectopic_fraction=0.001, nonstationary_share=0.1,
                        r_squared=0.97, curvature_pvalue=0.3, lack_of_fit_pvalue=0.4,
                        excess_scatter=0.0, beta_spectral=1.05, beta_wavelet=1.0)
    text = " ".join(v.cautions)
    # 74000 s x 1e-4 Hz = 7.4 periods; 8 periods of 1e-4 Hz = 80000 s = 22.2 h
    assert "7.4 periods" in text and "20.6 h" in text and "22.2 h" in text


def test_hourly_coverage_legend_names_every_character():
    from tfhrv.analysis.inspection import _hour_bar, _hour_legend

    bar = _hour_bar(np.linspace(0, 1, 40))
    legend = _hour_legend()
    for ch in set(bar):
        assert (ch if ch != " " else "blank") + " " in legend, ch


# ---------------------------------------------------------------- 10. small faults


def test_a_200_beat_record_is_too_short_and_says_for_what(tmp_path, capsys):
    f = tmp_path / "short200.csv"
    rr = 800 + 30 * np.random.default_rng(1).standard_normal(200)
    f.write_text("rr_ms\n" + "\n".join(f"{v:.0f}" for v in rr) + "\n")
    assert main(["report", str(f), "-o", str(tmp_path / "r.html"), "-q"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(f) in err
    assert "too short for a report" in err and "5-min window" in err
    assert not (tmp_path / "r.html").exists()


def test_a_two_minute_record_gets_no_recommended_estimator(tmp_path, capsys):
    f = tmp_path / "two_min.csv"
    f.write_text("rr_ms\n" + "800\n810\n790\n" * 50)
    assert main(["inspect", str(f), "--json", "-q"]) == 0
    data = _strict(capsys.readouterr().out)
    assert data["verdict"] == "unfit"
    assert data["verdict_detail"]["recommended_estimator"] == "none"


def test_explain_piped_into_head_ends_quietly(recording_file):
    # a reader that closes the pipe at once: no error, no traceback (Python docs, SIGPIPE)
    code = (f"import sys; sys.argv = ['tfhrv', 'inspect', '--explain', {str(recording_file)!r}, "
            "'-q']; from tfhrv.cli import main; sys.exit(main())")
    with subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE,
                          stderr=subprocess.PIPE, cwd=ROOT) as proc:
        proc.stdout.close()
        err = proc.stderr.read().decode()
        status = proc.wait()
    assert status == 0
    assert "Broken pipe" not in err and "Traceback" not in err and "Exception" not in err


def test_report_footer_gives_the_run_time_it_measures():
    from tfhrv.viz.report import _build_time

    assert _build_time(10.0, started=None).startswith("Figures and HTML built in")
    import time

    text = _build_time(time.perf_counter(), started=time.perf_counter() - 12.0)
    assert text.startswith("Analysis and report took 12.") and "start of the command" in text


def test_license_is_an_spdx_string():
    meta = tomllib.loads((ROOT / "pyproject.toml").read_text())
    assert meta["project"]["license"] == "BSD-3-Clause"
