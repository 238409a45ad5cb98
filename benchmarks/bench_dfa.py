"""Speed of the DFA kernel and the wavelet estimator on a 24-h-sized series.

Run:  python benchmarks/bench_dfa.py [--n 100000] [--full]

Times (median of 5 runs, time.perf_counter):
- ``dfa_fluctuation`` over all default scales (4..N/4, 16 per decade) for q = 1, 2, 3;
- a textbook DFA (numpy.polyfit in every box, boxes from both ends; Peng et al. 1995,
  doi:10.1063/1.166141) on the same series. By default it runs on every 4th default
  scale and its full-grid time is extrapolated by the number of boxes (its cost is one
  polyfit per box); ``--full`` runs it on the whole grid once;
- ``wavelet_exponent`` (db3) on the same series.
Targets: DFA-1 < 50 ms, >= 100x faster than the textbook version, wavelet < 50 ms.
On a busy machine multi-threaded BLAS can be slow for the small matrix products;
compare with OPENBLAS_NUM_THREADS=1.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from tfhrv.estimators.dfa import default_scales, dfa_fluctuation
from tfhrv.estimators.wavelet import wavelet_exponent


def textbook_dfa(x: np.ndarray, scales: np.ndarray, order: int) -> np.ndarray:
    y = np.cumsum(x - x.mean())
    out = []
    for n in scales.tolist():
        m = y.size // n
        k = np.arange(n, dtype=np.float64)
        res = []
        for s0 in [*range(0, m * n, n), *range(y.size - m * n, y.size, n)]:
            seg = y[s0:s0 + n]
            coef = np.polyfit(k, seg, order)
            res.append(np.mean((seg - np.polyval(coef, k)) ** 2))
        out.append(np.sqrt(np.mean(res)))
    return np.array(out)


def median_time(func, repeats: int = 5) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=100_000, help="series length (beats)")
    parser.add_argument("--full", action="store_true", help="run the textbook DFA fully")
    args = parser.parse_args()
    x = np.random.default_rng(0).standard_normal(args.n)
    scales = default_scales(args.n)
    print(f"N = {args.n} beats, {scales.size} default scales {scales[0]}..{scales[-1]}")
    print(f"{'method':<34}{'time (ms)':>12}{'target':>12}")
    fast = {}
    for q in (1, 2, 3):
        fast[q] = median_time(lambda q=q: dfa_fluctuation(x, order=q))
        target = "< 50" if q == 1 else ""
        print(f"{f'DFA-{q} fast kernel, all scales':<34}{1e3 * fast[q]:>12.1f}{target:>12}")

    sub = scales if args.full else scales[::4]
    t0 = time.perf_counter()
    ref = textbook_dfa(x, sub, 1)
    t_sub = time.perf_counter() - t0
    boxes = np.sum(2 * (args.n // scales))
    boxes_sub = np.sum(2 * (args.n // sub))
    t_text = t_sub * boxes / boxes_sub
    check = dfa_fluctuation(x, scales=sub, order=1).fluctuation
    rel = float(np.max(np.abs(check / ref - 1)))
    how = "run fully" if args.full else f"{sub.size} scales, scaled by boxes"
    print(f"{'DFA-1 textbook polyfit (' + how + ')':<34}{1e3 * t_text:>12.1f}")
    print(f"{'speed ratio textbook / fast':<34}{t_text / fast[1]:>12.0f}{'>= 100':>12}")
    print(f"{'max relative difference of F':<34}{rel:>12.1e}")
    t_w = median_time(lambda: wavelet_exponent(x))
    print(f"{'wavelet_exponent (db3)':<34}{1e3 * t_w:>12.1f}{'< 50':>12}")


if __name__ == "__main__":
    main()
