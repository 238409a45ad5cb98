"""Cohort throughput: synthetic 24-h records on a dask LocalCluster with 1 and 2 workers.

Run:  python benchmarks/bench_cohort.py [--n 54] [--days 1] [--workers 1 2] [--data DIR]

Writes ``--n`` synthetic records (``tfhrv.synth.simulate_recording``, alternating the
day-worker and heart-failure profiles, seeds 0..n-1) and a manifest into ``--data`` (kept
and reused when given), then runs the whole cohort pipeline (read, clean, scan, circadian,
write, study table, comparison, figure, Zarr store) once per worker count into a fresh
output folder, timing the complete ``run_cohort`` call with time.perf_counter (cluster
start-up included).  Prints per run: total time, mean time per record inside the worker,
parallel efficiency E = T(1 worker) / (k T(k workers)), and the peak resident memory of
each worker process (``resource.getrusage`` in the worker, so it includes the imported
libraries).

Targets (54 records of 24 h): < 120 s with 2 workers and E >= 75 %.  On a machine shared
with other jobs both numbers are pessimistic; run with a small ``--n`` there.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # before numpy is imported

from tfhrv.cohort.run import run_cohort  # noqa: E402
from tfhrv.synth import simulate_recording, write_recording_csv  # noqa: E402


def make_records(folder: Path, n: int, days: float) -> Path:
    """Write ``n`` records and ``manifest.csv`` (skipped for files already there)."""
    folder.mkdir(parents=True, exist_ok=True)
    lines = ["path,record,group"]
    t0 = time.perf_counter()
    made = 0
    for i in range(n):
        profile = "heart-failure" if i % 2 else "day-worker"
        name = f"bench{i:03d}"
        path = folder / f"{name}.csv.gz"
        if not path.exists():
            sim = simulate_recording(days=days, profile=profile, record_id=name, rng=i)
            write_recording_csv(sim, path, truth_sidecar=False)
            made += 1
        lines.append(f"{path.name},{name},{profile}")
    manifest = folder / "manifest.csv"
    manifest.write_text("\n".join(lines) + "\n")
    print(f"{n} records of {days:g} days in {folder} ({made} written in "
          f"{time.perf_counter() - t0:.1f} s)")
    return manifest


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=54, help="number of records (54)")
    parser.add_argument("--days", type=float, default=1.0, help="record length, days (1)")
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2],
                        help="worker counts to time (1 2)")
    parser.add_argument("--data", type=Path, help="folder for the records (kept, reused)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="tfhrv-bench-cohort-") as tmp:
        manifest = make_records(args.data or Path(tmp) / "data", args.n, args.days)
        base = None
        for k in args.workers:
            t0 = time.perf_counter()
            res = run_cohort(manifest, Path(tmp) / f"out{k}", workers=k, progress=False)
            total = time.perf_counter() - t0
            base = base or (total * k if k == 1 else None)
            done = [r for r in res.records if r["status"] == "done"]
            per = sum(r["seconds"] for r in done) / max(len(done), 1)
            peaks: dict[int, float] = {}
            for r in done:
                peaks[r["pid"]] = max(peaks.get(r["pid"], 0.0), r["peak_rss_mb"])
            eff = f"{100 * base / (k * total):.0f} %" if base else "n/a (no 1-worker run)"
            print(f"workers={k}: total {total:.1f} s for {len(done)} records "
                  f"({res.count('failed')} failed); {per:.1f} s per record in a worker; "
                  f"efficiency {eff}; peak memory per worker "
                  + ", ".join(f"{m:.0f} MB" for m in sorted(peaks.values())))


if __name__ == "__main__":
    main()
