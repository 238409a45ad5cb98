"""The promises of docs/RELIABILITY.md, tried as a user and a reviewer would (issue 19).

Faults are real where the machine allows it: a full disk is a file size limit set with
``resource.setrlimit(RLIMIT_FSIZE)`` in a subprocess (the kernel then fails ``write`` with
EFBIG, as on a full disk; POSIX setrlimit(2)); a read-only folder is ``chmod 0555`` (and,
for root, whom permissions do not stop, the same PermissionError raised where the file
system would raise it).
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

from tfhrv.cli import main
from tfhrv.core.files import OutputError, OutputSet, check_outputs, safe_file_stem, same_file

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT), "OPENBLAS_NUM_THREADS": "1"}


def _sha(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


def _one_error_line(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("tfhrv: error: ") and "Traceback" not in err
    return lines[0]


@pytest.fixture(scope="module")
def recording(tmp_path_factory) -> Path:
    """About 67 minutes of fGn-like intervals with a clock start (invented data)."""
    from tfhrv.synth import fgn

    d = tmp_path_factory.mktemp("rec")
    rr = 800 + 40 * fgn(5000, 0.8, rng=7)
    p = d / "rec.csv"
    p.write_text("# start: 2026-03-02T22:00:00\nrr_ms\n" + "\n".join(f"{v:.1f}" for v in rr)
                 + "\n")
    return p


@pytest.fixture(scope="module")
def scan_file(recording, tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("scan") / "rec.nc"
    assert main(["scan", str(recording), "-o", str(out)]) == 0
    return out


def _run_limited(args: list[str], limit_bytes: int, cwd: Path) -> subprocess.CompletedProcess:
    code = textwrap.dedent(f"""
        import resource, sys
        resource.setrlimit(resource.RLIMIT_FSIZE, ({limit_bytes}, {limit_bytes}))
        from tfhrv.cli import main
        sys.exit(main({args!r}))
    """)
    return subprocess.run([sys.executable, "-c", code], env=ENV, cwd=cwd, capture_output=True,
                          text=True, timeout=300)


# ------------------------------------------------------------------ full disk


def test_full_disk_scan_is_one_line_and_leaves_earlier_output(recording, scan_file, tmp_path):
    out = tmp_path / "out.nc"
    out.write_bytes(scan_file.read_bytes())  # an earlier output under the same name
    before = _sha(out)
    res = _run_limited(["scan", str(recording), "-o", str(out)], 64 * 1024, tmp_path)
    assert res.returncode == 2, (res.returncode, res.stderr[-2000:])
    line = _one_error_line(res.stderr)
    assert str(out) in line and "disk is full" in line and ".part" not in line
    assert _sha(out) == before  # intact
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.nc"]  # no temporary left


def test_full_disk_rhythm_writes_neither_table_nor_scan(scan_file, tmp_path):
    nc = tmp_path / "rec.nc"
    nc.write_bytes(scan_file.read_bytes())
    before = _sha(nc)
    res = _run_limited(["circadian", str(nc)], 64 * 1024, tmp_path)
    assert res.returncode == 2, res.stderr[-2000:]
    _one_error_line(res.stderr)
    assert _sha(nc) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rec.nc"]  # no CSV, no .part


def test_full_disk_report_writes_nothing(recording, tmp_path):
    res = _run_limited(["report", str(recording), "-o", str(tmp_path / "r.html"),
                        "--scan-output", str(tmp_path / "r.nc")], 256 * 1024, tmp_path)
    assert res.returncode == 2, res.stderr[-2000:]
    _one_error_line(res.stderr)
    assert list(tmp_path.iterdir()) == []


def test_full_disk_cohort_records_failures_and_leaves_no_partials(recording, tmp_path):
    man = tmp_path / "m.csv"
    man.write_text(f"path,record,group\n{recording},a,x\n{recording},b,y\n")
    out = tmp_path / "out"
    code = textwrap.dedent(f"""
        import resource, sys
        from tfhrv.cohort.run import CohortOptions, run_cohort
        from tfhrv.analysis.pipeline import ScanOptions
        from tfhrv.circadian.days import CircadianOptions
        opt = CohortOptions(scan=ScanOptions(n_surrogates=9), circadian=CircadianOptions(n_boot=99),
                            n_boot=199)
        resource.setrlimit(resource.RLIMIT_FSIZE, (16 * 1024, 16 * 1024))
        try:
            run_cohort({str(man)!r}, {str(out)!r}, workers=0, options=opt, progress=False)
        except OSError as exc:
            print(exc)
    """)
    res = subprocess.run([sys.executable, "-c", code], env=ENV, capture_output=True, text=True,
                         timeout=300)
    assert res.returncode == 0, res.stderr[-3000:]
    # the tables are written (16 KB suffice), the larger derived outputs are not, and the
    # one message says which
    assert "study.csv, comparison.csv and failures.csv were written" in res.stdout
    import pandas as pd

    fails = pd.read_csv(out / "failures.csv")
    assert sorted(fails["record"]) == ["a", "b"] and set(fails["stage"]) == {"write"}
    assert (out / "study.csv").is_file() and not (out / "study.parquet").exists()
    assert not list(out.rglob("*.part")) and not list((out / "records").glob("*.nc"))


# ------------------------------------------------------------------ read-only folder


def test_read_only_folder_names_the_output(recording, tmp_path, monkeypatch, capsys):
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o555)
    if os.geteuid() == 0:  # root ignores the mode: raise what the file system would
        import tempfile

        def denied(*a, **k):
            raise PermissionError(13, "Permission denied", str(folder / ".out.nc.x.part"))

        monkeypatch.setattr(tempfile, "mkstemp", denied)
    try:
        assert main(["scan", str(recording), "-o", str(folder / "out.nc")]) == 2
    finally:
        folder.chmod(0o755)
    line = _one_error_line(capsys.readouterr().err)
    assert str(folder / "out.nc") in line and "permission denied" in line
    assert ".part" not in line and list(folder.iterdir()) == []


# ------------------------------------------------------------------ input = output


def test_scan_refuses_to_overwrite_its_input(recording, tmp_path, capsys):
    rec = tmp_path / "rec.nc"  # a recording that happens to be named .nc
    rec.write_bytes(recording.read_bytes())
    link = tmp_path / "link.nc"
    link.symlink_to(rec)
    hard = tmp_path / "hard.nc"
    os.link(rec, hard)
    sub = tmp_path / "sub"
    sub.mkdir()
    before = _sha(rec)
    for out in (rec, link, hard, sub / ".." / "rec.nc"):
        assert main(["scan", str(rec), "-o", str(out)]) == 2
        assert "refusing to overwrite an input" in _one_error_line(capsys.readouterr().err)
    assert main(["scan", str(link), "-o", str(rec)]) == 2
    capsys.readouterr()
    assert _sha(rec) == before


def test_report_refuses_input_as_output(recording, tmp_path, capsys):
    rec = tmp_path / "rec.html"
    rec.write_bytes(recording.read_bytes())
    nc = tmp_path / "rec.nc"
    nc.write_bytes(recording.read_bytes())
    before = (_sha(rec), _sha(nc))
    assert main(["report", str(rec), "-o", str(rec)]) == 2
    assert main(["report", str(nc), "-o", str(tmp_path / "x.html"), "--scan-output",
                 str(nc)]) == 2
    err = capsys.readouterr().err
    assert err.count("refusing to overwrite an input") == 2
    assert (_sha(rec), _sha(nc)) == before and not (tmp_path / "x.html").exists()


def test_report_with_bad_scan_output_writes_nothing(recording, tmp_path, capsys):
    html = tmp_path / "r.html"
    assert main(["report", str(recording), "-o", str(html), "--scan-output",
                 str(tmp_path / "no" / "such" / "r.nc")]) == 2
    _one_error_line(capsys.readouterr().err)
    assert not html.exists()


def test_rhythm_csv_may_not_be_the_scan_file(scan_file, tmp_path, capsys):
    nc = tmp_path / "s.nc"
    nc.write_bytes(scan_file.read_bytes())
    before = _sha(nc)
    assert main(["circadian", str(nc), "--csv", str(nc)]) == 2
    assert "refusing to overwrite" in _one_error_line(capsys.readouterr().err)
    assert _sha(nc) == before


def test_check_outputs_and_same_file(tmp_path):
    a = tmp_path / "a"
    a.write_text("x")
    assert same_file(a, tmp_path / "." / "a") and not same_file(a, tmp_path / "b")
    with pytest.raises(ValueError, match="same file"):
        check_outputs([("o1", tmp_path / "b"), ("o2", tmp_path / "sub" / ".." / "b")])
    check_outputs([("o", tmp_path / "b")], [("i", a)])  # distinct: no error


# ------------------------------------------------------------------ output sets


def test_output_set_is_all_or_nothing(tmp_path):
    (tmp_path / "a.txt").write_text("old")
    with pytest.raises(RuntimeError), OutputSet() as out:
        out.add(tmp_path / "a.txt", lambda p: p.write_text("new"))
        out.add(tmp_path / "b.txt", lambda p: p.write_text("b"))
        raise RuntimeError("a later step fails")
    assert (tmp_path / "a.txt").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]

    def full(p):
        raise OSError(28, "No space left on device")

    with pytest.raises(OutputError, match="b.txt: cannot write: the disk is full"), \
            OutputSet() as out:
        out.add(tmp_path / "a.txt", lambda p: p.write_text("new"))
        out.add(tmp_path / "b.txt", full)
    assert (tmp_path / "a.txt").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]


def test_safe_file_stem_any_record_id():
    for rid in ("x" * 300, "a/b", "..", "é" * 200, "con:aux", " lead"):
        stem = safe_file_stem(rid)
        assert len(stem.encode()) <= 140 and "/" not in stem and not stem.startswith(".")
    assert safe_file_stem("a/b") != safe_file_stem("a_b") and safe_file_stem("s01") == "s01"


# ------------------------------------------------------------------ cohort


def _fast_options():
    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.circadian.days import CircadianOptions
    from tfhrv.cohort.run import CohortOptions

    return CohortOptions(scan=ScanOptions(n_surrogates=9), circadian=CircadianOptions(n_boot=99),
                         n_boot=199)


def test_cohort_resume_redoes_a_corrupt_output_of_the_same_size(recording, tmp_path):
    from tfhrv.cohort.run import run_cohort

    long_id = "r" * 300  # a 300-character record id: a safe file name, not an abort
    man = tmp_path / "m.csv"
    man.write_text(f"path,record,group\n{recording},a,x\n{recording},{long_id},y\n")
    out = tmp_path / "out"
    first = run_cohort(man, out, workers=0, options=_fast_options(), progress=False)
    assert [r["status"] for r in first.records] == ["done", "done"]
    nc = out / "records" / "a.nc"
    size = nc.stat().st_size
    with nc.open("r+b") as fh:  # zero 64 KB in the middle: same size, damaged content
        fh.seek(size // 2 - 32768)
        fh.write(b"\0" * 65536)
    assert nc.stat().st_size == size
    again = run_cohort(man, out, workers=0, options=_fast_options(), progress=False)
    status = {r["record"]: r["status"] for r in again.records}
    assert status == {"a": "done", long_id: "skipped"}
    import xarray as xr

    with xr.open_datatree(nc, engine="h5netcdf") as tree:
        assert tree.attrs["record_id"] == "a"


def test_manifest_problems_are_refused_before_any_work(recording, tmp_path):
    from tfhrv.cohort.run import ManifestError, run_cohort

    log = tmp_path / "sleep.csv"
    log.write_text("record,rest_start,rest_end\na,not a time,2026-03-03T06:00\n")
    cases = {
        "extra": f"path,record\n{recording},a,surplus\n",
        "sleep": f"path,record,sleep_log\n{recording},a,{log}\n",
        "tz": f"path,record,tz\n{recording},a,Atlantis/Capital\n",
        "dup": f"path,record,record\n{recording},a,b\n",
    }
    for name, text in cases.items():
        man = tmp_path / f"{name}.csv"
        man.write_text(text)
        out = tmp_path / f"out_{name}"
        with pytest.raises(ManifestError):
            run_cohort(man, out, workers=0, options=_fast_options(), progress=False)
        assert not out.exists(), name
    binary = tmp_path / "bin.csv"
    binary.write_bytes(b"path,record\n\xff\xfe\x00\x01")
    with pytest.raises(ValueError, match="bin.csv: holds binary data"):
        run_cohort(binary, tmp_path / "out_bin", workers=0, progress=False)


@pytest.mark.parametrize("option, value", [
    ("--min-coverage", "nan"), ("--max-ectopic", "-5"), ("--max-gap", "inf"),
    ("--max-nonstationary", "101"), ("--max-span-days", "0"),
])
def test_bad_options_refused_before_reading(option, value, tmp_path, capsys):
    missing = tmp_path / "absent.csv"  # never read: the option is refused first
    assert main(["inspect", str(missing), option, value]) == 2
    line = _one_error_line(capsys.readouterr().err)
    assert option in line and "absent.csv" not in line


# ------------------------------------------------------------------ warnings


def test_figures_of_a_sparse_scan_emit_no_library_warning(scan_file, tmp_path, capsys):
    """A 3-h record leaves most curves undrawn; matplotlib used to warn "No artists with
    labels found to put in legend" (pytest turns any warning into an error here)."""
    assert main(["figures", str(scan_file), "-d", str(tmp_path / "f"), "--formats",
                 "png"]) == 0
    assert "warning" not in capsys.readouterr().err


