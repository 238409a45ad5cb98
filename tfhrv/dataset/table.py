"""Per-window values of a scan as one flat table (CSV or Parquet) for spreadsheets and R.

One row per window of the ``/short`` and ``/long`` groups of a scan DataTree: the window's
time (centre as clock time when the date is known, seconds from the start, clock hour of
day), quality, stationarity category and tests, the primary estimator with its exponent
and calibrated interval, and every exponent (``beta_spectral``, ``beta_wavelet``,
``alpha1``, ``alpha2``, ``alpha_long``) with its calibrated 95 % interval, standard
error and the fitted slope before calibration.  A sidecar dictionary
``<table>.dictionary.csv`` gives each column's unit and meaning (taken from the file's own
``units``/``long_name`` attributes); Parquet files also carry the units in their
metadata.  Files are written atomically.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from tfhrv.dataset.schema import EXPONENTS

__all__ = ["TABLE_SUFFIXES", "dictionary_path", "window_table", "write_window_table"]

#: per-window scalars exported as they are
_PLAIN = ("coverage", "n_beats", "nn_mean_ms", "nn_sd_ms", "ectopic_fraction", "total_power",
          "adf_pvalue", "kpss_pvalue", "drift_pvalue")
TABLE_SUFFIXES = (".csv", ".parquet")


def _flag_names(da: xr.DataArray) -> np.ndarray:
    names = np.array(str(da.attrs.get("flag_meanings", "")).split(), dtype=object)
    codes = np.asarray(da.values, int)
    ok = (codes >= 0) & (codes < names.size)
    out = np.full(codes.shape, "", dtype=object)
    out[ok] = [str(n).replace("_", "-") for n in names[codes[ok]]]
    return out


def _slope_name(ds: xr.Dataset, name: str) -> str | None:
    """The fitted-slope variable of an exponent (``*_slope``)."""
    return name + "_slope" if name + "_slope" in ds else None


def window_table(tree: xr.DataTree, /, *, tiers: tuple[str, ...] = ("short", "long")
                 ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The per-window table and its dictionary.

    Parameters
    ----------
    tree : xarray.DataTree
        A scan (:func:`tfhrv.dataset.build.scan` or a file written by ``tfhrv scan``).
    tiers : tuple of {"short", "long"}
        Groups to export, in this order.

    Returns
    -------
    table : pandas.DataFrame
        One row per window.  Columns: ``record``, ``tier``, ``window`` (0-based index in
        its tier), ``time`` (window centre, clock time; only when the start date is known),
        ``elapsed_s``, ``window_start_s``, ``window_end_s``, ``clock_hour`` (when any clock
        is known), the quality and test columns, ``stationarity``, ``estimator``,
        ``exponent`` with ``exponent_lower``/``_upper``/``_se`` (the primary exponent in
        beta units), and per exponent ``<name>``, ``<name>_lower``, ``<name>_upper``,
        ``<name>_se``, ``<name>_slope``; finally ``reason``.  Missing values are NaN.
    dictionary : pandas.DataFrame
        Columns ``column``, ``units`` and ``description``, one row per table column.

    Raises
    ------
    ValueError
        When a tier is unknown or the tree holds none of the tiers asked for.
    """
    for t in tiers:
        if t not in ("short", "long"):
            raise ValueError(f"tiers must hold 'short' and/or 'long', got {t!r}")
    found = [t for t in tiers if t in tree.children]
    if not found:
        raise ValueError(f"the scan has none of the groups {', '.join('/' + t for t in tiers)}"
                         " (is it a file written by tfhrv scan?)")
    rid = str(tree.attrs.get("record_id", ""))
    frames, meta = [], {}

    def col(name, values, units, description):
        cols[name] = values
        meta.setdefault(name, (units, description))

    for tier in found:
        ds = tree[f"/{tier}"].to_dataset()
        n = ds.sizes.get("time", 0)
        cols: dict = {}
        window_s = float(ds.attrs.get("window_s", np.nan))
        col("record", np.full(n, rid, dtype=object), "", "record identifier")
        col("tier", np.full(n, tier, dtype=object), "",
            "window tier: short (5-min windows by default) or long (4-h windows)")
        col("window", np.arange(n), "", "index of the window in its tier, from 0")
        if np.issubdtype(ds["time"].dtype, np.datetime64):
            col("time", pd.to_datetime(ds["time"].values), "ISO 8601",
                "window centre, clock time (as in the recording; no time zone)")
        elapsed = np.asarray(ds["elapsed"].values, float)
        col("elapsed_s", elapsed, "s", "window centre, time from the recording start")
        col("window_start_s", elapsed - window_s / 2, "s", "window start, time from the start")
        col("window_end_s", elapsed + window_s / 2, "s", "window end, time from the start")
        if "clock_hour" in ds.coords:
            col("clock_hour", np.asarray(ds["clock_hour"].values, float), "h",
                "clock time of day of the window centre, 0-24")
        for name in _PLAIN:
            if name in ds:
                col(name, ds[name].values, str(ds[name].attrs.get("units", "")),
                    str(ds[name].attrs.get("long_name", name)))
        if "stationarity" in ds:
            col("stationarity", _flag_names(ds["stationarity"]), "",
                "stationarity category of the window (tfhrv.stationarity.battery)")
        if "estimator" in ds:
            col("estimator", _flag_names(ds["estimator"]), "",
                "primary estimator of the window (decision table; none = no estimate)")
        for name in ("exponent", *EXPONENTS):
            if name not in ds:
                continue
            units = str(ds[name].attrs.get("units", "1"))
            what = str(ds[name].attrs.get("long_name", name))
            if "calibrated" not in what:  # the file's own long name may already say so
                what += " (bias-corrected, calibrated)"
            col(name, ds[name].values, units, what)
            if name + "_ci" in ds:
                ci = np.asarray(ds[name + "_ci"].transpose("time", "bound").values, float)
                col(name + "_lower", ci[:, 0], units,
                    f"lower end of the calibrated 95 % interval of {name} (NaN: open end)")
                col(name + "_upper", ci[:, 1], units,
                    f"upper end of the calibrated 95 % interval of {name} (NaN: open end)")
            if name + "_se" in ds:
                col(name + "_se", ds[name + "_se"].values, units,
                    f"calibrated standard error of {name}")
            slope = _slope_name(ds, name)
            if slope is not None:
                col(name + "_slope", ds[slope].values, units,
                    f"{name}: slope of the fitted line before calibration (the conventional "
                    "value that published ranges refer to)")
        if "reason" in ds:
            col("reason", ds["reason"].values.astype(str), "",
                "why the primary estimator was chosen")
        frames.append(pd.DataFrame(cols))
    table = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
    dictionary = pd.DataFrame([{"column": c, "units": meta[c][0], "description": meta[c][1]}
                               for c in table.columns])
    return table, dictionary


