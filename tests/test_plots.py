"""Figures: checked through matplotlib objects (labels, artists, data, norms), not pixels.

Expected values come from the DataTree itself (the figure must show what the file holds),
from independent implementations (numpy least squares for the drawn lines) and from exact
theory (a cosinor on an exact cosine recovers it).
"""

from __future__ import annotations

import datetime as dt
import re
import subprocess
import sys
from dataclasses import replace

import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose

from tfhrv.analysis.pipeline import ScanOptions
from tfhrv.analysis.windows import LONG
from tfhrv.dataset.build import scan
from tfhrv.signal.clean import clean
from tfhrv.synth import simulate_recording
from tfhrv.viz import figures as plots

HHMM = re.compile(r"^\d\d:\d\d(\n.*)?$")


@pytest.fixture(scope="module")
def tree() -> xr.DataTree:
    """A 9-h synthetic day-worker record from 18:00 (evening and night), scanned once."""
    sim = simulate_recording(days=0.375, start=dt.datetime(2024, 3, 4, 18, 0), rng=1,
                             record_id="plot-test")
    return scan(clean(sim.recording), options=ScanOptions(long=replace(LONG, hop_s=7200.0)))


@pytest.fixture(scope="module")
def figs(tree) -> dict:
    """Every figure of the test tree, built once for the module."""
    return {name: func(tree) for name, func in plots.FIGURES.items()}


def without_clock(tree: xr.DataTree) -> xr.DataTree:
    """The same tree as the scan writes it when the clock start is unknown."""
    new = tree.copy()
    for tier in ("short", "long"):
        ds = tree[tier].to_dataset()
        td = np.round(ds["elapsed"].values * 1e3).astype("int64").astype("timedelta64[ms]")
        new[tier] = xr.DataTree(ds.drop_vars("clock_hour").assign_coords(time=("time", td)))
    new.attrs = {**tree.attrs, "clock": "unknown", "start": ""}
    return new


def artist(fig, gid: str):
    found = [a for ax in fig.axes for a in ax.get_children() if a.get_gid() == gid]
    assert found, f"no artist with gid {gid!r}"
    return found[0]


def by_ylabel(fig, text: str):
    return next(ax for ax in fig.axes if text in ax.get_ylabel())


def tick_labels(ax) -> list[str]:
    ax.figure.canvas.draw()
    return [t.get_text() for t in ax.get_xticklabels() if t.get_text()]


def test_import_tfhrv_does_not_import_matplotlib():
    # STYLE.md: only plots/report import matplotlib, and lazily
    code = ("import sys, tfhrv, tfhrv.viz.figures, tfhrv.viz.report; "
            "sys.exit(1 if 'matplotlib' in sys.modules else 0)")
    assert subprocess.run([sys.executable, "-c", code], check=False).returncode == 0


def test_every_figure_has_footer_and_units(figs):
    for name, fig in figs.items():
        assert any(t.get_text() == plots.FOOTER for t in fig.texts), name
        labels = [ax.get_ylabel() for ax in fig.axes if ax.get_ylabel()]
        labels += [ax.get_xlabel() for ax in fig.axes if ax.get_xlabel()]
        assert labels, name
        # every labelled quantity states its unit in parentheses
        assert all("(" in lab and ")" in lab for lab in labels), (name, labels)


def test_overview_shows_the_tree(tree, figs):
    fig = figs["overview"]
    short = tree["short"].to_dataset()
    nn = tree["nn"].to_dataset()
    ax_ex = by_ylabel(fig, "exponent")
    assert "(ms)" in by_ylabel(fig, "NN interval").get_ylabel()
    line = artist(fig, "alpha1")
    assert_allclose(line.get_xdata(), short["elapsed"].values / 3600, rtol=0, atol=1e-12)
    assert_allclose(line.get_ydata(), short["alpha1"].values, rtol=0, atol=0, equal_nan=True)
    band = artist(fig, "alpha1_ci").get_paths()[0].vertices[:, 1]
    ci = short["alpha1_ci"].values
    assert band.min() == pytest.approx(np.nanmin(ci)) and band.max() == pytest.approx(np.nanmax(ci))
    # removed beats: one marker per interval whose reason is not "kept" or "gap"
    assert artist(fig, "removed_beats").get_xdata().size == int(np.sum(nn["reason"].values > 1))
    # long tier converted to alpha = (beta + 1)/2 (Kantelhardt et al. 2001)
    long = tree["long"].to_dataset()
    expected = (long["exponent"].values + 1) / 2
    ok = np.isfinite(expected)
    assert_allclose(artist(fig, "long_alpha").get_ydata()[ok], expected[ok], rtol=1e-12)
    labels = tick_labels(ax_ex)
    assert labels and all(HHMM.match(s) for s in labels), labels
    assert "clock time" in ax_ex.get_xlabel()


