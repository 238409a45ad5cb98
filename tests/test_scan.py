"""The time x scale DataTree: layout, attributes, round trip, determinism, recovery."""

from __future__ import annotations

import datetime as dt
import subprocess
import sys
import textwrap
from dataclasses import replace

import numpy as np
import pytest
import xarray as xr

from tfhrv.analysis.pipeline import ScanOptions
from tfhrv.analysis.windows import LONG, TierSpec, window_starts
from tfhrv.dataset.build import scan
from tfhrv.dataset.netcdf import open_tree, write_tree
from tfhrv.signal.clean import clean
from tfhrv.signal.recording import Recording
from tfhrv.synth import fgn

START = dt.datetime(2026, 3, 2, 8, 0)


def schedule_recording(hours: float, *, seed: int, sleep=(23.0, 7.0), h_wake=0.9,
                       h_sleep=0.7, level_shift_at_h: float | None = None,
                       shift_ms: float = 150.0) -> tuple:
    """NN = 800 ms + 50 ms x exact fGn whose H follows a sleep/wake clock schedule.

    Returns the recording and a function giving the true H at a clock time.  Each state
    segment is a separate Davies-Harte path (Davies & Harte 1987), so within a segment
    the truth is exact.
    """
    gen = np.random.default_rng(seed)

    def asleep(clock_h):
        a, b = sleep
        return (clock_h >= a) | (clock_h < b) if a > b else (clock_h >= a) & (clock_h < b)

    n_total = int(hours * 3600 / 0.8)
    t_nominal = np.arange(n_total) * 0.8
    state = asleep((8.0 + t_nominal / 3600.0) % 24)
    edges = np.flatnonzero(np.diff(state.astype(int))) + 1
    bounds = np.concatenate([[0], edges, [n_total]])
    rr = np.empty(n_total)
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):
        h = h_sleep if state[a] else h_wake
        x = fgn(b - a, h, rng=gen)
        rr[a:b] = 800.0 + 50.0 * x / x.std()
    if level_shift_at_h is not None:
        rr[int(level_shift_at_h * 3600 / 0.8):] += shift_ms
    rec = Recording.from_intervals(rr, start=START, record_id=f"sched{seed}")
    return rec, lambda clock_h: np.where(asleep(clock_h), h_sleep, h_wake)


@pytest.fixture(scope="module")
def small_tree():
    rec, _ = schedule_recording(9.0, seed=1)
    opt = ScanOptions(long=replace(LONG, hop_s=2 * 3600.0))
    return scan(clean(rec), options=opt)


def test_window_alignment_to_clock():
    # clock start 08:04 -> first 5-min window at 08:05 (60 s after the start)
    s = window_starts(3600.0, dt.time(8, 4), TierSpec(300, 300, "short"))
    assert s[0] == 60.0 and np.all(np.diff(s) == 300.0)
    # unknown clock: windows from the start
    assert window_starts(3600.0, None, TierSpec(300, 300, "short"))[0] == 0.0


def test_layout_and_cf_attributes(small_tree):
    tree = small_tree
    assert set(tree.children) == {"nn", "short", "long", "record"}
    short = tree["/short"].to_dataset()
    for name in ("nn_mean_ms", "psd", "band_power", "fluctuation", "local_alpha", "alpha1",
                 "alpha1_ci", "beta_wavelet", "exponent", "exponent_ci", "stationarity",
                 "estimator", "reason", "adf_stat", "kpss_pvalue", "drift_pvalue"):
        assert name in short, name
    for name, var in short.data_vars.items():
        assert "long_name" in var.attrs, name
        if name not in ("reason", "stationarity", "estimator"):
            assert "units" in var.attrs, name
    assert "flag_meanings" in short["stationarity"].attrs
    assert short["alpha1_ci"].dims == ("time", "bound")
    assert short["local_alpha"].dims == ("time", "scale")
    assert np.issubdtype(short["time"].dtype, np.datetime64)
    root = tree.attrs
    for key in ("tfhrv_version", "source_file", "source_sha256", "parameters", "created",
                "caution"):
        assert key in root
    assert "research use" in root["caution"].lower()
    assert tree["/record"].attrs["verdict"] in ("fit", "fit-with-cautions", "unfit")


