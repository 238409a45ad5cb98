"""Figures from a scan DataTree: the record at a glance, the whole-record fits, the time x
scale map of the local DFA exponent, the stationarity timeline and the 24-h rhythm.

Every function takes the DataTree written by :func:`tfhrv.dataset.build.scan` (optionally with
the ``/circadian`` group of ``tfhrv circadian``) and returns a :class:`matplotlib.figure.Figure`
built with the object API (no pyplot, no global state), so it is safe in scripts, servers
and notebooks alike.  matplotlib is imported inside the functions: ``import tfhrv`` does
not import it.

Colours are the Okabe-Ito palette (Okabe & Ito 2008; Wong 2011, Nat Methods 8:441,
doi:10.1038/nmeth.1618), readable with the common colour-vision deficiencies; the
diverging map of the time x scale figure is ColorBrewer RdBu (Harrower & Brewer 2003,
Cartogr J 40:27, doi:10.1179/000870403235002042), centred at alpha = 1.  Time axes show
the clock (HH:MM) when the record's start is known and hours from the start otherwise.
Every figure carries the footer "research use only — not for diagnosis".
"""

from __future__ import annotations

import contextlib
from functools import partial
from pathlib import Path

import numpy as np
import xarray as xr

from tfhrv.core.validation import check_choice, check_positive
from tfhrv.dataset.schema import CATEGORIES, ESTIMATORS
from tfhrv.viz.figkit import (
    _C,
    _CATEGORY_COLOURS,
    _ESTIMATOR_COLOURS,
    _GREY,
    _MIN_COVERAGE,
    _NONSTATIONARY,
    FOOTER,
    OKABE_ITO,
    _bands,
    _clock,
    _cosinor_band,
    _ds,
    _duration,
    _edges,
    _figure_function,
    _finite_range,
    _fmt_ci,
    _gap_s,
    _hhmm,
    _long_alpha,
    _message,
    _new_figure,
    _rc,
    _record_end_h,
    _rest,
    _runs,
    _scalar,
    _smooth_time,
    _spans,
    _style,
    _tier_hours,
    _time_axis,
    _values,
    draw_each,
)
from tfhrv.viz.multifractal import multifractal_sentence, multifractal_spectrum

__all__ = [
    "FIGURES",
    "FOOTER",
    "OKABE_ITO",
    "dfa",
    "logscale",
    "multifractal_sentence",
    "multifractal_spectrum",
    "overview",
    "circadian",
    "save_all",
    "scale_map",
    "spectrum",
    "stationarity_timeline",
]



# ------------------------------------------------------------------ shared helpers


# ------------------------------------------------------------------ overview


