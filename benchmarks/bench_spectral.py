"""Timing of the spectral path on a 24-h-sized record (100 000 beats).

    .venv/bin/python benchmarks/bench_spectral.py [--lomb-scargle]

Median of 5 runs (time.perf_counter) for: cubic-spline resampling at 1 Hz; periodogram +
log-binned fit; Welch + fit; and the whole :func:`beta_from_nn` call (resample included).
Target: < 50 ms for the spectral estimate (PSD + fit) of one record.  ``--lomb-scargle``
adds one timed Lomb-Scargle run (slow: O(beats x frequencies)).
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable

import numpy as np
from scipy import fft as sp_fft

from tfhrv.estimators.spectral import (
    beta_from_nn,
    periodogram_psd,
    spectral_exponent,
    welch_psd,
)
from tfhrv.signal.resample import resample_even
from tfhrv.synth import fgn

N_BEATS = 100_000
RUNS = 5
TARGET_MS = 50.0


def median_ms(fn: Callable[[], object], runs: int = RUNS) -> float:
    fn()  # warm-up (imports, FFT plans)
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return 1000.0 * float(np.median(times))


def main() -> None:
    rr = 800.0 + 40.0 * fgn(N_BEATS, 0.95, rng=20261202)
    t = np.cumsum(rr) / 1000.0
    fs = 1.0
    es = resample_even(t, rr, fs_hz=fs)
    x = es.value_ms
    nfft = sp_fft.next_fast_len(x.size, real=True)
    print(f"{N_BEATS} beats, {t[-1] / 3600:.1f} h, resampled at {fs:g} Hz -> {x.size} samples "
          f"(FFT length {nfft}); median of {RUNS} runs")

    def per_fit():
        s = periodogram_psd(x, fs_hz=fs, nfft=nfft)
        return spectral_exponent(s.frequency_hz, s.psd, duration_s=x.size / fs)

    def welch_fit():
        s = welch_psd(x, fs_hz=fs, nperseg=32768)
        return spectral_exponent(s.frequency_hz, s.psd)

    spectral = [
        ("periodogram + log-binned fit", median_ms(per_fit)),
        ("Welch (nperseg 32768) + fit", median_ms(welch_fit)),
    ]
    other = [
        ("resample_even (cubic spline, 1 Hz)", median_ms(lambda: resample_even(t, rr, fs_hz=fs))),
        ("beta_from_nn periodogram (all)", median_ms(lambda: beta_from_nn(t, rr))),
        ("beta_from_nn welch (all)", median_ms(lambda: beta_from_nn(t, rr, method="welch"))),
    ]
    for name, ms in spectral:
        verdict = "ok" if ms < TARGET_MS else f"OVER the {TARGET_MS:g} ms target"
        print(f"  {name:<38s} {ms:8.1f} ms  {verdict}")
    for name, ms in other:
        print(f"  {name:<38s} {ms:8.1f} ms")
    print(f"  beta (periodogram) = {per_fit().exponent:.3f}, (Welch) = {welch_fit().exponent:.3f}")
    if "--lomb-scargle" in sys.argv:
        t0 = time.perf_counter()
        fit = beta_from_nn(t, rr, method="lomb-scargle")
        ms = 1000 * (time.perf_counter() - t0)
        name = "beta_from_nn lomb-scargle (1 run)"
        print(f"  {name:<38s} {ms:8.1f} ms  beta = {fit.exponent:.3f}")


if __name__ == "__main__":
    main()
