"""Calibrated fits of the estimator presets on one series, and when to withhold them.

:func:`calibrated_fits` runs the presets (:mod:`tfhrv.estimators.presets`) and calibrates
them (:mod:`tfhrv.calibration`); :func:`withhold_reason` says when the data hold no exponent
to report (mostly interpolated, or no power law).
"""

from __future__ import annotations

import numpy as np

from tfhrv.calibration.calibrate import calibrate, class_statistic
from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.dfa import Fluctuation
from tfhrv.estimators.loglog import ScalingFit
from tfhrv.estimators.presets import DFA_PRESETS, estimate, estimate_dfa

__all__ = [
    "RECORD_PRESETS",
    "WITHHOLD_LIMITS",
    "calibrated_fit",
    "calibrated_fits",
    "withhold_reason",
]

#: When the data hold no exponent to report (the reason codes of
#: :func:`withhold_reason`).  ``max_filled``: share of the analysed series filled in by
#: interpolation across gaps (beyond half, the interpolation, not the heart, makes the
#: slope; common practice).  ``max_dfa_rms``: RMS departure (log10 units, weighted) of
#: the DFA points from their line; measured on the open long-term records
#: (``scripts/withhold_limits.py``): over 560 windows of 300 beats the largest was
#: 0.074 for alpha1 and 0.114 for alpha2, over 600 fGn series (H 0.1-0.99) 0.035 and
#: 0.066, while a 12-beat sinusoid gives 0.13 for alpha1.  ``linearity_alpha`` and
#: ``max_excess_scatter``: the spectral lack-of-fit test against the known scatter of
#: log periodogram ordinates (Geweke & Porter-Hudak 1983), the same limits as the
#: FFT-slope verdict (:class:`FitnessThresholds`).
WITHHOLD_LIMITS: dict[str, float] = {
    "max_filled": 0.5,
    "max_dfa_rms_alpha1": 0.1,
    "max_dfa_rms_alpha2": 0.15,
    "max_dfa_rms_alpha_long": 0.15,
    "linearity_alpha": 0.01,
    "max_excess_scatter": 0.1,
}


def _dfa_rms(fit: ScalingFit) -> float:
    used = np.asarray(fit.used, dtype=bool)
    x, y, w = fit.x[used], fit.y[used], fit.weights[used]
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(w) & (w > 0)
    if ok.sum() < 3:
        return float("nan")
    r = y[ok] - (fit.intercept + fit.slope_exponent * x[ok])
    return float(np.sqrt(np.average(r * r, weights=w[ok])))


def withhold_reason(preset: str, fit: ScalingFit, /) -> str:
    """Why a fitted slope is not an exponent to report, or ``""`` when it is.

    Reason codes (the text after the colon explains it):

    - ``filled``: more than half of the analysed series was interpolated across gaps
      (``options["interpolated_fraction"]`` of the resampled spectral presets);
    - ``no-power-law``: the points depart from one line beyond their scatter: the
      spectral lack-of-fit test (p < 0.01 and RMS excess > 0.1 decade), or for DFA an RMS
      departure above :data:`WITHHOLD_LIMITS` ``max_dfa_rms_<preset>``.

    Examples
    --------
    >>> from tfhrv.estimators.presets import estimate
    >>> k = np.arange(3000)
    >>> withhold_reason("alpha1", estimate("alpha1", 800 + 50 * np.sin(2 * np.pi * k / 12)))
    ... # doctest: +ELLIPSIS
    'no-power-law: ...'
    """
    lim = WITHHOLD_LIMITS
    filled = float(fit.options.get("interpolated_fraction", 0.0) or 0.0)
    if filled > lim["max_filled"]:
        return (f"filled: {100 * filled:.0f} % of the analysed series is interpolated across "
                f"gaps (> {100 * lim['max_filled']:.0f} %); the slope would describe the "
                "interpolation")
    p, excess = fit.lack_of_fit_pvalue, fit.excess_scatter
    if (np.isfinite(p) and p < lim["linearity_alpha"] and np.isfinite(excess)
            and excess > lim["max_excess_scatter"]):
        return (f"no-power-law: the log-log points depart from one line beyond their scatter "
                f"(lack-of-fit p = {p:.2g}, RMS excess {excess:.2f} decade)")
    key = f"max_dfa_rms_{preset}"
    if preset in DFA_PRESETS and key in lim:
        rms = _dfa_rms(fit)
        if np.isfinite(rms) and rms > lim[key]:
            return (f"no-power-law: log F(n) departs from one line by {rms:.3f} decade RMS "
                    f"(> {lim[key]:g}); the series holds a rhythm or a change of regime, not "
                    "one scaling exponent")
    return ""