@_figure_function
def overview(tree: xr.DataTree, /):
    """NN tachogram and exponent tracks on one clock axis.

    Top: kept NN intervals (thin line, broken at gaps) with the 5-min mean, removed beats as
    ticks along the bottom, gaps >= 1 min shaded grey, non-stationary 5-min windows as a
    strip along the top and the night/rest period shaded blue.  Bottom: short-window alpha1
    with its calibrated 95 % interval and the long-window primary exponent converted to
    alpha = (beta + 1)/2 (alpha_long where no primary exponent exists).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.transforms import blended_transform_factory

    rid = tree.attrs.get("record_id", "")
    fig = _new_figure(tree, 10.0, 6.4, f"{rid}: NN intervals and scaling exponents")
    ax_nn, ax_ex = fig.subplots(2, 1, sharex=True, height_ratios=[1.15, 1.0])
    for ax in (ax_nn, ax_ex):
        _style(ax)
    clock = _clock(tree)
    end_h = _record_end_h(tree)
    rest = _rest(tree)
    short, long = _ds(tree, "short"), _ds(tree, "long")
    handles = []
    if rest is not None and short is not None:
        t_s, hop_s = _tier_hours(short)
        for i, (a, b) in enumerate(_spans(t_s, hop_s, rest[0])):
            for ax in (ax_nn, ax_ex):
                ax.axvspan(a, b, color=_C["sky"], alpha=0.16, lw=0, zorder=0,
                           label=rest[3] if (i == 0 and ax is ax_nn) else None)
    nn = _ds(tree, "nn")
    if nn is not None and nn.sizes.get("beat", 0):
        t = nn["beat_time_s"].values / 3600.0
        rr = nn["rr_ms"].values.astype(float)
        reason = nn["reason"].values.astype(int)
        kept = reason == 0
        tk, rk = t[kept], rr[kept]
        brk = np.flatnonzero(np.diff(tk) * 3600 > _gap_s(tree)) + 1
        ax_nn.plot(np.insert(tk, brk, np.nan), np.insert(rk, brk, np.nan), color="#9A9A9A",
                   lw=0.35, label="NN intervals (kept)", zorder=2, rasterized=True,
                   gid="nn_kept")
        gaps = np.flatnonzero((reason == 1) & (rr >= 60_000.0))
        for j, g in enumerate(gaps):
            for ax in (ax_nn, ax_ex):
                ax.axvspan(t[g] - rr[g] / 3.6e6, t[g], color="#BDBDBD", alpha=0.5, lw=0,
                           zorder=0, label="gap ≥ 1 min" if (j == 0 and ax is ax_nn) else None)
        removed = np.flatnonzero(reason > 1)
        if removed.size:
            trans = blended_transform_factory(ax_nn.transData, ax_nn.transAxes)
            ax_nn.plot(t[removed], np.full(removed.size, 0.025), "|", color=_C["vermillion"],
                       ms=5, mew=0.6, transform=trans, zorder=3, gid="removed_beats",
                       label=f"removed beats ({removed.size})")
        rng = _finite_range(rk, lo_q=0.1, hi_q=99.9, pad=0.08)
        if rng is not None:
            ax_nn.set_ylim(rng[0] - 0.06 * (rng[1] - rng[0]), rng[1] + 0.1 * (rng[1] - rng[0]))
    else:
        _message(ax_nn, "no NN series in this file")
    if short is not None and short.sizes.get("time", 0):
        t_s, hop_s = _tier_hours(short)
        ax_nn.plot(t_s, short["nn_mean_ms"].values, color=_C["black"], lw=1.0, zorder=3,
                   label="5-min mean NN", gid="nn_mean_ms")
        cat = short["stationarity"].values.astype(int)
        ns = np.isin(cat, _NONSTATIONARY)
        trans = blended_transform_factory(ax_nn.transData, ax_nn.transAxes)
        bars = [(a, b - a) for a, b in _spans(t_s, hop_s, ns)]
        if bars:
            ax_nn.broken_barh(bars, (0.955, 0.045), transform=trans, color=_C["orange"],
                              alpha=0.75, lw=0, zorder=3, gid="nonstationary",
                              label="non-stationary 5-min window (trend, unit root, drift)")
        a1 = _values(short, "alpha1")
        ci = _values(short, "alpha1_ci")
        band = ax_ex.fill_between(t_s, ci[:, 0], ci[:, 1], color=_C["blue"], alpha=0.18,
                                  lw=0, gid="alpha1_ci")
        (line,) = ax_ex.plot(t_s, a1, "o-", color=_C["blue"], ms=2.0, lw=0.6,
                             gid="alpha1")
        handles.append(((band, line), r"$\alpha_1$, 5-min windows (4–16 beats)"))
    if long is not None and long.sizes.get("time", 0):
        t_l, _ = _tier_hours(long)
        al, cil = _long_alpha(long)
        band = ax_ex.fill_between(t_l, cil[:, 0], cil[:, 1], color=_C["vermillion"],
                                  alpha=0.16, lw=0, gid="long_alpha_ci")
        win_h = float(long.attrs.get("window_s", 14400.0)) / 3600
        (line,) = ax_ex.plot(t_l, al, "-", color=_C["vermillion"], lw=1.8, marker="s", ms=3,
                             gid="long_alpha")
        handles.append(((band, line), rf"{win_h:g}-h windows: primary exponent as "
                        r"$\alpha=(\beta+1)/2$"))
    ax_ex.axhline(1.0, color="#4D4D4D", lw=0.7, ls=":", zorder=1)
    yr = _finite_range(_values(short, "alpha1") if short is not None else None,
                       _long_alpha(long)[0] if long is not None else None, lo_q=0.2,
                       hi_q=99.8)
    if yr is not None:
        ax_ex.set_ylim(max(min(yr[0], 0.5), -0.2), min(max(yr[1], 1.5), 2.6))
    ax_nn.set_ylabel("NN interval (ms)")
    ax_ex.set_ylabel(r"scaling exponent $\alpha$ (dimensionless)")
    _time_axis(ax_ex, clock, end_h)
    ax_nn.tick_params(labelbottom=False)
    legend = {"loc": "lower left", "bbox_to_anchor": (0.0, 1.0), "fontsize": 7.5,
              "handlelength": 1.6, "columnspacing": 1.2, "borderaxespad": 0.2}
    _legend(ax_nn, ncol=3, **legend)
    if handles:
        ax_ex.legend(*zip(*handles, strict=True), ncol=2,
                     title="shaded: calibrated 95 % confidence interval",
                     title_fontsize=7.5, alignment="left", **legend)
    return fig


# ------------------------------------------------------------------ whole-record fits


@_figure_function
def spectrum(tree: xr.DataTree, /):
    """Whole-record log-log PSD with the fit band, the fitted line and its residuals.

    The line is log10 PSD = intercept - raw * log10 f (raw = uncalibrated beta); the legend
    gives the calibrated beta with its 95 % interval.  Dotted lines mark the Task Force
    (1996) band limits.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.ticker import NullLocator
    from matplotlib.transforms import blended_transform_factory

    rec = _ds(tree, "record")
    verdict = rec.attrs.get("verdict", "n/a") if rec is not None else "n/a"
    fig = _new_figure(tree, 7.6, 6.2,
                      f"Whole-record spectrum — FFT-slope verdict: {verdict}")
    ax, ax_r = fig.subplots(2, 1, sharex=True, height_ratios=[3.0, 1.1])
    for a in (ax, ax_r):
        _style(a)
    x = _values(rec, "beta_spectral_fit_x")
    if x is None or not np.isfinite(x).any():
        _message(ax, "no whole-record spectral fit in this file")
        _message(ax_r, "")
        return fig
    y = _values(rec, "beta_spectral_fit_y")
    used = _values(rec, "beta_spectral_fit_used").astype(bool)
    b0, raw = _scalar(rec, "beta_spectral_intercept"), _scalar(rec, "beta_spectral_slope")
    band = np.asarray(rec.attrs.get("beta_spectral_band_hz", []), float).ravel()
    if band.size != 2 or not np.all(np.isfinite(band)):
        band = 10.0 ** np.array([x[used].min(), x[used].max()]) if used.any() else None
    f, p = 10.0 ** x, 10.0 ** y
    ax.set_xscale("log")
    ax.set_yscale("log")
    if band is not None:
        for a in (ax, ax_r):
            a.axvspan(band[0], band[1], color=_C["yellow"], alpha=0.22, lw=0, zorder=0,
                      label=(f"fit band {band[0]:.2g}–{band[1]:.2g} Hz" if a is ax
                             else None))
    ax.plot(f[~used], p[~used], "o", mfc="none", mec=_GREY, ms=3.5, mew=0.8,
            label="log-binned periodogram (outside the fit)")
    ax.plot(f[used], p[used], "o", color=_C["blue"], ms=4, label="points in the fit",
            gid="psd_used")
    beta = _scalar(rec, "beta_spectral")
    ci = _values(rec, "beta_spectral_ci")
    if np.isfinite(b0) and np.isfinite(raw) and band is not None:
        lx = np.linspace(np.log10(band[0]), np.log10(band[1]), 50)
        ax.plot(10 ** lx, 10 ** (b0 - raw * lx), color=_C["vermillion"], lw=2.0,
                label=f"fitted line, slope −{raw:.2f}", gid="fit_line")
        resid = y - (b0 - raw * x)
        ax_r.plot(f[~used], resid[~used], "o", mfc="none", mec=_GREY, ms=3, mew=0.8)
        ax_r.plot(f[used], resid[used], "o", color=_C["blue"], ms=3.5, gid="residual_used")
    ax_r.axhline(0.0, color=_C["vermillion"], lw=1.0)
    edges = sorted({float(v) for lo, hi in _bands(tree) for v in (lo, hi) if v > 0})
    for a in (ax, ax_r):
        for e in edges:
            a.axvline(e, color="#595959", lw=0.7, ls=":", zorder=1, gid="band_limit")
    lo_f = float(np.nanmin(f))
    trans = blended_transform_factory(ax.transData, ax.transAxes)
    for name, lo, hi in _bands(tree, named=True):
        lo = max(lo, lo_f)
        if hi > lo:
            ax.text(np.sqrt(lo * hi), 0.985, name, transform=trans, ha="center", va="top",
                    fontsize=7.5, color="#404040")
    ax.set_ylabel("power spectral density (ms²/Hz)")
    ax.yaxis.set_minor_locator(NullLocator())
    ax_r.set_ylabel("residual\n(log10 units)")
    ax_r.set_xlabel("frequency (Hz)")
    ax.tick_params(labelbottom=False)
    _legend(ax, loc="lower left", title=f"β = {_fmt_ci(beta, ci)} (calibrated, 95 % CI)",
            title_fontsize=8.5, alignment="left")
    return fig


