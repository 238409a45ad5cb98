"""Readers: formats, sniffing, and the catalogue of bad input (each must be one clear error)."""

from __future__ import annotations

import datetime as dt
import gzip
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tfhrv.core.errors import RecordFormatError, UnknownLabelWarning
from tfhrv.io.readers import parse_start, read_recording
from tfhrv.signal.recording import Recording


def _write(tmp_path: Path, name: str, text: str | bytes, *, gz: bool = False) -> Path:
    data = text.encode() if isinstance(text, str) else text
    p = tmp_path / (name + (".gz" if gz else ""))
    p.write_bytes(gzip.compress(data) if gz else data)
    return p


# ----------------------------------------------------------------------------- formats


@pytest.mark.parametrize("gz", [False, True])
def test_values_in_ms_and_seconds(tmp_path, gz):
    ms = _write(tmp_path, "a.txt", "800\n810\n790.5\n", gz=gz)
    s = _write(tmp_path, "b.txt", "0.8\n0.81\n0.7905\n", gz=gz)
    ra, rb = read_recording(ms), read_recording(s)
    assert_allclose(ra.rr_ms, [800, 810, 790.5])
    assert_allclose(rb.rr_ms, ra.rr_ms, rtol=1e-12)
    assert_allclose(ra.beat_time_s, [0.8, 1.61, 2.4005])
    assert ra.metadata["interval_unit"] == "ms" and rb.metadata["interval_unit"] == "s"


def test_values_ambiguous_unit_asks_for_units(tmp_path):
    p = _write(tmp_path, "x.txt", "50\n60\n55\n")
    with pytest.raises(RecordFormatError, match="--units"):
        read_recording(p)
    rec = read_recording(p, units="s")  # the option settles it (very long intervals in s)
    assert_allclose(rec.rr_ms, [50000, 60000, 55000])


def test_table_with_labels_and_comments(tmp_path):
    text = (
        "# record: sw99\n# start: 2026-03-02T22:00:00\n"
        "beat_time_s,rr_ms,label\n1.0,800,N\n1.8,800,V\n3.0,1200,N\n"
    )
    rec = read_recording(_write(tmp_path, "t.csv", text))
    assert rec.record_id == "sw99"
    assert rec.start == dt.datetime(2026, 3, 2, 22, 0)
    assert list(rec.labels) == ["N", "V", "N"]
    assert_allclose(rec.beat_time_s, [1.0, 1.8, 3.0])


def test_semicolon_decimal_comma(tmp_path):
    text = "Zeit (s);RR (ms);label\n0,8;800,5;N\n1,6;799,5;N\n"
    rec = read_recording(_write(tmp_path, "d.csv", text), time_column="Zeit (s)",
                         interval_column="RR (ms)")
    assert_allclose(rec.rr_ms, [800.5, 799.5])
    assert_allclose(rec.beat_time_s, [0.8, 1.6])


def test_tab_table_intervals_in_seconds_by_column_name(tmp_path):
    rec = read_recording(_write(tmp_path, "t.tsv", "ibi_s\tlabel\n0.8\tN\n0.9\tN\n"))
    assert_allclose(rec.rr_ms, [800, 900])
    assert_allclose(rec.beat_time_s, [0.8, 1.7])


def test_clock_timestamps_give_start_and_times(tmp_path):
    text = "timestamp,rr_ms\n2026-03-02T23:59:59,1000\n2026-03-03T00:00:00,1000\n"
    rec = read_recording(_write(tmp_path, "c.csv", text))
    assert rec.start == dt.datetime(2026, 3, 2, 23, 59, 58)
    assert_allclose(rec.beat_time_s, [1.0, 2.0])


def test_time_of_day_column_rolls_over_midnight(tmp_path):
    text = "clock,rr_ms\n23:59:59,1000\n00:00:00,1000\n00:00:01,1000\n"
    rec = read_recording(_write(tmp_path, "c.csv", text))
    assert rec.start == dt.time(23, 59, 58)
    assert_allclose(rec.beat_time_s, [1.0, 2.0, 3.0])


def test_beat_times_only(tmp_path):
    rec = read_recording(_write(tmp_path, "b.csv", "time_s\n1.0\n1.8\n2.7\n"))
    assert_allclose(rec.rr_ms, [800, 900])
    assert_allclose(rec.beat_time_s, [1.8, 2.7])


