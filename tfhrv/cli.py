"""The ``tfhrv`` command line.  No science here: parse options, call the library, print.

Every error a user can cause is printed as one line ``tfhrv: error: <file>, line <n>:
<problem>`` with exit status 2 and no traceback (``--debug`` shows the traceback).
"""

from __future__ import annotations

import os

# Single-threaded BLAS for the command line: the per-window regressions are small, and on a
# busy machine multi-threaded OpenBLAS made them 20-30 times slower (measured on 2 cores).
# Set before numpy is first imported; a user's own setting wins.
# The same for the other BLAS/OpenMP libraries numpy may be built with.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from collections.abc import Sequence  # noqa: E402
from functools import partial  # noqa: E402

from tfhrv.core.caution import CAUTION  # noqa: E402
from tfhrv.core.errors import InsufficientDataError, RecordFormatError, TfhrvWarning  # noqa: E402

__all__ = ["main"]

#: when the command started (before the lazy imports of numpy, xarray, matplotlib): the
#: report's footer gives the time from here, i.e. the command's own run time
_STARTED = time.perf_counter()


def _add_reader_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("reading the recording")
    g.add_argument("--format", dest="fmt", choices=("auto", "values", "table", "edf"),
                   default="auto", help="force the input format (default: sniffed)")
    g.add_argument("--units", choices=("ms", "s"), help="unit of the intervals when the file "
                   "does not say and the values are ambiguous")
    g.add_argument("--delimiter", help="table delimiter (default: sniffed among , ; tab)")
    g.add_argument("--decimal", choices=(".", ","), help="decimal mark (default: sniffed)")
    g.add_argument("--time-column", help="name of the beat-time column (s from start)")
    g.add_argument("--clock-column", help="name of the clock-timestamp column")
    g.add_argument("--interval-column", help="name of the interval column")
    g.add_argument("--label-column", help="name of the beat-label column")
    g.add_argument("--start", help="wall-clock start: ISO 8601 timestamp or time of day HH:MM[:SS]"
                   " (overrides the file)")
    g.add_argument("--record-id", help="record identifier (default: from the file)")
    g.add_argument("--tz", help="IANA time zone of the clock times, e.g. Europe/Berlin: clock "
                   "hours are then local civil time through daylight-saving changes (needs a "
                   "start with a date)")
    g.add_argument("--max-span-days", type=float, default=31.0,
                   help="longest accepted recording span, days (31; common practice)")


#: tfhrv.calibration.calibrate.MODELS, spelled out so that --help needs no numpy import
#: (tests/test_cli.py checks that the two agree)
CALIBRATION_MODELS = ("powerlaw", "fgn-fbm")


def _add_scan_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("windows and estimators")
    g.add_argument("--short-window", type=float, default=5.0, help="short window, min (5)")
    g.add_argument("--short-hop", type=float, default=5.0, help="short hop, min (5)")
    g.add_argument("--long-window", type=float, default=4.0, help="long window, h (4)")
    g.add_argument("--long-hop", type=float, default=1.0, help="long hop, h (1)")
    g.add_argument("--dfa-order", type=int, choices=(1, 2, 3), default=1,
                   help="DFA detrending order (1)")
    g.add_argument("--vanishing-moments", type=int, default=3,
                   help="wavelet vanishing moments (3; only 3 has calibrated intervals)")
    g.add_argument("--calibration", choices=CALIBRATION_MODELS, default="powerlaw",
                   help="model of the calibrated intervals: 'powerlaw' (fGn below alpha 1, "
                   "1/f^beta noise above; default) or 'fgn-fbm' (fGn below, fBm above, the "
                   "class read at the longest scales)")
    g.add_argument("--no-multifractal", action="store_true",
                   help="leave out the multifractal estimates (MF-DFA h(q), c2, width) of "
                   "the 4-h windows and the whole record: about a tenth less work")
    g = p.add_argument_group("FFT-slope fitness thresholds (unfit beyond these)")
    g.add_argument("--max-gap", type=float, default=30.0,
                   help="longest unreadable stretch, min (30; common practice)")
    g.add_argument("--min-coverage", type=float, default=75.0,
                   help="analysable share, %% (75; Task Force 1996 asks for 18 of 24 h)")
    g.add_argument("--max-ectopic", type=float, default=10.0,
                   help="non-sinus beats, %% (10; common practice)")
    g.add_argument("--level-effect-ses", type=float, default=1.96,
                   help="change of the FFT beta when the level changes are regressed out, "
                   "in calibrated SEs of the record's FFT beta (1.96: the half-width of its "
                   "95 %% interval)")
    g.add_argument("--max-nonstationary", type=float, default=25.0,
                   help="non-stationary long windows, %%, above which a caution states the "
                   "measured effect (25; common practice; the share alone is never unfit)")