def test_overview_without_clock_counts_hours(tree):
    fig = plots.overview(without_clock(tree))
    ax_ex = by_ylabel(fig, "exponent")
    assert "hours from start" in ax_ex.get_xlabel() and "unknown" in ax_ex.get_xlabel()
    labels = tick_labels(ax_ex)
    assert labels and all(s.endswith(" h") for s in labels), labels


def test_spectrum_line_is_the_least_squares_fit(tree, figs):
    fig = figs["spectrum"]
    rec = tree["record"].to_dataset()
    ax = by_ylabel(fig, "power spectral density")
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    assert "(ms²/Hz)" in ax.get_ylabel()
    pts = artist(fig, "psd_used")
    line = artist(fig, "fit_line")
    # independent check: numpy least squares through the drawn fit points gives the line
    slope, icpt = np.polyfit(np.log10(pts.get_xdata()), np.log10(pts.get_ydata()), 1)
    lx, ly = np.log10(line.get_xdata()), np.log10(line.get_ydata())
    assert_allclose(ly, icpt + slope * lx, rtol=1e-9, atol=1e-9)
    assert slope == pytest.approx(-float(rec["beta_spectral_slope"]), rel=1e-9)
    # Task Force (1996) band limits 0.003, 0.04, 0.15, 0.4 Hz marked on the main panel
    limits = sorted({float(a.get_xdata()[0]) for a in ax.get_lines()
                     if a.get_gid() == "band_limit"})
    assert_allclose(limits, [0.003, 0.04, 0.15, 0.4], rtol=0, atol=1e-12)
    # residuals are the vertical distances of the fit points from the line
    res = artist(fig, "residual_used").get_ydata()
    assert_allclose(res, np.log10(pts.get_ydata()) - (icpt + slope * np.log10(pts.get_xdata())),
                    atol=1e-9)


def test_dfa_lines_fit_their_ranges(tree, figs):
    fig = figs["dfa"]
    rec = tree["record"].to_dataset()
    f = artist(fig, "fluctuation")
    assert_allclose(f.get_xdata(), rec["scale"].values)
    assert_allclose(f.get_ydata(), rec["fluctuation"].values)
    for name, (lo, hi) in (("alpha1", (4, 16)), ("alpha2", (16, 64))):
        line = artist(fig, f"{name}_line")
        assert line.get_xdata().min() == pytest.approx(lo) and line.get_xdata().max() == \
            pytest.approx(hi)
        used = rec[f"{name}_fit_used"].values.astype(bool)
        x, y = rec[f"{name}_fit_x"].values[used], rec[f"{name}_fit_y"].values[used]
        # Peng et al. 1995: alpha is the least-squares slope of log F on log n over the
        # range; numpy's polyfit on the points that entered the fit must give the line
        slope, icpt = np.polyfit(x, y, 1)
        assert_allclose(np.log10(line.get_ydata()), icpt + slope * np.log10(line.get_xdata()),
                        atol=1e-9)
    legend = [t.get_text() for t in by_ylabel(fig, "fluctuation").get_legend().get_texts()]
    a1 = float(rec["alpha1"])
    lo, hi = rec["alpha1_ci"].values
    assert any(f"{a1:.2f} [{lo:.2f}, {hi:.2f}]" in s for s in legend), legend
    assert "(beats)" in fig.axes[-1].get_xlabel() or any("(beats)" in ax.get_xlabel()
                                                         for ax in fig.axes)


def test_logscale_bars_and_weighted_line(tree, figs):
    fig = figs["logscale"]
    rec = tree["record"].to_dataset()
    ax = fig.axes[0]
    container = next(c for c in ax.containers if c.get_label().startswith("octaves in"))
    j = container.lines[0].get_xdata()
    y = container.lines[0].get_ydata()
    segs = container.lines[2][0].get_segments()
    half = np.array([(s[1, 1] - s[0, 1]) / 2 for s in segs])
    var = rec["wavelet_y_var"].sel(octave=j).values
    assert_allclose(half, 1.96 * np.sqrt(var), rtol=1e-9)
    # Abry & Veitch (1998): weighted least squares with weights 1/Var(y_j) (numpy here)
    slope, icpt = np.polyfit(j, y, 1, w=1 / np.sqrt(var))
    line = artist(fig, "fit_line")
    assert_allclose(line.get_ydata(), icpt + slope * line.get_xdata(), atol=1e-9)
    assert "log$_2$ ms²" in ax.get_ylabel()