def test_library_warnings_go_to_the_log_not_the_terminal(tmp_path, capsys, caplog):
    import logging
    import warnings

    from tfhrv.cli import _show_warning

    with caplog.at_level(logging.DEBUG, logger="tfhrv"):
        _show_warning("No artists with labels found", UserWarning, "x.py", 1)
    assert capsys.readouterr().err == "" and "No artists" in caplog.text
    from tfhrv.core.errors import TfhrvWarning

    _show_warning("unknown beat label", TfhrvWarning, "x.py", 1)
    assert capsys.readouterr().err.startswith("tfhrv: warning: unknown beat label")
    del warnings


# ------------------------------------------------------------------ messages


def test_errors_name_the_users_file(tmp_path, capsys):
    """A problem found after reading (here: clock windows without a clock start) still
    names the user's file."""
    p = tmp_path / "short.txt"
    p.write_text("800\n810\n795\n" * 400)  # 16 min: one scan window, no clock
    nc = tmp_path / "short.nc"
    assert main(["scan", str(p), "-o", str(nc)]) == 0
    capsys.readouterr()
    assert main(["circadian", str(nc), "--period", "clock"]) == 2
    line = _one_error_line(capsys.readouterr().err)
    assert line.startswith(f"tfhrv: error: {nc}: ") and "clock start" in line