@_figure_function
def dfa(tree: xr.DataTree, /):
    """Whole-record DFA fluctuation function with the alpha1, alpha2 and long-range lines.

    Top: F(n) against n on log-log axes with each fitted line log10 F = intercept + raw *
    log10 n drawn over the box sizes that entered it; the legend gives the bias-corrected
    exponent and its calibrated 95 % interval.  Bottom: the local slope d log F / d log n.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.ticker import NullLocator

    rec = _ds(tree, "record")
    fig = _new_figure(tree, 7.6, 6.2, "Whole-record detrended fluctuation analysis")
    ax, ax_s = fig.subplots(2, 1, sharex=True, height_ratios=[3.0, 1.3])
    for a in (ax, ax_s):
        _style(a)
    if rec is not None and "fluctuation" in rec:
        n = rec["fluctuation"]["scale"].values.astype(float)
        F = rec["fluctuation"].values.astype(float)
    elif _values(rec, "alpha1_fit_x") is not None:
        n, F = 10 ** _values(rec, "alpha1_fit_x"), 10 ** _values(rec, "alpha1_fit_y")
    else:
        _message(ax, "no whole-record DFA in this file")
        _message(ax_s, "")
        return fig
    ok = np.isfinite(F) & (F > 0) & (n > 0)
    n, F = n[ok], F[ok]
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.plot(n, F, "o", mfc="none", mec="#404040", ms=3.5, mew=0.8, label="F(n), whole record",
            gid="fluctuation")
    lines = (("alpha1", r"$\alpha_1$", _C["blue"], (4, 16)),
             ("alpha2", r"$\alpha_2$", _C["vermillion"], (16, 64)),
             ("alpha_long", r"$\alpha_{long}$", _C["green"], None))
    for name, tex, colour, default in lines:
        b0, raw = _scalar(rec, f"{name}_intercept"), _scalar(rec, f"{name}_slope")
        if not (np.isfinite(b0) and np.isfinite(raw)):
            continue
        fx, fu = _values(rec, f"{name}_fit_x"), _values(rec, f"{name}_fit_used")
        if fx is not None and fu is not None and fu.astype(bool).any():
            lo, hi = 10 ** fx[fu.astype(bool)].min(), 10 ** fx[fu.astype(bool)].max()
        elif default is not None:
            lo, hi = default
        else:
            continue
        xx = np.geomspace(lo, hi, 30)
        label = (f"{tex} ({lo:.0f}–{hi:.0f} beats) = "
                 f"{_fmt_ci(_scalar(rec, name), _values(rec, name + '_ci'))}")
        ax.plot(xx, 10 ** (b0 + raw * np.log10(xx)), color=colour, lw=2.2, alpha=0.9,
                label=label, gid=f"{name}_line")
    if n.size >= 3:
        local = np.gradient(np.log10(F), np.log10(n))
        ax_s.plot(n, local, "-", color="#404040", lw=1.0, marker="o", ms=2.5,
                  gid="local_slope")
        r = _finite_range(local, lo_q=0, hi_q=100)
        if r is not None:
            ax_s.set_ylim(max(min(r[0], 0.4), -0.5), min(max(r[1], 1.6), 3.0))
    for v, ls in ((0.5, "--"), (1.0, ":"), (1.5, "--")):
        ax_s.axhline(v, color="#7F7F7F", lw=0.7, ls=ls)
    for b in (16, 64):
        for a in (ax, ax_s):
            a.axvline(b, color="#BFBFBF", lw=0.7, ls=":", zorder=1)
    ax.set_ylabel("fluctuation F(n) (ms)")
    ax.yaxis.set_minor_locator(NullLocator())
    ax_s.set_ylabel("local slope\n(dimensionless)")
    ax_s.set_xlabel("box size n (beats)")
    ax.tick_params(labelbottom=False)
    _legend(ax, loc="upper left", title="bias-corrected value [calibrated 95 % CI]",
            title_fontsize=8, alignment="left")
    return fig


@_figure_function
def logscale(tree: xr.DataTree, /):
    """Whole-record wavelet log-scale diagram (Abry & Veitch 1998).

    y_j with +-1.96 sqrt(Var y_j) bars against octave j, and the weighted line y_j =
    intercept + raw * j over the octaves used; the legend gives the calibrated beta.  The
    top axis gives the time scale 2^j x mean NN interval.

    Returns
    -------
    matplotlib.figure.Figure
    """
    rec = _ds(tree, "record")
    fig = _new_figure(tree, 7.6, 5.2, "Whole-record wavelet log-scale diagram")
    ax = fig.subplots()
    _style(ax)
    yj = _values(rec, "wavelet_y")
    if yj is None or not np.isfinite(yj).any():
        _message(ax, "no whole-record wavelet diagram in this file")
        return fig
    j = rec["wavelet_y"]["octave"].values.astype(float)
    var = _values(rec, "wavelet_y_var")
    err = 1.96 * np.sqrt(np.where(np.isfinite(var) & (var >= 0), var, np.nan))
    fx, fu = _values(rec, "beta_wavelet_fit_x"), _values(rec, "beta_wavelet_fit_used")
    used = np.isin(j, fx[fu.astype(bool)]) if fx is not None else np.zeros(j.size, bool)
    ax.errorbar(j[~used], yj[~used], yerr=err[~used], fmt="o", mfc="none", mec=_GREY,
                ecolor=_GREY, ms=4, capsize=2, lw=0.8, label="octaves outside the fit")
    ax.errorbar(j[used], yj[used], yerr=err[used], fmt="o", color=_C["blue"], ms=4.5,
                capsize=2, lw=0.9, label=r"octaves in the fit ($\pm$1.96 SD of $y_j$)",
                gid="y_j_used")
    b0, raw = _scalar(rec, "beta_wavelet_intercept"), _scalar(rec, "beta_wavelet_slope")
    if used.any() and np.isfinite(b0) and np.isfinite(raw):
        jj = np.array([j[used].min(), j[used].max()])
        ax.plot(jj, b0 + raw * jj, color=_C["vermillion"], lw=2.0,
                label=f"weighted line, slope {raw:.2f}", gid="fit_line")
    ax.set_xlabel(r"octave $j$ (scale $2^j$ beats)")
    ax.set_ylabel(r"$y_j$ = log$_2$ wavelet energy (log$_2$ ms²)")
    ax.set_xticks(j)
    nn_ms = _scalar(rec, "nn_mean_ms")
    if np.isfinite(nn_ms) and nn_ms > 0:
        top = ax.secondary_xaxis("top")
        step = 1 if j.size <= 8 else 2
        top.set_xticks(j[::step], [_duration(2 ** k * nn_ms / 1000) for k in j[::step]])
        top.tick_params(labelsize=7.5)
        top.set_xlabel(r"time scale $2^j$ × mean NN interval", fontsize=8)
    value = _fmt_ci(_scalar(rec, "beta_wavelet"), _values(rec, "beta_wavelet_ci"))
    _legend(ax, loc="upper left", title=f"β = {value} (calibrated, 95 % CI)",
            title_fontsize=8.5, alignment="left")
    return fig


# ------------------------------------------------------------------ time-resolved maps


#: percentiles of the local exponents that a fitted colour range spans
ALPHA_RANGE_PERCENTILES = (2.0, 98.0)


def _alpha_colours(values: np.ndarray, alpha_range: tuple[float, float] | None):
    """Colour map, norm, range text and extend of the local-exponent map.

    Fitted (``alpha_range`` None): the 2nd to 98th percentile of the finite values, at
    least 0.2 wide.  When alpha = 1 lies inside the range the diverging map is centred there
    (white = 1/f noise); when the whole range is below (above) 1 only the blue (red) half of
    the map is stretched over it, stopping short of white, so colour keeps its side of 1.
    """
    import matplotlib as mpl
    from matplotlib.colors import ListedColormap, Normalize, TwoSlopeNorm

    base = mpl.colormaps["RdBu_r"]
    finite = values[np.isfinite(values)]
    if alpha_range is not None:
        lo, hi = (float(v) for v in alpha_range)
        if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
            raise ValueError(f"alpha_range must be two finite numbers LOW < HIGH, got "
                             f"{alpha_range!r}")
        how = f"fixed range {lo:g}–{hi:g}"
    elif finite.size:
        lo, hi = (float(v) for v in np.percentile(finite, ALPHA_RANGE_PERCENTILES))
        if hi - lo < 0.2:
            mid = (hi + lo) / 2
            lo, hi = mid - 0.1, mid + 0.1
        lo, hi = np.floor(lo * 20) / 20, np.ceil(hi * 20) / 20
        how = (f"range fitted to the data (percentiles {ALPHA_RANGE_PERCENTILES[0]:g}–"
               f"{ALPHA_RANGE_PERCENTILES[1]:g}): {lo:.2f}–{hi:.2f}")
    else:
        lo, hi, how = 0.5, 1.5, "fixed range 0.5–1.5"
    if lo < 1.0 < hi:
        cmap, norm = base, TwoSlopeNorm(vmin=lo, vcenter=1.0, vmax=hi)
    elif hi <= 1.0:
        cmap = ListedColormap(base(np.linspace(0.0, 0.42, 256)), name="RdBu_r_below_1")
        norm = Normalize(vmin=lo, vmax=hi)
        how += "; all below α = 1: blue half only"
    else:
        cmap = ListedColormap(base(np.linspace(0.58, 1.0, 256)), name="RdBu_r_above_1")
        norm = Normalize(vmin=lo, vmax=hi)
        how += "; all above α = 1: red half only"
    below = bool(finite.size and np.any(finite < lo))
    above = bool(finite.size and np.any(finite > hi))
    extend = {(True, True): "both", (True, False): "min", (False, True): "max"}.get(
        (below, above), "neither")
    return cmap.with_extremes(bad="#D9D9D9"), norm, how, extend


@_figure_function
def scale_map(tree: xr.DataTree, /, *, tier: str = "short", smooth_windows: int = 1,
              alpha_range: tuple[float, float] | None = None):
    """Time x scale map of the local DFA exponent alpha(n) = d log F / d log n.

    Each cell is one window (drawn one hop wide at its centre) and one box size; grey
    cells have no estimate.  The diverging colour map is centred at alpha = 1 (1/f noise;
    blue below, towards uncorrelated 0.5, red above, towards Brownian-like 1.5).  By
    default the colour range is fitted to the data (2nd-98th percentile, see
    :func:`_alpha_colours`), so a record whose exponents all lie in 0.2-0.4 still shows
    its structure; ``alpha_range`` fixes it (e.g. (0.5, 1.5) to compare records).  The
    panel title states the range; values beyond saturate (arrows on the colour bar).  A
    strip above the map marks the night/rest period.

    Parameters
    ----------
    tree : xarray.DataTree
    tier : {"short", "long"}, default "short"
    smooth_windows : int, default 1
        Centred moving average over this many windows before drawing (1 = the raw
        per-window values).  Empty windows stay empty and are not averaged in; the panel
        title states the smoothing.
    alpha_range : (float, float), optional
        Fixed colour range (low, high); default: fitted to the data.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib as mpl
    from matplotlib.ticker import FixedLocator, NullFormatter, NullLocator

    check_choice(tier, "tier", ("short", "long"))
    if isinstance(smooth_windows, bool) or not isinstance(smooth_windows, int | np.integer):
        raise TypeError(f"smooth_windows must be an int, got {smooth_windows!r}")
    if smooth_windows < 1:
        raise ValueError(f"smooth_windows must be >= 1, got {smooth_windows!r}")
    ds = _ds(tree, tier)
    rid = tree.attrs.get("record_id", "")
    fig = _new_figure(tree, 10.0, 5.4, f"{rid}: local DFA exponent over time and scale")
    ax_top, ax = fig.subplots(2, 1, sharex=True, height_ratios=[0.06, 1.0])
    _style(ax, grid="")
    ax_top.set_yticks([])
    ax_top.tick_params(labelbottom=False, bottom=False)
    for side in ("top", "right", "left"):
        ax_top.spines[side].set_visible(False)
    if ds is None or "local_alpha" not in ds or ds.sizes.get("time", 0) == 0:
        _message(ax, f"no {tier}-window local exponents in this file")
        return fig
    t, hop = _tier_hours(ds)
    scales = ds["scale"].values.astype(float)
    la = _smooth_time(np.asarray(ds["local_alpha"].transpose("time", "scale").values, float),
                      smooth_windows)
    x_edges = _edges(t)
    y_edges = _edges(scales, log=True)
    cmap, norm, colour_range, extend = _alpha_colours(la, alpha_range)
    mesh = ax.pcolormesh(x_edges, y_edges, np.ma.masked_invalid(la.T), cmap=cmap,
                         norm=norm, shading="flat", rasterized=True,
                         gid="local_alpha")
    ax.set_yscale("log")
    ax.set_ylim(y_edges[0], y_edges[-1])
    ticks = [v for v in (4, 8, 16, 32, 64, 128, 256, 512, 1024, 2048, 4096, 8192)
             if y_edges[0] <= v <= y_edges[-1]]
    ax.yaxis.set_major_locator(FixedLocator(ticks))
    ax.yaxis.set_major_formatter(mpl.ticker.FixedFormatter([f"{v:d}" for v in ticks]))
    ax.yaxis.set_minor_locator(NullLocator())
    ax.yaxis.set_minor_formatter(NullFormatter())
    for b, lab in ((16, r"$\alpha_1$ | $\alpha_2$"), (64, r"$\alpha_2$ | long")):
        if y_edges[0] < b < y_edges[-1]:
            ax.axhline(b, color="#262626", lw=0.8, ls="--", alpha=0.7)
            ax.text(0.995, b, lab, transform=mpl.transforms.blended_transform_factory(
                ax.transAxes, ax.transData), ha="right", va="bottom", fontsize=7.5,
                color="#262626", bbox={"facecolor": "white", "alpha": 0.7, "lw": 0,
                                       "pad": 1.0})
    ax.set_ylabel("DFA box size n (beats)")
    cbar = fig.colorbar(mesh, ax=[ax_top, ax], extend=extend, pad=0.01, aspect=30)
    cbar.set_label(r"local DFA exponent $\alpha(n)$ (dimensionless)")
    ticks = mpl.ticker.MaxNLocator(nbins=6).tick_values(norm.vmin, norm.vmax)
    ticks = ticks[(ticks >= norm.vmin - 1e-9) & (ticks <= norm.vmax + 1e-9)]
    if norm.vmin < 1.0 < norm.vmax:
        step = float(np.min(np.diff(ticks))) if ticks.size > 1 else 1.0
        ticks = np.append(ticks[np.abs(ticks - 1.0) >= step / 2], 1.0)
    ticks = np.unique(np.round(ticks, 2))
    cbar.set_ticks(ticks, labels=[f"{v:g}" for v in ticks])
    cbar.ax.tick_params(labelsize=8)
    rest = _rest(tree)
    ax_top.set_ylim(0, 1)
    if rest is not None:
        short = _ds(tree, "short")
        ts, hs = _tier_hours(short)
        bars = [(a, b - a) for a, b in _spans(ts, hs, rest[0])]
        if bars:
            ax_top.broken_barh(bars, (0, 1), color=_C["blue"], lw=0)
        ax_top.text(-0.005, 0.5, rest[3].split(" (")[0], transform=ax_top.transAxes,
                    ha="right", va="center", fontsize=7.5)
    win = float(ds.attrs.get("window_s", hop * 3600))
    smooth = (f"; moving average over {smooth_windows} windows" if smooth_windows > 1
              else "")
    ax.set_title(f"{tier} tier: {_duration(win)} windows every {_duration(hop * 3600)}"
                 f"{smooth}; grey = no estimate\ncolour: {colour_range}", fontsize=8.5,
                 color="#404040")
    _time_axis(ax, _clock(tree), max(_record_end_h(tree), float(x_edges[-1])))
    return fig