def _add_circadian_options(p: argparse.ArgumentParser) -> None:
    """The day/night options shared by circadian, report, demo and cohort."""
    g = p.add_argument_group("day and night (circadian analysis)")
    g.add_argument("--night", type=float, nargs=2, default=(0.0, 6.0), metavar=("FROM", "TO"),
                   help="night clock window in hours (0 6; common practice)")
    g.add_argument("--day", type=float, nargs=2, default=(10.0, 20.0), metavar=("FROM", "TO"),
                   help="day clock window in hours (10 20; common practice)")
    g.add_argument("--period", choices=("auto", "clock", "inferred"), default="auto",
                   help="where day and night come from (auto: clock if known, else inferred)")
    g.add_argument("--rest-hours", type=float, default=6.0,
                   help="length of the inferred rest period, h (6)")
    g.add_argument("--sleep-log", help="CSV with record,rest_start,rest_end (takes precedence "
                   "over the clock windows)")


def _circadian_options(args: argparse.Namespace):
    from tfhrv.circadian.options import CircadianOptions

    return CircadianOptions(night_hours=tuple(args.night), day_hours=tuple(args.day),
                            period=args.period, rest_hours=args.rest_hours)


def _sleep_log(args: argparse.Namespace, record_id: str):
    from tfhrv.circadian.options import read_sleep_log

    return read_sleep_log(args.sleep_log, record_id) if args.sleep_log else None


def _add_feedback_options(p: argparse.ArgumentParser) -> None:
    """--progress / --quiet: progress on stderr (default: only when stderr is a terminal)."""
    g = p.add_argument_group("progress")
    m = g.add_mutually_exclusive_group()
    m.add_argument("--progress", dest="progress", action="store_const", const=True,
                   default=None, help="show stages and progress bars on stderr even when it "
                   "is not a terminal")
    m.add_argument("-q", "--quiet", dest="progress", action="store_const", const=False,
                   help="no progress on stderr (warnings and errors are still shown)")


def _progress(args: argparse.Namespace):
    """The progress reporter the options ask for (stderr only, never stdout)."""
    from tfhrv.core.progress import SILENT, TextProgress

    want = getattr(args, "progress", None)
    if want is None:
        try:
            want = sys.stderr.isatty()
        except (AttributeError, ValueError):
            want = False
    return TextProgress(sys.stderr) if want else SILENT


def _add_dpi_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--dpi", type=float, default=110.0,
                   help="resolution of PNG figures, dots per inch (110: 1100 px for a 10-inch "
                   "figure; 200-300 for print)")


def _read(args: argparse.Namespace):
    from tfhrv.io.readers import read_recording

    delimiter = "\t" if args.delimiter in ("\\t", "tab") else args.delimiter
    return read_recording(
        args.recording, fmt=args.fmt, units=args.units, delimiter=delimiter,
        decimal=args.decimal, time_column=args.time_column, clock_column=args.clock_column,
        interval_column=args.interval_column, label_column=args.label_column,
        start=args.start, record_id=args.record_id, tz=args.tz,
        max_span_s=args.max_span_days * 86400.0,
    )


def _clean(rec, args: argparse.Namespace):
    from tfhrv.signal.clean import CleanOptions, clean

    days = getattr(args, "max_span_days", None) or 31.0  # demo has no reader options
    return clean(rec, options=CleanOptions(max_span_s=days * 86400.0))


def _finite(v) -> bool:
    return v is not None and v == v and abs(v) != float("inf")


#: option -> (test, what it must be); every numeric option is checked here, before any
#: work starts, so that NaN, infinities and out-of-range values never reach the library.
_OPTION_RULES = {
    "max_gap": (lambda v: _finite(v) and v > 0, "a number > 0"),
    "min_coverage": (lambda v: _finite(v) and 0 <= v <= 100, "a percentage from 0 to 100"),
    "max_ectopic": (lambda v: _finite(v) and 0 <= v <= 100, "a percentage from 0 to 100"),
    "max_nonstationary": (lambda v: _finite(v) and 0 <= v <= 100,
                          "a percentage from 0 to 100"),
    "level_effect_ses": (lambda v: _finite(v) and v > 0, "a number > 0"),
    "short_window": (lambda v: _finite(v) and 0 < v <= 1440, "minutes, > 0 and <= 1440"),
    "short_hop": (lambda v: _finite(v) and 0 < v <= 1440, "minutes, > 0 and <= 1440"),
    "long_window": (lambda v: _finite(v) and 0 < v <= 168, "hours, > 0 and <= 168"),
    "long_hop": (lambda v: _finite(v) and 0 < v <= 168, "hours, > 0 and <= 168"),
    "vanishing_moments": (lambda v: 1 <= v <= 10, "an integer from 1 to 10"),
    "rest_hours": (lambda v: _finite(v) and 0 < v < 24, "hours, > 0 and < 24"),
    "night": (lambda v: all(_finite(x) and 0 <= x <= 24 for x in v), "two hours from 0 to 24"),
    "day": (lambda v: all(_finite(x) and 0 <= x <= 24 for x in v), "two hours from 0 to 24"),
    "max_span_days": (lambda v: _finite(v) and 0 < v <= 3660, "days, > 0 and <= 3660"),
    "workers": (lambda v: v >= 0, "an integer >= 0"),
    "days": (lambda v: _finite(v) and 0 < v <= 31, "days, > 0 and <= 31"),
}