def test_start_option_overrides_file(tmp_path):
    p = _write(tmp_path, "s.txt", "# start: 2026-03-02T07:00:00\n800\n800\n")
    assert read_recording(p, start="08:04").start == dt.time(8, 4)


def test_parse_start_rejects_nonsense():
    with pytest.raises(ValueError, match="ISO 8601"):
        parse_start("yesterday")
    with pytest.raises(ValueError, match="out of range"):
        parse_start("25:00")


def test_edf_plus_annotations(tmp_path):
    edfio = pytest.importorskip("edfio")
    onsets = np.cumsum(np.full(50, 0.8))
    anns = [edfio.EdfAnnotation(float(o), None, "V" if i == 10 else "N")
            for i, o in enumerate(onsets)]
    anns.append(edfio.EdfAnnotation(0.0, None, "Recording starts"))
    sig = edfio.EdfSignal(np.zeros(100), sampling_frequency=1.0, label="dummy")
    edf = edfio.Edf([sig], annotations=anns, starttime=dt.time(22, 30),
                    recording=edfio.Recording(startdate=dt.date(2026, 3, 2)))
    path = tmp_path / "beats.edf"
    edf.write(path)
    for p in (path, _write(tmp_path, "beats.edf", path.read_bytes(), gz=True)):
        rec = read_recording(p)
        assert rec.n_beats == 49
        assert_allclose(rec.rr_ms, 800.0, rtol=1e-6)
        assert rec.labels[9] == "V"
        assert rec.start == dt.datetime(2026, 3, 2, 22, 30)
        assert rec.metadata["other_annotations"] == 1


def test_unknown_label_kept_counted_warned_once(tmp_path):
    text = "rr_ms,label\n800,N\n800,Z\n800,Z\n800,N\n"
    with pytest.warns(UnknownLabelWarning, match="'Z'") as record:
        rec = read_recording(_write(tmp_path, "u.csv", text))
    assert len([w for w in record if w.category is UnknownLabelWarning]) == 1
    assert rec.metadata["unknown_labels"] == {"Z": 2}
    assert list(rec.labels) == ["N", "Z", "Z", "N"]


def test_input_file_is_not_modified(tmp_path):
    p = _write(tmp_path, "keep.csv", "rr_ms\n800\n810\n")
    before = (p.read_bytes(), p.stat().st_mtime_ns)
    read_recording(p)
    assert (p.read_bytes(), p.stat().st_mtime_ns) == before


# ------------------------------------------------------------------- bad-input catalogue

BAD = [
    # (name, content, expected message fragment, expected line or None)
    ("empty.txt", b"", "is empty", None),
    ("blank.txt", b"\n\n  \n", "is empty", None),
    ("header_only.csv", b"beat_time_s,rr_ms,label\n", "no data rows", 1),
    ("comments_only.txt", b"# start: 08:00\n", "no data lines", None),
    ("garbage.bin", bytes(range(256)) * 4, "binary", None),
    ("latin.txt", b"800\n\xff\xfe\xfa\n", "not UTF-8", 2),
    ("nonnumeric.txt", b"800\n810\nabc\n", "'abc' in the intervals is not a number", 3),
    ("nonnumeric.csv", b"rr_ms,label\n800,N\n8x0,N\n", "'8x0' in column 'rr_ms' is not", 3),
    ("nan.txt", b"800\nnan\n810\n", "not a finite number", 2),
    ("inf.csv", b"rr_ms\n800\ninf\n", "not a finite number", 3),
    ("zero.txt", b"800\n0\n810\n", "is not > 0", 2),
    ("negative.csv", b"rr_ms\n800\n-5\n", "is not > 0", 3),
    ("backwards.csv", b"time_s,rr_ms\n1.0,800\n1.8,800\n1.5,800\n", "goes backwards", 4),
    ("repeat.csv", b"time_s,rr_ms\n1.0,800\n1.0,800\n", "repeats", 3),
    ("mixed_ms_s.txt", b"800\n810\n0.8\n790\n", "mixed units", 3),
    ("mixed_s_ms.txt", b"0.8\n0.81\n800\n790\n0.8\n", "mixed units", 4),
    ("truncated.csv", b"time_s,rr_ms,label\n1.0,800,N\n1.8,8", "truncated", 3),
    ("fields.csv", b"time_s,rr_ms,label\n1.0,800,N\n1.8,800\n2.6,800,N\n", "expected 3 fields", 3),
    ("noheader.csv", b"1.0,800,N\n1.8,800,N\n", "header", 1),
    ("nocolumns.csv", b"foo,bar\n1,2\n", "no beat-time, clock or interval column", 1),
    ("badclock.csv", b"clock,rr_ms\n08:00:00,800\n8 o'clock,800\n", "clock time", 3),
    ("ambiguous.txt", b"40\n41\n", "--units", None),
]