def test_huge_line_is_not_echoed_whole(tmp_path, capsys):
    p = tmp_path / "long.txt"
    p.write_text("800\n" + "9" * 1_000_000 + "x\n")
    assert main(["inspect", str(p)]) == 2
    line = _one_error_line(capsys.readouterr().err)
    assert len(line) < 600 and str(p) in line and "line 2" in line


@pytest.mark.parametrize("value", ["1e20", "1e300", "1e10"])
def test_absurd_value_names_file_and_line(value, tmp_path, capsys):
    p = tmp_path / "v.txt"
    p.write_text("800\n" * 100 + value + "\n" + "800\n" * 5)
    assert main(["inspect", str(p)]) == 2
    line = _one_error_line(capsys.readouterr().err)
    assert f"{p}, line 101" in line and "beyond the limit" in line


def test_window_count_is_bounded():
    from tfhrv.analysis.windows import MAX_WINDOWS, TierSpec, window_starts

    assert window_starts(86400.0, None, TierSpec(300.0, 300.0, "short")).size == 288
    with pytest.raises(ValueError, match=f"at most {MAX_WINDOWS}"):
        window_starts(31 * 86400.0, None, TierSpec(1.0, 1.0, "short"))


def test_max_span_option_admits_the_rare_long_record(tmp_path, capsys):
    from tfhrv.io.readers import read_recording
    from tfhrv.signal.clean import CleanOptions, clean

    p = tmp_path / "t.csv"
    t = np.concatenate([np.arange(1, 300) * 0.8, 40 * 86400 + np.arange(1, 300) * 0.8])
    p.write_text("time_s\n" + "\n".join(f"{v:.3f}" for v in t) + "\n")
    with pytest.raises(ValueError, match="beyond the limit of 31 days"):
        read_recording(p)
    rec = read_recording(p, max_span_s=50 * 86400)
    with pytest.raises(ValueError, match="max_span_s"):
        clean(rec)
    assert clean(rec, options=CleanOptions(max_span_s=50 * 86400)).quality.n_gaps == 1