@pytest.mark.parametrize("tier", ["short", "long"])
def test_scale_map_norm_centred_at_one(tree, figs, tier):
    from matplotlib.colors import TwoSlopeNorm

    fig = figs[f"scale_map_{tier}"]
    mesh = artist(fig, "local_alpha")
    la = tree[tier]["local_alpha"].transpose("time", "scale").values
    # default: the range is fitted to the data (2nd-98th percentile, rounded outwards to
    # 0.05), centred at alpha = 1 when 1 lies inside it
    lo, hi = np.nanpercentile(la, [2, 98])
    assert mesh.norm.vmin <= lo + 1e-9 and mesh.norm.vmax >= hi - 1e-9
    assert mesh.norm.vmin > lo - 0.05 - 1e-9 and mesh.norm.vmax < hi + 0.05 + 1e-9
    if mesh.norm.vmin < 1 < mesh.norm.vmax:
        assert isinstance(mesh.norm, TwoSlopeNorm) and mesh.norm(1.0) == pytest.approx(0.5)
    fixed = artist(plots.scale_map(tree, tier=tier, alpha_range=(0.5, 1.5)), "local_alpha")
    assert isinstance(fixed.norm, TwoSlopeNorm)
    assert (fixed.norm.vmin, fixed.norm.vcenter, fixed.norm.vmax) == (0.5, 1.0, 1.5)
    shown = np.ma.filled(mesh.get_array().astype(float), np.nan).reshape(la.T.shape)
    assert_allclose(shown, la.T, equal_nan=True)
    ax = by_ylabel(fig, "box size")
    assert ax.get_yscale() == "log" and "(beats)" in ax.get_ylabel()
    cbar_labels = [a.get_ylabel() for a in fig.axes]
    assert any("local DFA exponent" in s for s in cbar_labels)


def test_scale_map_range_follows_low_exponents(tree):
    # a record whose local exponents all lie in 0.2-0.4 (as in heart failure, Peng et al.
    # 1995) must not be one saturated block: the colour range spans the data, on the blue
    # side of 1 only, and the title says so
    t = tree.copy()
    ds = tree["short"].to_dataset()
    la = ds["local_alpha"].values
    low = 0.2 + 0.2 * (la - np.nanmin(la)) / (np.nanmax(la) - np.nanmin(la))
    t["short"] = xr.DataTree(ds.assign(local_alpha=(ds["local_alpha"].dims, low)))
    fig = plots.scale_map(t)
    mesh = artist(fig, "local_alpha")
    assert 0.15 <= mesh.norm.vmin <= 0.25 and 0.35 <= mesh.norm.vmax <= 0.45
    colours = mesh.cmap(mesh.norm(np.array([0.22, 0.3, 0.38])))
    assert np.ptp(colours[:, :3], axis=0).max() > 0.3  # visibly different colours
    assert all(c[2] >= c[0] for c in colours)  # all on the blue side (below alpha = 1)
    title = " ".join(ax.get_title(loc=loc) for ax in fig.axes for loc in ("left", "center"))
    assert "fitted to the data" in title and "below α = 1" in title
    with pytest.raises(ValueError, match="alpha_range"):
        plots.scale_map(tree, alpha_range=(1.5, 0.5))


def test_spectrum_legend_shows_an_open_interval_end(tree):
    t = tree.copy()
    rec = tree["record"].to_dataset()
    ci = rec["beta_spectral_ci"].values.copy()
    ci[1] = np.nan  # the calibration could not bound the upper end
    t["record"] = xr.DataTree(rec.assign(beta_spectral_ci=(("bound",), ci)))
    legend = next(ax.get_legend() for ax in plots.spectrum(t).axes if ax.get_legend())
    assert f"[{ci[0]:.2f}, open]" in legend.get_title().get_text()


def test_dpi_sets_the_png_width(tree, tmp_path):
    import struct

    fig = plots.logscale(tree)
    width_in = fig.get_size_inches()[0]
    for dpi in (50, 120):
        png = plots.save_figure(fig, tmp_path / f"l{dpi}.png", dpi=dpi).read_bytes()
        # PNG IHDR: width is the big-endian uint32 at byte 16 (ISO/IEC 15948)
        assert struct.unpack(">I", png[16:20])[0] == pytest.approx(width_in * dpi, abs=2)


def test_scale_map_rejects_unknown_tier(tree):
    with pytest.raises(ValueError, match="tier must be one of"):
        plots.scale_map(tree, tier="medium")


