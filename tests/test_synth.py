"""Tests of tfhrv.synth: Davies–Harte fGn, Timmer–König noise, synthetic recordings.

Sources of the expected values (named again beside each check):
(a) exact theory and the published table of REFERENCES.md section 2.2 (fGn autocovariance);
(b) an independent generator from the registry, ``colorednoise.powerlaw_psd_gaussian``
    (Timmer & König 1995 as implemented there), and ``scipy.signal.periodogram``;
(c) Monte-Carlo checks with fixed seeds whose tolerances come from the seed spread.
The DFA used here is a small reference DFA-1 written in this file from the definition of
Peng et al., Chaos 1995;5:82-87 (not tfhrv.estimators).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import gzip
import json

import colorednoise  # independent Timmer–König generator: colorednoise.powerlaw_psd_gaussian
import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy import signal

from tfhrv.recording import KNOWN_LABELS, Recording
from tfhrv.synth import (
    PROFILES,
    SimulationProfile,
    SleepSchedule,
    SyntheticRecording,
    fgn,
    fgn_autocovariance,
    powerlaw_noise,
    sidecar_path,
    simulate_recording,
    write_recording_csv,
)

# ---------------------------------------------------------------------------------------
# reference helpers (written from the published definitions, independent of tfhrv)
# ---------------------------------------------------------------------------------------


def ref_dfa1(x: np.ndarray, scales: np.ndarray) -> float:
    """DFA-1 exponent: Peng et al. 1995, non-overlapping boxes, line fit per box."""
    y = np.cumsum(x - x.mean())
    f = []
    for s in scales:
        k = y.size // s
        box = y[: k * s].reshape(k, s)
        box = box - box.mean(axis=1, keepdims=True)
        t = np.arange(s) - (s - 1) / 2.0
        c = box @ t / (t @ t)  # least-squares slope in each box
        resid_var = (box**2).mean(axis=1) - c**2 * (t @ t) / s
        f.append(np.sqrt(resid_var.mean()))
    return float(np.polyfit(np.log(scales), np.log(f), 1)[0])


def loglog_slope(x: np.ndarray, fmax: float) -> float:
    """Least-squares slope of log periodogram vs log f over 0 < f <= fmax (cycles/sample)."""
    f, p = signal.periodogram(x, detrend="constant")
    m = (f > 0) & (f <= fmax)
    return float(np.polyfit(np.log(f[m]), np.log(p[m]), 1)[0])


def log_scales(lo: int, hi: int, num: int = 12) -> np.ndarray:
    return np.unique(np.round(np.geomspace(lo, hi, num)).astype(int))


LONG = log_scales(50, 500)  # Ivanov et al. 1999 fit about 60-600 beats (from memory)
SHORT = np.arange(4, 17)  # alpha1 range of Peng et al. 1995


def clean_core(sim: SyntheticRecording, seg: dict, margin_s: float = 2700.0) -> np.ndarray:
    """Intervals of one sleep/wake segment, ``margin_s`` away from its edges, without any
    interval the truth marks as ectopic, artifact or gap."""
    rec, truth = sim.recording, sim.truth
    idx = np.arange(seg["first_index"], seg["last_index"] + 1)
    t = rec.beat_time_s[idx]
    bad = np.zeros(rec.n_beats, dtype=bool)
    bad[truth["affected_index"]] = True
    sel = (t > seg["start_s"] + margin_s) & (t < seg["end_s"] - margin_s) & ~bad[idx]
    return rec.rr_ms[idx[sel]]


# ---------------------------------------------------------------------------------------
# Davies–Harte fGn
# ---------------------------------------------------------------------------------------

# REFERENCES.md 2.2, fGn autocovariance of unit variance at lags 1, 2, 3, 10, 100
FGN_TABLE = {
    0.25: [-0.292893, -0.048188, -0.024944, -0.003965, -0.000125],
    0.5: [0.0, 0.0, 0.0, 0.0, 0.0],
    0.75: [0.414214, 0.269649, 0.218061, 0.118660, 0.037500],
    0.9: [0.741101, 0.630135, 0.579293, 0.454380, 0.286638],
}


@pytest.mark.parametrize("hurst", sorted(FGN_TABLE))
def test_fgn_autocovariance_matches_table(hurst):
    # source: REFERENCES.md 2.2 table (six decimals)
    got = fgn_autocovariance(hurst, np.array([1, 2, 3, 10, 100]))
    assert_allclose(got, FGN_TABLE[hurst], rtol=0, atol=1e-6)
    assert_allclose(fgn_autocovariance(hurst, np.array([0])), [1.0], rtol=0, atol=1e-15)


@pytest.mark.parametrize("hurst", [0.25, 0.75, 0.9])
def test_fgn_sample_autocovariance_matches_table(hurst):
    # source: REFERENCES.md 2.2 (lags 1, 2, 3, 10); the test idea of section 2.3.
    # The mean is known (0), so mean(x_t x_{t+k}) is unbiased; tolerance 4 Monte-Carlo SE.
    lags = [1, 2, 3, 10]
    rng = np.random.default_rng(20240304)
    est = np.array([[np.mean(x[:-k] * x[k:]) for k in lags]
                    for x in (fgn(2048, hurst, rng=rng) for _ in range(300))])
    se = est.std(axis=0, ddof=1) / np.sqrt(est.shape[0])
    expected = np.array(FGN_TABLE[hurst][:4])
    assert np.all(np.abs(est.mean(axis=0) - expected) < 4 * se + 1e-4)


@pytest.mark.parametrize("n", [1000, 4096, 65536])
def test_circulant_eigenvalues_nonnegative(n):
    # source: Craigmile, J Time Ser Anal 2003;24:505-511 — the Davies–Harte embedding of fGn
    # has non-negative eigenvalues for every H in (0, 1).  Same embedding as tfhrv.synth.fgn.
    for hurst in np.round(np.arange(0.1, 0.91, 0.1), 1):
        gam = fgn_autocovariance(hurst, np.arange(n + 1))
        lam = np.fft.fft(np.concatenate([gam, gam[-2:0:-1]])).real
        assert lam.min() > -1e-12, (hurst, n, lam.min())


@pytest.mark.parametrize("hurst", [0.25, 0.5, 0.75, 0.9])
def test_fgn_spectrum_agrees_with_colorednoise(hurst):
    # source (b): colorednoise.powerlaw_psd_gaussian with beta = 2H - 1 (REFERENCES.md 2.1);
    # theory (a): low-frequency slope of fGn is 1 - 2H (Beran 1994).  Tolerance: 4 combined
    # Monte-Carlo SE over 24 paths per generator.
    n, paths, fmax = 2**14, 24, 1 / 64
    rng = np.random.default_rng(7)
    ours = np.array([loglog_slope(fgn(n, hurst, rng=rng), fmax) for _ in range(paths)])
    ref = np.array([loglog_slope(colorednoise.powerlaw_psd_gaussian(2 * hurst - 1, n,
                                                                    random_state=rng), fmax)
                    for _ in range(paths)])
    se = np.hypot(ours.std(ddof=1), ref.std(ddof=1)) / np.sqrt(paths)
    assert abs(ours.mean() - ref.mean()) < 4 * se
    assert abs(ours.mean() - (1 - 2 * hurst)) < 4 * ours.std(ddof=1) / np.sqrt(paths)


@pytest.mark.parametrize("hurst", [0.5, 0.75, 0.9])
def test_fgn_dfa_agrees_with_colorednoise(hurst):
    # source (b): colorednoise.powerlaw_psd_gaussian with beta = 2H - 1; DFA-1 (Peng 1995)
    # over 16..256 beats.  Tolerance 4 combined SE over 24 paths.  H < 0.5 is left out: the
    # fGn spectrum flattens near the Nyquist frequency while Timmer–König noise stays a
    # pure power law, and DFA of anti-persistent series is sensitive to that (in our runs
    # H = 0.25 gave 0.258 vs 0.281), so the two are not expected to agree there.
    n, paths = 2**14, 24
    scales = log_scales(16, 256, 9)
    rng = np.random.default_rng(11)
    ours = np.array([ref_dfa1(fgn(n, hurst, rng=rng), scales) for _ in range(paths)])
    ref = np.array([ref_dfa1(colorednoise.powerlaw_psd_gaussian(2 * hurst - 1, n,
                                                                random_state=rng), scales)
                    for _ in range(paths)])
    se = np.hypot(ours.std(ddof=1), ref.std(ddof=1)) / np.sqrt(paths)
    assert abs(ours.mean() - ref.mean()) < 4 * se
    # and both near alpha = H (REFERENCES.md 2.1 and the 16..64 / 64..256 columns of 3.3)
    assert abs(ours.mean() - hurst) < 4 * ours.std(ddof=1) / np.sqrt(paths) + 0.005


# ---------------------------------------------------------------------------------------
# Timmer–König 1/f^beta noise
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("beta", [0.0, 0.5, 1.0, 1.5, 2.0])
def test_powerlaw_noise_slope_is_minus_beta(beta):
    # source (a): Timmer & König, A&A 1995;300:707-710 — the expected periodogram is
    # proportional to f^-beta at every Fourier frequency; periodogram by scipy.signal.
    # Tolerance 4 Monte-Carlo SE over 20 paths.
    rng = np.random.default_rng(3)
    slopes = np.array([loglog_slope(powerlaw_noise(4096, beta, rng=rng), 0.499)
                       for _ in range(20)])
    assert abs(slopes.mean() + beta) < 4 * slopes.std(ddof=1) / np.sqrt(slopes.size)


@pytest.mark.parametrize("beta", [0.0, 1.0, 2.0])
def test_powerlaw_noise_unit_variance_and_zero_mean(beta):
    # theory (a): the expected variance is normalised to sigma**2; the f = 0 term is zero.
    rng = np.random.default_rng(5)
    xs = np.array([powerlaw_noise(1024, beta, sigma=2.0, rng=rng) for _ in range(300)])
    assert_allclose(xs.mean(axis=1), 0.0, rtol=0, atol=1e-12)
    v = (xs**2).mean(axis=1)
    assert abs(v.mean() - 4.0) < 4 * v.std(ddof=1) / np.sqrt(v.size)


def test_powerlaw_noise_same_spectrum_level_as_colorednoise():
    # source (b): both are Timmer–König with unit variance; the mean log periodogram at the
    # 32 lowest frequencies must agree within 4 combined SE (pink noise, 40 paths each).
    n, paths = 8192, 40
    rng = np.random.default_rng(9)

    def low_logp(x):
        return np.log(signal.periodogram(x, detrend=False)[1][1:33]).mean()

    ours = np.array([low_logp(powerlaw_noise(n, 1.0, rng=rng)) for _ in range(paths)])
    ref = np.array([low_logp(colorednoise.powerlaw_psd_gaussian(1.0, n, random_state=rng))
                    for _ in range(paths)])
    se = np.hypot(ours.std(ddof=1), ref.std(ddof=1)) / np.sqrt(paths)
    assert abs(ours.mean() - ref.mean()) < 4 * se


def test_powerlaw_noise_rejects_bad_input():
    with pytest.raises(ValueError, match="n must be"):
        powerlaw_noise(1, 1.0)
    with pytest.raises(ValueError, match="beta must be finite"):
        powerlaw_noise(10, float("nan"))


# ---------------------------------------------------------------------------------------
# Synthetic recordings
# ---------------------------------------------------------------------------------------

GAPS = [(20000.0, 2400.0), (100000.0, 300.0)]


@pytest.fixture(scope="module")
def day():
    return simulate_recording(days=2, profile="day-worker", gaps=GAPS, sampling_hz=1000,
                              record_id="t_day", rng=11)


@pytest.fixture(scope="module")
def night():
    return simulate_recording(days=2, profile="night-shift", rng=13)


@pytest.fixture(scope="module")
def failing():
    return simulate_recording(days=2, profile="heart-failure", rng=12)


def test_schedule_periods_cross_midnight():
    # exact: 23:00-07:00 from a 08:00 start is 15 h to 23 h after the start
    sched = SleepSchedule("23:00", "07:00")
    got = sched.periods(dt.datetime(2024, 3, 4, 8, 0), 2 * 86400.0)
    assert got[:2] == [(15 * 3600.0, 23 * 3600.0), (39 * 3600.0, 47 * 3600.0)]
    assert SleepSchedule(dt.time(9), dt.time(16)).hours == 7.0
    with pytest.raises(ValueError):
        SleepSchedule("07:00", "07:00")


def test_reproducible_with_seed():
    a = simulate_recording(days=0.3, rng=5)
    b = simulate_recording(days=0.3, rng=5)
    c = simulate_recording(days=0.3, rng=6)
    assert_array_equal(a.recording.rr_ms, b.recording.rr_ms)
    assert_array_equal(a.recording.labels, b.recording.labels)
    assert a.truth == b.truth
    assert a.recording.n_beats != c.recording.n_beats or not np.array_equal(
        a.recording.rr_ms, c.recording.rr_ms)
    # a Generator draws a seed that is stored and reproduces the recording
    d = simulate_recording(days=0.3, rng=np.random.default_rng(1))
    e = simulate_recording(days=0.3, rng=d.truth["seed"])
    assert_array_equal(d.recording.beat_time_s, e.recording.beat_time_s)


def test_valid_recording(day):
    rec, truth = day.recording, day.truth
    assert isinstance(day, SyntheticRecording) and isinstance(rec, Recording)
    assert rec.start == dt.datetime(2024, 3, 4, 8, 0) and rec.record_id == "t_day"
    assert set(np.unique(rec.labels)) <= KNOWN_LABELS
    assert truth["n_intervals"] == rec.n_beats
    # beat times are the running sum of the intervals, gaps included (Recording contract)
    assert_allclose(np.diff(rec.beat_time_s, prepend=0.0) * 1000.0, rec.rr_ms, rtol=0,
                    atol=1e-6)
    # 1000 Hz sampling clock: every beat time on the millisecond grid
    assert_allclose(rec.beat_time_s * 1000, np.round(rec.beat_time_s * 1000), rtol=0,
                    atol=1e-6)
    assert 2 * 86400 - 5 < rec.beat_time_s[-1] <= 2 * 86400
    assert json.loads(json.dumps(truth)) == truth  # JSON-serialisable, lossless


def test_sleep_means_follow_schedule(day, night):
    # the documented model: mean NN 800 ms awake, 1000 ms asleep (plus a 20 ms clock rhythm)
    for sim, clock in ((day, "23:00:00"), (night, "09:00:00")):
        assert all(p["start"].endswith(clock) for p in sim.truth["sleep_periods"])
        means = {"sleep": [], "wake": []}
        for seg in sim.truth["segments"]:
            core = clean_core(sim, seg)
            if core.size > 3000:
                means[seg["state"]].append(core.mean())
        assert min(means["sleep"]) > max(means["wake"]) + 100
        # segment edges sit within 5 min of the scheduled clock times
        starts = [s["start_s"] for s in sim.truth["segments"] if s["state"] == "sleep"]
        sched = [p["start_s"] for p in sim.truth["sleep_periods"] if p["start_s"] > 0]
        assert_allclose(starts, sched, rtol=0, atol=300)


def _reference_alpha(sim: SyntheticRecording, seg: dict, n_core: int,
                     seeds: int = 12) -> tuple[float, float]:
    """Mean and SD of DFA-1 over LONG on an independent model of the segment: colorednoise
    with beta = 2 alpha - 1 over the segment length, scaled by the state's SD, plus the
    white beat-to-beat jitter of the profile (the respiratory line is far below 50 beats)."""
    prof = sim.truth["profile"]
    sd = prof[f"sd_{seg['state']}_ms"]
    n_seg = seg["last_index"] - seg["first_index"] + 1
    rng = np.random.default_rng(int(seg["alpha"] * 1000) + n_core)
    vals = []
    for _ in range(seeds):
        x = colorednoise.powerlaw_psd_gaussian(2 * seg["alpha"] - 1, n_seg, random_state=rng)
        x = x - x.mean()  # expected variance 1, centred like the simulated segments
        lo = (n_seg - n_core) // 2
        core = sd * x[lo:lo + n_core] + prof["white_sd_ms"] * rng.standard_normal(n_core)
        vals.append(ref_dfa1(core, LONG))
    return float(np.mean(vals)), float(np.std(vals, ddof=1))


@pytest.mark.parametrize("name", ["day", "failing"])
def test_segment_exponent_matches_truth(name, request):
    # source (b)+(c): DFA-1 over 50..500 beats of each single-state stretch must match the
    # same DFA on an independent model built with colorednoise (beta = 2 alpha - 1,
    # REFERENCES.md 2.1: alpha = (beta + 1)/2) of equal length, within 4 SD of the
    # reference spread over 12 seeds.
    sim = request.getfixturevalue(name)
    checked = 0
    for seg in sim.truth["segments"]:
        core = clean_core(sim, seg)
        if core.size < 15000:
            continue
        mean, sd = _reference_alpha(sim, seg, core.size)
        assert abs(ref_dfa1(core, LONG) - mean) < 4 * max(sd, 0.01), seg
        assert seg["beta"] == pytest.approx(2 * seg["alpha"] - 1)
        checked += 1
    assert checked >= 4


@pytest.mark.parametrize("name", ["day", "night"])
def test_sleep_exponent_lower_than_wake(name, request):
    # source: Ivanov et al., Europhys Lett 1999;48:594 — lower exponent in sleep than in
    # wake (direction only, REFERENCES.md section 9)
    sim = request.getfixturevalue(name)
    est = {"sleep": [], "wake": []}
    for seg in sim.truth["segments"]:
        core = clean_core(sim, seg)
        if core.size > 15000:
            est[seg["state"]].append(ref_dfa1(core, LONG))
    assert len(est["sleep"]) == 2 and est["wake"]
    assert max(est["sleep"]) < min(est["wake"])


def _local_median(rec: Recording, i: int, bad: set[int]) -> float:
    near = [j for j in range(max(i - 6, 0), min(i + 8, rec.n_beats))
            if j not in bad and j not in (i, i + 1)]
    return float(np.median(rec.rr_ms[near]))


def test_ectopic_beats_labels_and_pauses(day, failing):
    # documented model; full compensatory pause after a ventricular premature beat and a
    # sinus reset after a supraventricular one (standard electrocardiography, e.g. Surawicz
    # & Knilans, Chou's Electrocardiography in Clinical Practice, 6th ed. 2008; from memory)
    for sim in (day, failing):
        rec, ect = sim.recording, sim.truth["ectopic"]
        bad = set(sim.truth["affected_index"])
        idx = np.array(ect["index"])
        assert idx.size > 100
        assert_array_equal(rec.labels[idx], ect["label"])
        assert set(ect["label"]) == {"V", "S"}
        assert np.all(rec.labels[idx + 1] == "N")
        assert_allclose(rec.beat_time_s[idx], ect["time_s"], rtol=0, atol=1e-4)
        ratio, prem = [], []
        for i, lab, sin0, sin1 in zip(idx, ect["label"], ect["sinus_ms"], ect["next_sinus_ms"],
                                      strict=True):
            med = _local_median(rec, i, bad)
            assert rec.rr_ms[i] <= 0.8 * sin0 + 2.0  # premature: coupling <= 0.8 sinus cycle
            assert rec.rr_ms[i] < med and rec.rr_ms[i + 1] > rec.rr_ms[i]  # then a pause
            if lab == "V":  # coupling + pause = two sinus cycles
                assert rec.rr_ms[i] + rec.rr_ms[i + 1] == pytest.approx(sin0 + sin1, abs=2.0)
            else:  # the sinus node restarts: pause 1.0-1.15 sinus cycles
                assert sin1 - 2.0 <= rec.rr_ms[i + 1] <= 1.15 * sin1 + 2.0
            ratio.append((lab, (rec.rr_ms[i] + rec.rr_ms[i + 1]) / (2 * med)))
            prem.append(rec.rr_ms[i] / med)
        v = np.array([r for lab, r in ratio if lab == "V"])
        s = np.array([r for lab, r in ratio if lab == "S"])
        assert abs(v.mean() - 1.0) < 0.02  # full compensation, on average
        assert s.mean() < v.mean() - 0.05  # less than compensatory
        assert np.mean(prem) < 0.8  # clearly premature against the neighbouring beats


def test_ectopic_rate_is_documented_default(day):
    # documented default: 0.2 % premature beats (Poisson count; 4 SD tolerance)
    n = day.recording.n_beats
    k = len(day.truth["ectopic"]["index"])
    assert abs(k - 0.002 * n) < 4 * np.sqrt(0.002 * n) + 10  # + events lost in the gaps


def test_artifacts(day):
    rec, art = day.recording, day.truth["artifact"]
    bad = set(day.truth["affected_index"])
    assert len(art["index"]) > 20
    assert set(art["label"]) == {"X", "N"}
    for i, kind, lab in zip(art["index"], art["kind"], art["label"], strict=True):
        assert rec.labels[i] == lab
        med = _local_median(rec, i, bad)
        if kind == "extra":  # a false detection: an absurdly short interval, then the rest
            assert rec.rr_ms[i] < 0.45 * med
            assert rec.rr_ms[i] + rec.rr_ms[i + 1] == pytest.approx(med, rel=0.25)
        else:  # a missed beat: about two cycles
            assert rec.rr_ms[i] > 1.6 * med


def test_gaps_where_truth_says(day):
    rec, gap = day.recording, day.truth["gap"]
    t = rec.beat_time_s
    assert gap["requested_start_s"] == [g[0] for g in GAPS]
    for i, a, d, s0, s1 in zip(gap["index"], gap["requested_start_s"],
                               gap["requested_duration_s"], gap["start_s"], gap["end_s"],
                               strict=True):
        assert not np.any((t >= a) & (t < a + d))  # no beat inside
        assert rec.rr_ms[i] >= d * 1000.0  # the spanning interval is kept, long
        assert t[i - 1] == pytest.approx(s0, abs=1e-4) and t[i] == pytest.approx(s1, abs=1e-4)
        assert i in day.truth["affected_index"]


def test_heart_failure_profile_direction(day, failing):
    # directions only: shorter mean NN and lower variability, flattened day/night, lower
    # alpha1 (Peng et al. 1995) and a steeper long-range slope (Huikuri et al. 1998; beta
    # ~ 1.4-1.5 in CHF, Am J Physiol 1999;276:R1) than the healthy-like profile
    def summary(sim):
        out = {"sleep": [], "wake": []}
        for seg in sim.truth["segments"]:
            core = clean_core(sim, seg)
            if core.size > 15000:
                out[seg["state"]].append((core.mean(), np.diff(core).std(),
                                          ref_dfa1(core, SHORT), ref_dfa1(core, LONG)))
        return {k: np.mean(v, axis=0) for k, v in out.items()}

    h, f = summary(day), summary(failing)
    assert f["wake"][0] < h["wake"][0] - 50
    assert f["sleep"][0] - f["wake"][0] < 0.5 * (h["sleep"][0] - h["wake"][0])
    assert f["wake"][1] < h["wake"][1]
    assert f["wake"][2] < h["wake"][2] - 0.05
    assert f["wake"][3] > h["wake"][3] + 0.1 and f["sleep"][3] > h["sleep"][3] + 0.1
    betas = [s["beta"] for s in failing.truth["segments"]]
    assert min(betas) >= 1.3 and max(betas) <= 1.55


@pytest.mark.parametrize("suffix", [".csv", ".csv.gz"])
def test_csv_and_truth_round_trip(day, tmp_path, suffix):
    path = write_recording_csv(day, tmp_path / f"rec{suffix}")
    raw = path.read_bytes()
    text = (gzip.decompress(raw) if suffix.endswith(".gz") else raw).decode("utf-8")
    lines = text.splitlines()
    meta = dict(line[2:].split(": ", 1) for line in lines if line.startswith("# "))
    assert meta["record"] == "t_day"
    assert dt.datetime.fromisoformat(meta["start"]) == day.recording.start
    header = next(line for line in lines if not line.startswith("#"))
    assert header == "beat_time_s,rr_ms,label"
    # pandas as the independent reader
    df = pd.read_csv(path, comment="#", dtype={"label": str})
    assert list(df.columns) == ["beat_time_s", "rr_ms", "label"]
    assert_allclose(df["beat_time_s"], day.recording.beat_time_s, rtol=0, atol=5e-5)
    assert_allclose(df["rr_ms"], day.recording.rr_ms, rtol=0, atol=5e-4)
    assert_array_equal(df["label"].to_numpy(str), day.recording.labels)
    side = sidecar_path(path)
    assert side == tmp_path / "rec.truth.json"
    assert json.loads(side.read_text()) == day.truth
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([path.name, side.name])
    # byte-reproducible (gzip without time stamp)
    again = write_recording_csv(day, tmp_path / f"again{suffix}", truth_sidecar=False)
    assert again.read_bytes() == raw
    assert not sidecar_path(again).exists()


def test_invalid_arguments():
    with pytest.raises(ValueError, match="profile must be one of"):
        simulate_recording(profile="athlete")
    with pytest.raises(ValueError, match="alpha_sleep"):
        dataclasses.replace(PROFILES["day-worker"], alpha_sleep=2.5)
    with pytest.raises(ValueError, match="gaps"):
        simulate_recording(days=0.1, gaps=[(10.0, 100.0)])
    with pytest.raises(TypeError, match="start"):
        simulate_recording(start="2024-03-04")
    with pytest.raises(TypeError, match="SyntheticRecording"):
        write_recording_csv(object(), "x.csv")
    assert isinstance(PROFILES["night-shift"], SimulationProfile)