def check_options(args: argparse.Namespace) -> None:
    """Refuse every bad option value in one place, before any file is read or written."""
    for dest, (ok, what) in _OPTION_RULES.items():
        value = getattr(args, dest, None)
        if value is not None and not ok(value):
            flag = "--" + dest.replace("_", "-")
            raise ValueError(f"{flag} must be {what}, got {value!r}")
    if getattr(args, "tz", None) is not None:
        from tfhrv.signal.clock import load_zone

        load_zone(args.tz)


def _protect(outputs, inputs) -> None:
    """Refuse an output that is an input (or another output), before any work starts."""
    from tfhrv.core.files import check_outputs

    check_outputs(outputs, inputs)


def _cmd_inspect(args: argparse.Namespace) -> int:
    from tfhrv.analysis.inspection import format_inspection, inspect_record, inspection_dict
    from tfhrv.analysis.policy import explain_table
    from tfhrv.core.jsonsafe import dumps_strict

    if args.explain:
        print(explain_table())
        if args.recording is None:
            return 0
        print()
    if args.recording is None:
        raise ValueError("inspect needs a recording file (or --explain alone)")
    progress = _progress(args)
    progress.stage(f"read {args.recording}")
    rec = _read(args)
    progress.stage("clean")
    ins = inspect_record(_clean(rec, args), options=_scan_options(args), progress=progress,
                         workers=_workers())
    if args.json:
        print(dumps_strict(inspection_dict(ins), indent=2))
    else:
        print(format_inspection(ins))
    return 0


def _scan_options(args: argparse.Namespace):
    from dataclasses import replace

    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.analysis.verdict import FitnessThresholds
    from tfhrv.analysis.windows import LONG, SHORT

    thresholds = FitnessThresholds(
        max_gap_s=args.max_gap * 60.0, min_coverage=args.min_coverage / 100.0,
        max_ectopic=args.max_ectopic / 100.0, level_effect_ses=args.level_effect_ses,
        caution_nonstationary=args.max_nonstationary / 100.0)
    return ScanOptions(
        short=replace(SHORT, window_s=args.short_window * 60.0, hop_s=args.short_hop * 60.0),
        long=replace(LONG, window_s=args.long_window * 3600.0, hop_s=args.long_hop * 3600.0),
        dfa_order=args.dfa_order, vanishing_moments=args.vanishing_moments,
        calibration_model=args.calibration, thresholds=thresholds,
        multifractal=not args.no_multifractal,
    )


def _workers() -> int:
    """Processes for the windows of one record: TFHRV_WORKERS if set, else the usable
    cores (at most 4).  Results do not depend on it."""
    env = os.environ.get("TFHRV_WORKERS", "").strip()
    if env:
        if not env.isdigit() or int(env) < 1:
            raise ValueError(f"TFHRV_WORKERS must be a positive integer, got {env!r}")
        return int(env)
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    return max(1, min(4, cores or 1))


def _check_output(path: str, suffixes: tuple[str, ...]) -> None:
    from pathlib import Path

    p = Path(path)
    if p.suffix.lower() not in suffixes:
        raise ValueError(f"{path}: output name must end with {' or '.join(suffixes)}")
    if p.exists() and p.is_dir():
        raise ValueError(f"{path}: output is a directory")
    if not p.resolve().parent.is_dir():
        raise ValueError(f"{path}: the output folder does not exist")


def _analysed(rec, options, progress, *, args: argparse.Namespace, what: str,
              while_waiting=None):
    """clean -> full record analysis, with stages; a record too short for any window says
    so, naming it.  ``while_waiting`` (the command's next imports) runs while the worker
    processes compute the windows."""
    from tfhrv.analysis.pipeline import analyse_record

    progress.stage("clean")
    cleaned = _clean(rec, args)
    _check_long_enough(cleaned, options, what=what)
    return analyse_record(cleaned, options=options, detail="full", progress=progress,
                          workers=_workers(), while_waiting=while_waiting)


