"""Clock time through daylight-saving changes (issue 19, item 6).

Oracle: the standard library's own arithmetic (``datetime`` in UTC, ``astimezone`` into the
IANA zone from the system/tzdata database), independent of LocalClock's probing.
Europe/Berlin changes on 2026-03-29 at 02:00 CET -> 03:00 CEST and on 2026-10-25 at
03:00 CEST -> 02:00 CET (EU Directive 2000/84/EC: last Sunday of March and October,
01:00 UTC).
"""

from __future__ import annotations

import datetime as dt
import zoneinfo

import numpy as np
import pytest

from tfhrv.core.errors import RecordFormatError
from tfhrv.io.readers import read_recording
from tfhrv.signal.clock import LocalClock, load_zone, localize

BERLIN = zoneinfo.ZoneInfo("Europe/Berlin")
UTC = dt.UTC


def _write_clock_file(path, start_utc: dt.datetime, hours: float, *, aware=False, seed=0):
    """Beats every ~0.8 s; the clock column is local Berlin time, naive or with offset."""
    rng = np.random.default_rng(seed)
    n = int(hours * 3600 / 0.8)
    rr = 800 + 30 * rng.standard_normal(n)
    t = np.cumsum(rr) / 1000.0
    lines = ["clock,rr_ms"]
    for ti, ri in zip(t, rr, strict=True):
        local = (start_utc + dt.timedelta(seconds=float(ti))).astimezone(BERLIN)
        stamp = local.isoformat(timespec="milliseconds") if aware else \
            local.replace(tzinfo=None).isoformat(timespec="milliseconds")
        lines.append(f"{stamp},{ri:.1f}")
    path.write_text("\n".join(lines) + "\n")
    return t, rr


def _assert_hours(actual, expected, atol=1e-6):
    """Equal as clock hours (24 == 0)."""
    d = (np.asarray(actual) - np.asarray(expected) + 12.0) % 24.0 - 12.0
    np.testing.assert_allclose(d, 0.0, atol=atol)


def _expected_hours(start_utc, elapsed_s):
    out = []
    for e in np.atleast_1d(elapsed_s):
        local = (start_utc + dt.timedelta(seconds=float(e))).astimezone(BERLIN)
        out.append(local.hour + local.minute / 60 + (local.second + local.microsecond / 1e6) / 3600)
    return np.array(out)


@pytest.mark.parametrize("start_utc, label", [
    (dt.datetime(2026, 3, 28, 22, 0, tzinfo=UTC), "spring-forward"),
    (dt.datetime(2026, 10, 24, 22, 0, tzinfo=UTC), "fall-back"),
])
def test_naive_clock_read_in_zone(tmp_path, start_utc, label):
    path = tmp_path / f"{label}.csv"
    t, rr = _write_clock_file(path, start_utc, 6.0)
    rec = read_recording(path, tz="Europe/Berlin")
    # elapsed physical time: equal to the running sum (no invented or lost hour)
    np.testing.assert_allclose(rec.beat_time_s, t, atol=2e-3)  # ms stamps
    assert rec.clock is not None and rec.clock.zone == "Europe/Berlin"
    assert len(rec.clock.changes()) == 1
    # clock hours: local civil time through the change, checked against datetime
    probe = np.linspace(0, 6 * 3600 - 1, 97)
    # the recording origin is one interval before the first stamp
    origin_utc = start_utc + dt.timedelta(seconds=float(t[0] - rr[0] / 1000.0))
    _assert_hours(rec.clock_hours(probe), _expected_hours(origin_utc, probe))
    # clean sees no gap at the change
    from tfhrv.signal.clean import clean

    assert clean(rec).quality.n_gaps == 0


def test_without_zone_spring_forward_invents_a_gap_and_fall_back_is_refused(tmp_path):
    """Naive clock times without --tz cannot be read through a change: the documented
    behaviour is a one-hour gap (spring) and a refusal that names --tz (autumn)."""
    spring = tmp_path / "spring.csv"
    _write_clock_file(spring, dt.datetime(2026, 3, 28, 23, 0, tzinfo=UTC), 4.0)
    rec = read_recording(spring)
    assert rec.beat_time_s[-1] > 4.9 * 3600  # the hour the clocks skipped counted as time
    autumn = tmp_path / "autumn.csv"
    _write_clock_file(autumn, dt.datetime(2026, 10, 24, 23, 0, tzinfo=UTC), 4.0)
    with pytest.raises(RecordFormatError, match="goes backwards.*--tz"):
        read_recording(autumn)


def test_offsets_in_timestamps_are_kept_per_beat(tmp_path):
    """Timestamps with UTC offsets: the change of offset moves the clock hours."""
    start_utc = dt.datetime(2026, 10, 24, 23, 0, tzinfo=UTC)
    path = tmp_path / "aware.csv"
    t, rr = _write_clock_file(path, start_utc, 4.0, aware=True)
    rec = read_recording(path)
    assert rec.clock.zone == "" and [o for _, o in rec.clock.changes()] == [3600.0]
    probe = np.linspace(0, 4 * 3600 - 1, 41)
    origin_utc = start_utc + dt.timedelta(seconds=float(t[0] - rr[0] / 1000.0))
    _assert_hours(rec.clock_hours(probe), _expected_hours(origin_utc, probe))