def dictionary_path(path: str | Path, /) -> Path:
    """The sidecar dictionary of a table file: ``<stem>.dictionary.csv`` beside it."""
    p = Path(path)
    return p.with_name(p.name[: -len(p.suffix)] + ".dictionary.csv")


def write_window_table(tree: xr.DataTree, path: str | Path, /, *,
                       tiers: tuple[str, ...] = ("short", "long")) -> tuple[Path, Path]:
    """Write :func:`window_table` as CSV or Parquet (by suffix) and its sidecar dictionary.

    Returns
    -------
    (Path, Path)
        The table and the dictionary (``<stem>.dictionary.csv``), each written atomically.

    Raises
    ------
    ValueError
        For a suffix other than ``.csv`` or ``.parquet``.
    """
    from tfhrv.core.files import atomic_write

    p = Path(path)
    suffix = p.suffix.lower()
    if suffix not in TABLE_SUFFIXES:
        raise ValueError(f"{p}: table name must end with {' or '.join(TABLE_SUFFIXES)}")
    table, dictionary = window_table(tree, tiers=tiers)
    if suffix == ".csv":
        atomic_write(p, lambda tmp: table.to_csv(tmp, index=False, float_format="%.6g",
                                                 date_format="%Y-%m-%dT%H:%M:%S"))
    else:
        table.attrs = {"units": dict(zip(dictionary["column"], dictionary["units"],
                                         strict=True)),
                       "dictionary": dictionary_path(p).name}
        atomic_write(p, lambda tmp: table.to_parquet(tmp, index=False))
    d = dictionary_path(p)
    atomic_write(d, lambda tmp: dictionary.to_csv(tmp, index=False))
    return p, d
