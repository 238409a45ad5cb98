"""Outputs derived from a cohort's study: group comparison (Mann-Whitney U, Cliff's delta,
Benjamini-Hochberg) and the time-of-day Zarr store of the short exponents.

Used by :mod:`tfhrv.cohort.run`, which re-exports the public names.
"""

from __future__ import annotations

import itertools
import json
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from tfhrv.core.validation import as_1d_float, check_positive

__all__ = [
    "NOT_COMPARED",
    "benjamini_hochberg",
    "cliffs_delta",
    "cliffs_delta_ci",
    "compare_groups",
    "compared_columns",
    "group_labels",
    "short_exponents_dataset",
    "write_zarr",
]

#: Column suffixes left out of the group comparison: interval bounds and p-values are not
#: measurements, acrophases are circular (a linear rank test does not apply), and the slopes
#: before calibration (``*_slope``) order the records almost as the calibrated values do (the
#: calibration is monotone at a given length), so a rank test of
#: them repeats the same comparison and would only inflate the multiple-testing family.
NOT_COMPARED = ("_ci_lower", "_ci_upper", "_cosinor_p", "_acrophase_h", "_slope")
BIN_MINUTES = 5

# ------------------------------------------------------------------------ statistics


def cliffs_delta(x, y, /) -> float:
    """Cliff's delta: P(X > Y) - P(X < Y) estimated over all pairs.

    Parameters
    ----------
    x, y : array_like
        The two samples (finite values).

    Returns
    -------
    float
        In [-1, 1]; positive when values of ``x`` tend to be larger.

    Notes
    -----
    delta = (#{(i, j): x_i > y_j} - #{(i, j): x_i < y_j}) / (n m)  (Cliff 1993), which
    equals 2 U / (n m) - 1 with U the Mann-Whitney statistic of ``x`` (ties count 1/2).

    References
    ----------
    Cliff N (1993) Dominance statistics: ordinal analyses to answer ordinal questions.
    Psychological Bulletin 114:494-509. doi:10.1037/0033-2909.114.3.494

    Examples
    --------
    >>> cliffs_delta([3, 4, 5], [1, 2, 3])
    0.888...
    """
    a, b = as_1d_float(x, "x"), as_1d_float(y, "y")
    return float(np.sign(a[:, None] - b[None, :]).mean())