# ------------------------------------------------------------------ no number from nothing


def _on_off_white_noise(rng):
    """White noise (true beta 0; Kobayashi & Musha 1982 for the 1/f contrast) recorded
    20 min of every hour for 24 h."""
    t_parts, rr_parts = [], []
    for h in range(24):
        rr = 800 + 40 * rng.standard_normal(1500)
        t = h * 3600 + np.cumsum(rr) / 1000.0
        keep = t < h * 3600 + 1200
        t_parts.append(t[keep])
        rr_parts.append(rr[keep])
    return np.concatenate(t_parts), np.concatenate(rr_parts)


def test_no_exponent_for_a_mostly_filled_series(rng):
    from tfhrv.analysis.fits import calibrated_fit

    t, rr = _on_off_white_noise(rng)
    fit = calibrated_fit("beta_spectral_long", rr, beat_time_s=t)
    assert fit.withheld.startswith("filled:") and np.isnan(fit.exponent)
    assert np.isnan(fit.ci).all() and fit.options["interpolated_fraction"] > 0.6
    # 28 min of data around a 20-h gap
    rr2 = 800 + 40 * rng.standard_normal(2100)
    t2 = np.cumsum(rr2) / 1000.0
    t2[1050:] += 20 * 3600
    assert calibrated_fit("beta_spectral_long", rr2, beat_time_s=t2).withheld.startswith(
        "filled:")
    # the same noise recorded without gaps keeps its exponent (near the true 0)
    rr3 = 800 + 40 * rng.standard_normal(100_000)
    ok = calibrated_fit("beta_spectral_long", rr3)
    assert ok.withheld == "" and abs(ok.exponent) < 0.3


