"""Property-based fuzzing of the readers and of every verb's entry point (issue 19).

Property: whatever the bytes, a reader returns a valid recording or raises one of our
documented errors naming the file; a verb returns 0 or exits with status 2 and one
``tfhrv: error:`` line, writes nothing on failure, and never shows a traceback.  Every
example runs under a time limit (hypothesis ``deadline``) and a memory limit (peak
traced allocation, numpy included, at most a constant plus a multiple of the input size:
work bounded by the data, not by what a number in it claims).

The seed corpus (``@example``) holds every case of issue 19.  Examples are derandomised
and bounded so that the suite adds well under a minute.
"""

from __future__ import annotations

import contextlib
import io
import tempfile
import tracemalloc
import warnings
from pathlib import Path

import pytest

hypothesis = pytest.importorskip("hypothesis")
from hypothesis import HealthCheck, example, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from tfhrv.cli import main  # noqa: E402
from tfhrv.core.errors import RecordFormatError  # noqa: E402
from tfhrv.io.readers import read_recording  # noqa: E402

WORK = Path(tempfile.mkdtemp(prefix="tfhrv-fuzz-"))
#: per-example memory limit: 64 MB plus 400 bytes per input byte (a beat line is ~6-20
#: bytes and the pipeline keeps a few float64 arrays per beat)
MEM_BASE, MEM_PER_BYTE = 64 * 2**20, 400

FAST = settings(max_examples=60, deadline=5000, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64).map(repr),
    st.integers(min_value=-10**30, max_value=10**30).map(str),
    st.sampled_from(["800", "0.8", "1e9", "1e12", "1e20", "1e300", "-1", "0", "nan", "inf",
                     "8,00", "800.", ".8", "1_000", "０８００", "800\u2028", "8\u008500",
                     "", " ", "N", "V"]),
    st.floats(min_value=250, max_value=1500).map(lambda v: f"{v:.1f}"),
)
HEADERS = st.lists(st.sampled_from(
    ["time_s", "time_ms", "time", "rr_ms", "rr", "nn", "rr_s", "label", "timestamp", "clock",
     "type", "x", "RR (ms)", "rr_ms"]), min_size=1, max_size=4)
SEPS = st.sampled_from([",", ";", "\t", " "])


@st.composite
def text_records(draw) -> bytes:
    """A values file or a table built from plausible and absurd pieces: mostly plausible
    records with a few absurd values spliced in, or anything at all."""
    mode = draw(st.sampled_from(["plausible", "plausible-table", "values", "table"]))
    if mode.startswith("plausible"):
        rr = draw(st.lists(st.floats(min_value=400, max_value=1200), min_size=20,
                           max_size=400))
        cells = [f"{v:.1f}" for v in rr]
        for _ in range(draw(st.integers(0, 3))):
            cells[draw(st.integers(0, len(cells) - 1))] = draw(NUMBERS)
        if mode == "plausible":
            body = "\n".join(cells)
        else:
            t, rows = 0.0, []
            for c, v in zip(cells, rr, strict=True):
                t += v / 1000.0
                rows.append(f"{t:.3f},{c}")
            body = draw(st.sampled_from(["time_s,rr_ms", "time_ms,rr_ms", "rr_ms,time_s"])) \
                + "\n" + "\n".join(rows)
    elif mode == "values":
        rows = draw(st.lists(NUMBERS, min_size=1, max_size=300))
        body = "\n".join(rows)
    else:
        sep = draw(SEPS)
        head = draw(HEADERS)
        rows = draw(st.lists(st.lists(NUMBERS, min_size=len(head), max_size=len(head) + 1),
                             min_size=1, max_size=200))
        body = sep.join(head) + "\n" + "\n".join(sep.join(r) for r in rows)
    if draw(st.booleans()):
        body = draw(st.sampled_from(["# start: 2026-03-02T08:00\n", "# start: 25:99\n",
                                     "# record: x\n", "\ufeff"])) + body
    if draw(st.booleans()):
        body += "\n"
    return body.encode("utf-8", "surrogatepass")


ANY_BYTES = st.one_of(text_records(), st.binary(max_size=2000))