@_figure_function
def stationarity_timeline(tree: xr.DataTree, /):
    """Stationarity category and chosen primary estimator of every window, both tiers.

    Each window is drawn one hop wide at its centre (long windows overlap, so a cell stands
    for the window centred there).  Legend entries give the share of windows per tier.

    Returns
    -------
    matplotlib.figure.Figure
    """
    rid = tree.attrs.get("record_id", "")
    fig = _new_figure(tree, 10.0, 4.4, f"{rid}: stationarity and estimator per window")
    ax_c, ax_e = fig.subplots(2, 1, sharex=True)
    tiers = [(name, _ds(tree, name)) for name in ("short", "long")]
    tiers = [(n, d) for n, d in tiers if d is not None and d.sizes.get("time", 0)]
    for ax, var, names, colours, title in (
            (ax_c, "stationarity", CATEGORIES, _CATEGORY_COLOURS, "stationarity category"),
            (ax_e, "estimator", ESTIMATORS, _ESTIMATOR_COLOURS, "primary estimator")):
        _style(ax, grid="")
        ax.set_ylim(-0.5, max(len(tiers), 1) - 0.5)
        if not tiers:
            _message(ax, "no windows in this file")
            continue
        meanings = str(tiers[0][1][var].attrs.get("flag_meanings", "")).split()
        if len(meanings) == len(names):  # the file's own category names win
            names = tuple(m.replace("_", "-") for m in meanings)
        shares = {code: [] for code in range(len(names))}
        for row, (tier, ds) in enumerate(tiers):
            t, hop = _tier_hours(ds)
            codes = ds[var].values.astype(int)
            for code in range(len(names)):
                shares[code].append(100.0 * np.mean(codes == code))
                bars = [(a, b - a) for a, b in _spans(t, hop, codes == code)]
                if bars:
                    ax.broken_barh(bars, (len(tiers) - 1 - row - 0.38, 0.76),
                                   color=colours[code], lw=0,
                                   gid=f"{var}:{tier}:{names[code]}")
        from matplotlib.patches import Patch

        handles = [Patch(color=colours[c], label=f"{names[c]} "
                         f"({' / '.join(f'{s:.0f}' for s in shares[c])} %)")
                   for c in range(len(names))]
        ax.legend(handles=handles, loc="center left", bbox_to_anchor=(1.005, 0.5),
                  title=f"{title}\n(% of {' / '.join(n for n, _ in tiers)} windows)",
                  title_fontsize=8, alignment="left", handlelength=1.2)
        ax.set_yticks(range(len(tiers)),
                      [f"{n}\n{_duration(float(d.attrs.get('window_s', 0)))}"
                       for n, d in reversed(tiers)])
        ax.spines["left"].set_visible(False)
        ax.tick_params(axis="y", length=0)
        ax.set_title(title, fontsize=9)
    ax_c.tick_params(labelbottom=False)
    _time_axis(ax_e, _clock(tree), _record_end_h(tree))
    return fig


