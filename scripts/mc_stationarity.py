"""Monte-Carlo rates of the stationarity battery categories on synthetic windows.

Run on purpose (not part of the test suite):

    .venv/bin/python scripts/mc_stationarity.py [n_seeds]

Prints (1) the share of each category of ``stationarity_battery`` for synthetic cases
and window lengths, (2) the rejection rate of the surrogate drift test at alpha = 0.05
for the two end-mismatch choices and the two transforms of ``drift_test`` (n = 350) and
(3) its rejection rate on stationary independent noise of other distributions (Student t
with 3 degrees of freedom, lognormal, Laplace, Gaussian) with and without the normal-score
transform (n = 400). The tolerances in tests/test_stationarity.py and the numbers in the
``drift_test`` Notes come from these tables.
"""

from __future__ import annotations

import sys
from collections import Counter

import numpy as np

from tfhrv.stationarity.battery import CATEGORIES, drift_test, stationarity_battery
from tfhrv.synth import fgn


def _cases(n: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    wn = rng.standard_normal(n)
    g = fgn(n, 0.6, rng=seed)
    half = np.arange(n) >= n // 2
    return {
        "white": wn,
        "fgn0.6": g,
        "fgn0.9": fgn(n, 0.9, rng=seed + 10_000),
        "shift2sd": g + 2.0 * half,
        "var_x3": np.where(half, np.sqrt(3.0) * g, g),
        "walk": np.cumsum(wn),
        "trend3sd": wn + 3.0 * np.arange(n) / (n - 1),
    }


def main(n_seeds: int = 300) -> None:
    for n in (350, 1000):
        counts: dict[str, Counter] = {}
        for seed in range(n_seeds):
            for name, x in _cases(n, seed).items():
                res = stationarity_battery(800.0 + 40.0 * x, rng=seed)
                counts.setdefault(name, Counter())[res.category] += 1
        print(f"n = {n}, {n_seeds} seeds; share of each category")
        print(f"{'case':10s} " + " ".join(f"{c:>12s}" for c in CATEGORIES))
        for name, c in counts.items():
            row = " ".join(f"{c[k] / n_seeds:12.3f}" for k in CATEGORIES)
            print(f"{name:10s} {row}")
        print()
    n = 350
    print(f"drift test rejection rate at alpha = 0.05, n = {n}, {n_seeds} seeds")
    print(f"{'end_match':10s} {'transform':14s} {'fGn H=0.9':>10s} {'fGn H=0.95':>10s} "
          f"{'shift 2SD':>10s}")
    for end_match in ("none", "trim"):
        for transform in ("normal-scores", "none"):
            hits = np.zeros(3)
            for seed in range(n_seeds):
                step = 2.0 * (np.arange(n) >= n // 2)
                series = (fgn(n, 0.9, rng=seed + 1), fgn(n, 0.95, rng=seed + 7),
                          fgn(n, 0.6, rng=seed) + step)  # fmt: skip
                hits += [drift_test(s, end_match=end_match, transform=transform,
                                    rng=seed).pvalue < 0.05 for s in series]
            print(f"{end_match:10s} {transform:14s} "
                  + " ".join(f"{h / n_seeds:10.3f}" for h in hits))
    n = 400
    print()
    print(f"drift test rejection rate on independent noise, alpha = 0.05, n = {n}, "
          f"{n_seeds} seeds")
    draws = {"gaussian": lambda g: g.standard_normal(n), "t3": lambda g: g.standard_t(3, n),
             "lognormal": lambda g: g.lognormal(0.0, 0.8, n), "laplace": lambda g: g.laplace(
                 size=n)}
    print(f"{'transform':14s} " + " ".join(f"{k:>10s}" for k in draws))
    for transform in ("normal-scores", "none"):
        rates = []
        for i, draw in enumerate(draws.values()):
            gen = np.random.default_rng(1000 + i)
            rates.append(np.mean([drift_test(800.0 + 30.0 * draw(gen), transform=transform,
                                             rng=seed).pvalue < 0.05
                                  for seed in range(n_seeds)]))
        print(f"{transform:14s} " + " ".join(f"{r:10.3f}" for r in rates))

if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 300)
