"""Shared machinery of :mod:`tfhrv.viz.figures`: palette, style, clock axes and tree access.

Private: names here may change without notice.  matplotlib is imported inside functions
only, so importing this module does not import it.
"""

from __future__ import annotations

import datetime as dt
import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from functools import cache, wraps

import numpy as np
import xarray as xr

from tfhrv.circadian.days import CircadianOptions
from tfhrv.dataset.schema import CATEGORIES
from tfhrv.estimators.spectral import TASK_FORCE_BANDS

FOOTER = "research use only — not for diagnosis"

#: Okabe & Ito (2008) colour-universal palette (hex), as listed by Wong (2011).
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky": "#56B4E9", "green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7",
}
_C = OKABE_ITO
_GREY = "#7F7F7F"
#: Task Force (1996) band limits in Hz, used when the tree does not carry them.
_TASK_FORCE = tuple((name, lo, hi) for name, (lo, hi) in TASK_FORCE_BANDS.items())
_CATEGORY_COLOURS = (_C["green"], _C["yellow"], _C["vermillion"], _C["purple"], "#A6A6A6",
                     "#E6E6E6")
_ESTIMATOR_COLOURS = ("#E6E6E6", _C["sky"], _C["blue"], _C["orange"])
_NONSTATIONARY = tuple(CATEGORIES.index(c) for c in ("trend", "unit-root", "drifting"))
_MIN_COVERAGE = CircadianOptions().min_coverage
_FOOT_IN = 0.24  # inches kept free at the bottom of every figure for the footer
_STYLE = {
    "font.size": 9, "axes.titlesize": 10, "axes.labelsize": 9, "legend.fontsize": 8,
    "xtick.labelsize": 8, "ytick.labelsize": 8, "axes.spines.top": False,
    "axes.spines.right": False, "axes.edgecolor": "#4D4D4D", "axes.linewidth": 0.8,
    "legend.frameon": False, "axes.titlelocation": "left", "figure.titlesize": 11,
    "figure.titleweight": "bold", "axes.titleweight": "normal", "savefig.facecolor": "white",
    "svg.hashsalt": "tfhrv",
}


def _rc():
    """A matplotlib rc context with our style (no change to the global rcParams)."""
    import matplotlib as mpl

    return mpl.rc_context(_STYLE)


def _figure_function(build):
    """Run a figure builder in our rc context, then fix its layout once.

    Constrained layout would otherwise be solved again at every draw (twice per
    ``savefig``, and again for every format written); solving it once and switching the
    engine off keeps the layout identical across formats.
    """

    @wraps(build)
    def wrapper(*args, **kwargs):
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        with _rc():
            fig = build(*args, **kwargs)
            FigureCanvasAgg(fig)
            fig.get_layout_engine().execute(fig)
            fig.set_layout_engine("none")
        return fig

    return wrapper


@cache
def warm_up() -> None:
    """Import matplotlib's figure and Agg modules and draw one tiny figure with plain text,
    mathtext and a log axis, so that processes forked afterwards inherit the loaded
    modules, fonts and parser instead of each loading them again (about 0.4 s per process;
    the figures themselves do not change).  Done once per process."""
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    with _rc():
        fig = Figure(figsize=(1.0, 1.0), dpi=20, layout="constrained")
        FigureCanvasAgg(fig)
        ax = fig.add_subplot()
        ax.set_xscale("log")
        ax.plot([1.0, 100.0], [0.0, 1.0])
        ax.set_title(r"$\alpha$ warm-up")
        fig.savefig(io.BytesIO(), format="png")


#: What forked figure workers read (set just before forking; never pickled).
_FORK_STATE: dict = {}


def _draw_item(i: int):
    st = _FORK_STATE
    return st["draw"](st["items"][i])


def draw_each(items: Sequence, draw: Callable, /, *, workers: int = 1, progress=None) -> list:
    """``draw(item)`` for every item, in order: with ``workers`` > 1 in forked processes
    (POSIX only) that inherit matplotlib loaded once here (:func:`warm_up`), else in this
    process.  matplotlib's Agg rendering is deterministic, so a PNG drawn by a worker is
    the bytes drawn here.  ``progress`` (a :class:`tfhrv.core.progress.Progress`) is told
    each item under "figures"."""
    import multiprocessing as mp

    from tfhrv.core.progress import SILENT

    track = (progress or SILENT).track
    _FORK_STATE.update(draw=draw, items=tuple(items))
    n = len(_FORK_STATE["items"])
    try:
        if workers > 1 and n > 1 and "fork" in mp.get_all_start_methods():
            warm_up()
            with mp.get_context("fork").Pool(min(workers, n)) as pool:
                return list(track(pool.imap(_draw_item, range(n)), total=n, label="figures"))
        return [_draw_item(i) for i in track(range(n), total=n, label="figures")]
    finally:
        _FORK_STATE.clear()


