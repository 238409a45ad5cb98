"""Synthetic series and recordings with known scaling exponents.

- Exact fractional Gaussian noise (fGn) and fractional Brownian motion (fBm) by the
  Davies–Harte circulant-embedding method (:func:`fgn`, :func:`fbm`).
- Gaussian 1/f^beta noise by the Timmer–König method (:func:`powerlaw_noise`).
- Realistic multi-day beat-interval recordings with a known ground truth: sleep/wake
  schedule, mean-interval rhythm, per-state scaling exponent, low-frequency (~0.1 Hz) and
  respiratory oscillations, ectopic beats, artifacts and gaps (:func:`simulate_recording`),
  and a CSV writer with a JSON truth sidecar (:func:`write_recording_csv`).

All synthetic recordings are invented; none comes from a person.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Literal

import numpy as np

from tfhrv.core.validation import check_choice, check_positive
from tfhrv.signal.recording import Recording
from tfhrv.synth.model import (
    ALPHA1_SCALES,
    ALPHA2_SCALES,
    LF_GRID_HZ,
    LONG_SCALES,
    expected_exponents,
    lf_resonance,
    powerlaw_acov,
)
from tfhrv.synth.noise import fgn, fgn_autocovariance, powerlaw_noise

__all__ = [
    "PROFILES",
    "SimulationProfile",
    "SleepSchedule",
    "SyntheticRecording",
    "simulate_recording",
]


# ---------------------------------------------------------------------------------------
# Synthetic recordings
# ---------------------------------------------------------------------------------------

ProfileName = Literal["day-worker", "night-shift", "heart-failure"]


def _as_clock(value: Any, name: str) -> dt.time:
    if isinstance(value, str):
        try:
            return dt.time.fromisoformat(value)
        except ValueError as exc:
            raise ValueError(f"{name} must be a clock time like '23:00', got {value!r}") from exc
    if isinstance(value, dt.time):
        return value.replace(tzinfo=None)
    raise TypeError(f"{name} must be a datetime.time or 'HH:MM', got {value!r}")


@dataclass(frozen=True, slots=True)
class SleepSchedule:
    """Habitual sleep period, the same every day, in local clock time.

    Parameters
    ----------
    sleep_start, sleep_end : datetime.time or str
        Clock times of falling asleep and waking up (``"23:00"`` is accepted).  A period
        that crosses midnight has ``sleep_end < sleep_start``.

    Examples
    --------
    >>> SleepSchedule("23:00", "07:00").hours
    8.0
    """

    sleep_start: dt.time
    sleep_end: dt.time

    def __post_init__(self) -> None:
        a = _as_clock(self.sleep_start, "sleep_start")
        b = _as_clock(self.sleep_end, "sleep_end")
        if a == b:
            raise ValueError(f"sleep_start and sleep_end must differ, got {a} and {b}")
        object.__setattr__(self, "sleep_start", a)
        object.__setattr__(self, "sleep_end", b)

    @property
    def hours(self) -> float:
        """Length of the sleep period in hours."""
        a = self.sleep_start.hour * 3600 + self.sleep_start.minute * 60 + self.sleep_start.second
        b = self.sleep_end.hour * 3600 + self.sleep_end.minute * 60 + self.sleep_end.second
        return ((b - a) % 86400) / 3600.0

    def periods(self, start: dt.datetime, duration_s: float) -> list[tuple[float, float]]:
        """Sleep periods as (start, end) in s from ``start`` that overlap [0, duration_s].

        Clock arithmetic ignores daylight-saving changes (a fixed offset from ``start``).
        """
        t0 = start.replace(tzinfo=None)
        out = []
        for d in range(-1, int(np.ceil(duration_s / 86400.0)) + 2):
            day = dt.datetime.combine(t0.date() + dt.timedelta(days=d), self.sleep_start)
            a = (day - t0).total_seconds()
            b = a + self.hours * 3600.0
            if b > 0 and a < duration_s:
                out.append((a, b))
        return out

    def to_dict(self) -> dict[str, str]:
        """JSON-ready form: ``{"sleep_start": "HH:MM:SS", "sleep_end": "HH:MM:SS"}``."""
        return {"sleep_start": self.sleep_start.isoformat(),
                "sleep_end": self.sleep_end.isoformat()}


@dataclass(frozen=True, slots=True)
class SimulationProfile:
    """Physiology and defects of a synthetic recording (every default documented).

    Change single fields with :func:`dataclasses.replace`, e.g.
    ``dataclasses.replace(PROFILES["day-worker"], alpha_sleep=0.8)``.

    Parameters
    ----------
    name : str
        Profile name, written to the truth.
    schedule : SleepSchedule
        Habitual sleep period.
    nn_wake_ms, nn_sleep_ms : float
        Mean sinus interval awake and asleep (ms).
    transition_min : float
        Duration of the raised-cosine change of the mean interval (and of the component
        amplitudes) centred on falling asleep and on waking (minutes).
    circadian_amp_ms : float
        Amplitude of an extra 24-h cosine of the mean interval, fixed to clock time
        (endogenous rhythm that does not follow a shifted sleep schedule).
    circadian_peak_hour : float
        Clock hour of the longest intervals of that cosine.
    alpha_wake, alpha_sleep : float
        Scaling (DFA) exponent of the long-range fluctuation in each state, in (0, 2).
        alpha < 1 is simulated as exact fGn with H = alpha; alpha >= 1 (fBm-like) as
        Timmer–König 1/f^beta noise; in both cases beta = 2 alpha - 1.
    sd_wake_ms, sd_sleep_ms : float
        Standard deviation of the long-range component (ms): its expected (population)
        value; the centred sample SD over a finite segment is somewhat smaller.
    white_sd_ms : float
        Standard deviation of independent beat-to-beat jitter (ms); it lowers the
        short-scale exponent alpha1.
    resp_hz : float
        Breathing frequency of the respiratory (HF) modulation (Hz).
    resp_amp_wake_ms, resp_amp_sleep_ms : float
        Amplitude of that sinusoidal modulation in each state (ms).
    ectopic_rate : float
        Expected premature beats per sinus beat.
    ventricular_share : float
        Share of premature beats that are ventricular (``V``, full compensatory pause);
        the rest are supraventricular (``S``, sinus reset).
    artifact_rate : float
        Expected detection artifacts per beat: a false extra detection (a short, absurd
        interval) or a missed beat (an interval twice as long), half each on average.
    artifact_label_share : float
        Share of artifacts labelled ``X``; the others are unlabelled (``N``), as they would
        be in an unedited export.
    blend_beats : int
        Half-width (beats) of the variance-preserving cross-fade between the fluctuation
        series of adjacent sleep/wake segments.
    lf_hz : float
        Centre frequency of the low-frequency (LF, baroreflex / Mayer-wave) oscillation
        (Hz), inside the LF band 0.04-0.15 Hz of the Task Force (1996).
    lf_bandwidth_hz : float
        Half-power bandwidth of that oscillation (Hz), below ``lf_hz``: a narrow-band
        stochastic rhythm, not a pure sinusoid.
    lf_sd_wake_ms, lf_sd_sleep_ms : float
        Standard deviation of the LF oscillation in each state (ms); both 0 switches it
        off (and then the recording is the same as without the component).
    """

    name: str = "day-worker"
    schedule: SleepSchedule = SleepSchedule("23:00", "07:00")
    nn_wake_ms: float = 800.0
    nn_sleep_ms: float = 1000.0
    transition_min: float = 30.0
    circadian_amp_ms: float = 20.0
    circadian_peak_hour: float = 4.0
    alpha_wake: float = 1.05
    alpha_sleep: float = 0.85
    sd_wake_ms: float = 85.0
    sd_sleep_ms: float = 55.0
    white_sd_ms: float = 6.0
    resp_hz: float = 0.25
    resp_amp_wake_ms: float = 15.0
    resp_amp_sleep_ms: float = 18.0
    ectopic_rate: float = 0.002
    ventricular_share: float = 0.5
    artifact_rate: float = 0.0005
    artifact_label_share: float = 0.5
    blend_beats: int = 256
    lf_hz: float = 0.1
    lf_bandwidth_hz: float = 0.03
    lf_sd_wake_ms: float = 33.0
    lf_sd_sleep_ms: float = 25.0

    def __post_init__(self) -> None:
        if not isinstance(self.schedule, SleepSchedule):
            raise TypeError(f"schedule must be a SleepSchedule, got {self.schedule!r}")
        for name in ("nn_wake_ms", "nn_sleep_ms", "sd_wake_ms", "sd_sleep_ms", "resp_hz",
                     "lf_hz", "lf_bandwidth_hz"):
            check_positive(getattr(self, name), name)
        for name in ("transition_min", "circadian_amp_ms", "white_sd_ms", "resp_amp_wake_ms",
                     "resp_amp_sleep_ms", "ectopic_rate", "artifact_rate", "lf_sd_wake_ms",
                     "lf_sd_sleep_ms"):
            check_positive(getattr(self, name), name, strict=False)
        if not self.lf_bandwidth_hz < self.lf_hz < 0.5 * LF_GRID_HZ:
            raise ValueError(f"lf_hz must lie between lf_bandwidth_hz and {0.5 * LF_GRID_HZ} Hz, "
                             f"got lf_hz={self.lf_hz!r}, lf_bandwidth_hz={self.lf_bandwidth_hz!r}")
        for name in ("alpha_wake", "alpha_sleep"):
            if not 0.0 < float(getattr(self, name)) < 2.0:
                raise ValueError(f"{name} must be in (0, 2), got {getattr(self, name)!r}")
        for name in ("ventricular_share", "artifact_label_share"):
            if not 0.0 <= float(getattr(self, name)) <= 1.0:
                raise ValueError(f"{name} must be in [0, 1], got {getattr(self, name)!r}")
        if self.ectopic_rate + self.artifact_rate > 0.05:
            raise ValueError("ectopic_rate + artifact_rate must be <= 0.05 (isolated events)")
        if int(self.blend_beats) < 1:
            raise ValueError(f"blend_beats must be >= 1, got {self.blend_beats!r}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form of every field."""
        d = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        d["schedule"] = self.schedule.to_dict()
        return d


