"""What the user waits for: fresh-process timings of the command line on a real record.

Every number is the wall time of a new Python process running the command (imports, reading,
analysis and file writing included), the median of ``--runs`` runs, beside its ratio to the
floor: reading the same CSV and computing one Welch PSD in a warm process (numpy/scipy, no
tfhrv).  A second table breaks one fresh ``scan`` into its stages (imports, read + clean,
battery and fits, building the tree, writing the file).  Records of 1, 2, 4 and 7 synthetic
days show whether the cost grows linearly, with the peak memory of each scan process; the
optional cohort run prints the per-record cost beside the single-record ``scan``.

Targets (issue "Speed as the user sees it"): scan of a 24-h record <= 2 s, inspect <= 1 s,
report <= 4 s, ``tfhrv --help`` and a verb's imports <= 0.4 s, writing the scan file
<= 0.2 s; 7-day scan <= 12 s and < 1 GB; cohort of 54 records on 2 workers <= 90 s.

Run:  python benchmarks/bench_cli.py [--record PATH] [--runs 5] [--days 1 2 4 7]
      [--cohort 54 | --cohort-dir DIR]
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_RECORD = ROOT.parent / "shared" / "data" / "open-rr" / "nsr2db" / "nsr001.csv.gz"
# the user's environment as it is: the command sets its own BLAS thread defaults
ENV = dict(os.environ)
TFHRV = [sys.executable, "-m", "tfhrv"]

FLOOR = """
import gzip, time
import numpy as np
from scipy.signal import welch
t0 = time.perf_counter()
with gzip.open({path!r}, "rt") as fh:
    a = np.loadtxt(fh, delimiter=",", skiprows=1, usecols=(0, 1))
