"""Bias, coverage and false-positive rate of the calibrated multifractal estimates.

Other seeds than the calibration, lengths between the tabulated ones, and exponents off the
tabulated grids.  Cells (>= 100 replicates each):

- monofractal null (c2 = 0, width 0): exact fGn (Davies & Harte 1987), H in {0.6, 0.85},
  and Timmer-Koenig 1/f^beta noise, beta = 1.2: share of p < 0.05 (false multifractality;
  the issue asks for none in >= 90 % of replicates), coverage of 0 by the c2 and width
  intervals;
- MRW, lambda^2 in {0.02, 0.05, 0.1} (Bacry et al. 2001; c2 = -lambda^2, width 10 lambda^2
  over q in [-5, 5]): bias and coverage of the calibrated c2 and width, power (p < 0.05);
- random binomial cascade, a in {0.6, 0.75} (Kantelhardt et al. 2002: tau(q) =
  -ln(a^q + b^q)/ln 2, h(q) = (tau(q) + 1)/q; leaders: c2 = -(ln a - ln b)^2 / (4 ln 2)):
  mean MF-DFA h(q) - theory at q = -4, -2, 2, 4, the same for the shape h(q) - h(2), and
  the mean raw c2 against the exact value.

Run:  nice -n 19 python scripts/validate_multifractal.py [--reps 100] [--out docs/...md]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from tfhrv.calibration.multifractal import estimate_multifractal, raw_estimates
from tfhrv.estimators.multifractal import DEFAULT_Q, binomial_hq
from tfhrv.synth import fgn, powerlaw_noise
from tfhrv.synth.multifractal import binomial_cascade, mrw

LENGTHS = (6000, 20000, 90000)
SEED = 19990603
QS = (-4.0, -2.0, 2.0, 4.0)


def nn_like(x: np.ndarray) -> np.ndarray:
    return 800.0 + 50.0 * (x - x.mean()) / x.std()


def cell(gen, reps: int, truth_c2: float, truth_w: float) -> dict:
    c2, lo, hi, wl, wh, w, p = ([] for _ in range(7))
    for r in range(reps):
        e = estimate_multifractal(nn_like(gen(r)))
        c2.append(e.c2)
        lo.append(e.c2_ci[0])
        hi.append(e.c2_ci[1])
        w.append(e.width)
        wl.append(e.width_ci[0])
        wh.append(e.width_ci[1])
        p.append(e.c2_pvalue)
    c2, lo, hi, w, wl, wh, p = map(np.asarray, (c2, lo, hi, w, wl, wh, p))

    def covers(a, b, t):
        # an open (NaN) end counts as unbounded; no interval at all (both ends NaN: the
        # estimate lies outside every band) counts as not covering
        some = np.isfinite(a) | np.isfinite(b)
        return np.mean(some & (np.nan_to_num(a, nan=-np.inf) <= t + 1e-12)
                       & (np.nan_to_num(b, nan=np.inf) >= t - 1e-12))

    return {"c2_bias": np.nanmean(c2) - truth_c2, "c2_sd": np.nanstd(c2),
            "c2_cover": covers(lo, hi, truth_c2), "w_bias": np.nanmean(w) - truth_w,
            "w_cover": covers(wl, wh, truth_w), "p05": np.mean(p < 0.05)}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=100)
    ap.add_argument("--out", type=Path, default=None)
    a = ap.parse_args()
    reps = a.reps
    t0 = time.perf_counter()
    lines = ["| process | n | c2 true | c2 bias | c2 SD | c2 95 % coverage | width true | "
             "width bias | width coverage | share p < 0.05 |",
             "|---|---|---|---|---|---|---|---|---|---|"]
    for n in LENGTHS:
        for label, make in (
                ("fGn H=0.6", lambda r, n=n: fgn(n, 0.6, rng=[SEED, 0, n, 60, r])),
                ("fGn H=0.85", lambda r, n=n: fgn(n, 0.85, rng=[SEED, 0, n, 85, r])),
                ("1/f^beta beta=1.2", lambda r, n=n: powerlaw_noise(
                    4 * n, 1.2, rng=[SEED, 3, n, 12, r])[:n])):
            s = cell(make, reps, 0.0, 0.0)
            lines.append(f"| {label} | {n} | 0 | {s['c2_bias']:+.4f} | {s['c2_sd']:.4f} "
                         f"| {s['c2_cover']:.2f} | 0 | {s['w_bias']:+.3f} | "
                         f"{s['w_cover']:.2f} | {s['p05']:.2f} |")
            print(lines[-1], flush=True)
        for lam2 in (0.02, 0.05, 0.1):
            def gen(r, n=n, lam2=lam2):
                return mrw(n, lam2, rng=[SEED, 1, n, int(1000 * lam2), r])
            s = cell(gen, reps, -lam2, 10 * lam2)
            lines.append(f"| MRW lambda2={lam2} | {n} | {-lam2:+.3f} | {s['c2_bias']:+.4f} | "
                         f"{s['c2_sd']:.4f} | {s['c2_cover']:.2f} | {10 * lam2:.2f} | "
                         f"{s['w_bias']:+.3f} | {s['w_cover']:.2f} | {s['p05']:.2f} |")
            print(lines[-1], flush=True)
    qi = [int(np.flatnonzero(DEFAULT_Q == q)[0]) for q in QS]
    i2 = int(np.flatnonzero(DEFAULT_Q == 2.0)[0])
    casc = ["| a | n | h(q) - theory at q = -4, -2, 2, 4 | [h(q) - h(2)] - theory | "
            "c2 raw (exact) |", "|---|---|---|---|---|"]
    for a_ in (0.6, 0.75):
        exact_c2 = -(np.log(a_) - np.log(1 - a_)) ** 2 / (4 * np.log(2))
        th = binomial_hq(DEFAULT_Q, a_)
        for lev in (12, 14, 17):
            hs, c2s = [], []
            for r in range(reps):
                x = binomial_cascade(lev, a_, rng=[SEED, 2, lev, int(100 * a_), r])
                h, _, _, c2, _, _ = raw_estimates(x)
                hs.append(h)
                c2s.append(c2)
            dh = np.nanmean(np.asarray(hs) - th, axis=0)
            shape = dh - dh[i2]
            casc.append(f"| {a_} | {2**lev} | {', '.join(f'{dh[i]:+.3f}' for i in qi)} | "
                        f"{', '.join(f'{shape[i]:+.3f}' for i in qi)} | "
                        f"{np.nanmean(c2s):+.3f} ({exact_c2:+.3f}) |")
            print(casc[-1], flush=True)
    wall = time.perf_counter() - t0
    text = "\n".join(lines) + "\n\nBinomial cascade (random orientation), MF-DFA-2 and " \
        "leaders, raw estimates:\n\n" + "\n".join(casc) + \
        f"\n\n{reps} replicates per cell; wall time {wall / 60:.1f} min.\n"
    print(text)
    if a.out is not None:
        a.out.write_text(text)


if __name__ == "__main__":
    main()
