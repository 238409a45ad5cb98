"""The multifractal figure and its sentence of interpretation.

:func:`multifractal_spectrum` draws the whole record's MF-DFA h(q) with its 95 % band
and the 4-h windows' h(q), and beside it the singularity spectrum f(alpha);
:func:`multifractal_sentence` says in one sentence what c2 and the width show, with the
research-use caution.  Both read the names declared in :mod:`tfhrv.dataset.schema`.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from tfhrv.calibration.calibrate import interval_text
from tfhrv.viz.figkit import (
    _C,
    _GREY,
    _ds,
    _figure_function,
    _message,
    _new_figure,
    _parameters,
    _scalar,
    _style,
    _values,
)

__all__ = ["multifractal_sentence", "multifractal_spectrum"]

#: the research-use caution that goes with every multifractal statement
_CAUTION = ("Research use only: c2 and the width describe the variability of this "
            "recording's scaling and are not a diagnosis; published differences between "
            "groups (Ivanov et al. 1999) are context, not a verdict on a person.")


def _switched_off(tree: xr.DataTree) -> bool:
    """Whether the scan's stored parameters say the multifractal analysis was off."""
    return _parameters(tree, "scan").get("multifractal") is False


def multifractal_sentence(tree: xr.DataTree, /) -> str:
    """One sentence on the whole record's multifractality, with the caution.

    Examples
    --------
    >>> import xarray as xr
    >>> multifractal_sentence(xr.DataTree()).startswith("No multifractal estimate")
    True
    """
    rec = _ds(tree, "record")
    c2 = _scalar(rec, "c2")
    if not np.isfinite(_scalar(rec, "c2_slope")):
        if _switched_off(tree):
            return ("No multifractal estimate: the analysis was switched off for this scan "
                    "(--no-multifractal). " + _CAUTION)
        return "No multifractal estimate for this record (too few beats). " + _CAUTION
    ci = _values(rec, "c2_ci")
    p = _scalar(rec, "c2_pvalue")
    w = _scalar(rec, "mf_width")
    wci = _values(rec, "mf_width_ci")
    if np.isfinite(ci).any():
        c2_txt = f"c2 = {c2:.3f} {interval_text(*ci, digits=3)}"
    else:
        c2_txt = (f"c2 = {_scalar(rec, 'c2_slope'):+.3f}, above the band of a monofractal "
                  "and outside the calibrated models, as level changes make it")
    w_txt = (f"an MF-DFA spectrum width of {w:.2f} {interval_text(*wci)}"
             if np.isfinite(wci).any() else
             f"an MF-DFA width of {_scalar(rec, 'mf_width_slope'):.2f}, outside the "
             "calibrated models")
    if np.isfinite(p) and p < 0.05:
        lead = (f"The whole record is more multifractal than monofractal noise of the same "
                f"exponent would appear ({c2_txt}, p = {p:.3f} for c2 < 0; {w_txt})")
    else:
        lead = (f"The whole record is not distinguishable from monofractal noise "
                f"({c2_txt}, p = {p:.2f} for c2 < 0; {w_txt})")
    long = _ds(tree, "long")
    note = ""
    est = _values(long, "mf_estimator")
    if est is not None and est.size:
        n_primary = int(np.sum(est > 0))
        note = (f"; {n_primary} of {est.size} 4-h windows were stationary enough for a "
                f"primary estimate")
    return lead + note + ". " + _CAUTION


