"""Multifractal estimates of the eight open records (healthy vs heart failure), untuned.

For each record of ``../shared/data/open-rr`` (records.csv): the whole-record estimates of
the scan (c1, c2 with its calibrated interval and p-value, MF-DFA width with interval,
h(-5) - h(5)) and the medians over the 4-h windows of the long tier, all 4-h windows and
those whose stationarity category makes the estimate primary.  Defaults throughout; no
option was tuned to the groups.  Prints a markdown table (the one in docs/METHODS.md).

Published direction (Ivanov et al., Nature 1999;399:461-465, WTMM on daytime records):
healthy heartbeat multifractal (broad spectrum), heart failure narrower (near
monofractal), i.e. c2 more negative and width larger in the healthy group.

Run:  nice -n 19 python scripts/multifractal_open_records.py [--data DIR]
"""

from __future__ import annotations

import argparse
import csv
import time
from pathlib import Path

import numpy as np

from tfhrv.analysis.multifractal_fits import C2_PRIMARY, MF_ESTIMATORS, WIDTH_PRIMARY
from tfhrv.analysis.pipeline import analyse_record
from tfhrv.calibration.calibrate import interval_text
from tfhrv.io.readers import read_recording
from tfhrv.signal.clean import clean


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", type=Path,
                    default=Path(__file__).resolve().parents[2] / "shared/data/open-rr")
    a = ap.parse_args()
    with open(a.data / "records.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    t0 = time.perf_counter()
    print("| record | group | beats | c1 | c2 [95 % CI] | p(c2<0) | width [95 % CI] | "
          "h(-5)-h(5) | 4-h windows: median c2 (all / primary) | median width "
          "(all / primary) |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for r in rows:
        path = a.data / r["path"]
        cleaned = clean(read_recording(path))
        an = analyse_record(cleaned, detail="full")
        m = an.multifractal
        v = an.long.values
        est = v["mf_estimator"]
        c2w, ww = v["c2"], v["mf_width"]

        def med(x, sel):
            x = x[sel & np.isfinite(x)]
            return f"{np.median(x):+.3f}" if x.size else "n/a"

        allw = np.ones(est.size, bool)
        c2p, wp = np.isin(est, C2_PRIMARY), np.isin(est, WIDTH_PRIMARY)
        n_prim = int(np.sum(est > 0))
        hspan = m.h[0] - m.h[-1]
        print(f"| {r['record']} | {r['group']} | {m.n_obs} | {m.c1:.2f} | {m.c2:+.3f} "
              f"{interval_text(*m.c2_ci, digits=3)} | {m.c2_pvalue:.3f} | {m.width:.2f} "
              f"{interval_text(*m.width_ci)} | {hspan:+.2f} | {med(c2w, allw)} / "
              f"{med(c2w, c2p)} (n={n_prim}/{est.size}) | {med(ww, allw)} / {med(ww, wp)} |",
              flush=True)
    print(f"\nprimary codes: {MF_ESTIMATORS}; wall time {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