@pytest.mark.parametrize(("name", "content", "fragment", "line"), BAD, ids=[b[0] for b in BAD])
@pytest.mark.parametrize("gz", [False, True])
def test_bad_input_is_one_clear_error(tmp_path, name, content, fragment, line, gz):
    p = _write(tmp_path, name, content, gz=gz)
    with pytest.raises(RecordFormatError) as info:
        read_recording(p)
    err = info.value
    assert fragment in str(err)
    assert err.path == str(p)
    assert err.line == line
    assert str(err).startswith(str(p))


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(RecordFormatError, match="no such file"):
        read_recording(tmp_path / "nope.csv")
    with pytest.raises(RecordFormatError, match="is a directory"):
        read_recording(tmp_path)


def test_truncated_gzip(tmp_path):
    p = tmp_path / "cut.csv.gz"
    p.write_bytes(gzip.compress(b"rr_ms\n" + b"800\n" * 1000)[:-20])
    with pytest.raises(RecordFormatError, match="gzip"):
        read_recording(p)


def test_unknown_column_option(tmp_path):
    p = _write(tmp_path, "t.csv", "rr_ms\n800\n")
    with pytest.raises(RecordFormatError, match="no column named 'ibi'"):
        read_recording(p, interval_column="ibi")


# ------------------------------------------------------------------- property-based fuzz

_alphabet = st.sampled_from(list("0123456789.,;\t -+eE\n#:NVASabcnaif\r") + ["nan", "inf"])


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(_alphabet, max_size=120).map("".join), st.booleans())
def test_fuzz_text_gives_recording_or_format_error(tmp_path_factory, text, gz):
    """Random text: the only allowed outcomes are a valid Recording or RecordFormatError."""
    p = _write(tmp_path_factory.mktemp("fuzz"), "f.txt", text, gz=gz)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnknownLabelWarning)
        try:
            rec = read_recording(p)
        except RecordFormatError as err:
            assert err.path == str(p)
            return
    assert isinstance(rec, Recording)
    assert np.all(rec.rr_ms > 0) and np.all(np.diff(rec.beat_time_s) > 0)


@settings(max_examples=150, deadline=None)
@given(st.binary(max_size=400))
def test_fuzz_bytes_gives_recording_or_format_error(tmp_path_factory, data):
    p = tmp_path_factory.mktemp("fuzzb") / "b.dat"
    p.write_bytes(data)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnknownLabelWarning)
        try:
            read_recording(p)
        except RecordFormatError:
            pass


# ------------------------------------------------------------------------- open records


def test_open_records_read_with_gaps_and_labels(open_rr):
    """Real 24-h records (PhysioNet nsr2db, chf2db, nsrdb; Goldberger et al. 2000)."""
    import csv

    from tfhrv.signal.clean import clean

    with (open_rr / "records.csv").open() as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 8
    sdnn_healthy_24h = []
    for row in rows:
        rec = read_recording(open_rr / row["path"])
        q = clean(rec).quality
        assert rec.n_beats > 80_000
        assert set(np.unique(rec.labels)) >= {"N"}
        # plausibility: mean NN between 500 and 1200 ms (physiological range of adults)
        assert 500 < q.nn_mean_ms < 1200, row["record"]
        if row["group"] == "healthy" and row["database"] == "nsr2db":
            sdnn_healthy_24h.append(q.nn_sd_ms)
        if row["record"] == "chf216":
            # the open-data README: chf216 has an unreadable stretch of about two hours
            assert q.longest_gap_s > 1.5 * 3600
        if row["record"] == "chf206":
            # chf206 has frequent ectopy in the source annotations (V labels > 5 %)
            assert q.ectopic_fraction > 0.05
    # Task Force 1996 Table 3 (from memory): 24-h SDNN 141 +/- 39 ms in healthy adults;
    # each healthy record within 2 SD of that mean.
    assert all(141 - 2 * 39 < s < 141 + 2 * 39 for s in sdnn_healthy_24h), sdnn_healthy_24h
