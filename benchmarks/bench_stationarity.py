"""Timing of the stationarity battery (run on purpose, not part of the test suite).

    .venv/bin/python benchmarks/bench_stationarity.py

Times each stage (ADF, KPSS level + trend, surrogate drift test) and the whole
battery on a 5-min window (~350 beats) and a 4-h window (~15,000 beats), then the
total for a 24-h record cut into 288 short + 24 long windows. Target (design): the
whole battery on every window of a 24-h record in under about 0.6 s. For comparison
it also times statsmodels' ``adfuller`` (AIC search), which our Gram/Cholesky ADF
replaces.

BLAS threads are limited to one unless OPENBLAS_NUM_THREADS is already set: on a small
shared machine, multi-threaded OpenBLAS made the ADF of a 4-h window 20-30 times slower
(578 ms against 18 ms, measured on 2 busy cores).
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # before numpy is imported

import time  # noqa: E402

import numpy as np  # noqa: E402
from statsmodels.tsa.stattools import adfuller  # noqa: E402

from tfhrv.stationarity.battery import (  # noqa: E402
    adf_test,
    drift_test,
    kpss_test,
    stationarity_battery,
)
from tfhrv.synth import fgn  # noqa: E402

SHORT, LONG = 350, 15_000
N_SHORT, N_LONG = 288, 24


def _nn(n: int, seed: int) -> np.ndarray:
    """Heart-rate-like NN window (ms): 800 + 40 fGn with H = 0.9 (beta = 0.8)."""
    return 800.0 + 40.0 * fgn(n, 0.9, rng=seed)


def _time(fn, windows) -> float:
    t0 = time.perf_counter()
    for w in windows:
        fn(w)
    return time.perf_counter() - t0


def main() -> None:
    stages = {
        "ADF": adf_test,
        "KPSS c+ct": lambda w: (kpss_test(w), kpss_test(w, regression="ct")),
        "drift": drift_test,
        "battery": stationarity_battery,
    }
    short = [_nn(SHORT, s) for s in range(N_SHORT)]
    long = [_nn(LONG, 10_000 + s) for s in range(N_LONG)]
    stationarity_battery(short[0])  # warm-up (imports, FFT plans)
    threads = os.environ["OPENBLAS_NUM_THREADS"]
    print(f"OPENBLAS_NUM_THREADS={threads}, load average {os.getloadavg()[0]:.1f}")
    print(f"{'stage':12s} {'1 short ms':>11s} {'1 long ms':>10s} {'24-h total s':>13s}")
    for name, fn in stages.items():
        ts = _time(fn, short)
        tl = _time(fn, long)
        print(f"{name:12s} {1e3 * ts / N_SHORT:11.2f} {1e3 * tl / N_LONG:10.2f} {ts + tl:13.3f}")
    t_sm_short = _time(lambda w: adfuller(w, autolag="AIC", result_object=True), short[:20]) / 20
    t_sm_long = _time(lambda w: adfuller(w, autolag="AIC", result_object=True), long[:1])
    print(
        f"{'sm adfuller':12s} {1e3 * t_sm_short:11.2f} {1e3 * t_sm_long:10.2f} "
        f"{N_SHORT * t_sm_short + N_LONG * t_sm_long:13.3f}  (extrapolated)"
    )


if __name__ == "__main__":
    main()