def test_stationarity_shares_in_legend(tree, figs):
    fig = figs["stationarity"]
    cats = tree["short"]["stationarity"].values
    share = 100 * np.mean(cats == 0)
    texts = [t.get_text() for ax in fig.axes if ax.get_legend() for t in
             ax.get_legend().get_texts()]
    assert any(s.startswith(f"stationary ({share:.0f} /") for s in texts), texts
    n_cells = sum(len(a.get_paths()) for ax in fig.axes for a in ax.collections
                  if str(a.get_gid()).startswith("stationarity:short:"))
    assert n_cells >= 1


def cosine_tree(*, with_clock: bool = True) -> xr.DataTree:
    """48 h of 5-min windows whose alpha1 is exactly 1 + 0.2 cos(2 pi (h - 15)/24)."""
    h = np.arange(576) * 5 / 60 + 2.5 / 60
    clock_h = (9.0 + h) % 24
    a1 = 1.0 + 0.2 * np.cos(2 * np.pi * (clock_h - 15.0) / 24)
    coords = {"elapsed": ("time", h * 3600), "bound": ["lower", "upper"], "scale": [4, 8, 16]}
    if with_clock:
        coords["clock_hour"] = ("time", clock_h)
    short = xr.Dataset(
        {"alpha1": ("time", a1), "alpha1_ci": (("time", "bound"), np.c_[a1 - 0.1, a1 + 0.1]),
         "coverage": ("time", np.ones(h.size)), "nn_mean_ms": ("time", 800 + 0 * h),
         "stationarity": ("time", np.zeros(h.size, np.int8)),
         "estimator": ("time", np.ones(h.size, np.int8)),
         "local_alpha": (("time", "scale"), np.full((h.size, 3), np.nan))},
        coords=coords, attrs={"window_s": 300.0, "hop_s": 300.0})
    root = {"record_id": "cos", "clock": "timestamp" if with_clock else "unknown",
            "start": "2024-03-04T09:00:00" if with_clock else ""}
    return xr.DataTree.from_dict({"/": xr.Dataset(attrs=root), "/short": short})


def test_circadian_recovers_an_exact_cosine():
    # exact theory: least squares on a noise-free cosine returns it (Nelson et al. 1979)
    fig = plots.circadian(cosine_tree())
    curve = artist(fig, "cosinor_short")
    x, y = curve.get_xdata(), curve.get_ydata()
    assert x[np.argmax(y)] == pytest.approx(15.0)
    assert y.max() == pytest.approx(1.2, abs=1e-9) and y.min() == pytest.approx(0.8, abs=1e-9)
    band = artist(fig, "cosinor_band_short").get_paths()[0].vertices[:, 1]
    assert np.ptp(band) == pytest.approx(0.4, abs=1e-6)  # zero residuals: a band of width 0
    labels = tick_labels(fig.axes[-1])
    assert labels[0] == "00:00" and all(HHMM.match(s) for s in labels)
    # no long tier in this tree: the panel says so instead of failing
    assert any("no long windows" in t.get_text() for ax in fig.axes for t in ax.texts)
    # night 00:00-06:00 shaded (clock windows, tfhrv.circadian.days defaults)
    spans = [p.get_x() for p in fig.axes[0].patches if p.get_label().startswith("night")]
    assert spans and spans[0] == pytest.approx(0.0)


def test_circadian_short_record_has_no_cosinor(figs):
    fig = figs["circadian"]
    assert any("no cosinor" in t.get_text() for ax in fig.axes for t in ax.texts)
    assert not [a for ax in fig.axes for a in ax.get_lines() if a.get_gid() == "cosinor_short"]


def test_figures_survive_missing_groups_and_nans(tree):
    bare = cosine_tree(with_clock=False)  # no /nn, /long or /record, no clock, NaN local_alpha
    for func in plots.FIGURES.values():
        func(bare)
    nan_tree = tree.copy()
    short = tree["short"].to_dataset()
    for var in ("alpha1", "alpha1_ci", "local_alpha"):
        short[var] = short[var] * np.nan
    nan_tree["short"] = xr.DataTree(short)
    for func in (plots.overview, plots.scale_map, plots.circadian):
        fig = func(nan_tree)
        assert any(t.get_text() == plots.FOOTER for t in fig.texts)


def test_save_all_writes_every_figure_atomically(tree, figs, tmp_path):
    paths = plots.save_all(tree, tmp_path / "figs", formats=("png",), dpi=30, prefix="r1_")
    assert [p.name for p in paths] == [f"r1_{name}.png" for name in plots.FIGURES]
    for p in paths:
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    svg = plots.save_figure(figs["logscale"], tmp_path / "figs" / "logscale.svg", fmt="svg")
    assert svg.read_bytes().lstrip().startswith(b"<?xml")
    assert not list((tmp_path / "figs").glob("*.part"))
    with pytest.raises(ValueError, match="formats must be one of"):
        plots.save_all(tree, tmp_path, formats=("jpg",))