def test_no_exponent_for_a_rhythm_without_scaling(rng):
    from tfhrv.analysis.fits import calibrated_fit, calibrated_fits
    from tfhrv.synth import fgn

    k = np.arange(3000)
    sine = 800 + 50 * np.sin(2 * np.pi * k / 12)  # a pure 12-beat rhythm: no power law
    assert calibrated_fit("alpha1", sine).withheld.startswith("no-power-law:")
    fits, _ = calibrated_fits({"alpha1": "alpha1", "alpha2": "alpha2"}, sine)
    assert fits["alpha1"].withheld.startswith("no-power-law:")
    assert np.isnan(fits["alpha1"].exponent)
    noise = 800 + 40 * fgn(3000, 0.9, rng=rng)  # fGn: alpha1 is reported
    fits, _ = calibrated_fits({"alpha1": "alpha1", "alpha2": "alpha2"}, noise)
    assert fits["alpha1"].withheld == "" and np.isfinite(fits["alpha1"].exponent)


def test_inspect_states_the_reason(tmp_path, capsys, rng):
    t, rr = _on_off_white_noise(rng)
    p = tmp_path / "onoff.csv"
    p.write_text("time_s,rr_ms\n" + "\n".join(f"{a:.3f},{b:.1f}" for a, b in zip(t, rr,
                                                                               strict=True)))
    assert main(["inspect", str(p)]) == 0
    out = capsys.readouterr().out
    assert "beta FFT none (filled)" in out and "no exponent beta FFT: filled" in out


def test_damaged_scan_file_is_named(scan_file, tmp_path, capsys):
    """A truncated scan file or a foreign format: one line naming the file (issue 19,
    item 7; the schema check itself is tfhrv.dataset.schema's)."""
    cut = tmp_path / "cut.nc"
    cut.write_bytes(scan_file.read_bytes()[: scan_file.stat().st_size // 3])
    text = tmp_path / "text.nc"
    text.write_text("rr_ms\n800\n")
    for p in (cut, text):
        assert main(["circadian", str(p)]) == 2
        line = _one_error_line(capsys.readouterr().err)
        assert f"{p}: is not a readable NetCDF4 scan file" in line
    assert sorted(q.name for q in tmp_path.iterdir()) == ["cut.nc", "text.nc"]


def test_cohort_manifest_tz_column(recording, tmp_path):
    import xarray as xr

    from tfhrv.cohort.run import run_cohort

    man = tmp_path / "m.csv"
    man.write_text(f"path,record,group,tz\n{recording},a,x,Europe/Berlin\n")
    res = run_cohort(man, tmp_path / "out", workers=0, options=_fast_options(), progress=False)
    assert [r["status"] for r in res.records] == ["done"]
    with xr.open_datatree(tmp_path / "out" / "records" / "a.nc", engine="h5netcdf") as tree:
        assert tree.attrs["time_zone"] == "Europe/Berlin"
        assert tree.attrs["start"] == "2026-03-02T22:00:00+01:00"  # CET in March before DST
