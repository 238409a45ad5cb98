"""Compute the calibration tables shipped in tfhrv/data/calibration.npz.

For every preset (tfhrv.estimators.presets), every true exponent on the grid and every
series length, simulate the process, map it to an NN-like series (800 ms + 50 ms x
standardised path), run the preset and record the estimate together with the class
statistic of the same path (:func:`tfhrv.calibration.calibrate.class_statistic`).  All
presets valid at a length run on the same simulated paths (one DFA fluctuation function
serves alpha1, alpha2, alpha_long and the class statistic).

Three simulated families (exact generators):

- ``fgn``: fractional Gaussian noise, H = alpha in (0, 1), Davies & Harte (1987);
- ``fbm``: fractional Brownian motion, the running sum of fGn with H = alpha - 1;
- ``powerlaw``: Gaussian 1/f^beta noise with beta = 2 alpha - 1 > 1 (Timmer & Koenig
  1995), generated 4x longer and cut to length so that it is not periodic.

Two calibration models are built from them (see tfhrv/estimators/calibrate.py):

- ``powerlaw`` = fgn below alpha 1 and powerlaw above, one belt (no class); continuous
  across alpha = 1, as HRV is modelled as 1/f-type noise across that border (Kobayashi &
  Musha 1982);
- ``fgn-fbm`` = the dichotomous fGn/fBm model (Eke et al. 2000): fgn below 1, fbm above,
  with a belt per class ("noise": class statistic <= 1, "motion": > 1) and one over all
  replicates ("any", for a series whose class statistic cannot be computed).  fBm with small H
  looks like fGn at the scales of a few beats (DFA-1 over 4-16 beats gives about 0.74 for
  alpha = 1.05), so the two branches overlap and only the class statistic, read at the
  longest scales, separates them; the belts are conditional on it.

Per cell (model, class, truth, length) the table keeps the share of replicates in the
class, the mean and SD of the estimates, and the 2.5 / 97.5 % quantiles as mean + SD x the
quantiles of the standardised estimates pooled over the cell and its two neighbours on the
truth grid (same family): with R replicates a raw 2.5 % quantile rests on 0.025 R points,
the pooled standardised one on three times as many, and the SD is estimated from all R.
Cells with fewer than ``MIN_IN_CLASS`` replicates in the class are NaN.

DFA of order 2 and 3 (``tfhrv scan --dfa-order``) has its own tables, added to the same
file by ``--dfa-order 2`` and ``--dfa-order 3`` (the class statistic stays DFA-1).

Run:  python scripts/make_calibration.py [--reps 1500] [--workers 2] [--quick]
      python scripts/make_calibration.py --dfa-order 2 --reps 800   (then 3)
Takes about 35 minutes on two cores with R = 1500 (750 at 65536 beats), about 15 per
extra DFA order with R = 800.

References
----------
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
Timmer J, Koenig M. On generating power law noise. Astron Astrophys 1995;300:707-710.
Eke A, Herman P, Bassingthwaighte JB, et al. Physiological time series: distinguishing
fractal noises from motions. Pflugers Arch 2000;439:403-415.
Kobayashi M, Musha T. 1/f fluctuation of heartbeat period. IEEE Trans Biomed Eng
1982;29:456-457.
"""

from __future__ import annotations

import argparse
import time
import warnings
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from tfhrv.calibration.calibrate import CLASS_THRESHOLD, MODELS, class_range
from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.dfa import dfa_ranges
from tfhrv.estimators.presets import DFA_PRESETS, PRESETS, dfa_fit_range, estimate
from tfhrv.synth import fgn, powerlaw_noise

#: true DFA alpha of each family (fGn: H = alpha; fBm: H = alpha - 1; powerlaw: beta =
#: 2 alpha - 1); the points near 0, 1 and 2 keep H = 0.1 and 0.9 inside the grid.
NOISE_ALPHAS = np.array([0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.98])
MOTION_ALPHAS = NOISE_ALPHAS + 1.0
FAMILIES = {"fgn": NOISE_ALPHAS, "fbm": MOTION_ALPHAS, "powerlaw": MOTION_ALPHAS}
#: the families of each model, in truth order
MODEL_FAMILIES = {"powerlaw": ("fgn", "powerlaw"), "fgn-fbm": ("fgn", "fbm")}
LENGTHS = {
    "alpha1": [128, 256, 512, 1024, 4096, 16384, 65536],
    "alpha2": [256, 512, 1024, 4096, 16384, 65536],
    "alpha_long": [1024, 4096, 16384, 65536],
    "beta_spectral_short": [128, 256, 512, 1024],
    "beta_wavelet_short": [128, 256, 512, 1024],
    "beta_spectral_long": [8192, 16384, 65536],
    "beta_wavelet_long": [16384, 65536],
}
ALL_LENGTHS = sorted({n for v in LENGTHS.values() for n in v})
#: a class cell needs this many replicates for its mean, SD and quantiles
MIN_IN_CLASS = 20
Z_LOW, Z_HIGH = 0.025, 0.975


