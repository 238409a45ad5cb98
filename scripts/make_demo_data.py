"""Generate the demo recordings of the fictional shift-work study into demo_data/.

Three invented 1-3 day beat-interval recordings (no real people) written by
:func:`tfhrv.synth.simulate_recording` with fixed seeds, as gzip CSV files with JSON truth
sidecars (format: :func:`tfhrv.synth.write_recording_csv`).  The output is
byte-reproducible for a given numpy version.

Usage::

    python scripts/make_demo_data.py [--out demo_data]
"""

from __future__ import annotations

import argparse
import datetime as dt
import time
from pathlib import Path

import numpy as np

from tfhrv.estimators.dfa import dfa
from tfhrv.synth import sidecar_path, simulate_recording, write_recording_csv


def _offset(start: dt.datetime, when: dt.datetime) -> float:
    """Seconds from the recording start to a clock time."""
    return (when - start).total_seconds()


def recordings() -> list[dict]:
    """The three demo recordings: every argument of simulate_recording, fixed."""
    s1 = dt.datetime(2024, 3, 4, 9, 12)
    s2 = dt.datetime(2024, 3, 5, 19, 40)
    s3 = dt.datetime(2024, 3, 6, 10, 5)
    return [
        {  # day worker, sleeps 23:00-07:00; 40-min loose electrode, then a 6-min dropout
            "record_id": "sw01_day_worker", "days": 2.0, "start": s1, "profile": "day-worker",
            "rng": 101, "sampling_hz": 1000.0,
            "gaps": [(_offset(s1, dt.datetime(2024, 3, 4, 14, 35)), 2400.0),
                     (_offset(s1, dt.datetime(2024, 3, 5, 18, 50)), 360.0)],
        },
        {  # night-shift worker, sleeps 09:00-16:00; 12-min dropout during a night shift
            "record_id": "sw02_night_shift", "days": 2.0, "start": s2, "profile": "night-shift",
            "rng": 202, "sampling_hz": 1000.0,
            "gaps": [(_offset(s2, dt.datetime(2024, 3, 6, 3, 15)), 720.0)],
        },
        {  # flattened, steep-sloped pattern (heart-failure-like), 250 Hz detector clock
            "record_id": "sw03_flattened", "days": 1.0, "start": s3, "profile": "heart-failure",
            "rng": 303, "sampling_hz": 250.0,
            "gaps": [(_offset(s3, dt.datetime(2024, 3, 6, 21, 30)), 180.0)],
        },
    ]


def scaling_summary(sim) -> dict[str, tuple[float, float]]:
    """Per state: mean DFA-1 alpha1 (4..16 beats) of the 5-min windows and mean DFA-1 over
    64..1024 beats, on the clean core (45 min from the edges) of segments with >= 2 h of
    core."""
    rec, truth = sim.recording, sim.truth
    bad = np.zeros(rec.n_beats, dtype=bool)
    bad[truth["affected_index"]] = True
    out: dict[str, tuple[list, list]] = {"wake": ([], []), "sleep": ([], [])}
    for seg in truth["segments"]:
        idx = np.arange(seg["first_index"], seg["last_index"] + 1)
        t = rec.beat_time_s[idx]
        idx = idx[(t > seg["start_s"] + 2700.0) & (t < seg["end_s"] - 2700.0)]
        if idx.size == 0 or rec.beat_time_s[idx[-1]] - rec.beat_time_s[idx[0]] < 7200.0:
            continue
        t, ok = rec.beat_time_s[idx], ~bad[idx]
        wins = [rec.rr_ms[idx[(t >= a) & (t < a + 300.0) & ok]]
                for a in np.arange(t[0], t[-1] - 300.0, 300.0)]
        out[seg["state"]][0].extend(dfa(w, fit_range=(4, 16)).exponent
                                    for w in wins if w.size >= 200)
        out[seg["state"]][1].append(dfa(rec.rr_ms[idx[ok]], fit_range=(64, 1024)).exponent)
    return {st: (float(np.mean(a)), float(np.mean(b))) for st, (a, b) in out.items() if a}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path,
                        default=Path(__file__).resolve().parent.parent / "demo_data")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    total = 0
    scaling = []
    print("| record | hours | intervals | mean NN wake / sleep (ms) | SD of NN (ms) | "
          "V / S / artifacts | gaps (min) | csv.gz bytes | truth bytes | sim s | write s |")
    print("|---|---|---|---|---|---|---|---|---|---|---|")
    for spec in recordings():
        t0 = time.perf_counter()
        sim = simulate_recording(**spec)
        t1 = time.perf_counter()
        path = write_recording_csv(sim, args.out / f"{spec['record_id']}.csv.gz")
        t2 = time.perf_counter()
        rec, truth = sim.recording, sim.truth
        clean = np.ones(rec.n_beats, dtype=bool)
        clean[truth["affected_index"]] = False
        state = np.full(rec.n_beats, "", dtype="<U5")
        for seg in truth["segments"]:
            state[seg["first_index"]:seg["last_index"] + 1] = seg["state"]
        wake = rec.rr_ms[clean & (state == "wake")].mean()
        sleep = rec.rr_ms[clean & (state == "sleep")].mean()
        labels = truth["ectopic"]["label"]
        size, side = path.stat().st_size, sidecar_path(path).stat().st_size
        total += size + side
        gaps = ", ".join(f"{d / 60:.0f}" for d in truth["gap"]["requested_duration_s"])
        print(f"| {spec['record_id']} | {24 * spec['days']:.0f} | {rec.n_beats} | "
              f"{wake:.0f} / {sleep:.0f} | {rec.rr_ms[clean].std():.0f} | "
              f"{labels.count('V')} / {labels.count('S')} / {len(truth['artifact']['index'])} | "
              f"{gaps} | {size} | {side} | {t1 - t0:.2f} | {t2 - t1:.2f} |")
        exp, meas = truth["expected_exponents"], scaling_summary(sim)
        for st in ("wake", "sleep"):
            alpha = truth["profile"][f"alpha_{st}"]
            scaling.append(f"| {spec['record_id']} | {st} | {exp['alpha1'][st]:.3f} | "
                           f"{meas[st][0]:.3f} | {alpha:.2f} | {exp['alpha_long'][st]:.3f} | "
                           f"{meas[st][1]:.3f} |")
    print(f"total {total} bytes in {args.out}")
    print()
    print("| record | state | alpha1 expected | alpha1 of 5-min windows | alpha (truth) | "
          "DFA 64-1024 expected | DFA 64-1024 |")
    print("|---|---|---|---|---|---|---|")
    print("\n".join(scaling))
    if total > 5 * 2**20:
        raise SystemExit("demo data exceed 5 MB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