def cliffs_delta_ci(x, y, /, *, n_boot: int = 1999, level: float = 0.95,
                    rng=None) -> tuple[float, float]:
    """Percentile bootstrap interval of Cliff's delta, resampling each group separately.

    Parameters
    ----------
    x, y : array_like
        The two samples.
    n_boot : int, default 1999
        Bootstrap resamples.
    level : float, default 0.95
        Coverage of the interval.
    rng : None, int or numpy.random.Generator
        Source of randomness (fixed seed = reproducible interval).

    Returns
    -------
    tuple of float
        ``(lower, upper)``.

    References
    ----------
    Efron B, Tibshirani RJ (1993) An Introduction to the Bootstrap, ch. 13 (percentile
    interval). Chapman & Hall. doi:10.1201/9780429246593

    Examples
    --------
    >>> lo, hi = cliffs_delta_ci([5, 6, 7, 8], [1, 2, 3, 9], n_boot=499, rng=0)
    >>> bool(-1 <= lo <= 0.5 <= hi <= 1)
    True
    """
    a, b = as_1d_float(x, "x"), as_1d_float(y, "y")
    n_boot = int(check_positive(n_boot, "n_boot"))
    if not 0 < level < 1:
        raise ValueError(f"level must be in (0, 1), got {level!r}")
    gen = np.random.default_rng(rng)
    stats_ = np.empty(n_boot)
    chunk = max(1, 4_000_000 // (a.size * b.size))
    for s in range(0, n_boot, chunk):
        k = min(chunk, n_boot - s)
        xa = a[gen.integers(0, a.size, (k, a.size))]
        yb = b[gen.integers(0, b.size, (k, b.size))]
        stats_[s:s + k] = np.sign(xa[:, :, None] - yb[:, None, :]).mean(axis=(1, 2))
    q = (1 - level) / 2
    lo, hi = np.quantile(stats_, [q, 1 - q])
    return float(lo), float(hi)


def benjamini_hochberg(pvalues, /) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values; NaN entries stay NaN and are not counted.

    Notes
    -----
    p_adj(i) = min over k >= i of min(1, m p(k) / k) for the sorted p-values p(1..m)
    (Benjamini & Hochberg 1995), computed by :func:`scipy.stats.false_discovery_control`.

    References
    ----------
    Benjamini Y, Hochberg Y (1995) Controlling the false discovery rate. J R Stat Soc B
    57:289-300. doi:10.1111/j.2517-6161.1995.tb02031.x

    Examples
    --------
    >>> benjamini_hochberg([0.01, 0.04, float("nan"), 0.03]).round(3)
    array([0.03, 0.04,  nan, 0.04])
    """
    from scipy.stats import false_discovery_control

    p = np.asarray(pvalues, dtype=np.float64)
    out = np.full(p.shape, np.nan)
    ok = np.isfinite(p)
    if ok.any():
        out[ok] = false_discovery_control(p[ok], method="bh")
    return out


def group_labels(col: pd.Series) -> list[str]:
    """Group labels in order of first appearance; records without a group take no part."""
    return list(dict.fromkeys(g for g in col.astype(str) if g not in ("", "nan", "None")))


def compared_columns(table: pd.DataFrame, /, *, group: str = "group") -> list[str]:
    """Numeric columns of the study table that :func:`compare_groups` tests."""
    return [c for c in table.columns if c != group and pd.api.types.is_numeric_dtype(table[c])
            and not pd.api.types.is_bool_dtype(table[c]) and not c.endswith(NOT_COMPARED)]


def compare_groups(table: pd.DataFrame, /, *, group: str = "group",
                   columns: Sequence[str] | None = None, n_boot: int = 1999,
                   level: float = 0.95, rng=None) -> pd.DataFrame:
    """Compare every numeric column between every pair of groups.

    Parameters
    ----------
    table : pandas.DataFrame
        The study table (one row per record).
    group : str, default "group"
        Column holding the group; groups are taken in order of first appearance, and
        rows with an empty group are left out.
    columns : sequence of str, optional
        Columns to test (default :func:`compared_columns`).
    n_boot, level, rng
        Bootstrap interval of Cliff's delta (see :func:`cliffs_delta_ci`).

    Returns
    -------
    pandas.DataFrame
        One row per (column, pair): ``variable``, ``group_a``, ``group_b``, ``n_a``,
        ``n_b`` (finite values), ``median_a``, ``median_b``, ``mannwhitney_u`` (statistic
        of group a), ``p_value`` (two-sided Mann-Whitney U, exact for small samples
        without ties, :func:`scipy.stats.mannwhitneyu`), ``cliffs_delta`` (positive when
        group a is larger) with ``cliffs_delta_ci_lower``/``_upper``, and ``p_adjusted``
        (Benjamini-Hochberg over every finite p-value of the table).  Tests need at least
        two finite values per group, else they are NaN.

    References
    ----------
    Mann HB, Whitney DR (1947) Ann Math Stat 18:50-60. doi:10.1214/aoms/1177730491
    """
    from scipy.stats import mannwhitneyu

    if group not in table:
        raise ValueError(f"group column {group!r} is not in the table")
    cols = list(columns) if columns is not None else compared_columns(table, group=group)
    gen = np.random.default_rng(rng)
    labels = table[group].astype(str)
    rows = []
    for (ga, gb), col in itertools.product(itertools.combinations(group_labels(labels), 2), cols):
        vals = pd.to_numeric(table[col], errors="coerce").to_numpy(dtype=np.float64)
        a = vals[(labels == ga).to_numpy()]
        b = vals[(labels == gb).to_numpy()]
        a, b = a[np.isfinite(a)], b[np.isfinite(b)]
        row = {"variable": col, "group_a": ga, "group_b": gb, "n_a": a.size, "n_b": b.size,
               "median_a": float(np.median(a)) if a.size else np.nan,
               "median_b": float(np.median(b)) if b.size else np.nan,
               "mannwhitney_u": np.nan, "p_value": np.nan, "cliffs_delta": np.nan,
               "cliffs_delta_ci_lower": np.nan, "cliffs_delta_ci_upper": np.nan}
        if a.size >= 2 and b.size >= 2:
            if np.ptp(np.concatenate([a, b])) == 0:  # all equal: no evidence of a shift
                u, p = a.size * b.size / 2.0, 1.0
            else:
                res = mannwhitneyu(a, b, alternative="two-sided")
                u, p = float(res.statistic), float(res.pvalue)
            lo, hi = cliffs_delta_ci(a, b, n_boot=n_boot, level=level, rng=gen)
            row.update(mannwhitney_u=u, p_value=p, cliffs_delta=cliffs_delta(a, b),
                       cliffs_delta_ci_lower=lo, cliffs_delta_ci_upper=hi)
        rows.append(row)
    out = pd.DataFrame(rows, columns=["variable", "group_a", "group_b", "n_a", "n_b",
                                      "median_a", "median_b", "mannwhitney_u", "p_value",
                                      "cliffs_delta", "cliffs_delta_ci_lower",
                                      "cliffs_delta_ci_upper"])
    out["p_adjusted"] = benjamini_hochberg(out["p_value"].to_numpy(dtype=np.float64))
    return out


# ------------------------------------------------------------------ time-of-day store


def short_exponents_dataset(records: Sequence[str], groups: Sequence[str],
                            profiles: Sequence[dict | None], /) -> xr.Dataset:
    """Short-tier ``alpha1`` and ``exponent`` of every record on a 5-min clock axis.

    Each value is the mean over all windows (of every day) whose centre falls in the bin;
    ``*_n_windows`` counts them.  Records without a clock start have NaN rows and are
    listed in the attribute ``records_without_clock``.
    """
    n_bins = 24 * 60 // BIN_MINUTES
    tod = (np.arange(n_bins) + 0.5) * BIN_MINUTES / 60.0
    nan = np.full(n_bins, np.nan)
    data = {}
    for var, long_name in (("alpha1", "DFA exponent over 4-16 beats"),
                           ("exponent", "primary scaling exponent in beta units")):
        data[var] = (("record", "time_of_day"),
                     np.array([nan if p is None else p[var] for p in profiles]).reshape(
                         len(profiles), n_bins),
                     {"units": "1", "long_name": f"{long_name}, mean of the short windows "
                      "centred in the bin"})
        data[var + "_n_windows"] = (
            ("record", "time_of_day"),
            np.array([np.zeros(n_bins, np.int32) if p is None else p[var + "_n"]
                      for p in profiles], dtype=np.int32).reshape(len(profiles), n_bins),
            {"units": "1", "long_name": f"short windows with a finite {var} in the bin"})
    ds = xr.Dataset(data, coords={
        "record": ("record", np.array(list(records), dtype=object)),
        "group": ("record", np.array(list(groups), dtype=object), {"long_name": "study group"}),
        "time_of_day": ("time_of_day", tod, {"units": "h",
                                             "long_name": "clock time of day (bin centre)"}),
    })
    missing = [r for r, p in zip(records, profiles, strict=True) if p is None]
    ds.attrs.update({
        "title": "tfhrv cohort: short-tier scaling exponents by time of day",
        "bin_minutes": BIN_MINUTES,
        "records_without_clock": json.dumps(missing),
        "note": "records without a clock start cannot be placed on the time-of-day axis "
                "and are NaN" if missing else "",
    })
    return ds


def write_zarr(ds: xr.Dataset, dest: Path, *, outputs=None) -> Path:
    """Write ``ds`` to the Zarr store ``dest`` through a temporary folder renamed into place
    (staged in ``outputs``, a :class:`tfhrv.core.files.OutputSet`, when given).

    Zarr format 2 with consolidated metadata: plain ``xarray.open_zarr(dest)`` opens it
    without warnings, and format 2 is read by every Zarr implementation.
    """
    from tfhrv.core.files import OutputSet

    def write(tmp):
        ds.to_zarr(tmp, mode="w", consolidated=True, zarr_format=2)

    if outputs is not None:
        return outputs.add(dest, write, directory=True)
    with OutputSet() as out:
        out.add(dest, write, directory=True)
    return dest