def test_multifractal_variables(small_tree):
    # issue #20: /long and /record carry c1, c2 (with _ci, c2_pvalue) and MF-DFA h(q) with
    # q as a dimension; /short does not, and says why (tfhrv.analysis.multifractal_fits)
    long, rec = small_tree["/long"].to_dataset(), small_tree["/record"].to_dataset()
    short = small_tree["/short"].to_dataset()
    for name in ("c1", "c1_ci", "c2", "c2_ci", "c2_slope", "c2_pvalue", "mf_width",
                 "mf_width_ci", "mf_h", "mf_h_ci", "mf_alpha", "mf_f"):
        assert name in long and name in rec, name
        assert name not in short, name
    assert "mf_estimator" in long and "mf_reason" in long
    assert long["mf_h"].dims == ("time", "q") and rec["mf_h_ci"].dims == ("q", "bound")
    assert long["c2_ci"].dims == ("time", "bound")
    assert "not computed on 5-min windows" in small_tree["/short"].attrs["multifractal"]
    # fGn schedule: monofractal within each state (the truth of schedule_recording)
    ok = np.isfinite(long["c2"].values)
    assert ok.any() and np.all(long["c2_pvalue"].values[ok] > 0.01)
    assert np.all(np.abs(long["mf_h"].values[ok] - 0.8) < 0.3)


def test_round_trip_identical(small_tree, tmp_path):
    path = write_tree(small_tree, tmp_path / "out.nc")
    back = open_tree(path)
    for group in ("/", "/nn", "/short", "/long", "/record"):
        xr.testing.assert_identical(back[group].to_dataset(), small_tree[group].to_dataset())
    assert not list(tmp_path.glob("*.part"))


def test_direct_writer_matches_xarray_h5netcdf_writer(small_tree, tmp_path):
    # write_tree writes through h5py for speed; xarray's own netCDF-4 writer (h5netcdf
    # engine) is the independent reference: both files must open to identical trees,
    # with the same on-disk encodings (dtype, units, fill value) of every variable.
    ours = write_tree(small_tree, tmp_path / "ours.nc")
    ref = tmp_path / "ref.nc"
    small_tree.to_netcdf(ref, engine="h5netcdf")
    with xr.open_datatree(ours) as a, xr.open_datatree(ref, engine="h5netcdf") as b:
        xr.testing.assert_identical(a, b)
        for node in b.subtree:
            for name, var in node.variables.items():
                got = a[node.path].variables[name].encoding
                for key in ("dtype", "units", "calendar", "_FillValue", "coordinates"):
                    assert str(got.get(key)) == str(var.encoding.get(key)), (node.path, name)