def _load_writer() -> None:
    """What writing the scan file needs (h5py), loaded while the windows are computed."""
    import h5py  # noqa: F401


def _load_report() -> None:
    """What the day/night analysis and the report need (xarray, pandas, matplotlib with its
    fonts and parser), loaded while the windows are computed instead of after them."""
    import tfhrv.circadian.days  # noqa: F401
    import tfhrv.dataset.groups  # noqa: F401
    from tfhrv.viz.figkit import warm_up
    from tfhrv.viz.report import write_report  # noqa: F401

    _load_writer()
    warm_up()


def _check_long_enough(cleaned, options, *, what: str) -> None:
    """Refuse, in the user's terms, a record shorter than one short window."""
    from tfhrv.core.errors import InsufficientDataError

    rec = cleaned.recording
    q = cleaned.quality
    need = options.short.window_s
    if q.recorded_s < need or cleaned.nn_ms.size < 2:
        raise InsufficientDataError(
            f"{rec.source or rec.record_id}: the record is too short for "
            f"{what or 'the time-resolved analysis'}: {q.recorded_s / 60:.1f} min recorded, "
            f"{cleaned.nn_ms.size} NN intervals kept; a scan needs at least one "
            f"{need / 60:g}-min window (--short-window), and the whole-record long-range "
            "exponents and the day/night analysis need hours (24 h for the classical "
            "1e-4 to 1e-2 Hz slope)")


def _cmd_scan(args: argparse.Namespace) -> int:
    # plain groups written directly: a scan never imports xarray (tfhrv.dataset.groups)
    from tfhrv.dataset.build import build_groups
    from tfhrv.dataset.netcdf import write_tree

    _check_output(args.output, (".nc",))
    _protect([("output", args.output)], [("recording", args.recording)])
    options = _scan_options(args)
    progress = _progress(args)
    progress.stage(f"read {args.recording}")
    rec = _read(args)
    groups = build_groups(_analysed(rec, options, progress, args=args, what="a scan",
                                    while_waiting=_load_writer))
    progress.stage(f"write {args.output}")
    write_tree(groups, args.output)
    n_short, n_long = (groups[g].sizes()["time"] for g in ("/short", "/long"))
    print(f"wrote {args.output}: {n_short} short and {n_long} long windows; FFT-slope "
          f"verdict {groups['/record'].attrs['verdict']}")
    return 0


def _cmd_circadian(args: argparse.Namespace) -> int:
    from pathlib import Path

    import xarray as xr

    from tfhrv.circadian.days import circadian_dataset, circadian_table, format_circadian
    from tfhrv.core.files import OutputSet
    from tfhrv.dataset.netcdf import open_tree, write_tree

    path = Path(args.scan_file)
    if not path.is_file():
        raise ValueError(f"{path}: no such scan file (make one with tfhrv scan)")
    csv_path = Path(args.csv) if args.csv else path.with_suffix(".circadian.csv")
    _protect([("--csv table", csv_path)], [("scan file", path), ("--sleep-log", args.sleep_log)])
    _protect([("updated scan file", path)], [("--sleep-log", args.sleep_log)])
    progress = _progress(args)
    progress.stage(f"read {path}")
    tree = open_tree(path)
    opt = _circadian_options(args)
    log = _sleep_log(args, tree.attrs.get("record_id", ""))
    progress.stage("day/night contrasts (block bootstrap) and cosinor")
    try:
        table = circadian_table(tree, options=opt, sleep_log=log)
    except InsufficientDataError as exc:
        raise InsufficientDataError(f"{path}: the record is too short for the circadian "
                                    f"analysis: {exc}") from None
    progress.stage(f"write {csv_path} and the /circadian group of {path}")
    tree["/circadian"] = xr.DataTree(circadian_dataset(table, opt, tree=tree, sleep_log=log))
    tree.attrs["history"] = tree.attrs.get("history", "") + "\ntfhrv circadian"
    with OutputSet() as out:  # both or neither
        out.add(csv_path, lambda tmp: table.to_csv(tmp, index=False, float_format="%.6g"))
        write_tree(tree, path, outputs=out)
    print(format_circadian(table))
    print(f"\nwrote {csv_path} and the /circadian group of {path}")
    return 0


