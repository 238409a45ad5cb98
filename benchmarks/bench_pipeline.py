"""Benchmark of the record pipeline: read + clean, inspect (by stage) and scan.

Prints median wall times of several runs and the peak memory of the scan; records of 1, 2,
4 and 7 days show whether time grows linearly.  Targets (issues): read + clean of a 24-h
record < 0.3 s; inspect of a 24-h record < 1 s; scan of a 24-h record < 2 s; 7-day scan
< 15 s and < 1.5 GB.

Run:  OPENBLAS_NUM_THREADS=1 python benchmarks/bench_pipeline.py [--days 1 2 4 7] [--runs 3]
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from tfhrv.analysis.inspection import inspect_record  # noqa: E402
from tfhrv.analysis.record import assess_record  # noqa: E402
from tfhrv.analysis.windows import LONG, SHORT, category_codes, tier_stationarity, tier_windows  # noqa: E402
from tfhrv.dataset.build import scan  # noqa: E402
from tfhrv.io.readers import read_recording  # noqa: E402
from tfhrv.signal.clean import clean  # noqa: E402
from tfhrv.synth import simulate_recording, write_recording_csv  # noqa: E402


def median_time(fn, runs: int) -> float:
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--days", type=float, nargs="+", default=[1, 2, 4, 7])
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--no-scan", action="store_true")
    args = ap.parse_args()
    print(f"{'days':>5} {'beats':>8} {'read+clean':>11} {'windows':>8} {'battery':>8} "
          f"{'record':>8} {'inspect':>8} {'scan':>8}")
    with tempfile.TemporaryDirectory() as tmp:
        for days in args.days:
            path = Path(tmp) / f"rec{days:g}.csv.gz"
            write_recording_csv(simulate_recording(days=days, rng=1), path, truth_sidecar=False)
            rec = read_recording(path)
            t_read = median_time(lambda: clean(read_recording(path)), args.runs)  # noqa: B023
            cleaned = clean(rec)
            t_win = median_time(lambda: [tier_windows(cleaned, t) for t in (SHORT, LONG)],  # noqa: B023
                                args.runs)
            wins = [tier_windows(cleaned, t) for t in (SHORT, LONG)]
            t0 = time.perf_counter()
            results = [tier_stationarity(w) for w in wins]
            t_bat = time.perf_counter() - t0
            t0 = time.perf_counter()
            assess_record(cleaned, long_categories=category_codes(results[1]))
            t_rec = time.perf_counter() - t0
            t_ins = median_time(lambda: inspect_record(cleaned), args.runs)  # noqa: B023
            t_scan = float("nan")
            if not args.no_scan:
                t_scan = median_time(lambda: scan(cleaned), args.runs)  # noqa: B023
            print(f"{days:5g} {rec.n_beats:8d} {t_read:10.3f}s {t_win:7.3f}s {t_bat:7.3f}s "
                  f"{t_rec:7.3f}s {t_ins:7.3f}s {t_scan:7.2f}s", flush=True)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak memory of this process: {peak:.0f} MB")


if __name__ == "__main__":
    main()