def test_plain_groups_write_the_same_file_without_xarray(tmp_path):
    # tfhrv scan writes the groups of build_groups directly (no xarray import); the file
    # must open identical to the one xarray's own netCDF-4 writer (h5netcdf engine, the
    # independent reference) makes of the same content as a DataTree, with both clock
    # kinds: datetimes (clock start known) and timedeltas (no clock).
    from tfhrv.analysis.pipeline import analyse_record
    from tfhrv.dataset.build import build_groups
    from tfhrv.dataset.groups import as_datatree

    opt = ScanOptions(long=replace(LONG, hop_s=2 * 3600.0))
    for start in (START, None):
        rec, _ = schedule_recording(9.0, seed=2)
        rec = Recording.from_intervals(rec.rr_ms, start=start, record_id="plain")
        groups = build_groups(analyse_record(clean(rec), options=opt))
        ours = write_tree(groups, tmp_path / f"ours{start is None}.nc")
        ref = tmp_path / f"ref{start is None}.nc"
        as_datatree(groups).to_netcdf(ref, engine="h5netcdf")
        with xr.open_datatree(ours) as a, xr.open_datatree(ref, engine="h5netcdf") as b:
            xr.testing.assert_identical(a, b)
            assert a["/short"]["time"].dtype.kind == ("M" if start else "m")
    code = ("import sys; from tfhrv.dataset.build import build_groups; "
            "from tfhrv.dataset.netcdf import write_tree; "
            "from tfhrv.analysis.pipeline import analyse_record; "
            "print('xarray' in sys.modules or 'pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"


def test_scan_and_inspect_of_a_record_import_no_scipy(open_rr, tmp_path):
    # Issue #16: importing any SciPy submodule costs 0.3-0.4 s in a fresh process, so the
    # analysis path of `tfhrv inspect` and `tfhrv scan` (read, clean, analyse_record,
    # build_groups, write_tree, the verdict and its printing) uses numpy, h5py,
    # PyWavelets and tfhrv only.  One process (TFHRV_WORKERS=1) runs both verbs on a whole
    # open 24-h record, so every lazily imported module would show in sys.modules.
    record = open_rr / "nsr2db" / "nsr001.csv.gz"
    code = textwrap.dedent(f"""
        import contextlib, io, os, sys
        os.environ["TFHRV_WORKERS"] = "1"
        from tfhrv.cli import main
        with contextlib.redirect_stdout(io.StringIO()):
            assert main(["inspect", {str(record)!r}]) == 0
            assert main(["scan", {str(record)!r}, "-o", {str(tmp_path / "s.nc")!r}]) == 0
        print(sorted(m for m in sys.modules
                     if m.split(".")[0] in ("scipy", "xarray", "pandas", "matplotlib")))
        """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"
    assert (tmp_path / "s.nc").stat().st_size > 0


def test_open_tree_reads_what_xarray_reads(small_tree, tmp_path):
    # open_tree decodes the file itself through h5py; xarray's own reader (h5netcdf engine)
    # is the independent reference: the same tree, including a group added later (the
    # /circadian group of tfhrv circadian, written through the DataTree route).
    from tfhrv.dataset.groups import groups_of

    tree = small_tree.copy()
    extra = xr.Dataset({"v": ("k", np.array([1.5, np.nan]), {"units": "1"}),
                        "flag": ("k", np.array([True, False]))},
                       coords={"k": ("k", ["a", "b"])}, attrs={"note": "x", "n": 3})
    tree["/extra"] = xr.DataTree(extra)
    path = write_tree(tree, tmp_path / "t.nc")
    ours = open_tree(path, check=False)
    with xr.open_datatree(path, engine="h5netcdf") as ref:
        xr.testing.assert_identical(ours, ref.load())
    assert set(groups_of(ours)) == {"/", "/nn", "/short", "/long", "/record", "/extra"}


def test_open_tree_dimensions_from_ids_or_scales(small_tree, tmp_path):
    # open_tree names dimensions from the netCDF-4 dimension ids when it can and from the
    # HDF5 dimension scales otherwise; xarray's reader (h5netcdf engine) is the reference
    # for a file of xarray's own writer and for one whose ids were removed.
    import h5py

    ref_path = tmp_path / "xr.nc"
    small_tree.to_netcdf(ref_path, engine="h5netcdf")
    stripped = write_tree(small_tree, tmp_path / "stripped.nc")
    with h5py.File(stripped, "r+") as h5:
        removed = []
        h5.visititems(lambda name, obj: removed.append(name) if (
            isinstance(obj, h5py.Dataset) and "_Netcdf4Coordinates" in obj.attrs) else None)
        for name in removed:
            del h5[name].attrs["_Netcdf4Coordinates"]
    assert removed
    for path in (ref_path, stripped):
        with xr.open_datatree(path, engine="h5netcdf") as ref:
            xr.testing.assert_identical(open_tree(path, check=False), ref.load())


def test_writer_builds_the_file_in_memory_only(small_tree, tmp_path, monkeypatch):
    # The file is built by HDF5's core driver without a backing store: a file of the
    # in-memory image's name in the working folder must stay untouched.
    monkeypatch.chdir(tmp_path)
    bystander = tmp_path / "tfhrv-in-memory.nc"
    bystander.write_text("not ours")
    out = write_tree(small_tree, tmp_path / "out.nc")
    assert bystander.read_text() == "not ours"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.nc", "tfhrv-in-memory.nc"]
    xr.testing.assert_identical(open_tree(out, check=False), small_tree)


def test_same_input_same_numbers():
    rec, _ = schedule_recording(5.0, seed=3)
    opt = ScanOptions()
    a, b = scan(clean(rec), options=opt), scan(clean(rec), options=opt)
    for group in ("/short", "/long", "/record"):
        xr.testing.assert_equal(a[group].to_dataset(), b[group].to_dataset())


def test_plain_xarray_opens_and_plots_without_tfhrv(small_tree, tmp_path):
    path = write_tree(small_tree, tmp_path / "plain.nc")
    code = textwrap.dedent(f"""
        import sys
        import matplotlib
        matplotlib.use("Agg")
        import xarray as xr
        tree = xr.open_datatree({str(path)!r})
        ax = tree["/short"].alpha1.plot.line(x="time")[0].axes
        assert "tfhrv" not in sys.modules
        assert len(ax.lines[0].get_xdata()) == tree["/short"].sizes["time"]
        print("ok", ax.get_ylabel())
    """)
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=False, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "DFA exponent" in proc.stdout


def test_unknown_clock_gives_elapsed_time():
    rec, _ = schedule_recording(5.0, seed=4)
    tree = scan(clean(rec.with_start(None)),
                options=ScanOptions())
    assert np.issubdtype(tree["/short"]["time"].dtype, np.timedelta64)
    assert tree.attrs["clock"] == "unknown"
    assert "clock_hour" not in tree["/short"].coords


@pytest.mark.slow
def test_recovery_of_a_sleep_wake_schedule():
    """Calibrated alpha1 (short tier) and the long-tier exponent follow a known schedule.

    Truth: exact fGn with H = 0.9 awake and 0.7 asleep (23:00-07:00), so DFA alpha = H and
    beta = 2H - 1 (REFERENCES 2.1).  Target RMSE <= 0.08 in alpha units over valid windows
    wholly inside one state.
    """
    rec, truth = schedule_recording(24.0, seed=11)
    tree = scan(clean(rec))
    short = tree["/short"].to_dataset()
    clock = short["clock_hour"].values
    half = 2.5 / 60
    same = truth(clock - half) == truth(clock + half)
    est = short["alpha1"].values
    ok = same & np.isfinite(est)
    rmse_short = np.sqrt(np.mean((est[ok] - truth(clock[ok])) ** 2))
    long = tree["/long"].to_dataset()
    lc = long["clock_hour"].values
    inside = truth(lc - 2) == truth(lc + 2)
    alpha_long = (long["exponent"].values + 1) / 2
    okl = inside & np.isfinite(alpha_long)
    rmse_long = np.sqrt(np.mean((alpha_long[okl] - truth(lc[okl])) ** 2))
    assert ok.sum() > 200 and okl.sum() >= 5
    assert rmse_short <= 0.08, rmse_short
    assert rmse_long <= 0.08, rmse_long


def test_level_shift_windows_do_not_use_fft_as_primary():
    # a 300-ms step (6 SD of the fluctuation), e.g. lying down after standing
    rec, _ = schedule_recording(9.0, seed=5, level_shift_at_h=4.5, shift_ms=300.0)
    tree = scan(clean(rec), options=ScanOptions())
    long = tree["/long"].to_dataset()
    el = long["elapsed"].values
    straddle = (el - 7200 < 4.5 * 3600) & (el + 7200 > 4.5 * 3600)
    est = long["estimator"].values[straddle]
    assert straddle.any()
    assert not np.any(est == 1), long["reason"].values[straddle]  # 1 = spectral


def test_calibration_model_is_recorded_and_used():
    # A 3-h random walk (fBm, H = 0.5; DFA alpha = 1.5, Peng et al. 1995): under the
    # "fgn-fbm" model the whole-record alpha1 is centred on 1.5, under "powerlaw" (1/f^beta
    # noise above alpha 1, outside its family here) it is pulled low -- the difference the
    # validation tables show, carried through the scan.  Both runs name their model and
    # the calibration table in the provenance.
    import json

    from tfhrv.calibration.calibrate import table_sha256

    walk = np.cumsum(fgn(int(3 * 3600 / 0.8), 0.5, rng=11))
    rr = 800.0 + 50.0 * (walk - walk.mean()) / walk.std()
    cleaned = clean(Recording.from_intervals(rr, start=START, record_id="walk"))
    out = {}
    for model in ("powerlaw", "fgn-fbm"):
        tree = scan(cleaned, options=ScanOptions(calibration_model=model))
        assert json.loads(tree.attrs["parameters"])["scan"]["calibration_model"] == model
        assert tree.attrs["calibration_table_sha256"] == table_sha256()
        out[model] = float(tree["/record"]["alpha1"])
    raw = float(tree["/record"]["alpha1_slope"])
    assert abs(raw - 1.5) < 0.05  # DFA-1 of a random walk at 4-16 beats: about 1.5
    assert abs(out["fgn-fbm"] - 1.5) < 0.03
    assert out["powerlaw"] < out["fgn-fbm"] - 0.02


def test_numpy_only_spares_dask_array_and_then_forgets():
    # In a fresh interpreter: xarray objects made inside the block do not import
    # dask.array, nor dask itself; after it, a dask array is again wrapped lazily (not
    # computed to numpy), which is xarray's documented behaviour for dask arrays.
    code = textwrap.dedent("""
        import sys
        import numpy as np
        import xarray as xr
        from xarray.namedarray import utils
        from tfhrv.dataset.netcdf import numpy_only
        before = utils.is_dask_collection
        with numpy_only():
            xr.Dataset({"a": ("x", np.zeros(3))}, coords={"x": np.arange(3.0)})
        assert "dask.array" not in sys.modules
        assert "dask" not in sys.modules  # not even the package (imported to answer)
        assert utils.is_dask_collection is before
        import dask.array as da
        v = xr.Variable("x", da.zeros(3))
        assert isinstance(v.data, da.Array), type(v.data)
        print("ok")
    """)
    pytest.importorskip("dask.array")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "ok"
