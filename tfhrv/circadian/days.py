"""Day/night contrasts and 24-h cosinor of every time-resolved variable of a scan.

Works on the DataTree written by :func:`tfhrv.dataset.build.scan` and returns a table (one row
per variable and day) plus the ``/circadian`` group.

Day and night come, in order of precedence, from a sleep log, from clock windows
(defaults night 00:00-06:00, day 10:00-20:00: common practice), or, when the clock start
is unknown, from the inferred rest period: the 6-h block with the longest mean NN interval
(common practice: heart rate is lowest during night sleep).  Results based on an inferred
period say so in the ``period_source`` column.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import asdict

import numpy as np
import pandas as pd
import xarray as xr

from tfhrv.analysis.multifractal_fits import C2_PRIMARY, WIDTH_PRIMARY
from tfhrv.circadian.core import cosinor, infer_rest_periods, night_day_contrast
from tfhrv.circadian.options import CircadianOptions, read_sleep_log, sleep_log_records
from tfhrv.core.errors import InsufficientDataError
from tfhrv.dataset.netcdf import numpy_only
from tfhrv.dataset.schema import variable

__all__ = [
    "CircadianOptions",
    "circadian_dataset",
    "circadian_table",
    "format_circadian",
    "read_sleep_log",
    "sleep_log_records",
]

#: (tier, variable) pairs analysed, in table order.
VARIABLES: tuple[tuple[str, str], ...] = (
    ("short", "alpha1"),
    ("short", "alpha2"),
    ("short", "beta_wavelet"),
    ("short", "exponent"),
    ("long", "alpha_long"),
    ("long", "exponent"),
    ("long", "c2"),
    ("long", "mf_width"),
    ("short", "nn_mean_ms"),
    ("short", "nn_sd_ms"),
    ("short", "lf_power"),
    ("short", "hf_power"),
)


#: multifractal variables and the mf_estimator codes under which they are primary
_MF_PRIMARY = {"c2": C2_PRIMARY, "mf_width": WIDTH_PRIMARY}


def _in_window(clock_h: np.ndarray, window: tuple[float, float]) -> np.ndarray:
    a, b = window
    return ((clock_h >= a) & (clock_h < b)) if a < b else ((clock_h >= a) | (clock_h < b))


def _series(tree: xr.DataTree, tier: str, var: str) -> np.ndarray:
    ds = tree[f"/{tier}"].to_dataset()
    if var == "lf_power":
        return ds["band_power"].sel(band="LF").values
    if var == "hf_power":
        return ds["band_power"].sel(band="HF").values
    if var in _MF_PRIMARY:  # multifractal: only where the window's category allows it
        if var not in ds:  # a scan file from before the multifractal variables
            return np.full(ds.sizes["time"], np.nan)
        primary = np.isin(ds["mf_estimator"].values, _MF_PRIMARY[var])
        return np.where(primary, ds[var].values, np.nan)
    return ds[var].values


def _periods(tree: xr.DataTree, tier: str, opt: CircadianOptions, sleep_log):
    """night and day masks for a tier, the day index of each window, and the source."""
    root = tree.attrs
    ds = tree[f"/{tier}"].to_dataset()
    elapsed_h = ds["elapsed"].values / 3600.0
    clock_known = root.get("clock", "unknown") != "unknown"
    if sleep_log is not None:
        if root.get("clock") != "timestamp":
            raise ValueError("a sleep log needs a record with a full clock start (date and "
                             "time); give it with --start YYYY-MM-DDTHH:MM")
        start = dt.datetime.fromisoformat(root["start"])
        night = np.zeros(elapsed_h.size, dtype=bool)
        for a, b in sleep_log:
            ha = _hours_between(start, a, root.get("time_zone", ""))
            hb = _hours_between(start, b, root.get("time_zone", ""))
            night |= (elapsed_h >= ha) & (elapsed_h < hb)
        clock_h = ds["clock_hour"].values
        day = ~night & _in_window(clock_h, opt.day_hours)
        source = "sleep log"
    elif opt.period == "clock" or (opt.period == "auto" and clock_known):
        if not clock_known:
            raise ValueError(
                "day/night clock windows need the recording's clock start; give it with "
                "--start HH:MM (or a full timestamp), or use --period inferred to find the "
                "rest period from the data")
        clock_h = ds["clock_hour"].values
        night = _in_window(clock_h, opt.night_hours)
        day = _in_window(clock_h, opt.day_hours)
        source = "clock"
    else:
        nn = tree["/short"]["nn_mean_ms"].values
        t_short = tree["/short"]["elapsed"].values / 3600.0
        span = float(np.ptp(t_short)) if t_short.size else 0.0
        if span < opt.rest_hours:
            raise InsufficientDataError(
                f"the inferred rest period needs at least {opt.rest_hours:g} h of 5-min "
                f"windows ({span:.1f} h here); give the clock start (--start HH:MM) for clock "
                "windows, or a sleep log")
        start_h = float(tree["/short"]["clock_hour"].values[0] - t_short[0]) % 24 if (
            "clock_hour" in tree["/short"].coords) else 0.0
        rests = infer_rest_periods(t_short, nn, length_hours=opt.rest_hours,
                                   day_boundary="noon" if clock_known else "record",
                                   clock_start_hours=start_h)
        night = np.zeros(elapsed_h.size, dtype=bool)
        for r in rests:
            if np.isfinite(r.start_hours):
                night |= (elapsed_h >= r.start_hours) & (elapsed_h < r.end_hours)
        # day: windows at least 4 h away from every inferred rest period (common practice)
        day = np.ones(elapsed_h.size, dtype=bool)
        for r in rests:
            if np.isfinite(r.start_hours):
                day &= (elapsed_h < r.start_hours - 4) | (elapsed_h >= r.end_hours + 4)
        source = "inferred rest period"
    day_index = np.floor(elapsed_h / 24.0).astype(int)
    if "clock_hour" in ds.coords and elapsed_h.size:
        # days run noon to noon (local civil time) so that each holds a whole night
        day_index = np.floor((_local_hours(ds) - 12.0) / 24.0).astype(int)
        day_index -= day_index.min()
    return night, day & ~night, day_index, source


def _hours_between(start: dt.datetime, t: dt.datetime, zone: str) -> float:
    """Hours from the record start to a sleep-log time; a naive time is read in the
    record's time zone (or at the start's UTC offset) when the start carries one."""
    if (start.tzinfo is None) == (t.tzinfo is None):
        if start.tzinfo is None:
            return (t - start).total_seconds() / 3600
        return (t.astimezone(dt.UTC) - start.astimezone(dt.UTC)).total_seconds() / 3600
    if start.tzinfo is not None:
        from tfhrv.signal.clock import load_zone, localize

        try:
            t = localize(t, load_zone(zone))
        except ValueError:
            t = t.replace(tzinfo=start.tzinfo)
        return (t.astimezone(dt.UTC) - start.astimezone(dt.UTC)).total_seconds() / 3600
    raise ValueError("the sleep log gives UTC offsets but the record's start has none; give "
                     "the record's time zone (--tz) or write the sleep log in local time")


def _local_hours(ds: xr.Dataset) -> np.ndarray:
    """Local civil clock time in hours since the midnight before the first window,
    continuous (not folded on 24 h): elapsed time plus the clock's own jumps, read from
    ``clock_hour`` (which follows daylight-saving changes)."""
    elapsed_h = ds["elapsed"].values / 3600.0
    clock = ds["clock_hour"].values
    clock0 = float((clock[0] - elapsed_h[0]) % 24)
    naive = clock0 + elapsed_h
    jump = (clock - naive + 12.0) % 24.0 - 12.0  # the offset change, in (-12, 12] h
    return naive + jump


def _cosinor_time(tree: xr.DataTree, tier: str) -> tuple[np.ndarray, str]:
    ds = tree[f"/{tier}"].to_dataset()
    elapsed_h = ds["elapsed"].values / 3600.0
    if "clock_hour" in ds.coords and elapsed_h.size:
        return _local_hours(ds), "clock"
    return elapsed_h, "hours from start"


def circadian_table(tree: xr.DataTree, /, *, options: CircadianOptions | None = None,
                 sleep_log: list | None = None) -> pd.DataFrame:
    """Day/night contrast and cosinor rows for every variable, pooled and per day.

    Returns
    -------
    pandas.DataFrame
        One row per (variable, day); columns: ``tier``, ``variable``, ``day`` ("all" or
        1, 2, ...), ``period_source``, ``day_mean``, ``night_mean``, ``difference`` (night
        - day), ``difference_low``/``_high`` (block-bootstrap 95 % interval),
        ``effect_size`` (Hedges' g), ``n_day``, ``n_night``, ``n_excluded``, and for the
        pooled rows the single-component cosinor ``mesor``, ``amplitude``,
        ``acrophase_h`` with their intervals, ``cosinor_p`` (zero-amplitude F-test),
        ``acrophase_h2``/``amplitude2``/``cosinor2_p`` of the 24 + 12 h model, and
        ``acrophase_reference`` ("clock" or "hours from start").
    """
    opt = options or CircadianOptions()
    with numpy_only():  # the selections would otherwise import dask.array (0.3-0.6 s)
        rows = [row for tier, var in VARIABLES
                for row in _variable_rows(tree, tier, var, opt, sleep_log)]
    return pd.DataFrame(rows)


#: Fewest independent windows (n x hop / window) in each period for a contrast interval and
#: effect size on a tier of overlapping windows: fewer give a moving-block bootstrap of one
#: or two blocks, which cannot show the spread (our choice).
_MIN_INDEPENDENT = 3


def _variable_rows(tree: xr.DataTree, tier: str, var: str, opt: CircadianOptions,
                   sleep_log: list | None) -> list[dict]:
    """The pooled and per-day rows of :func:`circadian_table` for one variable."""
    rows = []
    ds = tree[f"/{tier}"].to_dataset()
    y = _series(tree, tier, var)
    valid = np.isfinite(y) & (np.nan_to_num(ds["coverage"].values) >= opt.min_coverage)
    night, day, day_index, source = _periods(tree, tier, opt, sleep_log)
    t_h = ds["elapsed"].values / 3600.0
    tcos, ref = _cosinor_time(tree, tier)
    groups = [("all", np.ones(y.size, dtype=bool))]
    if day_index.max() > 0:
        groups += [(str(d + 1), day_index == d) for d in np.unique(day_index)]
    # overlapping windows share beats: a block must span at least one window length, so
    # that windows holding the same data are resampled together (4-h windows at a 1-h hop:
    # four windows, not one)
    window_h = float(ds.attrs.get("window_s", 0.0)) / 3600.0
    block_hours = max(opt.block_hours, window_h)
    overlap = window_h / (float(ds.attrs.get("hop_s", 0.0)) / 3600.0 or np.inf)
    for label, sel in groups:
        c = night_day_contrast(t_h[sel], y[sel], night[sel], day[sel],
                               block_hours=block_hours, n_boot=opt.n_boot,
                               rng=opt.seed, valid=valid[sel])
        row = {
            "tier": tier, "variable": var, "day": label, "period_source": source,
            "day_mean": c.day_mean, "night_mean": c.night_mean,
            "difference": c.difference, "difference_low": c.difference_ci[0],
            "difference_high": c.difference_ci[1], "effect_size": c.effect_size,
            "n_day": c.n_day, "n_night": c.n_night, "n_excluded": c.n_excluded,
            "contrast_note": c.reason or "",
        }
        independent = min(c.n_night, c.n_day) / max(overlap, 1.0)
        if overlap > 1.0 and not c.reason and independent < _MIN_INDEPENDENT:
            # overlapping windows: n windows hold only about n hop / window independent ones
            row.update(difference_low=np.nan, difference_high=np.nan, effect_size=np.nan,
                       contrast_note=(
                           f"no interval or effect size: {min(c.n_night, c.n_day)} "
                           f"overlapping {window_h:g}-h windows in the shorter period are "
                           f"about {independent:.1f} independent ones (fewer than "
                           f"{_MIN_INDEPENDENT}); the difference is descriptive"))
        if label == "all":
            row.update(_cosinor_columns(tcos[valid], y[valid], ref))
        rows.append(row)
    return rows


def _cosinor_columns(t: np.ndarray, y: np.ndarray, ref: str) -> dict:
    out = {"acrophase_reference": ref}
    span = float(np.ptp(t)) if t.size else 0.0
    for harmonics, suffix in ((1, ""), (2, "2")):
        keys = ["mesor", "mesor_low", "mesor_high", "amplitude", "amplitude_low",
                "amplitude_high", "acrophase_h", "acrophase_low", "acrophase_high",
                "cosinor_p"]
        names = [k + suffix if suffix else k for k in keys]
        if harmonics == 2:
            names = [n for n in names if not n.startswith("mesor")]
        vals = dict.fromkeys(names, np.nan)
        if span >= 18.0 and t.size >= 4 * harmonics + 2:
            try:
                f = cosinor(t, y, period_hours=24.0, harmonics=harmonics)
            except InsufficientDataError:
                f = None
            if f is not None:
                full = {
                    "mesor": f.mesor, "mesor_low": f.mesor_ci[0], "mesor_high": f.mesor_ci[1],
                    "amplitude": f.amplitude, "amplitude_low": f.amplitude_ci[0],
                    "amplitude_high": f.amplitude_ci[1],
                    "acrophase_h": f.acrophase_hours % 24,
                    "acrophase_low": f.acrophase_ci_hours[0] % 24,
                    "acrophase_high": f.acrophase_ci_hours[1] % 24,
                    "cosinor_p": f.f_pvalue,
                }
                for k, v in full.items():
                    name = k + suffix if suffix else k
                    if name in vals:
                        vals[name] = float(v)
        out.update(vals)
    return out


def circadian_dataset(table: pd.DataFrame, options: CircadianOptions, *,
                   tree: xr.DataTree | None = None,
                   sleep_log: list | None = None) -> xr.Dataset:
    """The table as the ``/circadian`` group (dimension ``row``) with units and long names.

    Given the scan ``tree`` (and the ``sleep_log`` the table was made with), the group also
    keeps the night/rest and day masks of the short windows (``short_night``,
    ``short_day`` on dimension ``short_window``), so that figures shade the periods the
    contrasts actually used.
    """
    with numpy_only():  # numpy data: spare the import of dask.array (0.3-0.6 s)
        ds = xr.Dataset.from_dataframe(table.reset_index(drop=True).rename_axis("row"))
        if tree is not None:
            night, day, _, source = _periods(tree, "short", options, sleep_log)
            label = _period_label(source, options)
            for name, mask in (("short_night", night), ("short_day", day)):
                ds[name] = ("short_window", mask.astype(np.int8),
                            {"period_source": source, "period_label": label})
        for name in ds.variables:
            if ds[name].dtype == object:
                ds[name] = ds[name].astype(str)
            # long_name, units and flags as declared (KeyError for an undeclared column)
            ds[name].attrs.update(variable("/circadian", name, None)[2])
    ds.attrs["options"] = str(asdict(options))
    ds.attrs["method"] = ("night - day difference with a moving-block bootstrap interval "
                          "(Kunsch 1989); Hedges' g; single and 24 + 12 h cosinor (Nelson et "
                          "al. 1979; Bingham et al. 1982; Cornelissen 2014)")
    return ds


#: unit of each variable of :data:`VARIABLES` (exponents are dimensionless)
UNITS = {"nn_mean_ms": "ms", "nn_sd_ms": "ms", "lf_power": "ms²", "hf_power": "ms²"}


def decimals(variable: str, /) -> int:
    """Decimals a table shows for a variable: 0 for ms and ms², 3 for c2, 2 for exponents."""
    return 0 if variable in UNITS else 3 if variable == "c2" else 2


def fixed(v: float, digits: int = 2, /) -> str:
    """``v`` with ``digits`` decimals; 'n/a' when not finite; never '-0' or '-0.00'.

    Examples
    --------
    >>> fixed(-0.001), fixed(-0.4, 0), fixed(float("nan")), fixed(-1.234)
    ('0.00', '0', 'n/a', '-1.23')
    """
    v = float(v)
    if not np.isfinite(v):
        return "n/a"
    text = f"{v:.{digits}f}"
    return text[1:] if text.startswith("-") and float(text) == 0 else text


def _fmt(v: float, digits: int = 2) -> str:
    return fixed(v, digits)


def _period_label(source: str, options: CircadianOptions) -> str:
    """How figures name the night/rest period of a ``_periods`` source."""
    if source == "clock":
        return (f"night {_clock(options.night_hours[0])}–{_clock(options.night_hours[1])} "
                "(clock)")
    if source == "inferred rest period":
        return "rest period (inferred: longest mean NN)"
    return f"rest period ({source})"


def _clock(h: float) -> str:
    if not np.isfinite(h):
        return "n/a"
    m = int(round(h * 60)) % (24 * 60)
    return f"{m // 60:02d}:{m % 60:02d}"


def format_circadian(table: pd.DataFrame, /) -> str:
    """Compact text table of the pooled rows (one line per variable), with units."""
    pooled = table[table["day"] == "all"]
    clock = str(pooled["acrophase_reference"].iloc[0]) == "clock" if len(pooled) else True
    head = ["variable (tier)", "unit", "day", "night", "night-day [95% CI]", "g", "MESOR",
            "amplitude [95% CI]", "acrophase [95% CI]" if clock else "acrophase h [95% CI]",
            "p"]
    rows = []
    for _, r in pooled.iterrows():
        digits = decimals(r["variable"])
        diff = (f"{_fmt(r['difference'], digits)} [{_fmt(r['difference_low'], digits)}, "
                f"{_fmt(r['difference_high'], digits)}]")
        amp = (f"{_fmt(r['amplitude'], digits)} [{_fmt(r['amplitude_low'], digits)}, "
               f"{_fmt(r['amplitude_high'], digits)}]")
        ph = (f"{_clock(r['acrophase_h'])} [{_clock(r['acrophase_low'])}-"
              f"{_clock(r['acrophase_high'])}]" if clock else
              f"{_fmt(r['acrophase_h'], 1)} [{_fmt(r['acrophase_low'], 1)}-"
              f"{_fmt(r['acrophase_high'], 1)}]")
        p = "n/a" if not np.isfinite(r["cosinor_p"]) else f"{r['cosinor_p']:.2g}"
        rows.append([f"{r['variable']} ({r['tier']})", UNITS.get(r["variable"], "1"),
                     _fmt(r["day_mean"], digits), _fmt(r["night_mean"], digits), diff,
                     _fmt(r["effect_size"]), _fmt(r["mesor"], digits), amp, ph, p])
    widths = [max(len(x[i]) for x in [head, *rows]) for i in range(len(head))]

    def line(cells: list[str]) -> str:
        return "  ".join(c.ljust(w) if i < 2 else c.rjust(w)
                         for i, (c, w) in enumerate(zip(cells, widths, strict=True))).rstrip()

    src = pooled["period_source"].iloc[0] if len(pooled) else "n/a"
    ref = pooled["acrophase_reference"].iloc[0] if len(pooled) else "n/a"
    out = [f"day/night from: {src}; acrophase as {ref}; g = Hedges' effect size; p = "
           "zero-amplitude test of the 24-h cosinor (ordinary least squares: windows taken "
           "as independent, so p is too small for autocorrelated windows); unit 1 = "
           "dimensionless", line(head)]
    out.append("-" * len(out[-1]))
    out += [line(r) for r in rows]
    notes = {}  # one line per distinct note, naming its variables
    for _, r in pooled.iterrows():
        note = str(r.get("contrast_note", "") or "")
        if note and note != "nan":
            notes.setdefault(note, []).append(f"{r['variable']} ({r['tier']})")
    out += [f"note: {', '.join(names)}: {note}" for note, names in notes.items()]
    return "\n".join(out)
