"""Monte-Carlo check of the scaling and spectral content of the synthetic recordings.

For each named profile of :data:`tfhrv.synth.PROFILES` and several seeds, simulates a 2-day
recording and measures, on the clean core of every sleep/wake segment (45 min away from
its edges, without the intervals the truth marks as ectopic, artifact or gap):

- DFA-1 alpha1 (every integer box size 4..16 beats, Peng et al. 1995) of each 5-min
  window, averaged per segment, against the segment's ``alpha1_expected`` (the exponent of
  the exact expected fluctuation function of the model, see ``truth["expected_exponents"]``);
- DFA-1 over 64..1024 beats of the whole core, against the component exponent ``alpha``
  and the model's ``alpha_long_expected``;
- Welch band powers of 5-min segments (4 Hz cubic-spline resampling, Task Force 1996
  bands) and the frequency of the largest PSD value in the LF band.

Prints Markdown tables (quoted in demo_data/README.md and in the synth tests' comments).
Usage::

    python scripts/mc_synth_scaling.py [--seeds 8] [--days 2]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from tfhrv.estimators.dfa import dfa
from tfhrv.estimators.spectral import band_powers, welch_psd
from tfhrv.signal.resample import resample_even
from tfhrv.synth import PROFILES, simulate_recording

MARGIN_S = 2700.0
WINDOW_S = 300.0


def segment_stats(sim) -> list[dict]:
    """Per-segment measurements on the clean core (segments with >= 2 h of core)."""
    rec, truth = sim.recording, sim.truth
    bad = np.zeros(rec.n_beats, dtype=bool)
    bad[truth["affected_index"]] = True
    rows = []
    for seg in truth["segments"]:
        idx = np.arange(seg["first_index"], seg["last_index"] + 1)
        t = rec.beat_time_s[idx]
        idx = idx[(t > seg["start_s"] + MARGIN_S) & (t < seg["end_s"] - MARGIN_S)]
        if idx.size == 0 or rec.beat_time_s[idx[-1]] - rec.beat_time_s[idx[0]] < 7200.0:
            continue
        ok = ~bad[idx]
        tt = rec.beat_time_s[idx]
        a1, a2 = [], []
        for a in np.arange(tt[0], tt[-1] - WINDOW_S, WINDOW_S):
            w = rec.rr_ms[idx[(tt >= a) & (tt < a + WINDOW_S) & ok]]
            if w.size >= 256:
                a1.append(dfa(w, fit_range=(4, 16)).exponent)
                a2.append(dfa(w, fit_range=(16, 64)).exponent)
        core = rec.rr_ms[idx[ok]]
        even = resample_even(tt, rec.rr_ms[idx], fs_hz=4.0, keep=ok)
        spec = welch_psd(even.value_ms, fs_hz=4.0, nperseg=1200)
        bp = band_powers(spec)
        lf = (spec.frequency_hz > 0.04) & (spec.frequency_hz <= 0.15)
        rows.append({
            "state": seg["state"], "alpha": seg["alpha"],
            "a1": float(np.mean(a1)), "a1_exp": seg["alpha1_expected"],
            "a2": float(np.mean(a2)), "a2_exp": seg["alpha2_expected"],
            "al": dfa(core, fit_range=(64, 1024)).exponent, "al_exp": seg["alpha_long_expected"],
            "lf": bp["LF"], "hf": bp["HF"], "lf_hf": bp.lf_hf,
            "lf_peak": float(spec.frequency_hz[lf][np.argmax(spec.psd[lf])]),
        })
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=8)
    parser.add_argument("--days", type=float, default=2.0)
    args = parser.parse_args(argv)
    print("| profile | state | segments | alpha1 expected | alpha1 5-min MC mean (SD) | "
          "mean diff to segment expectation (SE) | alpha2 expected | alpha2 5-min MC mean | "
          "alpha truth | alpha_long expected | "
          "DFA 64-1024 MC mean (SD) | LF ms^2 | HF ms^2 | LF/HF | LF peak Hz |")
    print("|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|")
    timing = {}
    for name in PROFILES:
        rows, exp = [], None
        for seed in range(args.seeds):
            t0 = time.perf_counter()
            sim = simulate_recording(days=args.days, profile=name, rng=seed)
            timing.setdefault(name, []).append(time.perf_counter() - t0)
            exp = sim.truth["expected_exponents"]
            rows += segment_stats(sim)
        for state in ("wake", "sleep"):
            r = [x for x in rows if x["state"] == state]
            a1 = np.array([x["a1"] for x in r])
            d = a1 - np.array([x["a1_exp"] for x in r])
            al = np.array([x["al"] for x in r])
            print(f"| {name} | {state} | {len(r)} | {exp['alpha1'][state]:.3f} | "
                  f"{a1.mean():.3f} ({a1.std(ddof=1):.3f}) | "
                  f"{d.mean():+.3f} ({d.std(ddof=1) / np.sqrt(d.size):.3f}) | "
                  f"{exp['alpha2'][state]:.3f} | {np.mean([x['a2'] for x in r]):.3f} | "
                  f"{r[0]['alpha']:.2f} | {exp['alpha_long'][state]:.3f} | "
                  f"{al.mean():.3f} ({al.std(ddof=1):.3f}) | "
                  f"{np.mean([x['lf'] for x in r]):.0f} | {np.mean([x['hf'] for x in r]):.0f} | "
                  f"{np.mean([x['lf_hf'] for x in r]):.2f} | "
                  f"{np.median([x['lf_peak'] for x in r]):.3f} |")
    for name, ts in timing.items():
        print(f"{name}: {args.days:g}-day simulation {np.median(ts):.2f} s (median of {len(ts)})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