def path(family: str, alpha: float, n: int, seed: int) -> np.ndarray:
    if family == "fgn":
        x = fgn(n, alpha, rng=seed)
    elif family == "fbm":
        x = np.cumsum(fgn(n, alpha - 1.0, rng=seed))
    else:
        x = powerlaw_noise(4 * n, 2 * alpha - 1, rng=seed)[n: 2 * n]
    x = (x - x.mean()) / x.std()
    return 800.0 + 50.0 * x


def presets_at(n: int) -> list[str]:
    return [p for p in PRESETS if n in LENGTHS[p]]


def one_path(x: np.ndarray, order: int = 1) -> dict[str, float]:
    """Every preset valid at len(x) (only the DFA ones, of this order, when order > 1)
    and the class statistic (always DFA-1), from one path."""
    n = x.size
    out: dict[str, float] = {}
    ranges = {p: dfa_fit_range(p, n) for p in presets_at(n) if p in DFA_PRESETS}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if order == 1:
            fits, _ = dfa_ranges(x, fit_ranges={**ranges, "_class": class_range(n)}, order=1)
        else:
            fits, _ = dfa_ranges(x, fit_ranges=ranges, order=order) if ranges else ({}, None)
            fits.update(dfa_ranges(x, fit_ranges={"_class": class_range(n)}, order=1)[0])
        out["_class"] = fits["_class"].exponent if "_class" in fits else np.nan
        for p in presets_at(n):
            if p in DFA_PRESETS:
                out[p] = fits[p].exponent if p in fits else np.nan
                continue
            if order != 1:
                continue
            try:
                out[p] = estimate(p, x).exponent
            except InsufficientDataError:
                out[p] = np.nan
    return out


def cell(args) -> np.ndarray:
    """(reps, 1 + presets) array: class statistic, then each preset (NaN if not valid)."""
    family, alpha, n, reps, seed0, order = args
    res = np.full((reps, 1 + len(PRESETS)), np.nan)
    for r in range(reps):
        got = one_path(path(family, alpha, n, seed0 + r), order)
        res[r, 0] = got["_class"]
        for k, p in enumerate(PRESETS):
            res[r, 1 + k] = got.get(p, np.nan)
    return res


