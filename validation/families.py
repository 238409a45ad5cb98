"""Seeded synthetic families with a stated expected outcome, for validating the
stationarity battery and the FFT-slope fitness verdict.

Two levels:

- window families: one long-tier window (4 h of beats at 800 ms, 18 000 beats) of
  Gaussian scaling noise, clean or with one injected non-stationarity of a stated size
  (level shift, linear or quadratic trend, variance change), judged by
  :func:`tfhrv.stationarity.battery.stationarity_battery`;
- record families: whole clean 24-h records (stationary scaling noise), with one gap,
  with ectopic beats, or too short for the 1e-4 Hz band, judged by the same long-tier
  battery and :func:`tfhrv.analysis.record.assess_record` as ``tfhrv inspect``.

Background noise: NN = 800 ms + 50 ms x, x of unit variance; fGn with H = (beta + 1)/2
(Davies & Harte 1987) for beta < 1 and Timmer-Koenig 1/f^beta noise for beta >= 1
(Timmer & Koenig 1995), as in :mod:`tfhrv.synth`.  Sizes are stated in units of the
background SD (50 ms).

Used by ``scripts/validate_verdict.py`` (>= 100 seeds, the table in
``docs/validation_verdict.md``) and ``tests/test_verdict_families.py`` (a few seeds).

References
----------
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
doi:10.1093/biomet/74.1.95
Timmer J, Koenig M. On generating power law noise. Astron Astrophys 1995;300:707-710.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from tfhrv.analysis.record import assess_record
from tfhrv.analysis.verdict import Verdict
from tfhrv.analysis.windows import LONG, category_codes, tier_stationarity, tier_windows
from tfhrv.estimators.presets import estimate
from tfhrv.signal.clean import clean
from tfhrv.signal.recording import Recording
from tfhrv.stationarity.battery import CATEGORIES, stationarity_battery
from tfhrv.synth.noise import fgn, powerlaw_noise

NN_MEAN_MS = 800.0
NN_SD_MS = 50.0
WINDOW_BEATS = 18_000  # 4 h at 800 ms: one long-tier window
INSPECT_SEED = 20100819  # the surrogate seed of tfhrv.analysis.inspection.inspect_record
ALARMS = ("trend", "unit-root", "drifting")  # categories that flag non-stationarity


def background(n: int, beta: float, seed: int) -> np.ndarray:
    """Unit-variance Gaussian scaling noise with spectral exponent ``beta``."""
    if beta < 1.0:
        x = fgn(n, (beta + 1.0) / 2.0, rng=seed)
    else:
        x = powerlaw_noise(n, beta, rng=seed)
    return (x - x.mean()) / x.std()


# --------------------------------------------------------------------------- windows


def inject(x: np.ndarray, kind: str, size: float, seed: int) -> np.ndarray:
    """Add one non-stationarity of ``size`` background SDs to a unit-variance series.

    ``shift``: a step of ``size`` at a random point in the middle half; ``linear``: a
    ramp rising by ``size`` over the window; ``quadratic``: an accelerating rise
    ``size`` (t / T)^2 (vertex at the window start); ``u-shape``: a symmetric parabola
    whose ends lie ``size`` above its vertex at the centre; ``variance``: the SD is
    multiplied by ``size`` from a random point in the middle half on.
    """
    n = x.size
    u = np.linspace(-1.0, 1.0, n)
    cut = int(np.random.default_rng(seed).integers(n // 4, 3 * n // 4))
    if kind == "shift":
        return x + size * (np.arange(n) >= cut)
    if kind == "linear":
        return x + size * (u + 1.0) / 2.0
    if kind == "quadratic":
        return x + size * ((u + 1.0) / 2.0) ** 2
    if kind == "u-shape":
        return x + size * u**2
    if kind == "variance":
        return np.where(np.arange(n) >= cut, size * x, x)
    raise ValueError(f"unknown injection {kind!r}")


def window_category(beta: float, kind: str | None, size: float, seed: int) -> str:
    """Category of one synthetic long-tier window (``kind=None``: clean)."""
    x = background(WINDOW_BEATS, beta, seed)
    if kind is not None:
        x = inject(x, kind, size, seed + 7919)
    return stationarity_battery(NN_MEAN_MS + NN_SD_MS * x, rng=seed).category


# --------------------------------------------------------------------------- records


def _recording(nn_ms: np.ndarray, labels: np.ndarray, *, drop: tuple[float, float] | None,
               record_id: str) -> Recording:
    t = np.cumsum(nn_ms) / 1000.0
    keep = np.ones(t.size, bool)
    if drop is not None:
        keep = (t < drop[0]) | (t >= drop[0] + drop[1])
    t, lab = t[keep], labels[keep]
    rr = np.diff(t, prepend=0.0) * 1000.0  # the interval that spans a gap is kept
    return Recording(t, rr, lab, start=dt.datetime(2026, 3, 2, 8, 0), record_id=record_id)


def record(*, beta: float = 1.0, hours: float = 24.0, gap_min: float = 0.0,
           ectopic: float = 0.0, seed: int) -> Recording:
    """A stationary synthetic record with an optional gap and ectopic beats.

    Parameters
    ----------
    beta : float
        Spectral exponent of the background noise.
    hours : float
        Duration.
    gap_min : float
        Length of one unreadable stretch (beats removed) at a random place at least 1 h
        from either end; 0 for none.
    ectopic : float
        Target share of premature beats (label ``V``): the interval ending on one is 65 %
        of the sinus interval and the next one is lengthened by the rest (full
        compensatory pause); no two premature beats in a row.
    seed : int
    """
    gen = np.random.default_rng(seed + 104729)
    n = int(hours * 3600.0 * 1000.0 / NN_MEAN_MS)
    nn = NN_MEAN_MS + NN_SD_MS * background(n, beta, seed)
    labels = np.full(n, "N")
    if ectopic > 0:
        # greedy non-adjacent selection with P = q / (1 + q) = ectopic
        q = ectopic / (1.0 - ectopic)
        cand = gen.random(n) < q
        cand[0] = cand[-1] = False
        sel = np.zeros(n, bool)
        for i in np.flatnonzero(cand):
            sel[i] = not sel[i - 1]
        idx = np.flatnonzero(sel)
        short = 0.65 * nn[idx]
        nn[idx + 1] += nn[idx] - short
        nn[idx] = short
        labels[idx] = "V"
    drop = None
    if gap_min > 0:
        dur = hours * 3600.0
        start = float(gen.uniform(3600.0, dur - 3600.0 - 60.0 * gap_min))
        drop = (start, 60.0 * gap_min)
    return _recording(nn, labels, drop=drop, record_id=f"family-{seed}")


def record_outcome(rec: Recording, *, battery: bool = True) -> Verdict:
    """Clean, run the long-tier battery and judge the record as ``tfhrv inspect`` does
    (the verdict's ``checks`` hold the longest gap, ectopic and non-stationary shares).

    ``battery=False`` skips the battery (every window counted stationary): four times
    faster, for tests of rules that do not read the non-stationary share (no unfit rule
    does; only the share's caution is then missing).
    """
    cleaned = clean(rec)
    windows = tier_windows(cleaned, LONG)
    if battery:
        codes = category_codes(tier_stationarity(windows, seed=INSPECT_SEED))
    else:
        codes = np.full(len(windows), CATEGORIES.index("stationary"), dtype=np.int8)
    return assess_record(cleaned, long_categories=codes).verdict


# ------------------------------------------------------------ records with day/night change

def distortion_margin(v: Verdict) -> float:
    """The verdict's margin for the level-change effect on this record (half-width of the
    calibrated 95 % interval of its FFT beta); the truth is judged against the same."""
    return float(v.checks["level_effect_margin"])


def _day_night(t: np.ndarray, onset_s: float, night_s: float, ramp_s: float) -> np.ndarray:
    """0 by day, 1 by night, logistic transitions whose 10-90 % rise takes ``ramp_s``."""
    tau = ramp_s / 4.394  # 10-90 % of a logistic = 2 ln 9 tau
    with np.errstate(over="ignore"):
        return (1.0 / (1.0 + np.exp(-(t - onset_s) / tau))
                - 1.0 / (1.0 + np.exp(-(t - onset_s - night_s) / tau)))


def timed_record(*, beta: float, night_ms: float = 0.0, night_sd: float = 1.0,
                 hours: float = 24.0, seed: int) -> Recording:
    """A 24-h record whose background is a power law in *time* (1-Hz grid), with an
    optional night: NN longer by ``night_ms`` and the background SD times ``night_sd``.

    Night starts 5-9 h after the start and lasts 7-9 h; each transition rises (10-90 %)
    over 20-60 min (the fall of heart rate at sleep onset takes tens of minutes; from
    memory).  The background is the same function of time with and without the night
    (same seed), so the change of the FFT slope is due to the injected change alone.
    """
    gen = np.random.default_rng(seed + 7727)
    onset, night, ramp = (gen.uniform(5, 9) * 3600, gen.uniform(7, 9) * 3600,
                          gen.uniform(1200, 3600))
    n_s = int(hours * 3600) + 2
    x = background(n_s, beta, seed)
    grid = np.arange(n_s, dtype=np.float64)
    w = _day_night(grid, onset, night, ramp)
    bg = NN_SD_MS * x * (1.0 + (night_sd - 1.0) * w)
    level = NN_MEAN_MS + bg + night_ms * w
    t_end = hours * 3600.0
    out = []
    t = 0.0
    while True:
        i = int(t)
        nn = level[i] + (t - i) * (level[i + 1] - level[i])
        t += nn / 1000.0
        if t >= t_end:
            break
        out.append(nn)
    nn = np.asarray(out)
    return _recording(nn, np.full(nn.size, "N"), drop=None, record_id=f"timed-{seed}")


def raw_fft_slope(rec: Recording) -> float:
    """Raw whole-record FFT slope of a record, as the verdict computes it."""
    cleaned = clean(rec)
    fit = estimate("beta_spectral_long", cleaned.nn_ms, beat_time_s=cleaned.nn_time_s)
    return float(fit.exponent)


def distortion_outcome(beta: float, night_ms: float, night_sd: float, seed: int, *,
                       battery: bool = True) -> tuple[Verdict, float]:
    """The verdict on a record with a night, and the true distortion of its FFT slope
    (slope with minus without the injected change, same seed)."""
    rec = timed_record(beta=beta, night_ms=night_ms, night_sd=night_sd, seed=seed)
    base = timed_record(beta=beta, seed=seed)
    return (record_outcome(rec, battery=battery),
            raw_fft_slope(rec) - raw_fft_slope(base))


def unfit_for_level_changes(v: Verdict) -> bool:
    return any(r.startswith("level changes") for r in v.reasons)


def _agrees(out: object) -> bool:
    v, dist = out  # type: ignore[misc]
    return unfit_for_level_changes(v) == (abs(dist) > distortion_margin(v))


def distortion_families() -> list[Family]:
    """Records with a known consequence of non-stationarity, and power-law nulls."""
    fams = []
    for beta in (0.6, 0.8, 1.0, 1.2, 1.4, 1.6):
        fams.append(Family(
            f"power-law null 24 h (time), beta={beta:g}", "distortion",
            "fit or fit-with-cautions", "null", 0.90,
            lambda s, b=beta: record_outcome(timed_record(beta=b, seed=s)),
            lambda v: v.verdict in ("fit", "fit-with-cautions")))
    for beta in (0.8, 1.0, 1.2, 1.4):
        for night in (50.0, 150.0, 250.0):
            fams.append(Family(
                f"night +{night:g} ms, beta={beta:g}", "distortion",
                "unfit for level changes iff |distortion| > margin", "agreement", None,
                lambda s, b=beta, m=night: distortion_outcome(b, m, 1.0, s), _agrees))
    for beta, sd in ((1.0, 0.6), (1.0, 1.5)):
        fams.append(Family(
            f"night SD x{sd:g} +100 ms, beta={beta:g}", "distortion",
            "unfit for level changes iff |distortion| > margin", "agreement", None,
            lambda s, b=beta, z=sd: distortion_outcome(b, 100.0, z, s), _agrees))
    return fams


# --------------------------------------------------------------------------- the families


@dataclass(frozen=True, slots=True)
class Family:
    """A seeded family with its expected outcome.

    ``run(seed)`` returns the observed outcome as a short string (a category or a
    verdict); ``hit(outcome)`` says whether it matches the expectation; ``target`` is the
    required share of hits (``None``: reported only) and ``kind`` says what a hit means
    (``detection``, ``no false alarm`` or ``verdict``).
    """

    name: str
    level: str
    expected: str
    kind: str
    target: float | None
    run: Callable[[int], object]
    hit: Callable[[object], bool]


def _is_alarm(category: object) -> bool:
    return category in ALARMS


def _verdict_is(*allowed: str, topic: str | None = None) -> Callable[[object], bool]:
    def hit(out: object) -> bool:
        assert isinstance(out, Verdict)
        if out.verdict not in allowed:
            return False
        if topic is None or out.verdict == "fit":
            return True
        return any(r.startswith(topic) for r in out.reasons + out.cautions)
    return hit


def _no_stationarity_unfit(out: object) -> bool:
    assert isinstance(out, Verdict)
    return not any(r.startswith("stationarity") for r in out.reasons)


def window_families(*, backgrounds: tuple[float, ...] = (0.2, 0.6, 1.0, 1.2)) -> list[Family]:
    """Clean windows at each background beta, and injections on a 1/f^0.6 and a 1/f
    background at stated sizes."""
    fams = []
    for beta in backgrounds:
        fams.append(Family(
            f"clean beta={beta:g}", "window", "stationary (or inconclusive)", "no false alarm",
            0.90 if beta <= 1.2 else None,
            lambda s, b=beta: window_category(b, None, 0.0, s),
            lambda c: not _is_alarm(c)))
    # sizes in background SDs; the largest of each row is the stated size that must be
    # detected (target 90 %); a 1/f background wanders more within 4 h, so its stated
    # sizes are larger.  The symmetric u-shape is reported without a target: its periodic
    # extension is one smooth cycle, which phase-randomised surrogates reproduce exactly
    # (see docs/validation_verdict.md).
    sizes = {0.6: {"shift": (2.0, 4.0), "linear": (1.0, 2.0), "quadratic": (1.0, 2.0),
                   "variance": (1.25, 1.5), "u-shape": (4.0, 8.0)},
             1.0: {"shift": (2.0, 4.0, 6.0), "linear": (2.0, 4.0), "quadratic": (2.0, 4.0),
                   "variance": (1.5, 2.0), "u-shape": (4.0, 8.0)}}
    labels = {"shift": "level shift {s:g} SD", "linear": "linear trend {s:g} SD",
              "quadratic": "accelerating trend {s:g} SD", "u-shape": "u-shaped trend {s:g} SD",
              "variance": "SD x{s:g}"}
    for beta, table in sizes.items():
        for kind, ss in table.items():
            for i, size in enumerate(ss):
                stated = i == len(ss) - 1 and kind != "u-shape"
                fams.append(Family(
                    f"{labels[kind].format(s=size)}, beta={beta:g}", "window",
                    "trend, unit-root or drifting", "detection", 0.90 if stated else None,
                    lambda s, b=beta, k=kind, z=size: window_category(b, k, z, s),
                    _is_alarm))
    return fams


def record_families() -> list[Family]:
    """Whole 24-h records: clean, with one gap, with ectopy, and too short."""
    fams = []
    for beta in (0.6, 1.0, 1.2):
        fams.append(Family(
            f"clean 24 h, beta={beta:g}", "record", "fit or fit-with-cautions, never unfit "
            "for stationarity", "no false alarm", 0.90,
            lambda s, b=beta: record_outcome(record(beta=b, seed=s)), _no_stationarity_unfit))
    for gap, expected, allowed, target in (
            (5.0, "fit", ("fit",), None),
            (20.0, "fit-with-cautions (gap)", ("fit-with-cautions", "unfit"), 1.0),
            (45.0, "unfit (gap)", ("unfit",), 1.0),
            (120.0, "unfit (gap)", ("unfit",), 1.0)):
        fams.append(Family(
            f"gap {gap:g} min", "record", expected, "verdict", target,
            lambda s, g=gap: record_outcome(record(gap_min=g, seed=s)),
            _verdict_is(*allowed, topic="gap")))
    for share, expected, allowed, target in (
            (0.02, "fit-with-cautions (ectopy)", ("fit-with-cautions", "unfit"), 1.0),
            (0.10, "fit-with-cautions or unfit (ectopy; on the 10 % limit)",
             ("fit-with-cautions", "unfit"), 1.0),
            (0.20, "unfit (ectopy)", ("unfit",), 1.0)):
        fams.append(Family(
            f"ectopy {100 * share:g} %", "record", expected, "verdict", target,
            lambda s, e=share: record_outcome(record(ectopic=e, seed=s)),
            _verdict_is(*allowed, topic="ectopy")))
    for hours, expected, allowed in ((16.0, "fit-with-cautions (duration)",
                                      ("fit-with-cautions", "unfit")),
                                     (6.0, "unfit (duration)", ("unfit",))):
        fams.append(Family(
            f"too short: {hours:g} h", "record", expected, "verdict", 1.0,
            lambda s, h=hours: record_outcome(record(hours=h, seed=s)),
            _verdict_is(*allowed, topic="duration")))
    return fams


__all__ = ["ALARMS", "CATEGORIES", "Family", "background",
           "distortion_families", "distortion_margin", "distortion_outcome", "inject",
           "raw_fft_slope",
           "timed_record", "unfit_for_level_changes",
           "record", "record_families", "record_outcome", "window_category",
           "window_families"]