def _parameters(tree: xr.DataTree, section: str) -> dict:
    """One section (``"scan"``, ``"clean"``) of the parameters stored in a scan file, or
    {} when the file has none or they cannot be read."""
    try:
        params = json.loads(str(tree.attrs.get("parameters", "{}")))
    except ValueError:
        return {}
    part = params.get(section, {}) if isinstance(params, dict) else {}
    return part if isinstance(part, dict) else {}


def _ds(tree: xr.DataTree, group: str) -> xr.Dataset | None:
    name = group.strip("/")
    if name not in tree.children:
        return None
    return tree[name].to_dataset()


def _values(ds: xr.Dataset | None, name: str) -> np.ndarray | None:
    if ds is None or name not in ds.variables:
        return None
    return np.asarray(ds[name].values, dtype=float)


def _scalar(ds: xr.Dataset | None, name: str) -> float:
    v = _values(ds, name)
    return float(v) if v is not None and v.size == 1 else float("nan")


def _style(ax, *, grid: str = "both") -> None:
    """Axis look set on the axes itself, so it survives drawing outside the rc context."""
    ax.tick_params(labelsize=8, color="#4D4D4D", length=3)
    ax.spines[["top", "right"]].set_visible(False)
    if grid:
        ax.grid(True, axis=grid, color="#E5E5E5", linewidth=0.6, zorder=0)
        ax.set_axisbelow(True)


def _new_figure(tree: xr.DataTree, width: float, height: float, title: str):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110, layout="constrained", facecolor="white")
    foot = _FOOT_IN / height
    fig.get_layout_engine().set(rect=(0.0, foot, 1.0, 1.0 - foot), h_pad=0.04, w_pad=0.04)
    from tfhrv import __version__

    rid = str(tree.attrs.get("record_id", ""))
    fig.text(0.008, 0.008, f"tfhrv {__version__} · record {rid}", fontsize=7, color="#595959",
             ha="left", va="bottom")
    fig.text(0.992, 0.008, FOOTER, fontsize=7, color="#595959", ha="right", va="bottom")
    fig.suptitle(title, x=0.01, ha="left")
    return fig


def _message(ax, text: str) -> None:
    ax.text(0.5, 0.5, text, transform=ax.transAxes, ha="center", va="center", color="#595959",
            fontsize=9, wrap=True)
    ax.set_xticks([])
    ax.set_yticks([])