t, rr = a[:, 0], a[:, 1]
grid = np.arange(t[0], t[-1], 0.25)
x = np.interp(grid, t, rr)
welch(x, fs=4.0, nperseg=1024)
print(time.perf_counter() - t0)
"""

STAGES = """
import time
t0 = time.perf_counter()
from tfhrv.cli import _workers  # sets the BLAS thread defaults as the command does
from tfhrv.analysis.pipeline import analyse_record
from tfhrv.dataset.build import build_groups
from tfhrv.dataset.netcdf import write_tree
from tfhrv.io.readers import read_recording
from tfhrv.signal.clean import clean
t1 = time.perf_counter()
c = clean(read_recording({path!r}))
t2 = time.perf_counter()
battery = analyse_record(c, detail="battery", workers=_workers())
t3 = time.perf_counter()
a = analyse_record(c, detail="full", workers=_workers())
t4 = time.perf_counter()
tree = build_groups(a)
t5 = time.perf_counter()
write_tree(tree, {out!r})
t6 = time.perf_counter()
print(t1 - t0, t2 - t1, t3 - t2, t4 - t3, t5 - t4, t6 - t5)
"""

OPEN = """
import time
t0 = time.perf_counter()
from tfhrv.dataset.netcdf import open_tree
open_tree({out!r})
print(time.perf_counter() - t0)
"""


def _cli_workers() -> int:
    sys.path.insert(0, str(ROOT))
    from tfhrv.cli import _workers

    return _workers()


def run(cmd: list[str]) -> tuple[float, float, str]:
    """Wall time (s), peak resident memory (MB) and stdout of one fresh process."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        t0 = time.perf_counter()
        proc = subprocess.Popen(cmd, env=ENV, stdout=out, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        out.seek(0)
        err.seek(0)
        if status != 0:
            raise RuntimeError(f"{' '.join(cmd)} failed:\n{err.read().decode()}")
        return wall, usage.ru_maxrss / 1024, out.read().decode()


def median_run(cmd: list[str], runs: int) -> tuple[float, float, str]:
    res = [run(cmd) for _ in range(runs)]
    return (statistics.median(r[0] for r in res), max(r[1] for r in res), res[-1][2])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--record", type=Path, default=DEFAULT_RECORD)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--days", type=float, nargs="*", default=[1, 2, 4, 7])
    ap.add_argument("--cohort", type=int, default=0,
                    help="also run a cohort of this many synthetic 24-h records on 2 workers")
    ap.add_argument("--cohort-dir", type=Path,
                    help="folder of recordings for the cohort run (default: synthesise "
                    "--cohort records of 24 h; pre-made records keep synthesis out of the "
                    "benchmark's own run time)")
    args = ap.parse_args()
    rec = str(args.record)
    tmp = Path(tempfile.mkdtemp(prefix="tfhrv-bench-"))
    # as an installed package is (pip byte-compiles at install; `make bench` runs the same):
    # otherwise a machine with PYTHONDONTWRITEBYTECODE set compiles the source in every run
    subprocess.run([sys.executable, "-m", "compileall", "-q", str(ROOT / "tfhrv")], check=True)
    try:
        floor = statistics.median(
            float(run([sys.executable, "-c", FLOOR.format(path=rec)])[2]) for _ in range(3))
        print(f"# fresh-process timings, median of {args.runs}; record {args.record.name}")
        print(f"# machine: {os.cpu_count()} cores; {time.strftime('%Y-%m-%d')}; "
              f"floor (read CSV + one Welch PSD, warm) {floor:.3f} s\n")
        print(f"{'command':<34}{'seconds':>9}{'x floor':>9}{'peak MB':>9}")
        rows = [
            ("tfhrv --help", [*TFHRV, "--help"]),
            ("import for inspect", [sys.executable, "-c",
                                    "import tfhrv.analysis.inspection, tfhrv.io.readers"]),
            ("import for scan", [sys.executable, "-c", "import tfhrv.dataset.build, "
                                 "tfhrv.dataset.netcdf, tfhrv.io.readers, h5py"]),
            ("import for report", [sys.executable, "-c", "import tfhrv.dataset.build, "
                                   "tfhrv.io.readers, tfhrv.circadian.days, "
                                   "tfhrv.viz.report, tfhrv.viz.figures"]),
            ("tfhrv inspect REC", [*TFHRV, "inspect", rec]),
            ("tfhrv scan REC -o OUT.nc", [*TFHRV, "scan", rec, "-o", str(tmp / "o.nc")]),
            ("  the same, --no-multifractal", [*TFHRV, "scan", rec, "-o", str(tmp / "m.nc"),
                                               "--no-multifractal"]),
            ("tfhrv figures OUT.nc -d DIR", [*TFHRV, "figures", str(tmp / "o.nc"), "-d",
                                             str(tmp / "figs")]),
            ("tfhrv report REC -o R.html", [*TFHRV, "report", rec, "-o",
                                            str(tmp / "r.html")]),
        ]
        times = {}
        for label, cmd in rows:
            wall, rss, _ = median_run(cmd, args.runs)
            times[label] = wall
            print(f"{label:<34}{wall:>9.2f}{wall / floor:>9.1f}{rss:>9.0f}")
        stages = [list(map(float, run([sys.executable, "-c", STAGES.format(
            path=rec, out=str(tmp / "s.nc"))])[2].split())) for _ in range(args.runs)]
        med = [statistics.median(s[i] for s in stages) for i in range(6)]
        names = ("imports", "read + clean", "battery (inspect's analysis)",
                 "battery + fits (scan's analysis)", "build tree", "write NetCDF")
        print(f"\n# one fresh scan by stage (median; windows shared by {_cli_workers()} "
              "processes, as the command does)")
        for n, v in zip(names, med, strict=True):
            print(f"{n:<34}{v:>9.3f}")
        size = (tmp / "s.nc").stat().st_size / 1e6
        t_open = statistics.median(float(run([sys.executable, "-c", OPEN.format(
            out=str(tmp / "s.nc"))])[2]) for _ in range(3))
        print(f"{'scan file size (MB)':<34}{size:>9.1f}")
        print(f"{'open_tree of it (incl. imports)':<34}{t_open:>9.3f}")

        if args.days:
            print("\n# synthetic day-worker records (fresh scan, one run each)")
            print(f"{'days':<8}{'beats':>10}{'seconds':>9}{'s per day':>11}{'peak MB':>9}")
            for d in args.days:
                path = tmp / f"d{d:g}.csv.gz"
                subprocess.run([*TFHRV, "synth", "-o", str(path), "--days", f"{d:g}",
                                "--seed", "1"], env=ENV, check=True, capture_output=True)
                with __import__("gzip").open(path, "rt") as fh:
                    n = sum(1 for line in fh if line[:1].isdigit())
                wall, rss, _ = run([*TFHRV, "scan", str(path), "-o", str(tmp / "d.nc")])
                print(f"{d:<8g}{n:>10,}{wall:>9.2f}{wall / d:>11.2f}{rss:>9.0f}")

        if args.cohort or args.cohort_dir:
            if args.cohort_dir:
                src = args.cohort_dir
            else:
                src = tmp / "cohort_in"
                src.mkdir()
                for i in range(args.cohort):
                    subprocess.run([*TFHRV, "synth", "-o", str(src / f"r{i:03d}.csv.gz"),
                                    "--seed", str(i), "--record-id", f"r{i:03d}"], env=ENV,
                                   check=True, capture_output=True)
            recs = sorted(Path(src).glob("*.csv.gz"))
            n_rec = len(recs)
            # the CLI on a record of the cohort itself, for a per-record comparison
            single, _, _ = median_run([*TFHRV, "scan", str(recs[0]), "-o",
                                       str(tmp / "c0.nc")], args.runs)
            wall, rss, _ = run([*TFHRV, "cohort", str(src), "-o", str(tmp / "cohort"),
                                "--workers", "2"])
            print(f"\n# cohort of {n_rec} 24-h records ({src.name}), 2 local workers")
            print(f"total {wall:.1f} s; per record {wall / n_rec:.2f} s (x2 workers = "
                  f"{2 * wall / n_rec:.2f} s of one core) vs `tfhrv scan` of its first "
                  f"record {single:.2f} s (ratio {wall / n_rec / single:.2f}); peak "
                  f"{rss:.0f} MB")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