#: Named profiles.  ``day-worker``: healthy adult sleeping 23:00-07:00 with the long-range
#: sleep/wake exponents of Ivanov et al. (1999) (wake ~1.05, sleep ~0.85; from memory), an
#: LF (~0.1 Hz) oscillation larger awake and a respiratory one larger asleep (LF/HF about 3
#: awake and 1.4 asleep; Vanoli et al. 1995 report 4 +- 1.4 and 1.22 +- 0.33 in NREM), tuned
#: so that the short-scale alpha1 is about 1.1 awake and 0.9 asleep (healthy ~1.2 +- 0.2,
#: Peng et al. 1995; from memory).  ``night-shift``: the same physiology sleeping
#: 09:00-16:00.  ``heart-failure``: shorter mean interval, low variability, almost no LF
#: power, flattened day/night difference, steep long-range spectrum (beta = 2 alpha - 1 ~
#: 1.4-1.5) and low alpha1 (~0.8: CHF ~0.8 +- 0.2 in Peng et al. 1995; alpha1 < 0.75
#: predicted mortality after MI, Huikuri et al. 2000), after the steep slopes of Huikuri et
#: al. (1998) (from memory).  ``truth["expected_exponents"]`` of a simulation states the
#: alpha1 each profile implies.
PROFILES: Mapping[str, SimulationProfile] = MappingProxyType({
    "day-worker": SimulationProfile(),
    "night-shift": SimulationProfile(name="night-shift",
                                     schedule=SleepSchedule("09:00", "16:00")),
    "heart-failure": SimulationProfile(
        name="heart-failure", nn_wake_ms=690.0, nn_sleep_ms=730.0, circadian_amp_ms=5.0,
        alpha_wake=1.25, alpha_sleep=1.18, sd_wake_ms=35.0, sd_sleep_ms=30.0,
        white_sd_ms=8.0, resp_amp_wake_ms=4.0, resp_amp_sleep_ms=6.0,
        ectopic_rate=0.008, ventricular_share=0.7, lf_sd_wake_ms=3.0, lf_sd_sleep_ms=2.0),
})


