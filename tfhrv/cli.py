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
import json  # noqa: E402
import sys  # noqa: E402
import warnings  # noqa: E402
from collections.abc import Sequence  # noqa: E402

from tfhrv.core.caution import CAUTION  # noqa: E402
from tfhrv.core.errors import InsufficientDataError, RecordFormatError, TfhrvWarning  # noqa: E402

__all__ = ["main"]


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
    g = p.add_argument_group("FFT-slope fitness thresholds (unfit beyond these)")
    g.add_argument("--max-gap", type=float, default=30.0,
                   help="longest unreadable stretch, min (30; common practice)")
    g.add_argument("--min-coverage", type=float, default=75.0,
                   help="analysable share, %% (75; Task Force 1996 asks for 18 of 24 h)")
    g.add_argument("--max-ectopic", type=float, default=10.0,
                   help="non-sinus beats, %% (10; common practice)")
    g.add_argument("--max-nonstationary", type=float, default=50.0,
                   help="non-stationary long windows, %% (50; common practice)")


def _read(args: argparse.Namespace):
    from tfhrv.io.readers import read_recording

    delimiter = "\t" if args.delimiter in ("\\t", "tab") else args.delimiter
    return read_recording(
        args.recording, fmt=args.fmt, units=args.units, delimiter=delimiter,
        decimal=args.decimal, time_column=args.time_column, clock_column=args.clock_column,
        interval_column=args.interval_column, label_column=args.label_column,
        start=args.start, record_id=args.record_id,
    )


def _cmd_inspect(args: argparse.Namespace) -> int:
    from tfhrv.analysis.inspection import format_inspection, inspect_record, inspection_dict
    from tfhrv.analysis.policy import explain_table
    from tfhrv.signal.clean import clean

    if args.explain:
        print(explain_table())
        if args.recording is None:
            return 0
        print()
    if args.recording is None:
        raise ValueError("inspect needs a recording file (or --explain alone)")
    ins = inspect_record(clean(_read(args)), options=_scan_options(args), workers=_workers())
    if args.json:
        print(json.dumps(inspection_dict(ins), indent=2, default=float))
    else:
        print(format_inspection(ins))
    return 0


