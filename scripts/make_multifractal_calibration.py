"""Compute the multifractal calibration table shipped in tfhrv/data/multifractal.npz.

On a grid of lengths covering 1-h to 24-h beat counts, simulate

- the monofractal null (c2 = 0) from two families, since the null distribution of the
  leader c2 at 24-h lengths is narrow enough (SD ~0.002) to feel the family: Gaussian
  1/f^beta noise (Timmer & Koenig 1995), generated 4x longer and cut (not periodic), beta
  in BETAS["powerlaw"], and exact fGn (Davies & Harte 1987) with H = (beta + 1)/2, beta in
  BETAS["fgn"];
- the multifractal random walk (Bacry, Delour & Muzy 2001) with white innovations and
  integral scale = the length, lambda^2 in LAMBDA2 (c2 = -lambda^2);

and store every replicate's MF-DFA h(q) and width and leader c1, c2
(:func:`tfhrv.calibration.multifractal.raw_estimates`, the computation the scan runs).
Each cell has its own seed (base seed, family, grid index, length index), so a cell can be
recomputed alone.

Run:  nice -n 19 python scripts/make_multifractal_calibration.py [--reps 100] [--quick]
(OMP_NUM_THREADS=1). Wall time is printed at the end.

References
----------
Timmer J, Koenig M. On generating power law noise. Astron Astrophys 1995;300:707-710.
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
Bacry E, Delour J, Muzy JF. Multifractal random walk. Phys Rev E 2001;64:026103.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from tfhrv.calibration.multifractal import raw_estimates
from tfhrv.estimators.multifractal import DEFAULT_Q
from tfhrv.synth import fgn, powerlaw_noise
from tfhrv.synth.multifractal import mrw

LENGTHS = np.array([4000, 12000, 40000, 120000])
FAMILIES = ("powerlaw", "fgn")
BETAS = {"powerlaw": np.array([0.0, 0.5, 1.0, 1.5]),
         "fgn": np.array([0.0, 0.4, 0.8, 0.96])}  # H = 0.5, 0.7, 0.9, 0.98
LAMBDA2 = np.array([0.0, 0.01, 0.02, 0.035, 0.05, 0.075, 0.1, 0.15, 0.2, 0.3])
SEED = 20020316


def null_series(family: str, n: int, beta: float, rng: np.random.Generator) -> np.ndarray:
    """800 ms + 50 ms x a standardised monofractal path (an NN-like series)."""
    if family == "fgn":
        x = fgn(n, (beta + 1.0) / 2.0, rng=rng)
    else:
        x = powerlaw_noise(4 * n, beta, rng=rng)[:n]
    return 800.0 + 50.0 * (x - x.mean()) / x.std()


def mrw_series(n: int, lambda2: float, rng: np.random.Generator) -> np.ndarray:
    x = mrw(n, lambda2, rng=rng)
    return 800.0 + 50.0 * (x - x.mean()) / x.std()


def run(reps: int, lengths: np.ndarray) -> dict[str, np.ndarray]:
    nq = DEFAULT_Q.size
    shape_null = (len(FAMILIES), BETAS["powerlaw"].size, lengths.size, reps)
    out = {"null_c1": np.full(shape_null, np.nan), "null_c2": np.full(shape_null, np.nan),
           "null_width": np.full(shape_null, np.nan),
           "null_h": np.full((*shape_null, nq), np.nan),
           "mrw_c2": np.full((LAMBDA2.size, lengths.size, reps), np.nan),
           "mrw_width": np.full((LAMBDA2.size, lengths.size, reps), np.nan)}
    for li, n in enumerate(lengths.tolist()):
        t0 = time.perf_counter()
        for fi, fam in enumerate(FAMILIES):
            for bi, beta in enumerate(BETAS[fam]):
                rng = np.random.default_rng([SEED, 0, bi, li] if fi == 0
                                            else [SEED, 2, bi, li])
                for r in range(reps):
                    h, width, c1, c2, _, _ = raw_estimates(null_series(fam, n, beta, rng))
                    out["null_h"][fi, bi, li, r] = h
                    out["null_width"][fi, bi, li, r] = width
                    out["null_c1"][fi, bi, li, r] = c1
                    out["null_c2"][fi, bi, li, r] = c2
        for ki, lam2 in enumerate(LAMBDA2):
            rng = np.random.default_rng([SEED, 1, ki, li])
            for r in range(reps):
                _, width, _, c2, _, _ = raw_estimates(mrw_series(n, lam2, rng))
                out["mrw_width"][ki, li, r] = width
                out["mrw_c2"][ki, li, r] = c2
        print(f"n = {n}: {time.perf_counter() - t0:.0f} s", flush=True)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=100)
    ap.add_argument("--quick", action="store_true", help="10 replicates, two lengths")
    ap.add_argument("--out", type=Path,
                    default=Path(__file__).resolve().parents[1] / "tfhrv/data/multifractal.npz")
    a = ap.parse_args()
    lengths = LENGTHS[:2] if a.quick else LENGTHS
    reps = 10 if a.quick else a.reps
    t0 = time.perf_counter()
    out = run(reps, lengths)
    betas = np.stack([BETAS[f] for f in FAMILIES])
    np.savez_compressed(a.out, lengths=lengths, betas=betas, lambda2=LAMBDA2, q=DEFAULT_Q,
                        **{k: v.astype(np.float32) for k, v in out.items()})
    wall = time.perf_counter() - t0
    print(f"wrote {a.out} ({reps} replicates per cell) in {wall / 60:.1f} min")
    print("null c2: mean (SD) by family and beta (rows) and length (columns)")
    for fi, fam in enumerate(FAMILIES):
        for bi, beta in enumerate(BETAS[fam]):
            cells = "  ".join(f"{np.nanmean(out['null_c2'][fi, bi, li]):+.4f} "
                              f"({np.nanstd(out['null_c2'][fi, bi, li]):.4f})"
                              for li in range(lengths.size))
            print(f"  {fam} beta {beta:.2f}: {cells}")
    print("MRW c2: mean by lambda^2 (rows) and length (columns)")
    for ki, lam2 in enumerate(LAMBDA2):
        cells = "  ".join(f"{np.nanmean(out['mrw_c2'][ki, li]):+.4f}"
                          for li in range(lengths.size))
        print(f"  lambda2 {lam2:.3f} (c2 = {-lam2:+.3f}): {cells}")


if __name__ == "__main__":
    main()
