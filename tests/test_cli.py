"""The command line: help on every verb, readable output, one-line errors with status 2."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from tfhrv.cli import build_parser, main


def _verbs() -> list[str]:
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "verb")
    return sorted(sub.choices)


@pytest.mark.parametrize("verb", _verbs())
def test_every_verb_has_help(verb, capsys):
    with pytest.raises(SystemExit) as info:
        main([verb, "--help"])
    assert info.value.code == 0
    out = capsys.readouterr().out
    assert "usage: tfhrv " + verb in out
    assert "research use" in " ".join(out.split()).lower()


def test_inspect_prints_quality(tmp_path, capsys):
    p = tmp_path / "r.csv"
    p.write_text("# start: 2026-03-02T08:00:00\nrr_ms,label\n" + "800,N\n" * 3000 + "500,V\n"
                 + "1100,N\n" + "800,N\n" * 3000)
    assert main(["inspect", str(p)]) == 0
    out = capsys.readouterr().out
    assert "2026-03-02T08:00:00" in out
    assert "6,002 read" in out and "non sinus end 1" in out
    assert main(["inspect", str(p), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["quality"]["n_intervals"] == 6002
    assert data["start_kind"] == "timestamp"
    # keys of the measured effect and of the block intervals exist (None where the record
    # is too short for them; this one is 1.3 h)
    assert "level_change_effect" in data and "block_intervals" in data


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        (None, "no such file"),
        (b"", "is empty"),
        (b"800\nabc\n", "line 2: 'abc' in the intervals is not a number"),
    ],
)
def test_errors_are_one_line_status_2_no_output(tmp_path, capsys, content, fragment):
    p = tmp_path / "bad.txt"
    if content is not None:
        p.write_bytes(content)
    before = sorted(tmp_path.iterdir())
    assert main(["inspect", str(p)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("tfhrv: error: ")
    assert fragment in err and "Traceback" not in err
    assert sorted(tmp_path.iterdir()) == before


def test_installed_entry_point_runs(tmp_path):
    p = tmp_path / "x.txt"
    p.write_text("40\n41\n")
    proc = subprocess.run([sys.executable, "-m", "tfhrv.cli", "inspect", str(p)],
                          capture_output=True, text=True, check=False)
    assert proc.returncode == 2
    assert "--units" in proc.stderr and "Traceback" not in proc.stderr


def test_calibration_choices_match_the_models():
    # the CLI spells the models out (no numpy import for --help); they must not drift
    from tfhrv.calibration.calibrate import MODELS
    from tfhrv.cli import CALIBRATION_MODELS

    assert CALIBRATION_MODELS == MODELS


@pytest.mark.parametrize("value", ["0", "two", "-1"])
def test_bad_worker_count_is_a_one_line_error(tmp_path, capsys, monkeypatch, value):
    p = tmp_path / "r.csv"
    p.write_text("rr_ms\n" + "800\n" * 600)
    monkeypatch.setenv("TFHRV_WORKERS", value)
    assert main(["inspect", str(p)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "TFHRV_WORKERS" in err and repr(value) in err


def test_version_is_printed_on_request(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.startswith("tfhrv ")