# ------------------------------------------------------------------ 24-h (circadian)


@_figure_function
def circadian(tree: xr.DataTree, /):
    """Exponents against the 24-h clock with a single-component cosinor and its band.

    Top: short-window alpha1; bottom: long-window exponent as alpha = (beta + 1)/2.  Points
    are windows with at least 50 % coverage, coloured by record day (noon to noon), folded
    on 24 h (clock time, or hours from the start when the clock is unknown).  The curve is
    the 24-h cosinor (Nelson et al. 1979; Cornelissen 2014) with a pointwise 95 % band
    from the least-squares covariance, which assumes independent residuals and is
    therefore too narrow for autocorrelated windows.  Night/rest and day spans are shaded.
    The cosinor needs at least 18 h of data (as :func:`tfhrv.circadian.days.circadian_table`).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from tfhrv.circadian.core import cosinor
    from tfhrv.circadian.days import CircadianOptions, _cosinor_time, _periods
    from tfhrv.core.errors import InsufficientDataError

    rid = tree.attrs.get("record_id", "")
    clock = _clock(tree)
    fig = _new_figure(tree, 10.0, 6.4, f"{rid}: 24-h rhythm of the scaling exponents")
    axes = fig.subplots(2, 1, sharex=True)
    rest = _rest(tree)
    short = _ds(tree, "short")
    if rest is not None and short is not None:
        tc, _ = _cosinor_time(tree, "short")
        for mask, colour, label in ((rest[0], _C["sky"], rest[3]),
                                    (rest[1], _C["yellow"], "day")):
            bins = np.zeros(288, bool)
            bins[(np.floor((tc[mask] % 24) * 12).astype(int)) % 288] = True
            for i, (a, b) in enumerate(_runs(bins)):
                for ax in axes:
                    ax.axvspan(a / 12, (b + 1) / 12, color=colour, alpha=0.18, lw=0,
                               zorder=0, label=label if (i == 0 and ax is axes[0]) else None)
    panels = (("short", r"$\alpha_1$, 5-min windows"),
              ("long", r"long windows: primary exponent as $\alpha=(\beta+1)/2$"))
    day_colours = [_C[k] for k in ("blue", "vermillion", "green", "purple", "orange",
                                   "black", "sky")]
    for ax, (tier, title) in zip(axes, panels, strict=True):
        _style(ax)
        ax.set_title(title, fontsize=9)
        ds = _ds(tree, tier)
        if ds is None or ds.sizes.get("time", 0) == 0:
            _message(ax, f"no {tier} windows in this file")
            continue
        y = _values(ds, "alpha1") if tier == "short" else _long_alpha(ds)[0]
        cov = np.nan_to_num(_values(ds, "coverage"))
        valid = np.isfinite(y) & (cov >= _MIN_COVERAGE)
        t, ref = _cosinor_time(tree, tier)
        day_index = np.zeros(t.size, int)
        if _record_end_h(tree) > 24.0:  # colour by noon-to-noon day as tfhrv.circadian.days does
            with contextlib.suppress(ValueError, KeyError):
                day_index = _periods(tree, tier, CircadianOptions(), None)[2]
        days = np.unique(day_index[valid])
        for k, d in enumerate(days):
            sel = valid & (day_index == d)
            ax.plot(t[sel] % 24, y[sel], "o", ms=2.6 if tier == "short" else 4,
                    color=day_colours[k % len(day_colours)], alpha=0.75, mew=0,
                    label=f"day {d + 1} (noon to noon)" if days.size > 1 else "windows",
                    zorder=3, gid=f"points_{tier}")
        span = float(np.ptp(t[valid])) if valid.any() else 0.0
        fit = None
        if span >= 18.0 and valid.sum() >= 6:
            with contextlib.suppress(InsufficientDataError):
                fit = cosinor(t[valid], y[valid], period_hours=24.0)
        if fit is not None:
            grid = np.linspace(0.0, 24.0, 289)
            curve, half = _cosinor_band(fit, grid)
            ax.fill_between(grid, curve - half, curve + half, color=_C["black"], alpha=0.15,
                            lw=0, zorder=2, label="95 % pointwise band (OLS)",
                            gid=f"cosinor_band_{tier}")
            phase = (_hhmm(fit.acrophase_hours) if ref == "clock"
                     else f"{fit.acrophase_hours % 24:.1f} h")
            ax.plot(grid, curve, color=_C["black"], lw=1.8, zorder=4, gid=f"cosinor_{tier}",
                    label=(f"cosinor 24 h (p = {fit.f_pvalue:.2g})\n"
                           f"MESOR {fit.mesor:.2f}, peak {phase}\namplitude "
                           f"{_fmt_ci(fit.amplitude, fit.amplitude_ci)}"))
        else:
            ax.text(0.99, 0.03, f"no cosinor: {span:.1f} h of usable windows (< 18 h)",
                    transform=ax.transAxes, ha="right", va="bottom", fontsize=8,
                    color="#595959")
        ax.axhline(1.0, color="#4D4D4D", lw=0.7, ls=":", zorder=1)
        r = _finite_range(y[valid], lo_q=0.2, hi_q=99.8)
        if r is not None:
            ax.set_ylim(max(r[0], -0.5), min(r[1], 3.0))
        ax.set_ylabel(r"$\alpha$ (dimensionless)")
        _legend(ax, loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7.5,
                handlelength=1.4)
    from matplotlib.ticker import FixedLocator, FuncFormatter

    axes[1].xaxis.set_major_locator(FixedLocator(np.arange(0, 25, 3)))
    axes[1].xaxis.set_major_formatter(FuncFormatter(
        lambda x, _p: _hhmm(x) if clock.known else f"{x:g} h"))
    axes[1].set_xlim(0, 24)
    axes[1].set_xlabel("clock time of day (HH:MM)" if clock.known else
                       "hours from start, folded on 24 h (clock time unknown)")
    axes[0].tick_params(labelbottom=False)
    return fig


def _legend(ax, **kw) -> None:
    """``ax.legend`` with the labelled artists that exist: no legend when there are none
    and no title, a title-only legend otherwise (matplotlib warns "No artists with labels
    found" when asked to find handles that a sparse record did not draw)."""
    handles, labels = ax.get_legend_handles_labels()
    if not handles and not kw.get("title"):
        return
    ax.legend(handles, labels, **kw)


# ------------------------------------------------------------------ saving

#: Figure name -> function, in the order of the report.
FIGURES = {
    "overview": overview,
    "scale_map_short": partial(scale_map, tier="short"),
    "scale_map_long": partial(scale_map, tier="long"),
    "stationarity": stationarity_timeline,
    "circadian": circadian,
    "spectrum": spectrum,
    "dfa": dfa,
    "logscale": logscale,
    "multifractal": multifractal_spectrum,
}


#: Metadata left out of each format, so that the same figure gives the same bytes.
_NO_DATE = {"png": {"Software": None}, "svg": {"Date": None}, "pdf": {"CreationDate": None}}


def save_figure(fig, path: str | Path, /, *, fmt: str = "png", dpi: float = 110.0,
                outputs=None) -> Path:
    """Write one figure atomically (temporary file in the same folder, then ``os.replace``),
    or stage it in ``outputs`` (a :class:`tfhrv.core.files.OutputSet`)."""
    from tfhrv.core.files import atomic_write

    check_choice(fmt, "fmt", ("png", "svg", "pdf"))
    dpi = check_positive(dpi, "dpi")

    def write(tmp):
        with _rc():  # our style, including the fixed SVG id salt
            fig.savefig(tmp, format=fmt, dpi=dpi, metadata=_NO_DATE[fmt])

    return outputs.add(path, write) if outputs is not None else atomic_write(path, write)


def _figure_bytes(name: str, tree: xr.DataTree, formats: tuple[str, ...], dpi: float,
                  alpha_range: tuple[float, float] | None) -> list[bytes]:
    """One figure of :data:`FIGURES` rendered in each of ``formats``."""
    import io

    func = FIGURES[name]
    fig = (func(tree, alpha_range=alpha_range) if name.startswith("scale_map")
           else func(tree))
    out = []
    for fmt in formats:
        buf = io.BytesIO()
        with _rc():  # our style, including the fixed SVG id salt (same bytes every run)
            fig.savefig(buf, format=fmt, dpi=dpi, metadata=_NO_DATE[fmt])
        out.append(buf.getvalue())
    return out


def save_all(tree: xr.DataTree, directory: str | Path, /, *,
             formats: tuple[str, ...] = ("png", "svg"), dpi: float = 110.0,
             prefix: str = "", alpha_range: tuple[float, float] | None = None,
             progress=None, outputs=None, workers: int = 1) -> list[Path]:
    """Render every figure of :data:`FIGURES` and write it in each format.

    Parameters
    ----------
    tree : xarray.DataTree
        A scan (optionally with ``/circadian``).
    directory : str or Path
        Output folder (created if needed).
    formats : tuple of {"png", "svg", "pdf"}, default ("png", "svg")
    dpi : float, default 110
        Resolution of raster output.
    prefix : str, default ""
        Prepended to each file name (e.g. the record id in a cohort folder).
    alpha_range : (float, float), optional
        Fixed colour range of the local-exponent maps (default: fitted to the data).
    progress : tfhrv.core.progress.Progress, optional
        Told each figure (default: silent).
    outputs : tfhrv.core.files.OutputSet, optional
        Stage the files there (renamed with the command's other outputs) instead of
        writing each at once.
    workers : int, default 1
        Processes drawing the figures (forked, POSIX only: :func:`~tfhrv.viz.figkit.draw_each`).
        PNGs are the same bytes as drawn in one process; an SVG the same drawing, with
        a clip-path id that can differ in its hash.  The files are written by this process.

    Returns
    -------
    list of Path
        The files written, ``<prefix><figure>.<format>``, in :data:`FIGURES` order.
    """
    from tfhrv.core.files import atomic_write
    from tfhrv.core.validation import check_int

    if isinstance(formats, str):
        formats = (formats,)
    formats = tuple(formats)
    for fmt in formats:
        check_choice(fmt, "formats", ("png", "svg", "pdf"))
    dpi = check_positive(dpi, "dpi")
    workers = check_int(workers, "workers", minimum=1)
    out = Path(directory)
    names = list(FIGURES)
    rendered = draw_each(names, lambda n: _figure_bytes(n, tree, formats, dpi, alpha_range),
                         workers=workers, progress=progress)
    written = []
    for name, blobs in zip(names, rendered, strict=True):
        for fmt, data in zip(formats, blobs, strict=True):
            def write(tmp, data=data):
                Path(tmp).write_bytes(data)

            path = out / f"{prefix}{name}.{fmt}"
            written.append(outputs.add(path, write) if outputs is not None
                           else atomic_write(path, write))
    return written
