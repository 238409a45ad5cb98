"""Windows in clock time over a cleaned recording (numpy layer, no xarray).

Two tiers by default: ``short`` (5-min windows, 5-min hop) and ``long`` (4-h windows,
1-h hop).  Windows are aligned to the clock (whole multiples of the hop from midnight)
when the start time is known, otherwise to the recording start.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np

from tfhrv.core.progress import SILENT, Progress
from tfhrv.signal.clean import CleanResult
from tfhrv.stationarity.battery import CATEGORIES, StationarityResult, stationarity_battery

__all__ = ["TierSpec", "Window", "tier_stationarity", "tier_windows", "window_starts"]


@dataclass(frozen=True, slots=True)
class TierSpec:
    """One tier of windows.

    Attributes
    ----------
    window_s, hop_s : float
        Window length and hop in s.
    scale : {"short", "long"}
        Which scale range the tier's primary exponent targets: ``short`` = 4-16 beats
        (the alpha1 range of Peng et al. 1995), ``long`` = 64 beats up to a quarter of the
        window (about 1e-3 to 1e-2 Hz).
    min_coverage : float
        Share of the window that NN intervals must cover for it to be analysed
        (common practice: half).
    min_beats : int
        Fewest NN intervals for the stationarity battery and estimators.
    """

    window_s: float
    hop_s: float
    scale: str
    min_coverage: float = 0.5
    min_beats: int = 128

    def __post_init__(self) -> None:
        if not (self.window_s > 0 and self.hop_s > 0):
            raise ValueError(f"window_s and hop_s must be > 0, got {self.window_s}, {self.hop_s}")
        if self.scale not in ("short", "long"):
            raise ValueError(f"scale must be one of ('short', 'long'), got {self.scale!r}")


#: Most windows one tier may cut (a 31-day record at the default 5-min hop has 8 928): an
#: explicit limit so that a tiny hop cannot make the work grow without bound.
MAX_WINDOWS = 100_000

SHORT = TierSpec(300.0, 300.0, "short")
LONG = TierSpec(14400.0, 3600.0, "long", min_beats=1024)


def window_starts(duration_s: float, start: dt.datetime | dt.time | None, tier: TierSpec
                  ) -> np.ndarray:
    """Window start times (s from the recording start), aligned to the clock when known.

    With a clock start, windows begin at whole multiples of the hop counted from
    midnight; otherwise at multiples of the hop from the recording start.  Windows that
    would end after the recording are dropped (a record shorter than one window gives one
    window from its start).

    Examples
    --------
    >>> window_starts(1800.0, dt.time(8, 4), TierSpec(300, 300, "short"))[:3].tolist()
    [60.0, 360.0, 660.0]
    """
    offset = 0.0
    if start is not None:
        tod = start.time() if isinstance(start, dt.datetime) else start
        secs = tod.hour * 3600 + tod.minute * 60 + tod.second + tod.microsecond / 1e6
        offset = (-secs) % tier.hop_s
    last = duration_s - tier.window_s
    if last < offset:
        return np.array([0.0])
    n = int(np.floor((last - offset) / tier.hop_s)) + 1
    if n > MAX_WINDOWS:
        raise ValueError(f"a hop of {tier.hop_s:g} s over {duration_s:g} s gives {n} windows "
                         f"(at most {MAX_WINDOWS}); use a longer hop")
    return offset + tier.hop_s * np.arange(n)


@dataclass(frozen=True, slots=True)
class Window:
    """One window: its start (s from the recording start), the NN intervals and beat times
    it holds, coverage, beat count and ectopic share (over all beats in the window)."""

    start_s: float
    nn_ms: np.ndarray
    time_s: np.ndarray
    coverage: float
    n_beats: int
    ectopic_fraction: float
    analysable: bool


def tier_windows(cleaned: CleanResult, tier: TierSpec, /) -> list[Window]:
    """Cut a cleaned recording into the tier's windows (beats assigned by their time)."""
    rec = cleaned.recording
    t_all = rec.beat_time_s
    keep = cleaned.keep
    sinus = rec.labels == "N"
    starts = window_starts(float(t_all[-1]), rec.start, tier)
    t0 = float(t_all[0] - rec.rr_ms[0] / 1000.0)
    if starts.size > 1:
        starts = starts[starts + tier.window_s > t0]
    lo = np.searchsorted(t_all, starts, side="left")
    hi = np.searchsorted(t_all, starts + tier.window_s, side="left")
    out = []
    for s, a, b in zip(starts, lo, hi, strict=True):
        k = keep[a:b]
        nn = rec.rr_ms[a:b][k]
        tt = t_all[a:b][k]
        cov = min(1.0, float(nn.sum()) / 1000.0 / tier.window_s)
        ect = float(1.0 - sinus[a:b].mean()) if b > a else float("nan")
        ok = cov >= tier.min_coverage and nn.size >= tier.min_beats
        out.append(Window(float(s), nn, tt, cov, int(nn.size), ect, ok))
    return out


def tier_stationarity(windows: list[Window], /, *, n_surrogates: int = 99, seed: int = 0,
                      progress: Progress = SILENT, label: str = "stationarity battery"
                      ) -> list[StationarityResult | None]:
    """The stationarity battery on every analysable window (None for the others).

    Window ``w`` uses the seed ``seed + w`` for its surrogates, so results do not depend
    on which other windows are analysed.  ``progress`` (default: silent) is told each
    window, under ``label``.
    """
    return [stationarity_battery(w.nn_ms, n_surrogates=n_surrogates, rng=seed + i)
            if w.analysable else None
            for i, w in enumerate(progress.track(windows, total=len(windows), label=label))]


def category_codes(results: list[StationarityResult | None], /) -> np.ndarray:
    """Index into :data:`tfhrv.stationarity.battery.CATEGORIES` per window (too-short for None)."""
    return np.array([CATEGORIES.index(r.category if r is not None else "too-short")
                     for r in results], dtype=np.int8)
