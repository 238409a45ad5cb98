"""Render every tfhrv figure of the demo record into docs/figures/ (PNG), and time it.

Usage::

    python scripts/render_figures.py                      # scan the demo record first
    python scripts/render_figures.py OUT.nc               # use an existing scan file
    python scripts/render_figures.py -o DIR --formats png svg --report DIR/report.html

Without a scan file the script reads ``demo_data/sw01_day_worker.csv.gz`` (synthetic:
nobody was recorded), cleans and scans it, and runs the circadian analysis; with a scan file
it adds the ``/circadian`` group in memory when the file lacks one.  Research use only.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import xarray as xr

from tfhrv.circadian.days import CircadianOptions, circadian_dataset, circadian_table
from tfhrv.dataset.build import scan
from tfhrv.dataset.netcdf import open_tree
from tfhrv.io.readers import read_recording
from tfhrv.signal.clean import clean
from tfhrv.viz.figures import save_all, save_figure, scale_map
from tfhrv.viz.report import write_report

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data" / "sw01_day_worker.csv.gz"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("scan_file", nargs="?", help="existing scan (.nc); default: scan the demo")
    ap.add_argument("-o", "--output", default=str(ROOT / "docs" / "figures"),
                    help="output folder (default docs/figures)")
    ap.add_argument("--formats", nargs="+", default=["png"], choices=["png", "svg", "pdf"])
    ap.add_argument("--dpi", type=float, default=110.0)
    ap.add_argument("--report", help="also write the HTML report to this path")
    args = ap.parse_args(argv)

    t0 = time.perf_counter()
    if args.scan_file:
        tree = open_tree(args.scan_file)
        print(f"opened {args.scan_file} in {time.perf_counter() - t0:.1f} s")
    else:
        tree = scan(clean(read_recording(DEMO)))
        print(f"scanned {DEMO.name} in {time.perf_counter() - t0:.1f} s")
    if "circadian" not in tree.children:
        t1 = time.perf_counter()
        opt = CircadianOptions()
        tree["/circadian"] = xr.DataTree(circadian_dataset(circadian_table(tree, options=opt), opt))
        print(f"circadian analysis in {time.perf_counter() - t1:.1f} s")
    t1, c1 = time.perf_counter(), time.process_time()
    paths = save_all(tree, args.output, formats=tuple(args.formats), dpi=args.dpi)
    print(f"{len(paths)} figure files in {time.perf_counter() - t1:.1f} s "
          f"(CPU {time.process_time() - c1:.1f} s):")
    # the paper-style variant: 30-min moving average of the 5-min map
    smooth = scale_map(tree, tier="short", smooth_windows=6)
    paths += [save_figure(smooth, Path(args.output) / f"scale_map_short_30min.{fmt}", fmt=fmt,
                          dpi=args.dpi) for fmt in args.formats]
    for p in paths:
        print(f"  {p}  ({p.stat().st_size / 1024:.0f} kB)")
    if args.report:
        t1, c1 = time.perf_counter(), time.process_time()
        path = write_report(tree, args.report, dpi=args.dpi)
        print(f"report {path} ({path.stat().st_size / 1024:.0f} kB) in "
              f"{time.perf_counter() - t1:.1f} s (CPU {time.process_time() - c1:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