@dataclass(frozen=True, slots=True)
class SyntheticRecording:
    """A simulated recording and its ground truth.

    Attributes
    ----------
    recording : Recording
        Beat times, intervals, labels and clock start.
    truth : dict
        JSON-serialisable ground truth: every parameter, the seed, the sleep schedule and
        periods, the per-segment exponents, and the indices and times of ectopic beats,
        artifacts and gaps (see :func:`simulate_recording`).
    """

    recording: Recording
    truth: dict[str, Any]


def _scaling_noise(n: int, alpha: float, gen: np.random.Generator) -> tuple[np.ndarray, str]:
    """Zero-mean series of ``n`` beats, expected variance 1, with DFA exponent ``alpha``."""
    if n < 2:
        return gen.standard_normal(n), "white"
    if alpha < 1.0:
        x, model = fgn(n, alpha, rng=gen), "fGn"
    else:
        x, model = powerlaw_noise(n, 2.0 * alpha - 1.0, rng=gen), "power-law"
    return x - x.mean(), model


def _blended_fluctuation(state: np.ndarray, alphas: tuple[float, float], blend: int,
                         gen: np.random.Generator) -> tuple[np.ndarray, list[dict[str, Any]]]:
    """Per-segment scaling noise joined by variance-preserving cross-fades."""
    n = state.size
    cuts = np.concatenate([[0], np.flatnonzero(np.diff(state)) + 1, [n]])
    lengths = np.diff(cuts)
    # half-width of the cross-fade at each inner boundary
    half = [min(blend, lengths[j - 1] // 2, lengths[j] // 2) for j in range(1, lengths.size)]
    x = np.zeros(n)
    segs = []
    for j in range(lengths.size):
        a, b = int(cuts[j]), int(cuts[j + 1])
        pre = half[j - 1] if j > 0 else 0
        post = half[j] if j < lengths.size - 1 else 0
        lo, hi = a - pre, b + post
        alpha = alphas[int(state[a])]
        piece, model = _scaling_noise(hi - lo, alpha, gen)
        w = np.ones(hi - lo)
        if pre:
            ramp = (np.arange(2 * pre) + 0.5) / (2 * pre)
            w[: 2 * pre] = np.sin(0.5 * np.pi * ramp)
        if post:
            ramp = (np.arange(2 * post) + 0.5) / (2 * post)
            w[-2 * post:] = np.cos(0.5 * np.pi * ramp)
        x[lo:hi] += w * piece
        segs.append({"state": "sleep" if state[a] else "wake", "sinus_first": a,
                     "sinus_last": b - 1, "alpha": alpha, "model": model, "n_path": hi - lo})
    return x, segs


def _state_exponents(prof: SimulationProfile, state: str, n_path: int,
                     nn_s: float) -> tuple[float, float, float]:
    """(alpha1, alpha2, alpha_long) of the expected DFA-1 fluctuation function of one state's model
    (see :func:`tfhrv.synth.model.expected_exponents`)."""
    alpha = float(getattr(prof, f"alpha_{state}"))
    k = np.arange(int(LONG_SCALES[-1]) + 1)
    rho = (fgn_autocovariance(alpha, k) if alpha < 1.0
           else powerlaw_acov(k, 2.0 * alpha - 1.0, n_path))
    return expected_exponents(
        rho, nn_s=nn_s, sd_ms=getattr(prof, f"sd_{state}_ms"), white_sd_ms=prof.white_sd_ms,
        resp_hz=prof.resp_hz, resp_amp_ms=getattr(prof, f"resp_amp_{state}_ms"),
        lf_hz=prof.lf_hz, lf_bandwidth_hz=prof.lf_bandwidth_hz,
        lf_sd_ms=getattr(prof, f"lf_sd_{state}_ms"))


def _model_description(prof: SimulationProfile) -> dict[str, Any]:
    """The additive components of the sinus-interval model and their parameters (truth)."""
    def states(fmt: str) -> dict[str, float]:
        return {st: getattr(prof, fmt.format(st)) for st in ("wake", "sleep")}

    r = float(np.exp(-np.pi * prof.lf_bandwidth_hz / LF_GRID_HZ))
    return {
        "formula": "RR_k = m(t_k) + sd(t_k) x_k + white e_k + A(t_k) sin(2 pi f_r t_k + phi)"
                   " + sd_LF(t_k) L(t_k)",
        "mean": {"nn_ms": states("nn_{}_ms"), "circadian_amp_ms": prof.circadian_amp_ms,
                 "circadian_peak_hour": prof.circadian_peak_hour},
        "scaling": {"domain": "beat", "sd_ms": states("sd_{}_ms"), "alpha": states("alpha_{}"),
                    "model": "per segment: fGn (Davies-Harte) if alpha < 1, else Timmer-Koenig "
                             "1/f^beta noise, beta = 2 alpha - 1"},
        "white": {"domain": "beat", "sd_ms": prof.white_sd_ms},
        "respiratory": {"domain": "time", "kind": "sinusoid of random phase",
                        "frequency_hz": prof.resp_hz, "amplitude_ms": states("resp_amp_{}_ms")},
        "lf": {"domain": "time", "kind": "band-pass AR(2) resonance (narrow-band Gaussian "
                                         "oscillation), unit variance, read at the beat times "
                                         "by linear interpolation",
               "filter": "H(z) = (1 - z^-2) / (1 - 2 r cos(w0) z^-1 + r^2 z^-2), "
                         "w0 = 2 pi f0 / fs, r = exp(-pi B / fs)",
               "grid_hz": LF_GRID_HZ, "centre_hz": prof.lf_hz,
               "bandwidth_hz": prof.lf_bandwidth_hz, "pole_radius": round(r, 12),
               "sd_ms": states("lf_sd_{}_ms")},
    }


def _sleep_weight(t: np.ndarray, periods: list[tuple[float, float]], ramp_s: float) -> np.ndarray:
    """0 awake, 1 asleep, raised-cosine ramps of length ``ramp_s`` centred on each edge."""
    w = np.zeros_like(t)
    for a, b in periods:
        if ramp_s > 0:
            up = np.clip((t - (a - ramp_s / 2)) / ramp_s, 0.0, 1.0)
            down = np.clip((t - (b - ramp_s / 2)) / ramp_s, 0.0, 1.0)
            s = 0.5 * (1 - np.cos(np.pi * up)) - 0.5 * (1 - np.cos(np.pi * down))
        else:
            s = ((t >= a) & (t < b)).astype(float)
        w = np.maximum(w, s)
    return w


def _place_events(n: int, count: int, gen: np.random.Generator, spacing: int = 5) -> np.ndarray:
    """Up to ``count`` sorted indices in [3, n - 4], at least ``spacing`` apart."""
    if count <= 0 or n < 10:
        return np.zeros(0, dtype=np.int64)
    cand = np.sort(gen.choice(np.arange(3, n - 3), size=min(count, n - 6), replace=False))
    keep = [int(cand[0])]
    for c in cand[1:]:
        if c - keep[-1] >= spacing:
            keep.append(int(c))
    return np.asarray(keep, dtype=np.int64)


def simulate_recording(
    *,
    days: float = 1.0,
    start: dt.datetime = dt.datetime(2024, 3, 4, 8, 0),
    profile: ProfileName | SimulationProfile = "day-worker",
    schedule: SleepSchedule | None = None,
    gaps: Sequence[tuple[float, float]] = (),
    sampling_hz: float | None = None,
    record_id: str = "synthetic",
    rng=None,
) -> SyntheticRecording:
    """Simulate a multi-day beat-interval recording with a known ground truth.

    Parameters
    ----------
    days : float, default 1
        Length in days (at least 10 minutes).
    start : datetime.datetime, default 2024-03-04 08:00
        Clock time of the start (naive = local clock time).
    profile : {"day-worker", "night-shift", "heart-failure"} or SimulationProfile
        Physiology and defect rates (see :data:`PROFILES` and :class:`SimulationProfile`).
    schedule : SleepSchedule, optional
        Overrides the profile's sleep schedule.
    gaps : sequence of (start_s, duration_s)
        Stretches without beats (e.g. a loose electrode), in s from the start; each must
        lie at least 60 s inside the record and they must not overlap.  The interval
        that spans a gap is kept, as long as the gap, with label ``N``.
    sampling_hz : float, optional
        Round beat times to this sampling clock (as an ECG detector would); ``None``
        keeps them exact.
    record_id : str, default "synthetic"
        Identifier written to the recording.
    rng : None, int or numpy.random.Generator
        Source of randomness.  The seed actually used is stored in ``truth["seed"]``;
        ``simulate_recording(..., rng=truth["seed"])`` reproduces the recording.

    Returns
    -------
    SyntheticRecording
        ``recording`` and ``truth``.  ``truth`` keys: ``generator``, ``seed``,
        ``record_id``, ``start``, ``days``, ``duration_s``, ``sampling_hz``,
        ``profile`` (every parameter), ``sleep_periods`` (list of dicts with ``start_s``,
        ``end_s``, ``start``, ``end``), ``segments`` (list: ``state``, ``alpha``,
        ``beta`` = 2 alpha - 1, ``model`` ("fGn" or "power-law"), ``hurst_class`` and
        ``hurst`` (H of the fGn or fBm class), ``first_index``, ``last_index``,
        ``start_s``, ``end_s``, ``median_nn_ms``, ``alpha1_expected``, ``alpha2_expected``
        and ``alpha_long_expected``: the DFA-1 exponents over 4..16, 16..64 and 64..1024
        beats that the segment's model implies), ``components`` (the additive parts of the
        model and their parameters), ``expected_exponents`` (``alpha1``, ``alpha2`` and
        ``alpha_long`` per state for a
        nominal segment, the scales, and how they were obtained), ``ectopic`` (columns
        ``index``, ``label``, ``time_s``,
        ``coupling_ratio``, ``sinus_ms``, ``next_sinus_ms``), ``artifact`` (columns
        ``index``, ``kind``, ``label``, ``time_s``), ``gap`` (columns ``index``,
        ``start_s``, ``end_s``, ``requested_start_s``, ``requested_duration_s``),
        ``affected_index`` (every interval that is not a clean sinus interval) and
        ``n_intervals``.

    Notes
    -----
    Sinus intervals are generated on the beat index k with approximate beat times t_k:

        RR_k = m(t_k) + sd(t_k) x_k + sigma_w e_k + A(t_k) sin(2 pi f_r t_k + phi)
               + sd_LF(t_k) L(t_k),

    with m(t) = nn_wake + (nn_sleep - nn_wake) s(t) + C cos(2 pi (h(t) - h_peak)/24),
    s(t) in [0, 1] the sleep weight (raised-cosine ramps of ``transition_min``), h(t) the
    clock hour, sd(t), A(t) and sd_LF(t) interpolated between the wake and sleep values by
    s(t), e_k white noise and x_k the scaling component.  For each sleep or wake segment
    (beats whose first-pass time falls inside or outside a sleep period) x is an
    independent path of expected variance 1, centred on its own mean, with the state's
    exponent: fGn with H = alpha for alpha < 1 (Davies & Harte 1987); for alpha >= 1,
    1/f^beta noise with beta = 2 alpha - 1 (Timmer & König 1995), because an fBm with
    H = alpha - 1 near 0 converges slowly to its scaling (DFA-1 over 50-500 beats gave
    1.00 instead of 1.05 for H = 0.05 in our runs).  Adjacent paths are joined by
    cross-fades with weights cos and sin over 2 ``blend_beats`` beats, so the variance
    stays 1.  Beat times are the running sum of the intervals; t_k is refined by three
    fixed-point passes.  Segment means are zero, so the fluctuation does not shift the
    sleep boundaries in clock time.

    L(t) is the low-frequency (baroreflex, Mayer-wave) rhythm: a unit-variance Gaussian
    narrow-band oscillation, white noise through the resonance H(z) = (1 - z^-2) /
    (1 - 2 r cos(w0) z^-1 + r^2 z^-2) on a 4 Hz time grid (w0 = 2 pi ``lf_hz`` / 4,
    r = exp(-pi ``lf_bandwidth_hz`` / 4): power peaks near ``lf_hz`` with half-power width
    ``lf_bandwidth_hz``; the zero at 0 Hz keeps it out of the long-range scaling), read at
    t_k by linear interpolation.  With a period of about 10 beats it steepens the DFA
    fluctuation function over 4-16 beats: healthy-like profiles reach alpha1 about 1.1
    awake and 0.9 asleep (Peng et al. 1995 report ~1.2 in healthy subjects; from memory),
    and the LF/HF balance moves towards HF in sleep (Vanoli et al. 1995).

    ``expected_exponents`` and the per-segment ``alpha1_expected`` and
    ``alpha_long_expected`` are exact for the stationary Gaussian model of each state:
    E F^2(n) = tr(Q L Sigma L^T) / n (L the cumulative-sum matrix, Q the projection that
    removes a line, Sigma the beat-domain autocovariance, the sum of the components'
    with the state's mean interval as beat spacing), and the exponent is the least-squares
    slope of log sqrt(E F^2) on log n.  The mean alpha1 of 5-min windows agrees within
    0.01 (scripts/mc_synth_scaling.py); DFA-1 over 64..1024 beats lies about 0.01 below
    the component exponent alpha, as the short-scale parts add a near-constant to F^2.
    The same plateau lowers alpha2 (16..64 beats) of the healthy-like profiles to about
    0.83 awake and 0.76 asleep, below the ~1.0 of Peng et al. (1995; from memory).

    Premature beats (rate ``ectopic_rate``) shorten interval i to c RR_i with c ~
    U(0.55, 0.75) (``V``) or U(0.60, 0.80) (``S``).  A ventricular beat leaves the sinus
    node undisturbed, so the following interval is a full compensatory pause:
    RR'_i + RR'_{i+1} = RR_i + RR_{i+1}.  A supraventricular beat resets the sinus node:
    RR'_{i+1} = RR_{i+1} u with u ~ U(1.0, 1.15) (a less than compensatory pause)
    [textbook electrocardiography; from memory].  Artifacts: a false extra detection
    splits an interval into u RR and (1 - u) RR with u ~ U(0.1, 0.4); a missed beat
    merges two intervals.  Neither moves the true beats.  Events are isolated (at least
    5 beats apart) and events touching a gap are dropped.

    The sleep/wake direction of the default exponents follows Ivanov et al. (1999):
    lower exponent in sleep than in wake.

    References
    ----------
    Ivanov PCh, Bunde A, Amaral LAN, et al. Sleep-wake differences in scaling behavior of
    the human heartbeat. Europhys Lett 1999;48:594-600. arXiv:cond-mat/9911073
    Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
    doi:10.1093/biomet/74.1.95
    Timmer J, König M. On generating power law noise. Astron Astrophys 1995;300:707-710.
    Peng C-K, Havlin S, Stanley HE, Goldberger AL. Quantification of scaling exponents and
    crossover phenomena in nonstationary heartbeat time series. Chaos 1995;5:82-87.
    doi:10.1063/1.166141
    Vanoli E, Adamson PB, Ba-Lin, et al. Heart rate variability during specific sleep
    stages. Circulation 1995;91:1918-1922. doi:10.1161/01.CIR.91.7.1918
    Huikuri HV, Mäkikallio TH, Peng C-K, et al. Fractal correlation properties of R-R
    interval dynamics and mortality in patients with depressed left ventricular function
    after an acute myocardial infarction. Circulation 2000;101:47-53.
    doi:10.1161/01.CIR.101.1.47

    Examples
    --------
    >>> sim = simulate_recording(days=0.25, rng=7)
    >>> sim.recording.n_beats > 20000, sim.truth["segments"][0]["state"]
    (True, 'wake')
    >>> sim.truth["seed"]
    7
    """
    days, duration, prof, sampling_hz, gap_list = _checked_inputs(
        days=days, start=start, profile=profile, schedule=schedule, sampling_hz=sampling_hz,
        gaps=gaps)
    seed = _seed(rng)
    gen = np.random.default_rng(seed)
    periods = prof.schedule.periods(start, duration)
    sinus = _sinus_intervals(prof, start, duration, periods, gen)
    events = _insert_events(sinus.nn, prof, gen)
    times = np.cumsum(events.rr) / 1000.0
    if sampling_hz is not None:
        times = np.round(times * sampling_hz) / sampling_hz
    cut = _cut_gaps(times, events, duration, gap_list)
    rec = Recording(cut.times, np.diff(cut.times, prepend=0.0) * 1000.0, cut.labels,
                    start=start, record_id=record_id,
                    metadata={"synthetic": True, "profile": prof.name, "seed": seed})
    truth = _truth(prof, sinus, events, cut, times, seed=seed, record_id=record_id,
                   start=start, days=days, duration=duration, sampling_hz=sampling_hz,
                   periods=periods, gap_list=gap_list)
    return SyntheticRecording(rec, truth)


def _checked_inputs(*, days, start, profile, schedule, sampling_hz, gaps):
    """Validated ``days``, duration (s), profile, sampling rate and sorted gap list."""
    days = check_positive(days, "days")
    duration = days * 86400.0
    if duration < 600.0:
        raise ValueError(f"days must cover at least 10 minutes, got {days!r}")
    if not isinstance(start, dt.datetime):
        raise TypeError(f"start must be a datetime.datetime, got {start!r}")
    if isinstance(profile, str):
        prof = PROFILES[check_choice(profile, "profile", tuple(PROFILES))]
    elif isinstance(profile, SimulationProfile):
        prof = profile
    else:
        raise TypeError(f"profile must be a profile name or a SimulationProfile, got {profile!r}")
    if schedule is not None:
        if not isinstance(schedule, SleepSchedule):
            raise TypeError(f"schedule must be a SleepSchedule or None, got {schedule!r}")
        prof = dataclasses.replace(prof, schedule=schedule)
    if sampling_hz is not None:
        sampling_hz = check_positive(sampling_hz, "sampling_hz")
        if sampling_hz < 50.0:
            raise ValueError(f"sampling_hz must be >= 50, got {sampling_hz!r}")
    gap_list = sorted((float(a), float(d)) for a, d in gaps)
    prev_end = 0.0
    for a, d in gap_list:
        if d <= 0 or a < 60.0 or a + d > duration - 60.0 or a < prev_end:
            raise ValueError(
                f"gaps must be (start_s, duration_s) pairs with duration > 0, at least 60 s "
                f"inside the record and not overlapping, got {(a, d)!r}"
            )
        prev_end = a + d
    return days, duration, prof, sampling_hz, gap_list


def _seed(rng) -> int:
    """The integer seed behind ``rng`` (stored in the truth, so a run can be repeated)."""
    if isinstance(rng, np.random.Generator):
        return int(rng.integers(2**63 - 1))
    if rng is None:
        return int(np.random.SeedSequence().entropy % (2**63 - 1))
    return int(rng)


@dataclass(frozen=True, slots=True)
class _Sinus:
    nn: np.ndarray  # sinus intervals (ms)
    segments: list  # sleep/wake segments of the scaling component


def _sinus_intervals(prof: SimulationProfile, start: dt.datetime, duration: float,
                     periods: list[tuple[float, float]], gen: np.random.Generator) -> _Sinus:
    """The sinus interval series of the model in :func:`simulate_recording` (Notes)."""
    t_clock0 = start.hour * 3600.0 + start.minute * 60.0 + start.second + start.microsecond / 1e6
    ramp_s = 60.0 * prof.transition_min

    def mean_nn(t: np.ndarray, s: np.ndarray) -> np.ndarray:
        hour = ((t_clock0 + t) / 3600.0) % 24.0
        circ = prof.circadian_amp_ms * np.cos(2 * np.pi * (hour - prof.circadian_peak_hour) / 24)
        return prof.nn_wake_ms + (prof.nn_sleep_ms - prof.nn_wake_ms) * s + circ

    # first pass: beat times from the mean interval alone
    span = duration * 1.02 + 300.0
    grid = np.arange(0.0, span + 10.0, 5.0)
    rate = 1000.0 / mean_nn(grid, _sleep_weight(grid, periods, ramp_s))
    phase = np.concatenate([[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * 5.0)])
    n_sinus = int(phase[-1])
    t = np.interp(np.arange(1, n_sinus + 1), phase, grid)
    asleep = np.zeros(n_sinus, dtype=bool)
    for a, b in periods:
        asleep |= (t >= a) & (t < b)
    x, segs = _blended_fluctuation(asleep.astype(np.int8), (prof.alpha_wake, prof.alpha_sleep),
                                   int(prof.blend_beats), gen)
    white = gen.standard_normal(n_sinus) * prof.white_sd_ms
    resp_phase = gen.uniform(0, 2 * np.pi)
    lf_on = prof.lf_sd_wake_ms > 0 or prof.lf_sd_sleep_ms > 0
    if lf_on:  # unit-variance LF oscillation on a 4 Hz grid well past the last beat
        lf_grid = lf_resonance(int(1.1 * span * LF_GRID_HZ) + 2, prof.lf_hz,
                               prof.lf_bandwidth_hz, gen)
        grid_i = np.arange(lf_grid.size, dtype=np.float64)
    for _ in range(3):
        s = _sleep_weight(t, periods, ramp_s)
        sd = prof.sd_wake_ms + (prof.sd_sleep_ms - prof.sd_wake_ms) * s
        amp = prof.resp_amp_wake_ms + (prof.resp_amp_sleep_ms - prof.resp_amp_wake_ms) * s
        resp = amp * np.sin(2 * np.pi * prof.resp_hz * t + resp_phase)
        nn = mean_nn(t, s) + sd * x + white + resp
        if lf_on:
            lf_sd = prof.lf_sd_wake_ms + (prof.lf_sd_sleep_ms - prof.lf_sd_wake_ms) * s
            nn += lf_sd * np.interp(t * LF_GRID_HZ, grid_i, lf_grid)
        nn = np.maximum(nn, 250.0)  # physiological floor; not reached with the shipped profiles
        t = np.cumsum(nn) / 1000.0
    return _Sinus(nn, segs)


@dataclass(frozen=True, slots=True)
class _Events:
    rr: np.ndarray  # intervals after premature beats and artifacts (ms)
    labels: np.ndarray
    pos: np.ndarray  # new index of the first piece of each sinus interval
    ect: np.ndarray  # sinus index of each premature beat
    art: np.ndarray  # sinus index of each artifact
    sinus_labels: np.ndarray
    coupling: np.ndarray
    extra: np.ndarray  # artifact is a false extra detection (else a missed beat)
    art_labels: np.ndarray


def _insert_events(nn: np.ndarray, prof: SimulationProfile, gen: np.random.Generator
                   ) -> _Events:
    """Premature beats and detection artifacts on the sinus index (Notes of
    :func:`simulate_recording`)."""
    n_sinus = nn.size
    n_ev = gen.poisson((prof.ectopic_rate + prof.artifact_rate) * n_sinus)
    ev = _place_events(n_sinus, n_ev, gen)
    is_ect = gen.random(ev.size) < prof.ectopic_rate / max(prof.ectopic_rate + prof.artifact_rate,
                                                            1e-300)
    ect, art = ev[is_ect], ev[~is_ect]
    rr = nn.copy()
    lab = np.full(n_sinus, "N", dtype="<U1")
    is_v = gen.random(ect.size) < prof.ventricular_share
    coup = np.where(is_v, gen.uniform(0.55, 0.75, ect.size), gen.uniform(0.60, 0.80, ect.size))
    rr[ect] = coup * nn[ect]
    rr[ect + 1] = np.where(is_v, nn[ect] + nn[ect + 1] - rr[ect],
                           nn[ect + 1] * gen.uniform(1.0, 1.15, ect.size))
    lab[ect] = np.where(is_v, "V", "S")
    extra = gen.random(art.size) < 0.5
    art_lab = np.where(gen.random(art.size) < prof.artifact_label_share, "X", "N")
    counts = np.ones(n_sinus, dtype=np.int64)
    counts[art[extra]] = 2
    counts[art[~extra] + 1] = 0
    pos = np.cumsum(counts) - counts
    out_rr = np.repeat(rr, counts)
    out_lab = np.repeat(lab, counts)
    u = gen.uniform(0.1, 0.4, int(extra.sum()))
    pe = pos[art[extra]]
    out_rr[pe] = u * rr[art[extra]]
    out_rr[pe + 1] = (1 - u) * rr[art[extra]]
    out_lab[pe] = art_lab[extra]
    out_lab[pe + 1] = "N"
    pm = pos[art[~extra]]
    out_rr[pm] = rr[art[~extra]] + rr[art[~extra] + 1]
    out_lab[pm] = art_lab[~extra]
    return _Events(out_rr, out_lab, pos, ect, art, lab, coup, extra, art_lab)


@dataclass(frozen=True, slots=True)
class _Cut:
    times: np.ndarray  # beat times kept (s)
    labels: np.ndarray
    new_index: np.ndarray  # index after the cut of every beat before it
    ok_ect: np.ndarray  # premature beat and its companion survived the cut
    ok_art: np.ndarray
    spanning: list  # index (before the cut) of the interval spanning each gap
    gap_rows: list


def _cut_gaps(times: np.ndarray, ev: _Events, duration: float,
              gap_list: list[tuple[float, float]]) -> _Cut:
    """Beats up to ``duration`` with the gaps removed; which events survived."""
    n_keep = int(np.searchsorted(times, duration, side="right"))
    times, labels = times[:n_keep], ev.labels[:n_keep]
    ect_idx = ev.pos[ev.ect]
    art_idx = ev.pos[ev.art]
    art_span = np.where(ev.extra, 2, 1)
    keep = np.ones(n_keep, dtype=bool)
    spanning_old = []
    gap_rows = []
    for a, d in gap_list:
        inside = (times >= a) & (times < a + d)
        keep &= ~inside
        nxt = int(np.searchsorted(times, a + d, side="left"))
        spanning_old.append(nxt)
        gap_rows.append((a, d))
    new_index = np.cumsum(keep) - 1
    bad = ~keep
    bad_span = np.zeros(n_keep, dtype=bool)
    bad_span[spanning_old] = True

    def survives(idx: np.ndarray, width: np.ndarray) -> np.ndarray:
        ok = np.ones(idx.size, dtype=bool)
        for k in range(int(width.max(initial=1))):
            j = idx + k
            inside = j < n_keep
            jj = np.minimum(j, n_keep - 1)
            ok &= np.where(k < width, inside & ~bad[jj] & ~bad_span[jj], True)
        return ok

    ok_e = survives(ect_idx, np.full(ect_idx.size, 2))
    ok_a = survives(art_idx, art_span)
    return _Cut(times[keep], labels[keep], new_index, ok_e, ok_a, spanning_old, gap_rows)


def _truth(prof: SimulationProfile, sinus: _Sinus, ev: _Events, cut: _Cut,
           t_all: np.ndarray, *, seed: int, record_id: str, start: dt.datetime, days: float,
           duration: float, sampling_hz: float | None, periods: list,
           gap_list: list) -> dict[str, Any]:
    """The ground-truth dictionary documented in :func:`simulate_recording`."""
    nn, times, pos = sinus.nn, cut.times, ev.pos
    ok_e, ok_a, extra = cut.ok_ect, cut.ok_art, ev.extra

    def r4(v: Any) -> list[float]:
        return [round(float(z), 4) for z in np.atleast_1d(v)]

    e_new = cut.new_index[pos[ev.ect][ok_e]]
    a_new = cut.new_index[pos[ev.art][ok_a]]
    g_new = cut.new_index[np.asarray(cut.spanning, dtype=np.int64)]
    affected = set(e_new.tolist()) | set((e_new + 1).tolist()) | set(a_new.tolist())
    affected |= set((a_new[extra[ok_a]] + 1).tolist()) | set(g_new.tolist())

    seg_rows = []
    for sg in sinus.segments:
        t_first = float(t_all[pos[sg["sinus_first"]]])
        t_last = float(t_all[pos[sg["sinus_last"]]])
        i0 = int(np.searchsorted(times, t_first, side="left"))
        i1 = int(np.searchsorted(times, t_last, side="right")) - 1
        if i0 >= times.size or i1 < i0:
            continue
        alpha = float(sg["alpha"])
        fgn_class = sg["model"] == "fGn"
        nn_seg = float(np.median(nn[sg["sinus_first"]:sg["sinus_last"] + 1]))
        a1, a2, al = _state_exponents(prof, sg["state"], int(sg["n_path"]), nn_seg / 1000.0)
        seg_rows.append({"state": sg["state"], "alpha": alpha, "beta": round(2 * alpha - 1, 12),
                         "model": sg["model"], "hurst_class": "fGn" if fgn_class else "fBm",
                         "hurst": round(alpha if fgn_class else alpha - 1.0, 12),
                         "first_index": i0,
                         "last_index": i1, "start_s": round(float(times[i0]), 4),
                         "end_s": round(float(times[i1]), 4),
                         "median_nn_ms": round(nn_seg, 4), "alpha1_expected": round(a1, 4),
                         "alpha2_expected": round(a2, 4), "alpha_long_expected": round(al, 4)})

    def clock(sec: float) -> str:
        return (start + dt.timedelta(seconds=sec)).isoformat()

    nominal = {"wake": (24.0 - prof.schedule.hours) * 3.6e6 / prof.nn_wake_ms,
               "sleep": prof.schedule.hours * 3.6e6 / prof.nn_sleep_ms}
    expect = {st: _state_exponents(prof, st, int(nominal[st]), getattr(prof, f"nn_{st}_ms") / 1e3)
              for st in ("wake", "sleep")}
    ect_ok = ev.ect[ok_e]
    return {
        "generator": "tfhrv.synth.recordings.simulate_recording",
        "seed": seed,
        "record_id": record_id,
        "start": start.isoformat(),
        "days": days,
        "duration_s": duration,
        "sampling_hz": sampling_hz,
        "profile": prof.to_dict(),
        "sleep_periods": [{"start_s": a, "end_s": b, "start": clock(a), "end": clock(b)}
                          for a, b in periods],
        "segments": seg_rows,
        "components": _model_description(prof),
        "expected_exponents": {
            "alpha1": {st: round(v[0], 4) for st, v in expect.items()},
            "alpha2": {st: round(v[1], 4) for st, v in expect.items()},
            "alpha_long": {st: round(v[2], 4) for st, v in expect.items()},
            "alpha1_scales": ALPHA1_SCALES.tolist(),
            "alpha2_scales": ALPHA2_SCALES.tolist(),
            "alpha_long_scales": LONG_SCALES.tolist(),
            "nominal_segment_beats": {st: int(v) for st, v in nominal.items()},
            "method": "slope of log sqrt(E F^2(n)) on log n, E F^2 the expected DFA-1 "
                      "fluctuation of the state's model (the sum of the components' "
                      "autocovariances; beat spacing of the time-domain components = the "
                      "state's mean interval; power-law paths as long as a nominal segment), "
                      "by the exact trace formula E F^2(n) = tr(Q L Sigma L^T)/n; per "
                      "segment the same with its own length and median interval",
            "check": "the Monte-Carlo mean of DFA-1 alpha1 over 5-min windows agrees within "
                     "0.02 (scripts/mc_synth_scaling.py)",
        },
        "ectopic": {
            "index": e_new.tolist(),
            "label": ev.sinus_labels[ect_ok].tolist(),
            "time_s": r4(times[e_new]) if e_new.size else [],
            "coupling_ratio": r4(ev.coupling[ok_e]) if e_new.size else [],
            "sinus_ms": r4(nn[ect_ok]) if e_new.size else [],
            "next_sinus_ms": r4(nn[ect_ok + 1]) if e_new.size else [],
        },
        "artifact": {
            "index": a_new.tolist(),
            "kind": np.where(extra[ok_a], "extra", "missed").tolist(),
            "label": ev.art_labels[ok_a].tolist(),
            "time_s": r4(times[a_new]) if a_new.size else [],
        },
        "gap": {
            "index": g_new.tolist(),
            "start_s": [round(float(times[i - 1]), 4) for i in g_new],
            "end_s": [round(float(times[i]), 4) for i in g_new],
            "requested_start_s": [a for a, _ in cut.gap_rows],
            "requested_duration_s": [d for _, d in cut.gap_rows],
        },
        "affected_index": sorted(int(i) for i in affected),
        "n_intervals": int(times.size),
    }