def test_scan_clock_hour_and_root_attributes(tmp_path):
    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.analysis.windows import LONG, SHORT
    from tfhrv.dataset.build import scan
    from tfhrv.signal.clean import clean

    start_utc = dt.datetime(2026, 3, 28, 22, 0, tzinfo=UTC)
    path = tmp_path / "s.csv"
    t, rr = _write_clock_file(path, start_utc, 6.0, seed=3)
    rec = read_recording(path, tz="Europe/Berlin")
    tree = scan(clean(rec), options=ScanOptions(short=SHORT, long=LONG, n_surrogates=9))
    import json

    assert tree.attrs["time_zone"] == "Europe/Berlin"
    origin_utc = start_utc + dt.timedelta(seconds=float(t[0] - rr[0] / 1000.0))
    (change, offset), = json.loads(tree.attrs["utc_offset_changes"])
    due = (dt.datetime(2026, 3, 29, 1, 0, tzinfo=UTC) - origin_utc).total_seconds()
    assert offset == 7200.0 and abs(change - due) <= 1.0
    short = tree["/short"]
    _assert_hours(short["clock_hour"].values, _expected_hours(origin_utc, short["elapsed"].values))


def test_start_option_with_zone_and_errors(tmp_path):
    path = tmp_path / "v.txt"
    path.write_text("\n".join(["800"] * 200) + "\n")
    rec = read_recording(path, start="2026-10-25T01:30", tz="Europe/Berlin")
    assert rec.start.utcoffset() == dt.timedelta(hours=2)  # first showing of 02:xx is CEST
    with pytest.raises(RecordFormatError, match="needs a start with a date"):
        read_recording(path, start="01:30", tz="Europe/Berlin")
    with pytest.raises(RecordFormatError, match="does not exist"):
        read_recording(path, start="2026-03-29T02:30", tz="Europe/Berlin")
    with pytest.raises(ValueError, match="IANA"):
        read_recording(path, tz="Mars/Olympus")
    with pytest.raises(ValueError, match="IANA"):
        load_zone("../../etc/passwd")


def test_localize_fold_and_clock_from_offsets():
    z = load_zone("Europe/Berlin")
    first = localize(dt.datetime(2026, 10, 25, 2, 59), z)
    second = localize(dt.datetime(2026, 10, 25, 2, 0), z, after=first)
    assert (second.astimezone(UTC) - first.astimezone(UTC)) == dt.timedelta(minutes=1)
    c = LocalClock.from_offsets(np.array([0.0, 1.0, 2.0, 3.0]),
                                np.array([3600.0, 3600.0, 7200.0, 7200.0]))
    assert c.changes() == [[2.0, 7200.0]]
    np.testing.assert_array_equal(c.offset_at(np.array([0.5, 2.0, 9.0])), [3600, 7200, 7200])


def test_cli_tz_option(tmp_path, capsys):
    from tfhrv.cli import main

    path = tmp_path / "f.csv"
    _write_clock_file(path, dt.datetime(2026, 10, 24, 23, 0, tzinfo=UTC), 2.0)
    import json

    assert main(["inspect", str(path), "--tz", "Europe/Berlin", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["time_zone"] == "Europe/Berlin" and data["start"].endswith("+02:00")
    assert main(["inspect", str(path), "--tz", "Nowhere/Town"]) == 2
    assert "IANA" in capsys.readouterr().err


def test_rhythm_local_hours_follow_the_change():
    """Day boundaries and cosinor time use local civil hours: after a fall-back change the
    clock reads one hour less than start + elapsed (checked against datetime)."""
    import xarray as xr

    from tfhrv.circadian.days import _local_hours

    start_utc = dt.datetime(2026, 10, 24, 22, 0, tzinfo=UTC)  # 00:00 CEST
    elapsed = np.arange(0, 8 * 3600, 300.0) + 150.0
    clock = _expected_hours(start_utc, elapsed)
    ds = xr.Dataset(coords={"elapsed": ("time", elapsed), "clock_hour": ("time", clock)})
    local = _local_hours(ds)
    naive = elapsed / 3600.0
    before = elapsed < 3 * 3600  # the change is at 01:00 UTC, 3 h after the start
    np.testing.assert_allclose(local[before], naive[before], atol=1e-9)
    np.testing.assert_allclose(local[~before], naive[~before] - 1.0, atol=1e-9)


def test_sleep_log_in_local_time_with_a_zone():
    from tfhrv.circadian.days import _hours_between

    start = dt.datetime(2026, 10, 24, 20, 0, tzinfo=BERLIN)  # 18:00 UTC
    # 06:00 local on the 25th is CET (+1): 05:00 UTC, 11 h after the start
    assert _hours_between(start, dt.datetime(2026, 10, 25, 6, 0), "Europe/Berlin") == 11.0
    assert _hours_between(start.replace(tzinfo=None), dt.datetime(2026, 10, 25, 6, 0), "") \
        == 10.0