#: issue 19, item by item
CORPUS = [
    b"time_s,rr_ms\n1,800\n1e12,810\n",                              # 1
    b"0.8\n0.81\n1e10\n0.8\n",                                       # 1
    b"time_s,rr_ms\n" + b"".join(b"%d,1000\n" % i for i in range(1, 200)) + b"1e9,1000\n",
    b"800\n" * 100 + b"1e20\n800\n",                                 # 9
    b"800\n" * 100 + b"1e300\n800\n",                                # 9
    b"time_ms,rr_ms\n" + b"".join(b"%d.8,800\n" % i for i in range(200)),  # 8
    "800\n8\u202800\n810\n".encode(),                                # 8
    "800\n8\u008500\n810\n".encode(),                                # 8
    b"rr_ms,rr_ms\n800,810\n800,800\n",                              # 8
    b"rr,nn\n800,810\n800,800\n",                                    # 8
    b"800\n" + b"9" * 200_000 + b"x\n",                              # 9 (long line)
    b"\x89HDF\r\n\x1a\n" + bytes(600),                               # 7/9 (binary)
    b"clock,rr_ms\n2026-10-25T02:59:59,800\n2026-10-25T02:00:00.5,800\n",  # 6
]


@pytest.fixture(scope="module", autouse=True)
def _warm():
    """Import the pipeline and load the calibration tables once, outside the per-example
    time and memory limits (they are one-off costs, not work per input)."""
    p = _path(b"rr_ms\n" + b"800\n810\n795\n" * 200, "warm.csv")
    _run(["inspect", str(p)])
    _run(["scan", str(p), "-o", str(WORK / "warm.nc")])
    (WORK / "warm.nc").unlink(missing_ok=True)
    import tfhrv.cohort.run  # noqa: F401
    import tfhrv.viz.figures  # noqa: F401
    import tfhrv.viz.report  # noqa: F401
    yield
    import shutil

    shutil.rmtree(WORK, ignore_errors=True)


def _check_bounded(fn, size: int):
    tracemalloc.start()
    try:
        result = fn()
    finally:
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    assert peak <= MEM_BASE + MEM_PER_BYTE * size, f"peak {peak / 2**20:.0f} MB for {size} B"
    return result


def _path(data: bytes, name: str = "rec.csv") -> Path:
    p = WORK / name
    p.write_bytes(data)
    return p