def _cmd_rhythm(args: argparse.Namespace) -> int:
    """The verb's name before tfhrv 0.2: a hidden alias of ``circadian`` for one release."""
    import warnings

    from tfhrv.core.errors import DeprecatedNameWarning

    warnings.warn("'tfhrv rhythm' is now 'tfhrv circadian' (the old name reads as cardiac "
                  "rhythm); the alias will be removed in the next release",
                  DeprecatedNameWarning, stacklevel=1)
    return _cmd_circadian(args)


def _pipeline(rec, options, progress, circadian_options=None, sleep_log=None, *,
              args: argparse.Namespace):
    """clean -> scan -> circadian: the tree with its /circadian group, and the table.
    xarray, pandas and matplotlib are imported while the windows are computed
    (:func:`_load_report`)."""
    from tfhrv.dataset.build import build_tree

    analysis = _analysed(rec, options, progress, args=args, what="a report",
                         while_waiting=_load_report)
    import xarray as xr

    from tfhrv.circadian.days import CircadianOptions, circadian_dataset, circadian_table
    from tfhrv.core.errors import InsufficientDataError

    tree = build_tree(analysis)
    copt = circadian_options or CircadianOptions()
    progress.stage("day/night contrasts (block bootstrap) and cosinor")
    try:
        table = circadian_table(tree, options=copt, sleep_log=sleep_log)
    except InsufficientDataError as exc:  # a short record: the report says why, without it
        tree.attrs["circadian_skipped"] = f"record too short for the circadian analysis: {exc}"
        progress.note(f"no circadian analysis for {rec.source or rec.record_id}: {exc}")
        return tree, None
    tree["/circadian"] = xr.DataTree(circadian_dataset(table, copt, tree=tree,
                                                       sleep_log=sleep_log))
    return tree, table


def _cmd_export(args: argparse.Namespace) -> int:
    from pathlib import Path

    from tfhrv.dataset.netcdf import open_tree
    from tfhrv.dataset.table import TABLE_SUFFIXES, write_window_table

    path = Path(args.scan_file)
    if not path.is_file():
        raise ValueError(f"{path}: no such scan file (make one with tfhrv scan)")
    _check_output(args.output, TABLE_SUFFIXES)
    progress = _progress(args)
    progress.stage(f"read {path}")
    tree = open_tree(path)
    tiers = ("short", "long") if args.tier == "both" else (args.tier,)
    progress.stage(f"write {args.output}")
    table, dictionary = write_window_table(tree, args.output, tiers=tiers)
    print(f"wrote {table} (one row per window, {'/'.join(tiers)} tier) and its column "
          f"dictionary {dictionary}")
    return 0


def _cmd_figures(args: argparse.Namespace) -> int:
    from pathlib import Path

    from tfhrv.dataset.netcdf import open_tree
    from tfhrv.viz.figures import save_all

    path = Path(args.scan_file)
    if not path.is_file():
        raise ValueError(f"{path}: no such scan file (make one with tfhrv scan)")
    from tfhrv.core.files import OutputSet
    from tfhrv.viz.figures import FIGURES

    out = Path(args.directory)
    if out.exists() and not out.is_dir():
        raise ValueError(f"{out}: exists and is not a folder")
    _protect([(f"figure {n}.{f}", out / f"{n}.{f}") for n in FIGURES for f in args.formats],
             [("scan file", path)])
    progress = _progress(args)
    progress.stage(f"read {path}")
    tree = open_tree(path)
    with OutputSet() as staged:
        written = save_all(tree, out, formats=tuple(args.formats), dpi=args.dpi,
                           progress=progress, outputs=staged, workers=_workers(),
                           **({"alpha_range": tuple(args.alpha_range)} if args.alpha_range
                              else {}))
    print(f"wrote {len(written)} files to {out}")
    return 0


def _cmd_report(args: argparse.Namespace) -> int:
    from tfhrv.core.files import OutputSet
    from tfhrv.dataset.netcdf import write_tree

    _check_output(args.output, (".html", ".htm"))
    if args.scan_output:
        _check_output(args.scan_output, (".nc",))
    _protect([("report", args.output), ("--scan-output", args.scan_output)],
             [("recording", args.recording)])
    progress = _progress(args)
    progress.stage(f"read {args.recording}")
    rec = _read(args)
    tree, table = _pipeline(rec, _scan_options(args), progress, _circadian_options(args),
                            _sleep_log(args, rec.record_id), args=args)
    from tfhrv.viz.report import write_report  # loaded during the analysis (_load_report)

    with OutputSet() as out:  # the report and the scan file, or neither
        path = write_report(tree, args.output, circadian_table=table, dpi=args.dpi,
                            progress=progress, started=_STARTED, outputs=out,
                            workers=_workers())
        if args.scan_output:
            progress.stage(f"write {args.scan_output}")
            write_tree(tree, args.scan_output, outputs=out)
    print(f"wrote {path}: FFT-slope verdict {tree['/record'].attrs['verdict']}")
    return 0


