"""The scan against a naive composition of general-purpose library calls.

Run:  OPENBLAS_NUM_THREADS=1 python benchmarks/bench_naive_scan.py [--days 1] [--runs 1]

On the same synthetic 24-h record (``tfhrv.synth.simulate_recording(days=1, rng=1)``) and
the same windows of both tiers, the naive composition does per window what a
straightforward script would: ``statsmodels.tsa.stattools.adfuller`` with its defaults
(lag by AIC up to the Schwert maximum), ``kpss`` level and trend with its defaults, the
surrogate drift statistics with one FFT per surrogate in a Python loop, DFA-1 with
``numpy.polyfit`` in every box (boxes from both ends; Peng et al. 1995) on the default
scales, the periodogram slope (``scipy.signal.periodogram`` and ``numpy.polyfit`` on log
axes) and the wavelet log-scale slope (``pywt.wavedec``).  It skips calibration,
resampling, local slopes and writing, so the ratio understates what the scan saves.
Prints the time of both and the ratio naive / scan.
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import warnings  # noqa: E402

import numpy as np  # noqa: E402
import pywt  # noqa: E402
from scipy import signal  # noqa: E402
from statsmodels.tools.sm_exceptions import InterpolationWarning  # noqa: E402
from statsmodels.tsa.stattools import adfuller, kpss  # noqa: E402

from tfhrv.analysis.windows import LONG, SHORT, tier_windows  # noqa: E402
from tfhrv.dataset.build import scan  # noqa: E402
from tfhrv.estimators.dfa import default_scales  # noqa: E402
from tfhrv.signal.clean import clean  # noqa: E402
from tfhrv.synth import simulate_recording  # noqa: E402


def textbook_dfa(x: np.ndarray, scales: np.ndarray) -> np.ndarray:
    """DFA-1 with numpy.polyfit in every box, boxes tiled from both ends."""
    y = np.cumsum(x - x.mean())
    out = []
    for n in scales:
        m = y.size // n
        starts = [i * n for i in range(m)] + [y.size - (i + 1) * n for i in range(m)]
        k = np.arange(n)
        rss = 0.0
        for s in starts:
            seg = y[s:s + n]
            coef = np.polyfit(k, seg, 1)
            rss += float(np.sum((seg - np.polyval(coef, k)) ** 2))
        out.append(np.sqrt(rss / (2 * m * n)))
    return np.array(out)


def naive_drift(x: np.ndarray, k: int = 6, b: int = 99, seed: int = 0) -> float:
    """Mean/SD drift p-value against phase-randomised surrogates, one FFT per surrogate."""
    gen = np.random.default_rng(seed)

    def stats(z):
        parts = np.array_split(z, k)
        means = np.array([p.mean() for p in parts])
        sds = np.array([p.std(ddof=1) for p in parts])
        return means.std(ddof=1) / np.sqrt(np.mean(sds ** 2)), sds.max() / sds.min()

    spec = np.fft.rfft(x)
    obs = stats(x)
    count = 0
    for _ in range(b):
        ph = np.exp(2j * np.pi * gen.random(spec.size))
        ph[0] = 1.0
        s = stats(np.fft.irfft(spec * ph, n=x.size))
        count += s[0] >= obs[0] or s[1] >= obs[1]
    return (1 + count) / (b + 1)


def naive_window(nn: np.ndarray) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", InterpolationWarning)
        warnings.simplefilter("ignore", FutureWarning)  # kpss tuple-return notice
        adfuller(nn, autolag="AIC")
        kpss(nn, regression="c", nlags="auto")
        kpss(nn, regression="ct", nlags="auto")
    naive_drift(nn)
    sc = default_scales(nn.size)
    f = textbook_dfa(nn, sc)
    np.polyfit(np.log10(sc), np.log10(f), 1)
    fr, p = signal.periodogram(nn, fs=1.0)
    keep = (fr > 0) & (p > 0)
    np.polyfit(np.log10(fr[keep]), np.log10(p[keep]), 1)
    coeffs = pywt.wavedec(nn, "db3")
    energies = [np.mean(c ** 2) for c in coeffs[1:]]
    np.polyfit(np.arange(len(energies)), np.log2(energies), 1)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--days", type=float, default=1.0)
    ap.add_argument("--runs", type=int, default=1)
    args = ap.parse_args()
    cleaned = clean(simulate_recording(days=args.days, rng=1).recording)
    wins = [w for tier in (SHORT, LONG) for w in tier_windows(cleaned, tier)
            if w.nn_ms.size >= tier.min_beats]
    scan(cleaned)  # warm-up (imports, caches)
    t_scan = min(_timed(lambda: scan(cleaned)) for _ in range(args.runs))
    t_naive = min(_timed(lambda: [naive_window(w.nn_ms) for w in wins])
                  for _ in range(args.runs))
    print(f"{len(wins)} windows; tfhrv scan {t_scan:.2f} s; naive composition "
          f"{t_naive:.1f} s; ratio naive / scan {t_naive / t_scan:.0f}x")


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


if __name__ == "__main__":
    main()