def _run(argv: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
            warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the property is about errors, not warnings
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


def _assert_clean_failure(code: int, err: str, must_name: str | None = None) -> None:
    assert code in (0, 1, 2), code
    assert "Traceback" not in err
    if code == 2:
        lines = err.strip().splitlines()
        errors = [ln for ln in lines if ln.startswith("tfhrv: error:")]
        assert len(errors) == 1 and len(errors[0]) < 700, err[:1000]
        if must_name is not None:
            assert must_name in errors[0], errors[0]


# ------------------------------------------------------------------ readers


def _with_corpus(test):
    for i, data in enumerate(CORPUS):
        test = example(data).via(f"issue 19 corpus {i}")(test)
    return test


@settings(FAST, max_examples=200)
@given(ANY_BYTES)
@_with_corpus
def test_reader_refuses_or_reads(data):
    p = _path(data)

    def read():
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return read_recording(p)
        except RecordFormatError as exc:
            assert str(p) in str(exc) and len(str(exc)) < 1000
            return None

    rec = _check_bounded(read, len(data))
    hypothesis.event("read" if rec is not None else "refused")
    if rec is not None:
        assert rec.beat_time_s[-1] <= 31 * 86400 and (rec.rr_ms > 0).all()



# ------------------------------------------------------------------ verbs


@settings(FAST, max_examples=40)
@given(text_records())
@example(CORPUS[0]).via("issue 19")
@example(CORPUS[5]).via("issue 19")
@example(CORPUS[6]).via("issue 19")
def test_inspect_entry_point(data):
    p = _path(data)
    code, _, err = _check_bounded(lambda: _run(["inspect", str(p)]), len(data))
    _assert_clean_failure(code, err, must_name=None)
    assert code in (0, 2)


@settings(FAST, max_examples=12, deadline=20000)
@given(text_records())
def test_scan_and_report_entry_points(data):
    p = _path(data, "scan_in.csv")
    out = WORK / "scan_out.nc"
    out.unlink(missing_ok=True)
    code, _, err = _run(["scan", str(p), "-o", str(out)])
    _assert_clean_failure(code, err)
    assert out.exists() == (code == 0)  # a failed command writes nothing
    html = WORK / "r.html"
    html.unlink(missing_ok=True)
    if code == 2:  # the report reads the same way: refuse the same, write nothing
        code, _, err = _run(["report", str(p), "-o", str(html)])
        _assert_clean_failure(code, err)
        assert code == 2 and not html.exists()


@settings(FAST, max_examples=25)
@given(st.binary(max_size=4000), st.sampled_from(["circadian", "figures"]))
@example(b"\x89HDF\r\n\x1a\n" + bytes(600), "circadian").via("issue 19: plain HDF5 signature")
@example(b"", "figures").via("issue 19: empty")
def test_scan_file_entry_points(data, verb):
    p = _path(data, "foreign.nc")
    argv = [verb, str(p)] + (["-d", str(WORK / "figs")] if verb == "figures" else [])
    code, _, err = _run(argv)
    _assert_clean_failure(code, err, must_name=str(p))
    assert code == 2


@settings(FAST, max_examples=40)
@given(st.one_of(
    st.lists(st.lists(st.text(max_size=20), min_size=1, max_size=5), min_size=1,
             max_size=6).map(lambda rows: "\n".join(",".join(r) for r in rows).encode(
                 "utf-8", "surrogatepass")),
    st.binary(max_size=500)))
@example(b"path,record\na.csv," + b"r" * 300 + b"\n").via("issue 19: 300-character id")
@example(b"path,record\na.csv,s1,extra\n").via("issue 19: more fields than the header")
@example(b"\xff\xfe\x00b\x00i\x00n").via("issue 19: binary manifest")
def test_cohort_manifest_entry_point(data):
    from tfhrv.cohort.run import read_manifest

    (WORK / "a.csv").write_text("rr_ms\n" + "800\n" * 20)
    p = _path(data, "manifest.csv")
    try:
        entries = _check_bounded(lambda: read_manifest(p), len(data))
    except RecordFormatError as exc:  # ManifestError is one
        assert str(p) in str(exc)
        return
    for e in entries:
        from tfhrv.core.files import safe_file_stem

        assert len(safe_file_stem(e.record).encode()) <= 140


@settings(FAST, max_examples=30)
@given(st.sampled_from(["--min-coverage", "--max-ectopic", "--max-gap", "--max-span-days",
                        "--short-window", "--long-hop", "--tz"]),
       st.one_of(st.floats().map(repr), st.text(max_size=30)))
def test_option_values_entry_point(option, value):
    verb = "scan" if option in ("--short-window", "--long-hop") else "inspect"
    argv = [verb, str(WORK / "never-read.csv")] + (["-o", str(WORK / "x.nc")]
                                                    if verb == "scan" else [])
    try:
        code, _, err = _run(argv + [option, value])
    except SystemExit as exc:  # argparse: a value that is not a number at all
        assert exc.code == 2
        return
    _assert_clean_failure(code, err)
    assert code == 2  # refused, or the (absent) file is named
    assert not (WORK / "x.nc").exists()


@settings(FAST, max_examples=10)
@given(st.text(max_size=40))
@example("Europe/Berlin").via("a valid zone")
@example("../../../etc/passwd").via("path traversal")
def test_synth_and_demo_options(tz):
    from tfhrv.signal.clock import load_zone

    try:
        load_zone(tz)
    except ValueError as exc:
        assert "IANA" in str(exc)
        # the demo refuses it before any work (the demo itself is run in test_cli)
        code, _, err = _run(["demo", "-o", str(WORK / "demo"), "--tz", tz])
        _assert_clean_failure(code, err)
        assert code == 2 and not (WORK / "demo").exists()
    code, _, err = _run(["synth", "-o", str(WORK / "s.csv"), "--days", "nan"])
    _assert_clean_failure(code, err)
    assert code == 2 and not (WORK / "s.csv").exists()