def _finite_range(*arrays, lo_q: float = 0.5, hi_q: float = 99.5, pad: float = 0.06):
    vals = np.concatenate([np.asarray(a, float).ravel() for a in arrays if a is not None])
    vals = vals[np.isfinite(vals)]
    if vals.size == 0:
        return None
    lo, hi = np.percentile(vals, [lo_q, hi_q])
    if hi <= lo:
        lo, hi = lo - 0.5, hi + 0.5
    span = hi - lo
    return lo - pad * span, hi + pad * span


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index pairs of the runs of True in a boolean array."""
    m = np.concatenate([[False], np.asarray(mask, bool), [False]])
    d = np.diff(m.astype(np.int8))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1, strict=True))


def _spans(centres_h: np.ndarray, width_h: float, mask: np.ndarray) -> list[tuple[float, float]]:
    return [(centres_h[a] - width_h / 2, centres_h[b] + width_h / 2) for a, b in _runs(mask)]


def _hhmm(hours: float) -> str:
    m = int(round(hours * 60)) % (24 * 60)
    return f"{m // 60:02d}:{m % 60:02d}"


@dataclass(frozen=True, slots=True)
class _Clock:
    known: bool
    offset_h: float  # clock hour at elapsed 0
    date0: dt.date | None
    label: str


def _clock(tree: xr.DataTree) -> _Clock:
    kind = str(tree.attrs.get("clock", "unknown"))
    start = str(tree.attrs.get("start", ""))
    if kind != "unknown" and start:
        try:
            if kind == "timestamp":
                d = dt.datetime.fromisoformat(start)
                return _Clock(True, d.hour + d.minute / 60 + d.second / 3600, d.date(),
                              f"clock time (start {d:%Y-%m-%d %H:%M})")
            t = dt.time.fromisoformat(start)
            return _Clock(True, t.hour + t.minute / 60 + t.second / 3600, None,
                          f"clock time (start {t:%H:%M}, date unknown)")
        except ValueError:
            pass
    short = _ds(tree, "short")
    if short is not None and "clock_hour" in short.coords and short.sizes.get("time", 0):
        h0 = float((short["clock_hour"].values[0] - short["elapsed"].values[0] / 3600) % 24)
        return _Clock(True, h0, None, "clock time")
    return _Clock(False, 0.0, None, "hours from start (clock time unknown)")


def _time_axis(ax, clock: _Clock, t_max_h: float) -> None:
    """HH:MM ticks on clock-aligned hours (or whole hours from the start)."""
    from matplotlib.ticker import FixedLocator, FuncFormatter

    span = max(float(t_max_h), 1.0)
    step = next(s for lim, s in ((8, 1), (14, 2), (30, 3), (80, 6), (200, 12), (np.inf, 24))
                if span <= lim)
    first = (-clock.offset_h) % step if clock.known else 0.0
    ticks = np.arange(first, span + 1e-9, step)
    minor = np.arange((-clock.offset_h) % 1 if clock.known else 0.0, span + 1e-9, 1.0)

    def fmt(x, _pos):
        if not clock.known:
            return f"{x:g} h"
        label = _hhmm(clock.offset_h + x)
        if clock.date0 is not None and label == "00:00" and span > 20:
            day = clock.date0 + dt.timedelta(hours=clock.offset_h + x)
            label += f"\n{day:%d %b}"
        return label

    ax.xaxis.set_major_locator(FixedLocator(ticks))
    ax.xaxis.set_major_formatter(FuncFormatter(fmt))
    if step > 1 and span <= 30:
        ax.xaxis.set_minor_locator(FixedLocator(minor))
    ax.set_xlim(0.0, span)
    ax.set_xlabel(clock.label)


def _rest(tree: xr.DataTree):
    """Night/day masks of the short windows from tfhrv.circadian.days, or None when unavailable."""
    from tfhrv.circadian.days import CircadianOptions, _period_label, _periods

    short = _ds(tree, "short")
    if short is None or short.sizes.get("time", 0) == 0:
        return None
    opt = CircadianOptions()
    try:
        night, day, day_index, source = _periods(tree, "short", opt, None)
    except (ValueError, KeyError):
        return None
    kept = tree["/circadian"].to_dataset() if "circadian" in tree.children else None
    if kept is not None and "short_night" in kept and kept["short_night"].size == night.size:
        # the periods tfhrv circadian used (a sleep log or non-default clock windows)
        night = kept["short_night"].values.astype(bool)
        day = kept["short_day"].values.astype(bool)
        return night, day, day_index, str(kept["short_night"].attrs["period_label"])
    return night, day, day_index, _period_label(source, opt)


def _tier_hours(ds: xr.Dataset) -> tuple[np.ndarray, float]:
    t = np.asarray(ds["elapsed"].values, float) / 3600.0
    hop = float(ds.attrs.get("hop_s", np.median(np.diff(t)) * 3600 if t.size > 1 else 300.0))
    return t, hop / 3600.0


def _record_end_h(tree: xr.DataTree) -> float:
    ends = []
    nn = _ds(tree, "nn")
    if nn is not None and nn.sizes.get("beat", 0):
        ends.append(float(np.nanmax(nn["beat_time_s"].values)) / 3600)
    for tier in ("short", "long"):
        ds = _ds(tree, tier)
        if ds is not None and ds.sizes.get("time", 0):
            t, hop = _tier_hours(ds)
            ends.append(float(t[-1] + hop / 2))
    return max(ends) if ends else 1.0


def _as_alpha(beta: np.ndarray) -> np.ndarray:
    """alpha = (beta + 1) / 2, DFA exponent from the spectral one (Kantelhardt et al. 2001)."""
    return (np.asarray(beta, float) + 1.0) / 2.0


def _long_alpha(ds: xr.Dataset) -> tuple[np.ndarray, np.ndarray]:
    """Long-tier exponent as alpha, primary estimator first, alpha_long where it is missing."""
    n = ds.sizes["time"]
    a = _as_alpha(_values(ds, "exponent")) if "exponent" in ds else np.full(n, np.nan)
    ci = (_as_alpha(_values(ds, "exponent_ci")) if "exponent_ci" in ds
          else np.full((n, 2), np.nan))
    if "alpha_long" in ds:
        miss = ~np.isfinite(a)
        a[miss] = _values(ds, "alpha_long")[miss]
        if "alpha_long_ci" in ds:
            ci[miss] = _values(ds, "alpha_long_ci")[miss]
    return a, ci


def _fmt_ci(v: float, ci) -> str:
    """'v [lo, hi]'; an open end (the calibration cannot bound it) reads 'open'."""
    from tfhrv.calibration.calibrate import interval_text

    if not np.isfinite(v):
        return "n/a"
    lo, hi = (float(c) for c in ci) if ci is not None else (np.nan, np.nan)
    text = interval_text(lo, hi)
    return f"{v:.2f} {text}" if text != "n/a" else f"{v:.2f} (no interval)"


def _gap_s(tree: xr.DataTree) -> float:
    try:
        return float(_parameters(tree, "clean")["gap_min_s"])
    except (KeyError, TypeError, ValueError):
        return 3.0


def _bands(tree: xr.DataTree, named: bool = False):
    short = _ds(tree, "short")
    if short is not None and {"band_low_hz", "band_high_hz"} <= set(short.coords):
        rows = list(zip(short["band"].values.astype(str), short["band_low_hz"].values,
                        short["band_high_hz"].values, strict=True))
    else:
        rows = list(_TASK_FORCE)
    return [(str(n), float(a), float(b)) for n, a, b in rows] if named else \
        [(float(a), float(b)) for _, a, b in rows]


def _duration(seconds: float) -> str:
    for size, unit in ((3600.0, "h"), (60.0, "min"), (1.0, "s")):
        if seconds >= size or unit == "s":
            v = seconds / size
            return f"{v:.0f} {unit}" if v >= 10 else f"{v:.2g} {unit}"
    return ""


def _edges(centres: np.ndarray, *, log: bool = False) -> np.ndarray:
    """Cell edges halfway between centres (geometric halfway on a log axis)."""
    c = np.log(centres) if log else np.asarray(centres, float)
    if c.size == 1:
        e = np.array([c[0] - 0.5, c[0] + 0.5])
    else:
        mid = (c[1:] + c[:-1]) / 2
        e = np.concatenate([[c[0] - (mid[0] - c[0])], mid, [c[-1] + (c[-1] - mid[-1])]])
    return np.exp(e) if log else e


def _smooth_time(a: np.ndarray, k: int) -> np.ndarray:
    """Centred moving average over k windows along axis 0, ignoring empty windows.

    A cell needs at least half of its k neighbours; empty cells stay empty.  Cell i
    averages rows i - (k - 1) // 2 .. i + k // 2 (the centring of
    ``scipy.ndimage.convolve1d`` with a box of k ones, which the tests check), from
    running sums.
    """
    if k <= 1:
        return a
    k = int(k)
    ok = np.isfinite(a)
    n = a.shape[0]
    idx = np.arange(n)
    hi, lo = np.minimum(idx + k // 2 + 1, n), np.maximum(idx - (k - 1) // 2, 0)

    def box_sum(v: np.ndarray) -> np.ndarray:
        c = np.concatenate([np.zeros((1, *v.shape[1:])), np.cumsum(v, axis=0)])
        return c[hi] - c[lo]

    num = box_sum(np.where(ok, a, 0.0))
    den = box_sum(ok.astype(float))
    out = np.full(a.shape, np.nan)
    np.divide(num, den, out=out, where=ok & (den >= k / 2))
    return out


def _cosinor_band(fit, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Curve and pointwise 95 % half-width from the OLS covariance (delta method)."""
    from tfhrv.core.specfun import stdtrit

    cols = [np.ones_like(t)]
    for k in range(1, fit.harmonics + 1):
        w = 2 * np.pi * k * t / fit.period_hours
        cols += [np.cos(w), np.sin(w)]
    x = np.column_stack(cols)
    se = np.sqrt(np.einsum("ij,jk,ik->i", x, np.asarray(fit.covariance), x))
    return x @ np.asarray(fit.coefficients), stdtrit(fit.df_resid, 0.975) * se
