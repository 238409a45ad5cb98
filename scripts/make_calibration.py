"""Compute the calibration tables shipped in tfhrv/data/calibration.npz.

For each preset (tfhrv.estimators.presets), each true exponent on the grid and each series
length, simulate the process, map it to an NN-like series (800 ms + 50 ms x standardised
path), run the preset and keep the mean, SD and 2.5 / 97.5 % quantiles of the estimates.

The process: exact fGn with H = alpha by Davies-Harte (Davies & Harte 1987) for alpha < 1;
for alpha > 1, Gaussian 1/f^beta noise with beta = 2 alpha - 1 (Timmer & Koenig 1995),
generated 4x longer and cut to length so that it is not periodic.  Why not fBm with
H = alpha - 1 above 1: for small H its increments are anti-persistent, so at the scales of
a few beats fBm looks flatter than 1/f^beta (DFA over 4-16 beats gives about 0.74 for
alpha = 1.05), and the mean-estimate curve would not be monotone across alpha = 1.
HRV is modelled as 1/f^beta noise across that border (Kobayashi & Musha 1982), so that is
the family the intervals are calibrated for; the fBm case is checked separately in
scripts/validate_estimators.py.

Run:  python scripts/make_calibration.py [--reps 200] [--quick]
Prints a summary table; takes about 10-20 minutes on two cores with the default grid.
"""

from __future__ import annotations

import argparse
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from tfhrv.errors import InsufficientDataError
from tfhrv.estimators.presets import PRESETS, estimate
from tfhrv.synth import fgn, powerlaw_noise

#: true DFA alpha on the grid (fGn H = alpha below 1, fBm H = alpha - 1 above 1)
ALPHAS = np.array([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95,
                   1.05, 1.1, 1.2, 1.3, 1.4, 1.5, 1.6, 1.7, 1.8, 1.9])
LENGTHS = {
    "alpha1": [128, 256, 512, 1024, 4096, 16384, 65536],
    "alpha2": [256, 512, 1024, 4096, 16384, 65536],
    "alpha_long": [1024, 4096, 16384, 65536],
    "beta_spectral_short": [128, 256, 512, 1024],
    "beta_wavelet_short": [128, 256, 512, 1024],
    "beta_spectral_long": [8192, 16384, 65536],
    "beta_wavelet_long": [4096, 16384, 65536],
}


def path(alpha: float, n: int, seed: int) -> np.ndarray:
    if alpha < 1:
        x = fgn(n, alpha, rng=seed)
    else:
        x = powerlaw_noise(4 * n, 2 * alpha - 1, rng=seed)[n: 2 * n]
    x = (x - x.mean()) / x.std()
    return 800.0 + 50.0 * x


def cell(args):
    preset, alpha, n, reps, seed0 = args
    out = np.full(reps, np.nan)
    for r in range(reps):
        try:
            out[r] = estimate(preset, path(alpha, n, seed0 + r)).exponent
        except InsufficientDataError:
            pass
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--reps", type=int, default=200)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--out", default=str(Path(__file__).resolve().parents[1] / "tfhrv" / "data"
                                          / "calibration.npz"))
    args = ap.parse_args()
    arrays: dict[str, np.ndarray] = {"presets": np.array(PRESETS)}
    t0 = time.perf_counter()
    with ProcessPoolExecutor(args.workers) as pool:
        for p_i, preset in enumerate(PRESETS):
            lengths = LENGTHS[preset]
            truth = ALPHAS if preset.startswith("alpha") else 2 * ALPHAS - 1
            jobs = []
            for a_i, alpha in enumerate(ALPHAS):
                for l_i, n in enumerate(lengths):
                    reps = args.reps if n <= 4096 else max(50, args.reps // 2)
                    seed0 = 1_000_000 * p_i + 10_000 * a_i + 1_000 * l_i
                    jobs.append((preset, float(alpha), int(n), reps, seed0))
            results = list(pool.map(cell, jobs, chunksize=1))
            shape = (ALPHAS.size, len(lengths))
            mean, sd, ql, qh = (np.full(shape, np.nan) for _ in range(4))
            k = 0
            for a_i in range(ALPHAS.size):
                for l_i in range(len(lengths)):
                    est = results[k][np.isfinite(results[k])]
                    k += 1
                    if est.size >= 10:
                        mean[a_i, l_i] = est.mean()
                        sd[a_i, l_i] = est.std(ddof=1)
                        ql[a_i, l_i], qh[a_i, l_i] = np.quantile(est, [0.025, 0.975])
            arrays.update({f"{preset}__truth": truth, f"{preset}__lengths": np.array(lengths),
                           f"{preset}__mean": mean, f"{preset}__sd": sd,
                           f"{preset}__q_low": ql, f"{preset}__q_high": qh,
                           f"{preset}__n_rep": np.array(args.reps)})
            print(f"{preset:22s} done at {time.perf_counter() - t0:7.1f} s; bias at n="
                  f"{lengths[-1]}: " + " ".join(f"{m - t:+.2f}" for m, t in
                                                zip(mean[:, -1], truth, strict=True)),
                  flush=True)
    Path(args.out).parent.mkdir(parents=True, exist_ok=True)
    np.savez_compressed(args.out, **arrays)
    print(f"wrote {args.out} ({Path(args.out).stat().st_size / 1024:.0f} KiB)")


if __name__ == "__main__":
    main()