def _cmd_demo(args: argparse.Namespace) -> int:
    from pathlib import Path

    import tfhrv
    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.core.files import OutputSet
    from tfhrv.dataset.netcdf import write_tree
    from tfhrv.io.readers import read_recording

    demo = Path(tfhrv.__file__).resolve().parents[1] / "demo_data" / "sw01_day_worker.csv.gz"
    if not demo.is_file():
        raise ValueError(f"{demo}: demo recording not found (it ships with the source tree; "
                         "run tfhrv demo from a checkout, or tfhrv synth to make a recording)")
    out = Path(args.output_dir)
    out.mkdir(parents=True, exist_ok=True)
    print(f"demo recording: {demo.name} (invented 48-h day worker of a fictional shift-work "
          "study)")
    progress = _progress(args)
    progress.stage(f"read {demo.name}")
    rec = read_recording(demo, tz=args.tz)
    tree, table = _pipeline(rec, ScanOptions(), progress, _circadian_options(args),
                            _sleep_log(args, rec.record_id), args=args)
    from tfhrv.viz.report import write_report  # loaded during the analysis (_load_report)

    progress.stage(f"write {out / 'sw01_day_worker.nc'}")
    atomic_csv = out / "sw01_day_worker.circadian.csv"
    with OutputSet() as staged:  # all three or none
        write_tree(tree, out / "sw01_day_worker.nc", outputs=staged)
        if table is not None:
            staged.add(atomic_csv, lambda tmp: table.to_csv(tmp, index=False,
                                                            float_format="%.6g"))
        report = write_report(tree, out / "sw01_day_worker_report.html",
                              circadian_table=table, dpi=args.dpi, progress=progress,
                              started=_STARTED, outputs=staged, workers=_workers())
    print(f"verdict: {tree['/record'].attrs['verdict']}")
    print(f"wrote {out / 'sw01_day_worker.nc'} and {atomic_csv}")
    print(f"report: {report.resolve()}")
    return 0


def _cmd_cohort(args: argparse.Namespace) -> int:
    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.cohort.run import (
        CohortOptions,
        format_summary,
        read_manifest,
        run_cohort,
        with_sleep_log,
    )

    entries = read_manifest(args.manifest)
    if args.sleep_log:
        entries = with_sleep_log(entries, args.sleep_log)
    res = run_cohort(entries, args.output, workers=args.workers, scheduler=args.scheduler,
                     options=CohortOptions(report=args.report,
                                           scan=ScanOptions(multifractal=not args.no_multifractal),
                                           circadian=_circadian_options(args)),
                     progress=_progress(args))
    print(format_summary(res))
    return 1 if res.count("failed") else 0


def _cmd_synth(args: argparse.Namespace) -> int:
    import datetime as dt

    from tfhrv.synth import simulate_recording, write_recording_csv

    if not (args.output.endswith(".csv") or args.output.endswith(".csv.gz")):
        raise ValueError(f"{args.output}: output name must end with .csv or .csv.gz")
    start = dt.datetime.fromisoformat(args.start) if args.start else dt.datetime(2026, 3, 2, 8)
    sim = simulate_recording(days=args.days, start=start, profile=args.profile,
                             record_id=args.record_id or "synthetic", rng=args.seed)
    write_recording_csv(sim, args.output)
    print(f"wrote {args.output} ({sim.recording.n_beats:,} intervals) and its ground-truth "
          "sidecar .truth.json")
    return 0