def summarise(samples: list[np.ndarray]) -> tuple[np.ndarray, ...]:
    """Share (of all replicates), mean, SD, pooled-standardised quantiles per truth."""
    t = len(samples)
    share, mean, sd, ql, qh = (np.full(t, np.nan) for _ in range(5))
    z = [None] * t
    for i, (est, total) in enumerate(samples):
        share[i] = est.size / total if total else np.nan
        if est.size >= MIN_IN_CLASS:
            mean[i] = est.mean()
            sd[i] = est.std(ddof=1)
            z[i] = (est - mean[i]) / sd[i] if sd[i] > 0 else np.zeros_like(est)
    for i in range(t):
        if z[i] is None:
            continue
        pool = np.concatenate([z[j] for j in (i - 1, i, i + 1) if 0 <= j < t and z[j] is not None])
        zl, zh = np.quantile(pool, [Z_LOW, Z_HIGH])
        ql[i], qh[i] = mean[i] + sd[i] * zl, mean[i] + sd[i] * zh
    return share, mean, sd, ql, qh


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--reps", type=int, default=1500)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--quick", action="store_true", help="R = 60, for a trial run")
    ap.add_argument("--dfa-order", type=int, choices=(1, 2, 3), default=1,
                    help="1: every preset (a new file); 2 or 3: the DFA presets of that "
                    "order, added to the existing file as <preset>.q<order>")
    ap.add_argument("--out", default=str(Path(__file__).resolve().parents[1] / "tfhrv" / "data"
                                          / "calibration.npz"))
    args = ap.parse_args()
    reps_base = 60 if args.quick else args.reps
    t0 = time.perf_counter()
    order_ = args.dfa_order
    jobs, keys = [], []
    for f_i, (family, alphas) in enumerate(FAMILIES.items()):
        for a_i, alpha in enumerate(alphas):
            for l_i, n in enumerate(ALL_LENGTHS):
                reps = reps_base if n <= 16384 else max(40, reps_base // 2)
                seed0 = 10_000_000 * f_i + 100_000 * a_i + 10_000 * l_i + 30_000_000 * (
                    order_ - 1)
                for c0 in range(0, reps, 250):  # chunks keep both workers busy
                    jobs.append((family, float(alpha), int(n), min(250, reps - c0), seed0 + c0,
                                 order_))
                    keys.append((family, a_i, n))
    # the largest jobs first, so that the pool does not end on one long job
    order = sorted(range(len(jobs)), key=lambda j: -jobs[j][2] * jobs[j][3])
    raw: dict[tuple, list[np.ndarray]] = {}
    with ProcessPoolExecutor(args.workers) as pool:
        done = 0
        for j, res in zip(order, pool.map(cell, [jobs[j] for j in order], chunksize=1),
                          strict=True):
            raw.setdefault(keys[j], []).append(res)
            done += 1
            if done % 50 == 0:
                print(f"{done}/{len(jobs)} jobs at {time.perf_counter() - t0:7.1f} s", flush=True)
    raw = {k: np.concatenate(v) for k, v in raw.items()}

    arrays: dict[str, np.ndarray] = {}
    if order_ != 1:
        with np.load(args.out) as z:
            arrays.update({k: z[k] for k in z.files})
    names = [str(v) for v in arrays.get("presets", [])]
    for p_i, preset in enumerate(PRESETS):
        if order_ != 1 and preset not in DFA_PRESETS:
            continue
        lengths = LENGTHS[preset]
        name = preset if order_ == 1 else f"{preset}.q{order_}"
        if name not in names:
            names.append(name)
        for model in MODELS:
            fams = MODEL_FAMILIES[model]
            alpha = np.concatenate([FAMILIES[f] for f in fams])
            truth = alpha if preset.startswith("alpha") else 2 * alpha - 1
            classes = ("any",) if model == "powerlaw" else ("any", "noise", "motion")
            shape = (len(classes), truth.size, len(lengths))
            tab = {k: np.full(shape, np.nan) for k in ("share", "mean", "sd", "q_low", "q_high")}
            for l_i, n in enumerate(lengths):
                for c_i, cls in enumerate(classes):
                    for fam in fams:
                        lo = 0 if fam == "fgn" else NOISE_ALPHAS.size
                        samples = []
                        for a_i in range(FAMILIES[fam].size):
                            r = raw[(fam, a_i, n)]
                            est, stat = r[:, 1 + p_i], r[:, 0]
                            ok = np.isfinite(est)
                            if cls == "noise":
                                ok &= stat <= CLASS_THRESHOLD
                            elif cls == "motion":
                                ok &= stat > CLASS_THRESHOLD
                            samples.append((est[ok], r.shape[0]))
                        out = summarise(samples)
                        for key, v in zip(("share", "mean", "sd", "q_low", "q_high"), out,
                                           strict=True):
                            tab[key][c_i, lo: lo + v.size, l_i] = v
            pre = f"{name}__{model}__"
            arrays.update({pre + "truth": truth, pre + "lengths": np.array(lengths),
                           pre + "classes": np.array(classes),
                           pre + "n_rep": np.array(reps_base)})
            arrays.update({pre + k: v.astype(np.float32) for k, v in tab.items()})
            bias = tab["mean"][0, :, -1] - truth if model == "powerlaw" else None
            if bias is not None:
                print(f"{name:22s} {model:9s} bias at n={lengths[-1]}: "
                      + " ".join(f"{b:+.2f}" for b in bias), flush=True)
    arrays["presets"] = np.array(names)
    arrays["models"] = np.array(MODELS)
    Path(args.out).parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(args.out).with_suffix(".tmp.npz")
    np.savez_compressed(tmp, **arrays)
    tmp.replace(args.out)
    print(f"wrote {args.out} ({Path(args.out).stat().st_size / 1024:.0f} KiB) in "
          f"{time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
