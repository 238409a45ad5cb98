"""Monte-Carlo coverage of the cosinor confidence intervals (tfhrv.circadian.core.cosinor).

Prints, for each CI method and model, the share of seeds whose 95 % interval holds the
true amplitude (first component) and the true peak time. Numbers quoted in the cosinor
docstring and in tests/test_circadian_core.py come from this script.

Run: .venv/bin/python scripts/circadian_core_coverage.py [n_seeds]
"""

from __future__ import annotations

import sys

import numpy as np

from tfhrv.circadian.core import cosinor

TAU, AMP, PEAK = 24.0, 5.0, 15.0


def coverage(method: str, harmonics: int, n: int, noise_sd: float, n_seeds: int):
    hits_a = hits_p = 0
    for seed in range(n_seeds):
        gen = np.random.default_rng(seed)
        t = np.sort(gen.uniform(0, 48, n))
        y = 70 + AMP * np.cos(2 * np.pi * (t - PEAK) / TAU) + gen.normal(0, noise_sd, n)
        fit = cosinor(t, y, harmonics=harmonics, ci_method=method)
        lo, hi = fit.component_amplitude_ci[0]
        hits_a += lo <= AMP <= hi
        truth = fit.acrophase_hours + (PEAK - fit.acrophase_hours + TAU / 2) % TAU - TAU / 2
        hits_p += fit.acrophase_ci_hours[0] <= truth <= fit.acrophase_ci_hours[1]
    return hits_a / n_seeds, hits_p / n_seeds


def main() -> None:
    n_seeds = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    print(f"{'method':8s} {'h':>2s} {'N':>4s} {'sd':>4s} {'amp cov':>8s} {'peak cov':>9s}")
    for method in ("delta", "ellipse"):
        for harmonics in (1, 2):
            for n, sd in ((60, 3.0), (240, 3.0), (60, 1.5), (60, 1.0)):
                ca, cp = coverage(method, harmonics, n, sd, n_seeds)
                print(f"{method:8s} {harmonics:2d} {n:4d} {sd:4.1f} {ca:8.3f} {cp:9.3f}")


if __name__ == "__main__":
    main()
