"""Validate the stationarity battery and the FFT-slope fitness verdict on synthetic
families with a stated expected outcome (``validation.families``).

For every family, R seeds (default 100) are drawn and the observed category (window
families: one 4-h long-tier window) or verdict (record families: a whole record, judged
by the long-tier battery and ``tfhrv.analysis.record.assess_record`` exactly as ``tfhrv inspect``)
is compared with the expectation.  The table gives the share of hits with a 95 % Wilson
interval, the distribution of outcomes, and PASS/FAIL against the targets:

- injected non-stationarity of the stated size is detected (category ``trend``,
  ``unit-root`` or ``drifting``) in >= 90 % of windows;
- false alarms on clean fGn / 1/f^beta noise with beta <= 1.2 stay <= 10 % (windows: an
  alarm category; records: ``unfit`` for a stationarity reason);
- the verdict is never ``fit`` for a record whose longest gap exceeds the 30-min limit,
  and gaps, ectopy and short duration are named among the reasons or cautions;
- power-law records in time (beta 0.6-1.6) are ``fit`` or ``fit-with-cautions`` in
  >= 90 % of seeds;
- over the day/night and variance-change families, ``unfit`` for level changes agrees
  with "true distortion of the FFT slope > the record's margin" in >= 90 % of records.

Then the open records (``--open-rr``) are listed with their verdict, reasons and measured
effects, as ``tfhrv inspect`` gives them.

Run:  python scripts/validate_verdict.py [--seeds 100] [--seeds-distortion N]
          [--workers 2] [--out docs/validation_verdict.md]
With --seeds 3 --seeds-distortion 8 --workers 1 it takes about 20 minutes on one core
(a record family costs 3-8 s per seed: the 4-h battery and the null of the effect).

References
----------
Wilson EB. Probable inference, the law of succession, and statistical inference. J Am
Stat Assoc 1927;22:209-212. doi:10.1080/01621459.1927.10502953
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from collections import Counter
from concurrent.futures import ProcessPoolExecutor

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
# validation/ (fixtures shared with the tests, not shipped) lives at the repository root.
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

import numpy as np  # noqa: E402

from tfhrv import __version__  # noqa: E402
from tfhrv.analysis.verdict import Verdict  # noqa: E402
from validation.families import (  # noqa: E402
    distortion_families,
    distortion_margin,
    record_families,
    unfit_for_level_changes,
    window_families,
)

NOTES = (
    "Reading notes.",
    "",
    "- Sizes that reach 90 % detection are larger on a 1/f background (beta = 1) than on a "
    "weakly correlated one (beta = 0.6): within 4 h, 1/f noise itself wanders by several "
    "SDs, and the drift test's null keeps the window's own spectrum (that is its purpose).",
    "- A symmetric u-shaped trend spanning the window is a blind spot of the surrogate drift "
    "test: its periodic extension is one smooth cycle, which phase-randomised surrogates "
    "reproduce; only a large one is caught (by ADF/KPSS, as unit-root).  The estimator "
    "choice still protects the exponent: wavelets with 3 vanishing moments ignore "
    "polynomial trends of degree < 3.",
    "- Clean records: 'hits' means not unfit for a stationarity reason; the outcome column "
    "shows every verdict.  Records with 10 % ectopy sit on the unfit limit (> 10 %) and "
    "split about evenly, as expected.",
    "- The record families are what made us replace the log-log R^2 >= 0.9 rule (common "
    "practice) by a lack-of-fit test: with R^2 most clean power-law records were unfit.",
    "- Distortion families: the background is a power law in time (1-Hz grid; beta as "
    "named), the same function of time with and without the injected night (NN longer by "
    "50-250 ms for 7-9 h from 5-9 h after the start, logistic transitions rising 10-90 % "
    "over 20-60 min; or the night SD multiplied by 0.6 or 1.5 with +100 ms).  The truth D "
    "is the raw FFT slope with minus without the night (same seed); the margin is the "
    "record's own, the half-width of the calibrated 95 % interval of its FFT beta "
    "(about 0.2).  Outcomes read 'verdict |D| vs margin', with 'unfit(level)' for unfit "
    "because of the level changes.",
    "- Power-law nulls in time with beta 0.6-1.6 (the model behind the classical slope) "
    "must not be unfit; cautions (drift in many 4-h windows, a motion-like beta > 1.5) are "
    "allowed.",
)
SEED0 = 3_000_000  # far from the calibration (< 10^7 but different range) and test seeds


def _families():
    return window_families() + record_families() + distortion_families()


def _run(job: tuple[int, int]) -> tuple[int, str, bool, float]:
    index, seed = job
    fam = _families()[index]
    out = fam.run(seed)
    hit = bool(fam.hit(out))
    dist = float("nan")
    if isinstance(out, tuple):  # (verdict, true distortion)
        v, dist = out
        label = (f"{'unfit(level)' if unfit_for_level_changes(v) else v.verdict}")
        label += f" |D|{'>' if abs(dist) > distortion_margin(v) else '<='}margin"
    else:
        label = out.verdict if isinstance(out, Verdict) else str(out)
    return index, label, hit, dist


def wilson(k: int, n: int, z: float = 1.96) -> tuple[float, float]:
    """Wilson (1927) score interval of a binomial share."""
    p = k / n
    den = 1 + z * z / n
    centre = (p + z * z / (2 * n)) / den
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / den
    return centre - half, centre + half


def open_records(folder: str) -> list[str]:
    """Verdict, reasons and measured effects of the open records, as ``tfhrv inspect``
    gives them (thresholds were not chosen on these records)."""
    import csv

    from tfhrv.analysis.inspection import inspect_record
    from tfhrv.calibration.calibrate import interval_text
    from tfhrv.io.readers import read_recording
    from tfhrv.signal.clean import clean

    manifest = os.path.join(folder, "records.csv")
    if not os.path.exists(manifest):
        return []
    with open(manifest, encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    out = ["", "## The open records", "",
           "| record | verdict | level effect [95 %] | non-stationary 4-h windows | FFT beta "
           "(calibrated 95 %; through the day 95 %) | wavelet beta | reasons and cautions |",
           "|---|---|---|---|---|---|---|"]
    for row in rows:
        path = os.path.join(folder, row["path"])
        if not os.path.exists(path):
            continue
        ins = inspect_record(clean(read_recording(path)))
        a = ins.assessment
        v = a.verdict
        e = a.effect
        eff = f"{e.effect:+.2f} [{e.ci[0]:+.2f}, {e.ci[1]:+.2f}]" if e is not None else "n/a"
        f, b = a.fits["beta_spectral"], a.block.get("beta_spectral")
        fb = "n/a" if f is None else f"withheld ({f.withheld.split(':')[0]})" if f.withheld else (
            f"{f.exponent:.2f} ({interval_text(*f.ci).strip('[]').replace(', ', '-')}; "
            + (f"{b.ci[0]:.2f}-{b.ci[1]:.2f})" if b is not None else "n/a)"))
        w = a.fits["beta_wavelet"]
        wb = "n/a" if w is None else f"{w.exponent:.2f}"
        why = "; ".join(v.reasons + v.cautions).replace("|", "/") or "none"
        share = v.checks.get("nonstationary_share", float("nan"))
        out.append(f"| {row['record']} | {v.verdict} | {eff} | {100 * share:.0f} % | {fb} "
                   f"| {wb} | {why} |")
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seeds", type=int, default=100)
    ap.add_argument("--seeds-distortion", type=int, default=None,
                    help="seeds of the distortion families (default --seeds)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--level", choices=("window", "record", "distortion", "all"),
                    default="all")
    ap.add_argument("--out", help="also write the table (markdown) to this file")
    ap.add_argument("--open-rr", default=os.path.join(os.path.dirname(__file__), "..", "..",
                                                      "shared", "data", "open-rr"),
                    help="folder of the open records to list (skipped when absent)")
    args = ap.parse_args(argv)
    fams = _families()
    chosen = [i for i, f in enumerate(fams) if args.level in ("all", f.level)]
    n_dist = args.seeds if args.seeds_distortion is None else args.seeds_distortion
    jobs = [(i, SEED0 + s) for i in chosen
            for s in range(n_dist if fams[i].level == "distortion" else args.seeds)]
    t0 = time.perf_counter()
    results: dict[int, list[tuple[str, bool]]] = {i: [] for i in chosen}
    agree: list[bool] = []
    with ProcessPoolExecutor(max_workers=args.workers) as pool:
        for i, label, hit, _dist in pool.map(_run, jobs, chunksize=1):
            results[i].append((label, hit))
            if fams[i].kind == "agreement":
                agree.append(hit)
    elapsed = time.perf_counter() - t0
    lines = [
        "# Validation of the stationarity battery and the FFT-slope fitness verdict",
        "",
        f"Made by `python scripts/validate_verdict.py --seeds {args.seeds}"
        f"{f' --seeds-distortion {n_dist}' if n_dist != args.seeds else ''}"
        f"{' --level ' + args.level if args.level != 'all' else ''}` "
        f"(tfhrv {__version__}, {elapsed:.0f} s with {args.workers} workers). "
        "Families, sizes and expectations: `validation/families.py`; method: the script's "
        "docstring. Sizes are in SDs of the background noise (NN = 800 ms + 50 ms x, x of "
        "unit variance: fGn for beta < 1, Timmer-Koenig 1/f^beta noise for beta >= 1). "
        "Window families are one 4-h long-tier window (18 000 beats); record families are "
        "judged as `tfhrv inspect` judges them.",
        "",
        "| family | level | expected | measures | hits | 95 % CI | target | result | outcomes |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    failed = 0
    for i in chosen:
        f = fams[i]
        res = results[i]
        k = sum(h for _, h in res)
        n = len(res)
        lo, hi = wilson(k, n)
        if f.target is None:
            verdict, target = "reported", "-"
        else:
            ok = k / n >= f.target
            failed += not ok
            verdict, target = ("PASS" if ok else "FAIL"), f">= {f.target:.0%}"
        counts = Counter(label for label, _ in res)
        outcomes = ", ".join(f"{c} {v}" for c, v in counts.most_common())
        lines.append(f"| {f.name} | {f.level} | {f.expected} | {f.kind} | {k}/{n} "
                     f"| {lo:.2f}-{hi:.2f} | {target} | {verdict} | {outcomes} |")
    if agree:
        k, n = sum(agree), len(agree)
        lo, hi = wilson(k, n)
        ok = k / n >= 0.90
        failed += not ok
        lines += ["", f"**Agreement over all day/night and variance families** (unfit for "
                  "level changes iff the true |distortion| > the record's margin): "
                  f"{k}/{n} = {k / n:.2f} (95 % CI {lo:.2f}-{hi:.2f}); target >= 90 %: "
                  f"{'PASS' if ok else 'FAIL'}."]
    lines += ["", f"{failed} target(s) failed.", "", *NOTES]
    lines += open_records(args.open_rr)
    text = "\n".join(lines) + "\n"
    print(text)
    if args.out:
        with open(args.out + ".tmp", "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(args.out + ".tmp", args.out)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
