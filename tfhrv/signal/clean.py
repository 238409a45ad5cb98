"""NN extraction, artefact rules, gap detection and the quality summary.

Every interval of the recording keeps a reason code (:class:`Reason`): ``KEPT`` or why it
was removed.  The first rule that applies wins, in this order: gap, non-sinus end,
non-sinus start, physiological range, relative change.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np

from tfhrv.core.validation import check_positive, readonly
from tfhrv.signal.recording import MAX_SPAN_S, SINUS_LABELS, Recording

__all__ = ["CleanOptions", "CleanResult", "Quality", "Reason", "clean"]


class Reason(enum.IntEnum):
    """Why an interval was kept or removed (stored as ``uint8`` in outputs)."""

    KEPT = 0
    GAP = 1
    NON_SINUS_END = 2
    NON_SINUS_START = 3
    OUT_OF_RANGE = 4
    RELATIVE_CHANGE = 5

    @classmethod
    def meanings(cls) -> str:
        """Space-separated names in code order (CF ``flag_meanings``)."""
        return " ".join(r.name.lower() for r in cls)


@dataclass(frozen=True, slots=True)
class CleanOptions:
    """Thresholds of the cleaning rules.

    Attributes
    ----------
    min_ms, max_ms : float
        Physiological range, default 300-2000 ms (HR 30-200 bpm; common practice, see
        e.g. the review of Peltola 2012, Front Physiol 3:148).
    max_relative_change : float
        Reject an interval differing from the local reference by more than this fraction;
        default 0.2 (common practice usually credited to Malik et al. 1989, from memory;
        Karlsson et al. 2012 tested 10-50 %).
    reference_beats : int
        Width of the running median of accepted intervals used as the local reference.
    gap_min_s : float
        An interval at least this long, or a beat-time jump that exceeds the interval by
        at least this much, is a gap (unreadable stretch); default 3 s (common practice:
        longer than any plausible sinus pause at rest).
    max_span_s : float
        Longest accepted span from the recording start to the last beat, default
        :data:`tfhrv.signal.recording.MAX_SPAN_S` (31 days; common practice).  The hourly
        coverage and the resampled series grow with the span, so a record claiming more
        is refused rather than allowed to exhaust memory.
    """

    min_ms: float = 300.0
    max_ms: float = 2000.0
    max_relative_change: float = 0.2
    reference_beats: int = 11
    gap_min_s: float = 3.0
    max_span_s: float = MAX_SPAN_S

    def __post_init__(self) -> None:
        check_positive(self.max_span_s, "max_span_s")
        check_positive(self.min_ms, "min_ms")
        check_positive(self.max_ms, "max_ms")
        if self.min_ms >= self.max_ms:
            raise ValueError(f"min_ms must be < max_ms, got {self.min_ms} and {self.max_ms}")
        check_positive(self.max_relative_change, "max_relative_change")
        check_positive(self.gap_min_s, "gap_min_s")
        if int(self.reference_beats) < 3:
            raise ValueError(f"reference_beats must be >= 3, got {self.reference_beats!r}")


@dataclass(frozen=True, slots=True)
class Quality:
    """Quality summary of a cleaned recording.

    Attributes
    ----------
    recorded_s : float
        Span from the first to the last beat.
    analysable_s : float
        Sum of the kept NN intervals.
    coverage : float
        analysable_s / recorded_s.
    n_intervals, n_kept : int
    share_kept : float
    removed : mapping of str to int
        Count of intervals per removal reason.
    ectopic_fraction : float
        Share of beats labelled non-sinus (any code other than ``N``).
    n_gaps : int
        Number of detected gaps.
    longest_gap_s : float
        Longest stretch of time not covered by kept intervals.
    gaps_s : numpy.ndarray
        (n, 2) start and end (s from start) of every uncovered stretch >= ``gap_min_s``.
    hourly_coverage : numpy.ndarray
        Fraction of each elapsed hour covered by kept intervals.
    nn_mean_ms, nn_sd_ms, rmssd_ms : float
        Mean, SD and root mean square of successive differences of the kept intervals
        (successive differences only between adjacent kept intervals; Task Force 1996).
    """

    recorded_s: float
    analysable_s: float
    coverage: float
    n_intervals: int
    n_kept: int
    share_kept: float
    removed: MappingProxyType
    ectopic_fraction: float
    n_gaps: int
    longest_gap_s: float
    gaps_s: np.ndarray
    hourly_coverage: np.ndarray
    nn_mean_ms: float
    nn_sd_ms: float
    rmssd_ms: float

    def as_dict(self) -> dict:
        """Plain JSON-friendly dictionary."""
        return {
            "recorded_h": self.recorded_s / 3600,
            "analysable_h": self.analysable_s / 3600,
            "coverage": self.coverage,
            "n_intervals": self.n_intervals,
            "n_kept": self.n_kept,
            "share_kept": self.share_kept,
            "removed": dict(self.removed),
            "ectopic_fraction": self.ectopic_fraction,
            "n_gaps": self.n_gaps,
            "longest_gap_s": self.longest_gap_s,
            "gaps_s": self.gaps_s.tolist(),
            "hourly_coverage": self.hourly_coverage.tolist(),
            "nn_mean_ms": self.nn_mean_ms,
            "nn_sd_ms": self.nn_sd_ms,
            "rmssd_ms": self.rmssd_ms,
        }


@dataclass(frozen=True, slots=True)
class CleanResult:
    """A recording with the verdict on every interval.

    ``keep`` marks the NN intervals; ``reason`` holds a :class:`Reason` code per interval.
    """

    recording: Recording
    keep: np.ndarray
    reason: np.ndarray
    quality: Quality
    options: CleanOptions = field(default_factory=CleanOptions)

    @property
    def nn_ms(self) -> np.ndarray:
        """The kept NN intervals (beat-indexed series)."""
        return self.recording.rr_ms[self.keep]

    @property
    def nn_time_s(self) -> np.ndarray:
        """Beat times of the kept intervals."""
        return self.recording.beat_time_s[self.keep]


def clean(recording: Recording, /, *, options: CleanOptions | None = None) -> CleanResult:
    """Extract NN intervals and summarise quality.

    Parameters
    ----------
    recording : Recording
    options : CleanOptions, optional

    Returns
    -------
    CleanResult

    Notes
    -----
    Rules, in order (the first that applies is the reason):

    1. gap: ``rr >= gap_min_s`` or the beat-time step exceeds ``rr`` by ``gap_min_s``;
    2. non-sinus end: the interval ends on a beat whose label is not ``N``;
    3. non-sinus start: it starts on such a beat (the beat ending the previous interval);
    4. range: outside ``[min_ms, max_ms]``;
    5. relative change: ``|rr - ref| > max_relative_change * ref``, where ``ref`` is the
       running median of the intervals that passed rules 1-4 (Karlsson et al. 2012 use a
       local mean; the median is robust to a missed beat next to the interval).

    References
    ----------
    Task Force of the ESC and NASPE. Heart rate variability: standards of measurement,
    physiological interpretation, and clinical use. Circulation 1996;93:1043-1065.
    Karlsson M, Hornsten R, Rydberg A, Wiklund U. Automatic filtering of outliers in RR
    intervals before analysis of heart rate variability in Holter recordings.
    BioMed Eng OnLine 2012;11:2. doi:10.1186/1475-925X-11-2

    Examples
    --------
    >>> rec = Recording.from_intervals([800, 810, 400, 1200, 805, 790] * 20)
    >>> res = clean(rec)
    >>> int(res.keep.sum()) < rec.n_beats
    True
    """
    opt = options or CleanOptions()
    rr = recording.rr_ms
    t = recording.beat_time_s
    if not t[-1] <= opt.max_span_s:
        where = f"{recording.source}: " if recording.source else ""
        raise ValueError(f"{where}the last beat is {t[-1]:.6g} s from the start, beyond "
                         f"max_span_s = {opt.max_span_s:g} s ({opt.max_span_s / 86400:g} "
                         "days)")
    n = rr.size
    reason = np.zeros(n, dtype=np.uint8)

    step = np.empty(n)
    step[0] = rr[0] / 1000.0
    step[1:] = np.diff(t)
    gap = (rr >= opt.gap_min_s * 1000.0) | (step - rr / 1000.0 >= opt.gap_min_s)
    sinus = np.isin(recording.labels, list(SINUS_LABELS))
    non_sinus_start = np.zeros(n, dtype=bool)
    non_sinus_start[1:] = ~sinus[:-1]
    out_of_range = (rr < opt.min_ms) | (rr > opt.max_ms)

    for mask, code in (
        (out_of_range, Reason.OUT_OF_RANGE),
        (non_sinus_start, Reason.NON_SINUS_START),
        (~sinus, Reason.NON_SINUS_END),
        (gap, Reason.GAP),
    ):  # lowest priority first; later assignments win
        reason[mask] = code
    candidates = np.flatnonzero(reason == Reason.KEPT)
    if candidates.size:
        vals = rr[candidates]
        ref = _running_median(vals, int(opt.reference_beats))
        jump = np.abs(vals - ref) > opt.max_relative_change * ref
        reason[candidates[jump]] = Reason.RELATIVE_CHANGE
    keep = reason == Reason.KEPT
    quality = _quality(recording, keep, reason, sinus, opt)
    return CleanResult(recording, readonly(keep), readonly(reason), quality, opt)


def _running_median(x: np.ndarray, size: int, *, block: int = 1 << 16) -> np.ndarray:
    """Running median over ``size`` values, ends mirrored: equal, value for value, to
    ``scipy.ndimage.median_filter(x, size=size, mode="mirror")``.

    The same window (``size // 2`` values before, the rest after; the order statistic of
    rank ``size // 2``, which is the upper median when ``size`` is even) and the same
    mirror extension (``numpy.pad`` "reflect"), selected with ``numpy.partition`` in
    blocks of rows; a series not longer than the window goes to SciPy.  Written out
    because ``scipy.ndimage`` costs about 0.1 s to import for this one call.
    """
    if x.size <= size:
        from scipy import ndimage

        return ndimage.median_filter(x, size=size, mode="mirror")
    rank = size // 2
    padded = np.pad(x, (rank, size - 1 - rank), mode="reflect")
    windows = np.lib.stride_tricks.sliding_window_view(padded, size)
    out = np.empty_like(x)
    for a in range(0, x.size, block):
        out[a:a + block] = np.partition(windows[a:a + block], rank, axis=1)[:, rank]
    return out


def _quality(rec: Recording, keep, reason, sinus, opt: CleanOptions) -> Quality:
    rr = rec.rr_ms
    t = rec.beat_time_s
    t0 = float(t[0] - rr[0] / 1000.0)
    recorded = float(t[-1] - t0)
    nn = rr[keep]
    analysable = float(nn.sum() / 1000.0)
    # covered stretches: [t_i - rr_i, t_i] for kept intervals; uncovered = complement
    ends = t[keep]
    starts = ends - nn / 1000.0
    if ends.size:
        edges_start = np.concatenate([[t0], ends])
        edges_end = np.concatenate([starts, [t[-1]]])
        holes = edges_end - edges_start
        big = holes >= opt.gap_min_s
        gaps = np.column_stack([edges_start[big], edges_end[big]])
        longest = float(max(holes.max(), 0.0))
    else:
        gaps = np.array([[t0, float(t[-1])]])
        longest = recorded
    n_hours = max(1, int(np.ceil(recorded / 3600.0 - 1e-9)))
    covered = np.zeros(n_hours)
    if ends.size:
        # split each kept interval at hour boundaries (intervals are < max_ms, so at most 2 parts)
        s_rel, e_rel = starts - t0, ends - t0
        h_s = np.clip((s_rel // 3600).astype(int), 0, n_hours - 1)
        h_e = np.clip((e_rel // 3600).astype(int), 0, n_hours - 1)
        same = h_s == h_e
        np.add.at(covered, h_s[same], (e_rel - s_rel)[same])
        cut = (h_s[~same] + 1) * 3600.0
        np.add.at(covered, h_s[~same], cut - s_rel[~same])
        np.add.at(covered, h_e[~same], e_rel[~same] - cut)
    hour_len = np.full(n_hours, 3600.0)
    hour_len[-1] = recorded - 3600.0 * (n_hours - 1)
    hourly = np.clip(covered / np.maximum(hour_len, 1e-9), 0.0, 1.0)
    removed = {
        r.name.lower(): int(np.count_nonzero(reason == r)) for r in Reason if r != Reason.KEPT
    }
    adjacent = keep[1:] & keep[:-1]
    diffs = np.diff(rr)[adjacent]
    return Quality(
        recorded_s=recorded,
        analysable_s=analysable,
        coverage=analysable / recorded if recorded > 0 else 0.0,
        n_intervals=int(rr.size),
        n_kept=int(keep.sum()),
        share_kept=float(keep.mean()),
        removed=MappingProxyType(removed),
        ectopic_fraction=float(1.0 - sinus.mean()),
        n_gaps=int(gaps.shape[0]),
        longest_gap_s=longest,
        gaps_s=readonly(gaps),
        hourly_coverage=readonly(hourly),
        nn_mean_ms=float(nn.mean()) if nn.size else float("nan"),
        nn_sd_ms=float(nn.std(ddof=1)) if nn.size > 1 else float("nan"),
        rmssd_ms=float(np.sqrt(np.mean(diffs**2))) if diffs.size else float("nan"),
    )
