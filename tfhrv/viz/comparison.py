"""The cohort's group-comparison figure (``comparison.png``)."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from tfhrv.core.files import atomic_write

__all__ = ["KEY_VARIABLES", "plot_comparison"]

#: Variables drawn in ``comparison.png`` (those present with data).
KEY_VARIABLES = ("nn_sd_ms", "rmssd_ms", "nn_mean_ms", "alpha1", "alpha2", "beta_spectral",
                 "alpha_long", "alpha1_night_minus_day", "c2", "mf_width")


def plot_comparison(study: pd.DataFrame, comparison: pd.DataFrame, path: str | Path, /, *,
                    group: str = "group", groups: Sequence[str], outputs=None) -> Path | None:
    """Strip and box plot by group of the key variables, titled with the adjusted p.

    ``groups`` are the group labels in the order to draw them.  Returns the file written,
    or None when no key variable has data.
    """
    from matplotlib.figure import Figure

    labels = study[group].astype(str)
    names = [v for v in KEY_VARIABLES if v in study
             and np.isfinite(pd.to_numeric(study[v], errors="coerce")).any()]
    if not names or not groups:
        return None
    ncol = min(4, len(names))
    nrow = -(-len(names) // ncol)
    fig = Figure(figsize=(3.0 * ncol, 3.1 * nrow))
    fig.subplots_adjust(left=0.08, right=0.98, bottom=0.13 / nrow, top=1 - 0.3 / nrow,
                        wspace=0.35, hspace=0.7)
    axes = fig.subplots(nrow, ncol, squeeze=False)
    jitter = np.random.default_rng(0)
    for ax, name in zip(axes.flat, names, strict=False):
        vals = pd.to_numeric(study[name], errors="coerce").to_numpy(dtype=np.float64)
        data = [vals[(labels == g).to_numpy()] for g in groups]
        data = [d[np.isfinite(d)] for d in data]
        pos = [i for i, d in enumerate(data) if d.size]
        ax.boxplot([data[i] for i in pos], positions=pos, widths=0.5, showfliers=False)
        for i in pos:
            ax.plot(i + jitter.uniform(-0.12, 0.12, data[i].size), data[i], "o", ms=4,
                    alpha=0.8)
        ax.set_xticks(range(len(groups)),
                      [f"{g or '(none)'}\nn={d.size}" for g, d in zip(groups, data, strict=True)],
                      fontsize=8)
        ax.set_xlim(-0.6, len(groups) - 0.4)
        sel = comparison[comparison["variable"] == name] if len(comparison) else comparison
        p = float(sel["p_adjusted"].iloc[0]) if len(sel) else float("nan")
        ax.set_title(f"{name}\nadjusted p = {'n/a' if not np.isfinite(p) else f'{p:.2g}'}",
                     fontsize=9)
    for ax in axes.flat[len(names):]:
        ax.set_axis_off()
    fig.suptitle("Groups compared: Mann-Whitney U, Benjamini-Hochberg adjusted p "
                 "(first pair). Research use only.", fontsize=9)
    def write(tmp):
        fig.savefig(tmp, format="png", dpi=100)

    # staged in ``outputs`` (a tfhrv.core.files.OutputSet) when given
    return outputs.add(path, write) if outputs is not None else atomic_write(path, write)