def _withheld(fit: ScalingFit, reason: str) -> ScalingFit:
    """The fit with its exponent removed and the reason kept (the curve stays)."""
    from dataclasses import replace

    nan = float("nan")
    return replace(fit, exponent=nan, se=nan, ci=(nan, nan), slope_exponent=nan,
                   withheld=reason, options={**fit.options, "withheld_slope": fit.slope_exponent})


def calibrated_fit(preset: str, nn_ms: np.ndarray, /, *, beat_time_s: np.ndarray | None = None,
                   order: int = 1, vanishing_moments: int = 3,
                   calibration_model: str = "powerlaw",
                   class_stat: float | None = None) -> ScalingFit | None:
    """Run a preset (:mod:`tfhrv.estimators.presets`) and calibrate it under
    ``calibration_model`` (:mod:`tfhrv.calibration.calibrate`; ``class_stat`` is computed
    from ``nn_ms`` when the model needs it and none is given).

    Returns None when the series cannot support the preset (the estimator raised
    :class:`~tfhrv.core.errors.InsufficientDataError`: too short, too few scales, constant),
    and a fit without exponent (NaN, ``withheld`` giving the reason) when the data hold no
    exponent to report (:func:`withhold_reason`); every other error propagates.
    """
    try:
        raw = estimate(preset, nn_ms, beat_time_s=beat_time_s, order=order,
                       vanishing_moments=vanishing_moments)
    except InsufficientDataError:
        return None
    if not np.isfinite(raw.exponent):
        return None
    if reason := withhold_reason(preset, raw):
        return _withheld(raw, reason)
    if calibration_model == "fgn-fbm" and class_stat is None:
        class_stat = class_statistic(nn_ms)
    return calibrate(raw, estimator=preset, n=int(np.size(nn_ms)), model=calibration_model,
                     class_stat=class_stat)


def calibrated_fits(presets: dict[str, str], nn_ms: np.ndarray, /, *,
                    beat_time_s: np.ndarray | None = None, order: int = 1,
                    vanishing_moments: int = 3, dfa_scales: np.ndarray | None = None,
                    calibration_model: str = "powerlaw",
                    ) -> tuple[dict[str, ScalingFit | None], Fluctuation | None]:
    """Several calibrated presets on one series (name -> preset), the DFA ones from a
    shared fluctuation function (:func:`tfhrv.estimators.presets.estimate_dfa`).

    Gives the same fits as :func:`calibrated_fit` preset by preset. Returns the fits
    (None where the series cannot support a preset) and the fluctuation function, which
    also holds F(n) at ``dfa_scales`` when given (None if no DFA could be computed).
    """
    dfa_names = {v: p for v, p in presets.items() if p in DFA_PRESETS}
    raw_dfa: dict = {}
    fl = None
    try:
        raw_dfa, fl = estimate_dfa(tuple(dfa_names.values()), nn_ms, order=order,
                                   extra_scales=dfa_scales)
    except InsufficientDataError:
        pass
    out: dict[str, ScalingFit | None] = {}
    n = int(np.size(nn_ms))
    stat = class_statistic(nn_ms) if calibration_model == "fgn-fbm" else None
    for var, preset in presets.items():
        if preset in DFA_PRESETS:
            raw = raw_dfa.get(preset)
            ok = raw is not None and np.isfinite(raw.exponent)
            reason = withhold_reason(preset, raw) if ok else ""
            out[var] = (None if not ok else _withheld(raw, reason) if reason else
                        calibrate(raw, estimator=preset, n=n, model=calibration_model,
                                  class_stat=stat))
        else:
            out[var] = calibrated_fit(preset, nn_ms, beat_time_s=beat_time_s, order=order,
                                      vanishing_moments=vanishing_moments,
                                      calibration_model=calibration_model, class_stat=stat)
    return out, fl


#: exponent name -> preset for the whole record (and the long tier).
RECORD_PRESETS: dict[str, str] = {
    "alpha1": "alpha1",
    "alpha2": "alpha2",
    "alpha_long": "alpha_long",
    "beta_spectral": "beta_spectral_long",
    "beta_wavelet": "beta_wavelet_long",
}