@_figure_function
def multifractal_spectrum(tree: xr.DataTree, /):
    """Whole-record MF-DFA h(q) with its 95 % band, the 4-h windows' h(q), and f(alpha).

    Left: h(q) of the whole record (line) with the interval of the monofractal null (band)
    and of every 4-h window whose estimate is primary (thin lines; grey: not primary).
    A monofractal has a flat h(q). Right: the singularity spectrum f(alpha) of the whole
    record (Legendre transform) and the calibrated c2 and width in the legend.

    Returns
    -------
    matplotlib.figure.Figure
    """
    rec = _ds(tree, "record")
    long = _ds(tree, "long")
    fig = _new_figure(tree, 9.2, 4.6, "Multifractal spectrum (MF-DFA-2, wavelet leaders)")
    ax_h, ax_f = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.15, 1.0]})
    for ax in (ax_h, ax_f):
        _style(ax)
    h = _values(rec, "mf_h")
    if h is None or not np.isfinite(h).any():
        _message(ax_h, "multifractal analysis switched off for this scan (--no-multifractal)"
                 if _switched_off(tree) else "no whole-record multifractal estimate in this file")
        _message(ax_f, "")
        return fig
    q = rec["q"].values.astype(float)
    hw = _values(long, "mf_h")
    est = _values(long, "mf_estimator")
    if hw is not None and est is not None:
        prim_label = other_label = None
        for row, e in zip(hw, est, strict=True):
            if not np.isfinite(row).any():
                continue
            primary = int(e) > 0
            label = None
            if primary and prim_label is None:
                label = prim_label = "4-h windows, primary"
            elif not primary and other_label is None:
                label = other_label = "4-h windows, not primary (category)"
            ax_h.plot(q, row, color=_C["sky"] if primary else "#C8C8C8", lw=0.8,
                      alpha=0.9, zorder=1, label=label)
    ci = _values(rec, "mf_h_ci")
    if ci is not None:
        ax_h.fill_between(q, ci[:, 0], ci[:, 1], color=_C["orange"], alpha=0.25, lw=0,
                          zorder=2, label="±1.96 SD of monofractal noise (95 %)")
    ax_h.plot(q, h, color=_C["vermillion"], lw=2.0, marker="o", ms=3, zorder=3,
              label="whole record h(q)", gid="h_record")
    ax_h.axvline(2.0, color=_GREY, lw=0.6, ls=":")
    ax_h.text(2.05, 0.02, "q = 2: DFA", transform=ax_h.get_xaxis_transform(), fontsize=7,
              color="#595959")
    ax_h.set_xlabel("moment order q (dimensionless)")
    ax_h.set_ylabel("generalised Hurst exponent h(q)\n(dimensionless)")
    ax_h.legend(loc="upper right", fontsize=7.5, frameon=False)
    alpha, f = _values(rec, "mf_alpha"), _values(rec, "mf_f")
    ax_f.plot(alpha, f, color=_C["vermillion"], lw=2.0, marker="o", ms=3, gid="f_alpha")
    if alpha is not None and np.isfinite(alpha).all():
        for i, txt, off in ((0, f"q = {q[0]:g}", (-34, 4)), (q.size - 1, f"q = {q[-1]:g}",
                                                                 (4, -10))):
            ax_f.annotate(txt, (alpha[i], f[i]), textcoords="offset points", xytext=off,
                          fontsize=7, color="#595959")
    ax_f.set_xlabel(r"Hoelder exponent $\alpha$ (dimensionless)")
    ax_f.set_ylabel(r"singularity spectrum $f(\alpha)$ (dimensionless)")
    c2, c2ci = _scalar(rec, "c2"), _values(rec, "c2_ci")
    w, wci = _scalar(rec, "mf_width"), _values(rec, "mf_width_ci")
    p = _scalar(rec, "c2_pvalue")
    lines = [f"whole record: c2 = {c2:.3f} {interval_text(*c2ci, digits=3)}, "
             f"p(c2 < 0) = {p:.3f}",
             f"width = {w:.2f} {interval_text(*wci)} (calibrated); raw c2 "
             f"{_scalar(rec, 'c2_slope'):.3f}, width {_scalar(rec, 'mf_width_slope'):.2f}",
             "a monofractal is a single point"]
    ax_f.set_title("\n".join(lines), fontsize=8, loc="left")
    if alpha is not None and np.isfinite(alpha).all() and np.any(np.diff(alpha) > 0):
        # a multifractal has alpha(q) decreasing; a rise folds f(alpha) back on itself
        lo, hi = ax_f.get_ylim()
        ax_f.set_ylim(lo, hi + 0.45 * (hi - lo))  # room for the note above the curve
        ax_f.text(0.98, 0.98, "α(q) not decreasing in q: the curve folds back and is\n"
                  "not a multifractal spectrum (crossovers or non-stationarity\n"
                  "make h(q) rise with q somewhere)", transform=ax_f.transAxes,
                  fontsize=7.5, ha="right", va="top", color=_C["vermillion"],
                  bbox={"fc": "white", "ec": _C["vermillion"], "lw": 0.6})
    return fig

