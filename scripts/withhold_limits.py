"""Measure the DFA RMS departure behind tfhrv.analysis.fits.WITHHOLD_LIMITS.

Prints, per DFA preset, the RMS departure (log10 units, weighted) of log F(n) from its
fitted line over windows of real records (the open long-term records of
../shared/data/open-rr, every 1500th beat a 300-beat window), over fGn series
(H 0.1-0.99, 100 seeds each, 300 beats) and over noisy sinusoids of 6-30 beats, whose
DFA curve is not a power law.  The limits are set above the largest real and fGn value
and below the sinusoids'.

Run: PYTHONPATH=. python scripts/withhold_limits.py [--seeds 100]   (about 30 s)
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from tfhrv.analysis.fits import WITHHOLD_LIMITS, _dfa_rms
from tfhrv.estimators.presets import estimate
from tfhrv.io.readers import read_recording
from tfhrv.signal.clean import clean
from tfhrv.synth import fgn

OPEN_RR = Path(__file__).resolve().parents[2] / "shared" / "data" / "open-rr"
PRESETS = ("alpha1", "alpha2")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=100)
    args = ap.parse_args()
    real = {p: [] for p in PRESETS}
    for f in sorted(OPEN_RR.glob("*/*.csv.gz")):
        x = clean(read_recording(f)).nn_ms
        for s in range(0, x.size - 300, 1500):
            for p in PRESETS:
                real[p].append(_dfa_rms(estimate(p, x[s:s + 300])))
    noise = {p: [] for p in PRESETS}
    for h in (0.1, 0.3, 0.5, 0.7, 0.9, 0.99):
        for seed in range(args.seeds):
            x = 800 + 40 * fgn(300, h, rng=seed)
            for p in PRESETS:
                noise[p].append(_dfa_rms(estimate(p, x)))
    print(f"{'preset':8} {'limit':>6} {'real n':>7} {'real q99.9':>10} {'real max':>9} "
          f"{'fGn max':>8}  sinusoid (period: rms)")
    k = np.arange(300)
    for p in PRESETS:
        r, g = np.array(real[p]), np.array(noise[p])
        sins = []
        for per in (6, 8, 12, 20, 30):
            wiggle = 3 * np.random.default_rng(0).standard_normal(300)
            x = 800 + 50 * np.sin(2 * np.pi * k / per) + wiggle
            sins.append(f"{per}: {_dfa_rms(estimate(p, x)):.3f}")
        lim = WITHHOLD_LIMITS[f"max_dfa_rms_{p}"]
        print(f"{p:8} {lim:6.3f} {r.size:7d} {np.quantile(r, 0.999):10.3f} {r.max():9.3f} "
              f"{g.max():8.3f}  {', '.join(sins)}")


if __name__ == "__main__":
    main()