class _VersionAction(argparse.Action):
    """``--version``: the installed version, looked up only when asked for (reading the
    package metadata costs about 50 ms, on every command otherwise)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS,
                 help="show program's version number and exit"):
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        from tfhrv import __version__

        print(f"tfhrv {__version__}")
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every verb."""
    parser = argparse.ArgumentParser(
        prog="tfhrv",
        description="Time-resolved scaling analysis of long heart inter-beat (NN) interval "
        "recordings. " + CAUTION,
    )
    parser.add_argument("--version", action=_VersionAction)
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = parser.add_subparsers(dest="verb", metavar="VERB", required=True)

    p = sub.add_parser("inspect", help="quality, stationarity and FFT-slope fitness verdict",
                       description="Read a recording, clean it and print how much is usable "
                       "(recorded and analysable time, removed intervals by reason, ectopy, "
                       "gaps, hourly coverage), the stationarity category counts of the short "
                       "and long windows, and whether the record is fit for a whole-record FFT "
                       "power-law slope, with every reason and the recommended estimator. "
                       + CAUTION)
    p.add_argument("recording", nargs="?",
                   help="beat-interval file (text, CSV, EDF+, optionally .gz)")
    p.add_argument("--json", action="store_true", help="print the same as JSON")
    p.add_argument("--explain", action="store_true",
                   help="print the estimator decision table")
    _add_scan_options(p)
    _add_reader_options(p)
    p.set_defaults(func=_cmd_inspect)

    p = sub.add_parser("scan", help="time-resolved exponents -> DataTree (NetCDF) file",
                       description="Windows the recording in clock time (short and long "
                       "tiers), tests each window for stationarity, runs every estimator the "
                       "window supports with calibrated intervals, records the primary "
                       "estimator and why, and writes one NetCDF4 file with groups /nn, "
                       "/short, /long and /record. " + CAUTION)
    p.add_argument("recording", help="beat-interval file")
    p.add_argument("-o", "--output", required=True, help="output file (.nc)")
    _add_scan_options(p)
    _add_reader_options(p)
    p.set_defaults(func=_cmd_scan)

    circadian_text = ("Reads a scan file, contrasts night and day (clock windows, a sleep "
                      "log, or the inferred rest period) with block-bootstrap intervals, fits "
                      "single and 24 + 12 h cosinors, prints a table, writes it as CSV and adds "
                      "a /circadian group to the scan file. " + CAUTION)
    for verb in ("circadian", "rhythm"):  # "rhythm": hidden alias (old name) for one release
        p = (sub.add_parser(verb, help="day/night contrasts and 24-h cosinor of a scan",
                            description=circadian_text) if verb == "circadian"
             else sub.add_parser(verb, description="Deprecated name of 'tfhrv circadian'. "
                                 + circadian_text))
        p.add_argument("scan_file", help="file written by tfhrv scan (.nc)")
        _add_circadian_options(p)
        p.add_argument("--csv", help="table output (default: SCAN.circadian.csv)")
        p.set_defaults(func=_cmd_circadian if verb == "circadian" else _cmd_rhythm)

    p = sub.add_parser("export", help="per-window values of a scan as CSV or Parquet",
                       description="Writes one row per window of a scan file (time, clock "
                       "hour, quality, stationarity category, primary estimator, every "
                       "exponent with its calibrated interval, SE and fitted slope) as CSV or "
                       "Parquet for spreadsheets and R, with a sidecar TABLE.dictionary.csv "
                       "giving each column's unit and meaning. " + CAUTION)
    p.add_argument("scan_file", help="file written by tfhrv scan (.nc)")
    p.add_argument("-o", "--output", required=True, help="table file (.csv or .parquet)")
    p.add_argument("--tier", choices=("short", "long", "both"), default="both",
                   help="which windows (both: one table with a tier column)")
    p.set_defaults(func=_cmd_export)

    p = sub.add_parser("figures", help="all figures of a scan file as PNG/SVG",
                       description="Renders the overview, spectrum, DFA, wavelet log-scale "
                       "diagram, time x scale maps, stationarity timeline and circadian figures of "
                       "a scan file. " + CAUTION)
    p.add_argument("scan_file", help="file written by tfhrv scan (.nc)")
    p.add_argument("-d", "--directory", required=True, help="output folder")
    p.add_argument("--formats", nargs="+", choices=("png", "svg"), default=["png", "svg"],
                   help="file formats (png svg)")
    _add_dpi_option(p)
    p.add_argument("--alpha-range", type=float, nargs=2, metavar=("LOW", "HIGH"),
                   help="fixed colour range of the local-exponent maps (e.g. 0.5 1.5, to "
                   "compare records); default: fitted to the data, centred at alpha = 1")
    p.set_defaults(func=_cmd_figures)

    p = sub.add_parser("report", help="the whole pipeline into one self-contained HTML file",
                       description="Reads, cleans, scans and analyses day and night (circadian) "
                       "of a "
                       "recording and writes one HTML report with everything embedded. " + CAUTION)
    p.add_argument("recording", help="beat-interval file")
    p.add_argument("-o", "--output", required=True, help="report file (.html)")
    p.add_argument("--scan-output", help="also keep the scan file (.nc)")
    _add_dpi_option(p)
    _add_scan_options(p)
    _add_circadian_options(p)
    _add_reader_options(p)
    p.set_defaults(func=_cmd_report)

    p = sub.add_parser("demo", help="the report on the shipped demo recording",
                       description="Runs the whole pipeline on the shipped invented demo "
                       "recording (a day worker of a fictional shift-work study), writes the scan "
                       "file, the circadian table and the HTML report, and prints the report's "
                       "path. " + CAUTION)
    p.add_argument("-o", "--output-dir", default="demo_output",
                   help="output folder (demo_output)")
    p.add_argument("--tz", help="IANA time zone to read the demo's clock times in, e.g. "
                   "Europe/Berlin (default: naive local clock time)")
    _add_dpi_option(p)
    _add_circadian_options(p)
    p.set_defaults(func=_cmd_demo)

    p = sub.add_parser("cohort", help="many recordings on dask; study table; group comparison",
                       description="Runs scan and the circadian analysis on every recording of a "
                       "manifest (CSV "
                       "with path, record, group, optional start or start_time_of_day, sleep_log, "
                       "extra columns; or a folder or quoted glob of recordings) on a dask "
                       "cluster, skips records already done, and writes OUTDIR/records/<record>.nc"
                       ", study.parquet/.csv, comparison.csv/.png, short_exponents.zarr and "
                       "failures.csv. " + CAUTION)
    p.add_argument("manifest", help="manifest CSV, folder, or quoted glob pattern")
    p.add_argument("-o", "--output", required=True, help="output folder")
    p.add_argument("--workers", type=int, help="local worker processes (default: CPU count; "
                   "0: in this process, without dask)")
    p.add_argument("--scheduler", help="address of a running dask scheduler (tcp://host:port)")
    p.add_argument("--report", action="store_true", help="also write reports/<record>.html")
    p.add_argument("--no-multifractal", action="store_true",
                   help="leave out the multifractal estimates (about a tenth less work per "
                   "record; the study columns of c2 and the width are then empty)")
    _add_circadian_options(p)
    p.set_defaults(func=_cmd_cohort)

    p = sub.add_parser("synth", help="synthetic recording with known exponents",
                       description="Writes a synthetic multi-day beat-interval recording with "
                       "a known sleep/wake exponent schedule, ectopy, artefacts and gaps, and "
                       "its ground truth as a JSON sidecar. " + CAUTION)
    p.add_argument("-o", "--output", required=True, help="output file (.csv or .csv.gz)")
    p.add_argument("--days", type=float, default=1.0, help="length in days (1)")
    p.add_argument("--profile", choices=("day-worker", "night-shift", "heart-failure"),
                   default="day-worker", help="physiological profile (day-worker)")
    p.add_argument("--start", help="clock start, ISO 8601 (2026-03-02T08:00)")
    p.add_argument("--seed", type=int, default=0, help="random seed (0)")
    p.add_argument("--record-id", help="record identifier")
    p.set_defaults(func=_cmd_synth)
    for p in sub.choices.values():
        _add_feedback_options(p)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tfhrv`` command."""
    parser = build_parser()
    args = parser.parse_args(argv)
    source = None  # the user's file, named in every error once the options are checked
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default", TfhrvWarning)
            warnings.showwarning = partial(_show_warning, debug=args.debug)
            check_options(args)
            source = next((str(v) for k in ("recording", "scan_file", "manifest")
                           if (v := getattr(args, k, None)) is not None), None)
            status = int(args.func(args) or 0)
            sys.stdout.flush()  # a closed pipe shows here, inside the handler below
            return status
    except BrokenPipeError:  # output piped into head & co. (an OSError: caught first)
        _silence_stdout()
        return 0
    except (RecordFormatError, InsufficientDataError, ValueError, TypeError, OSError,
            MemoryError) as exc:
        if args.debug:
            raise
        text = _one_line(exc)
        if source is not None and not isinstance(exc, OSError) and source not in text:
            text = f"{source}: {text}"
        print(f"tfhrv: error: {text}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:  # pragma: no cover - interactive
        print("tfhrv: interrupted", file=sys.stderr)
        return 130


def _silence_stdout() -> None:
    """Point stdout at the null device, so that the interpreter's final flush of a closed
    pipe does not print a second error (Python docs, 'Note on SIGPIPE')."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):  # stdout without a file descriptor
        pass


def _one_line(exc: BaseException, limit: int = 500) -> str:
    """The error as one line of readable length."""
    if isinstance(exc, MemoryError):
        return "out of memory"
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= limit else text[:limit] + "..."


def _show_warning(message, category, filename, lineno, file=None, line=None, *,
                  debug=False) -> None:
    """Our warnings go to the terminal; a library's go to the ``tfhrv`` log (shown with
    --debug): they concern our code, not the user's data."""
    if issubclass(category, TfhrvWarning):
        print(f"tfhrv: warning: {_one_line(message)}", file=sys.stderr)
        return
    import logging

    logging.getLogger("tfhrv").debug("%s: %s (%s:%s)", category.__name__, message, filename,
                                     lineno)
    if debug:
        print(f"tfhrv: debug: library warning {category.__name__}: {message}", file=sys.stderr)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