def _scan_options(args: argparse.Namespace):
    from dataclasses import replace

    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.analysis.policy import FitnessThresholds
    from tfhrv.analysis.windows import LONG, SHORT

    thresholds = FitnessThresholds(
        max_gap_s=args.max_gap * 60.0, min_coverage=args.min_coverage / 100.0,
        max_ectopic=args.max_ectopic / 100.0, max_nonstationary=args.max_nonstationary / 100.0)
    return ScanOptions(
        short=replace(SHORT, window_s=args.short_window * 60.0, hop_s=args.short_hop * 60.0),
        long=replace(LONG, window_s=args.long_window * 3600.0, hop_s=args.long_hop * 3600.0),
        dfa_order=args.dfa_order, vanishing_moments=args.vanishing_moments,
        calibration_model=args.calibration, thresholds=thresholds,
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


def _cmd_scan(args: argparse.Namespace) -> int:
    from tfhrv.dataset.build import scan
    from tfhrv.dataset.netcdf import write_tree
    from tfhrv.signal.clean import clean

    _check_output(args.output, (".nc",))
    options = _scan_options(args)
    rec = _read(args)
    tree = scan(clean(rec), options=options, workers=_workers())
    write_tree(tree, args.output)
    rec_ds = tree["/record"]
    print(f"wrote {args.output}: {tree['/short'].sizes['time']} short and "
          f"{tree['/long'].sizes['time']} long windows; FFT-slope verdict "
          f"{rec_ds.attrs['verdict']}")
    return 0


def _cmd_rhythm(args: argparse.Namespace) -> int:
    from pathlib import Path

    import xarray as xr

    from tfhrv.circadian.days import (
        RhythmOptions,
        format_rhythm,
        read_sleep_log,
        rhythm_dataset,
        rhythm_table,
    )
    from tfhrv.dataset.netcdf import atomic_write, open_tree, write_tree

    path = Path(args.scan_file)
    if not path.is_file():
        raise ValueError(f"{path}: no such scan file (make one with tfhrv scan)")
    tree = open_tree(path)
    opt = RhythmOptions(night_hours=tuple(args.night), day_hours=tuple(args.day),
                        period=args.period, rest_hours=args.rest_hours)
    log = (read_sleep_log(args.sleep_log, tree.attrs.get("record_id", ""))
           if args.sleep_log else None)
    table = rhythm_table(tree, options=opt, sleep_log=log)
    csv_path = Path(args.csv) if args.csv else path.with_suffix(".rhythm.csv")
    atomic_write(csv_path, lambda tmp: table.to_csv(tmp, index=False, float_format="%.6g"))
    tree["/rhythm"] = xr.DataTree(rhythm_dataset(table, opt, tree=tree, sleep_log=log))
    tree.attrs["history"] = tree.attrs.get("history", "") + "\ntfhrv rhythm"
    write_tree(tree, path)
    print(format_rhythm(table))
    print(f"\nwrote {csv_path} and the /rhythm group of {path}")
    return 0


def _pipeline(rec, options, rhythm_options=None):
    """read -> clean -> scan -> rhythm: the tree with its /rhythm group, and the table."""
    import xarray as xr

    from tfhrv.circadian.days import RhythmOptions, rhythm_dataset, rhythm_table
    from tfhrv.dataset.build import scan
    from tfhrv.signal.clean import clean

    tree = scan(clean(rec), options=options, workers=_workers())
    ropt = rhythm_options or RhythmOptions()
    table = rhythm_table(tree, options=ropt)
    tree["/rhythm"] = xr.DataTree(rhythm_dataset(table, ropt, tree=tree))
    return tree, table


def _cmd_figures(args: argparse.Namespace) -> int:
    from pathlib import Path

    from tfhrv.dataset.netcdf import open_tree
    from tfhrv.viz.figures import save_all

    path = Path(args.scan_file)
    if not path.is_file():
        raise ValueError(f"{path}: no such scan file (make one with tfhrv scan)")
    out = Path(args.directory)
    if out.exists() and not out.is_dir():
        raise ValueError(f"{out}: exists and is not a folder")
    written = save_all(open_tree(path), out, formats=tuple(args.formats))
    print(f"wrote {len(written)} files to {out}")
    return 0


def _cmd_report(args: argparse.Namespace) -> int:
    from tfhrv.dataset.netcdf import write_tree
    from tfhrv.viz.report import write_report

    _check_output(args.output, (".html", ".htm"))
    tree, table = _pipeline(_read(args), _scan_options(args))
    path = write_report(tree, args.output, rhythm_table=table, workers=_workers())
    if args.scan_output:
        _check_output(args.scan_output, (".nc",))
        write_tree(tree, args.scan_output)
    print(f"wrote {path}: FFT-slope verdict {tree['/record'].attrs['verdict']}")
    return 0


def _cmd_demo(args: argparse.Namespace) -> int:
    from pathlib import Path

    import tfhrv
    from tfhrv.analysis.pipeline import ScanOptions
    from tfhrv.dataset.netcdf import atomic_write, write_tree
    from tfhrv.io.readers import read_recording
    from tfhrv.viz.report import write_report

    demo = Path(tfhrv.__file__).resolve().parents[1] / "demo_data" / "sw01_day_worker.csv.gz"
    if not demo.is_file():
        raise ValueError(f"{demo}: demo recording not found (it ships with the source tree; "
                         "run tfhrv demo from a checkout, or tfhrv synth to make a recording)")
    out = Path(args.output_dir)
    out.mkdir(parents=True, exist_ok=True)
    print(f"demo recording: {demo.name} (invented 48-h day worker of a fictional shift-work "
          "study)")
    tree, table = _pipeline(read_recording(demo), ScanOptions())
    write_tree(tree, out / "sw01_day_worker.nc")
    atomic_csv = out / "sw01_day_worker.rhythm.csv"
    atomic_write(atomic_csv, lambda tmp: table.to_csv(tmp, index=False, float_format="%.6g"))
    report = write_report(tree, out / "sw01_day_worker_report.html", rhythm_table=table)
    print(f"verdict: {tree['/record'].attrs['verdict']}")
    print(f"wrote {out / 'sw01_day_worker.nc'} and {atomic_csv}")
    print(f"report: {report.resolve()}")
    return 0


def _cmd_cohort(args: argparse.Namespace) -> int:
    from tfhrv.cohort.run import CohortOptions, format_summary, run_cohort

    res = run_cohort(args.manifest, args.output, workers=args.workers,
                     scheduler=args.scheduler, options=CohortOptions(report=args.report))
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

    p = sub.add_parser("rhythm", help="day/night contrasts and 24-h cosinor of a scan",
                       description="Reads a scan file, contrasts night and day (clock windows, "
                       "a sleep log, or the inferred rest period) with block-bootstrap "
                       "intervals, fits single and 24 + 12 h cosinors, prints a table, writes "
                       "it as CSV and adds a /rhythm group to the scan file. " + CAUTION)
    p.add_argument("scan_file", help="file written by tfhrv scan (.nc)")
    p.add_argument("--night", type=float, nargs=2, default=(0.0, 6.0), metavar=("FROM", "TO"),
                   help="night clock window in hours (0 6; common practice)")
    p.add_argument("--day", type=float, nargs=2, default=(10.0, 20.0), metavar=("FROM", "TO"),
                   help="day clock window in hours (10 20; common practice)")
    p.add_argument("--period", choices=("auto", "clock", "inferred"), default="auto",
                   help="where day and night come from (auto: clock if known, else inferred)")
    p.add_argument("--rest-hours", type=float, default=6.0,
                   help="length of the inferred rest period, h (6)")
    p.add_argument("--sleep-log", help="CSV with record,rest_start,rest_end (takes precedence)")
    p.add_argument("--csv", help="table output (default: SCAN.rhythm.csv)")
    p.set_defaults(func=_cmd_rhythm)

    p = sub.add_parser("figures", help="all figures of a scan file as PNG/SVG",
                       description="Renders the overview, spectrum, DFA, wavelet log-scale "
                       "diagram, time x scale maps, stationarity timeline and rhythm figures of "
                       "a scan file. " + CAUTION)
    p.add_argument("scan_file", help="file written by tfhrv scan (.nc)")
    p.add_argument("-d", "--directory", required=True, help="output folder")
    p.add_argument("--formats", nargs="+", choices=("png", "svg"), default=["png", "svg"],
                   help="file formats (png svg)")
    p.set_defaults(func=_cmd_figures)

    p = sub.add_parser("report", help="the whole pipeline into one self-contained HTML file",
                       description="Reads, cleans, scans and analyses the day/night rhythm of a "
                       "recording and writes one HTML report with everything embedded. " + CAUTION)
    p.add_argument("recording", help="beat-interval file")
    p.add_argument("-o", "--output", required=True, help="report file (.html)")
    p.add_argument("--scan-output", help="also keep the scan file (.nc)")
    _add_scan_options(p)
    _add_reader_options(p)
    p.set_defaults(func=_cmd_report)

    p = sub.add_parser("demo", help="the report on the shipped demo recording",
                       description="Runs the whole pipeline on the shipped invented demo "
                       "recording (a day worker of a fictional shift-work study), writes the scan "
                       "file, the rhythm table and the HTML report, and prints the report's "
                       "path. " + CAUTION)
    p.add_argument("-o", "--output-dir", default="demo_output",
                   help="output folder (demo_output)")
    p.set_defaults(func=_cmd_demo)

    p = sub.add_parser("cohort", help="many recordings on dask; study table; group comparison",
                       description="Runs scan and rhythm on every recording of a manifest (CSV "
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
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tfhrv`` command."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default", TfhrvWarning)
            warnings.showwarning = _show_warning
            return int(args.func(args) or 0)
    except (RecordFormatError, InsufficientDataError, ValueError, TypeError, OSError) as exc:
        if args.debug:
            raise
        print(f"tfhrv: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into head & co.
        return 0
    except KeyboardInterrupt:  # pragma: no cover - interactive
        print("tfhrv: interrupted", file=sys.stderr)
        return 130


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    print(f"tfhrv: warning: {message}", file=sys.stderr)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
