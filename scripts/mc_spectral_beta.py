"""Monte-Carlo spread of the spectral estimators; sets the tolerances in tests/test_spectral.py.

Run on purpose (not part of the test suite):

    .venv/bin/python scripts/mc_spectral_beta.py [n_seeds]

Prints, for the settings the tests use, the mean and standard deviation over seeds of

* beta from the boxcar periodogram + log-binned fit (n = 2**15 samples at 1 Hz, band
  1e-3..1e-1 Hz, 20 bins) on 1/f^beta Gaussian noise from the independent package
  ``colorednoise`` (Timmer & König 1995 method) and on Davies-Harte fGn;
* the shift of that beta when a quadratic trend 20 (t/T)^2 is added to fGn (H = 0.7);
* the Lomb-Scargle band power of a single sinusoid sampled at jittered beat-like times,
  relative to A^2/2;
* beta from :func:`beta_from_nn` (periodogram, Welch, Lomb-Scargle, Lomb-Scargle with the
  middle 10 % of beats removed) on NN series 800 + 40 fGn(H = 0.8) ms, 2**14 beats,
  band 1e-3..1e-1 Hz (expected beta = 2H - 1 = 0.6).
"""

from __future__ import annotations

import sys

import colorednoise
import numpy as np

from tfhrv.estimators.spectral import (
    band_powers,
    beta_from_nn,
    lomb_scargle_psd,
    periodogram_psd,
    spectral_exponent,
)
from tfhrv.synth import fgn

N = 2**15
BAND = (1e-3, 1e-1)


def beta_of(x: np.ndarray) -> float:
    s = periodogram_psd(x, fs_hz=1.0)
    return spectral_exponent(s.frequency_hz, s.psd, band=BAND).exponent


def main(n_seeds: int) -> None:
    seeds = range(1000, 1000 + n_seeds)
    print(f"n = {N}, band = {BAND} Hz, {n_seeds} seeds")
    for beta in (0.0, 1.0, 2.0):
        est = np.array(
            [beta_of(colorednoise.powerlaw_psd_gaussian(beta, N, random_state=s)) for s in seeds]
        )
        print(f"colorednoise beta={beta:.0f}: mean {est.mean():.4f}  sd {est.std(ddof=1):.4f}")
    for h in (0.3, 0.7, 0.9):
        est = np.array([beta_of(fgn(N, h, rng=s)) for s in seeds])
        print(f"fGn H={h} (beta={2 * h - 1:.1f}): mean {est.mean():.4f}  sd {est.std(ddof=1):.4f}")
    ramp = 20.0 * (np.arange(N) / N) ** 2
    shift = np.array([beta_of(x + ramp) - beta_of(x) for x in (fgn(N, 0.7, rng=s) for s in seeds)])
    print(f"quadratic trend shift: mean {shift.mean():.4f}  sd {shift.std(ddof=1):.4f}  "
          f"min {shift.min():.4f}")
    for f0, amp in ((0.1, 20.0), (0.25, 10.0)):
        rel = []
        for s in seeds:
            rng = np.random.default_rng(s)
            tb = np.cumsum(rng.uniform(0.6, 1.0, 375))
            y = amp * np.sin(2 * np.pi * f0 * tb + rng.uniform(0, 2 * np.pi))
            dur = tb[-1] - tb[0]
            grid = np.arange(1, int(0.6 * dur * 4)) / (dur * 4)
            bp = band_powers(lomb_scargle_psd(tb, y, frequency_hz=grid))
            rel.append(bp["LF" if f0 < 0.15 else "HF"] / (amp**2 / 2) - 1)
        rel = np.array(rel)
        print(f"Lomb-Scargle {f0} Hz band power / (A^2/2) - 1: mean {rel.mean():.4f}  "
              f"sd {rel.std(ddof=1):.4f}  max |.| {np.abs(rel).max():.4f}")
    n_nn = 2**14
    gap = np.ones(n_nn, dtype=bool)
    gap[int(0.45 * n_nn):int(0.55 * n_nn)] = False
    rows: dict[str, list[float]] = {"periodogram": [], "welch": [], "lomb-scargle": [],
                                    "lomb-scargle, 10 % gap": []}
    for s in seeds:
        rr = 800.0 + 40.0 * fgn(n_nn, 0.8, rng=s)
        t = np.cumsum(rr) / 1000.0
        for m in ("periodogram", "welch", "lomb-scargle"):
            rows[m].append(beta_from_nn(t, rr, band=BAND, method=m).exponent)
        rows["lomb-scargle, 10 % gap"].append(
            beta_from_nn(t, rr, band=BAND, method="lomb-scargle", keep=gap).exponent
        )
    for m, v in rows.items():
        v = np.array(v)
        print(f"beta_from_nn {m} (target 0.6): mean {v.mean():.4f}  sd {v.std(ddof=1):.4f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100)