def test_save_all_same_figures_on_two_processes(tree, tmp_path):
    # Forked workers draw the figures (tfhrv figures uses the cores): the PNGs must be the
    # bytes one process draws, and the SVGs the same drawing (element ids are hashes of
    # sub-pixel clip boxes, which font state inherited by a worker can move in the last
    # printed digit, so ids are compared as placeholders).
    import re

    def drawing(svg: bytes) -> bytes:
        return re.sub(rb'(?<=id=")[^"]+|(?<=#)[^)"]+', b"ID", svg)

    one = plots.save_all(tree, tmp_path / "one", formats=("png", "svg"), dpi=30)
    two = plots.save_all(tree, tmp_path / "two", formats=("png", "svg"), dpi=30, workers=2)
    assert [p.name for p in one] == [p.name for p in two]
    for a, b in zip(one, two, strict=True):
        if a.suffix == ".png":
            assert a.read_bytes() == b.read_bytes(), a.name
        else:
            assert drawing(a.read_bytes()) == drawing(b.read_bytes()), a.name


def test_svg_ids_do_not_change_between_saves(figs, tmp_path):
    # Our style fixes matplotlib's SVG id salt (svg.hashsalt), which applies only if the
    # figure is saved inside it: saving the same figure twice gives the same bytes.
    first = plots.save_figure(figs["stationarity"], tmp_path / "a.svg", fmt="svg")
    second = plots.save_figure(figs["stationarity"], tmp_path / "b.svg", fmt="svg")
    assert first.read_bytes() == second.read_bytes()


def test_smoothing_is_a_moving_average_that_keeps_gaps():
    from tfhrv.viz.figkit import _smooth_time

    a = np.array([[1.0], [2.0], [np.nan], [4.0], [5.0], [6.0]])
    out = _smooth_time(a, 3)
    # exact arithmetic: centred means over the finite neighbours (at least 3/2 of them)
    assert_allclose(out[:, 0], [1.5, 1.5, np.nan, 4.5, 5.0, 5.5], equal_nan=True)
    assert _smooth_time(a, 1) is a
    const = np.full((20, 4), 0.9)
    assert_allclose(_smooth_time(const, 6)[3:-3], 0.9)


def test_scale_map_smoothing_option(tree):
    fig = plots.scale_map(tree, smooth_windows=3)
    assert any("moving average over 3 windows" in ax.get_title("left") for ax in fig.axes)
    with pytest.raises(ValueError, match="smooth_windows"):
        plots.scale_map(tree, smooth_windows=0)
    with pytest.raises(TypeError, match="smooth_windows"):
        plots.scale_map(tree, smooth_windows=2.5)


def test_multifractal_figure_shows_the_tree(tree, figs):
    # the drawn h(q) and f(alpha) are the file's mf_h, mf_alpha and mf_f (issue #20)
    fig = figs["multifractal"]
    rec = tree["/record"].to_dataset()
    line = artist(fig, "h_record")
    assert_allclose(line.get_xdata(), rec["q"].values)
    assert_allclose(line.get_ydata(), rec["mf_h"].values)
    fa = artist(fig, "f_alpha")
    assert_allclose(fa.get_xdata(), rec["mf_alpha"].values)
    assert_allclose(fa.get_ydata(), rec["mf_f"].values)
    sentence = plots.multifractal_sentence(tree)
    assert "research use only" in sentence.lower() and "c2" in sentence


def test_time_smoothing_equals_scipy_box_filter():
    # the running-sum moving average of the scale maps equals scipy.ndimage.convolve1d
    # with a box of k ones (zero padding) for odd and even k, gaps left out
    from scipy.ndimage import convolve1d

    from tfhrv.viz.figkit import _smooth_time

    rng = np.random.default_rng(4)
    a = rng.normal(1.0, 0.2, (37, 5))
    a[rng.random(a.shape) < 0.2] = np.nan
    for k in (2, 3, 4, 6, 7):
        ok = np.isfinite(a)
        kern = np.ones(k)
        num = convolve1d(np.where(ok, a, 0.0), kern, axis=0, mode="constant")
        den = convolve1d(ok.astype(float), kern, axis=0, mode="constant")
        ref = np.full(a.shape, np.nan)
        np.divide(num, den, out=ref, where=ok & (den >= k / 2))
        np.testing.assert_allclose(_smooth_time(a, k), ref, rtol=1e-13, equal_nan=True)
