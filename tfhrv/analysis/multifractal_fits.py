"""Multifractal estimates per long window and for the whole record, and when they are
primary (numpy layer).

The record pipeline (:mod:`tfhrv.analysis.pipeline`) calls :func:`empty_multifractal` and
:func:`window_multifractal` for each window of the ``long`` tier, and
:func:`record_multifractal` once for the whole record; the computation is
:func:`tfhrv.calibration.multifractal.estimate_multifractal` (MF-DFA-2 over 16 to
min(1024, N/10) beats, wavelet leaders on db3 over the wavelet exponent's octaves,
calibrated against the monofractal null and the multifractal random walk).

**5-min windows are not analysed.** A 5-min window holds about 300-400 beats: MF-DFA with
boxes of 16 beats and more leaves fewer than 3 scales with >= 10 boxes, and the leaders
reach octave 5 at most; the negative and large positive moments of a few hundred values
are dominated by a handful of boxes (Kantelhardt et al. 2002 recommend series of
thousands of values). The calibration's shortest length is 4000 beats (about 1 h).

**Which windows count (the decision table** :data:`MF_DECISION`). As for the
monofractal exponents (:mod:`tfhrv.analysis.policy`), the stationarity category of a
window says which multifractal estimate is primary there:

- ``stationary``: both (leader c2 and MF-DFA width);
- ``trend``: leaders only. Wavelets with N = 3 vanishing moments ignore polynomial
  trends of degree < 3 (Abry & Veitch 1998; Wendt et al. 2007), while MF-DFA-2 removes
  only trends linear in the NN series; polynomial, sinusoidal and other trends beyond the
  detrending order bend F_q(s) and give spurious q dependence (Kantelhardt et al. 2002,
  sec. 3; Ludescher et al. 2011 for periodic trends);
- ``unit-root``: both (MF-DFA-2 handles h up to 2 and the leaders are computed on the
  integrated coefficients with 3 vanishing moments);
- ``drifting``: neither. A level change is a kink in the profile: the few boxes that
  hold it dominate the large positive moments, so h(q) rises at large q and the
  estimates move away from the truth - measured on fGn (H = 0.7, 16000 beats) with a
  3-SD level shift half-way: MF-DFA width about -0.2 instead of 0, leader c2 about +0.01
  instead of 0 (``tests/test_multifractal_fits.py``); a window with several shifts and
  regime changes of different scaling can move them either way. An SD step alone, with
  the same scaling on both sides, changed little in the same test (F_q mixes two power
  laws of the same exponent);
- ``inconclusive``: both, with the caution of the category;
- ``too-short``: neither.

References
----------
Kantelhardt JW, Zschiegner SA, Koscielny-Bunde E, Havlin S, Bunde A, Stanley HE.
Physica A 2002;316:87-114. doi:10.1016/S0378-4371(02)01383-3
Abry P, Veitch D. IEEE Trans Inf Theory 1998;44:2-15. doi:10.1109/18.650984
Wendt H, Abry P, Jaffard S. IEEE Signal Process Mag 2007;24(4):38-48.
Ludescher J, Bogachev MI, Kantelhardt JW, Schumann AY, Bunde A. On spurious and corrupted
multifractality: the effects of additive noise, short-term memory and periodic trends.
Physica A 2011;390:2480-2490 (citation from memory).
"""

from __future__ import annotations

import numpy as np

from tfhrv.calibration.multifractal import MultifractalEstimate, estimate_multifractal
from tfhrv.estimators.multifractal import DEFAULT_Q

__all__ = [
    "C2_PRIMARY",
    "MF_DECISION",
    "MF_ESTIMATORS",
    "MIN_BEATS",
    "MULTIFRACTAL_OFF",
    "SHORT_NOTE",
    "WIDTH_PRIMARY",
    "empty_multifractal",
    "record_multifractal",
    "window_multifractal",
]

#: Codes of ``mf_estimator`` (flag_values in the file).
MF_ESTIMATORS: tuple[str, ...] = ("none", "leaders", "mfdfa", "both")
#: ``mf_estimator`` codes under which c2 (leaders) and the width (MF-DFA) are primary.
C2_PRIMARY: tuple[int, ...] = (1, 3)
WIDTH_PRIMARY: tuple[int, ...] = (2, 3)
#: Fewest NN intervals for a multifractal estimate (the shortest calibrated length).
MIN_BEATS = 4000
#: Why the 5-min tier carries no multifractal variables (written to its group attrs).
SHORT_NOTE = ("multifractal variables are not computed on 5-min windows: about 300-400 "
              "beats leave fewer than 3 MF-DFA scales of >= 16 beats with >= 10 boxes and "
              "too few wavelet leaders for the log-cumulants; the calibration starts at "
              f"{MIN_BEATS} beats (about 1 h). See the long tier and the whole record.")

#: category -> (estimate that is primary there, reason); see the module docstring.
MF_DECISION: dict[str, tuple[str, str]] = {
    "stationary": ("both", "stationary: leader c2 and MF-DFA width both primary"),
    "trend": ("leaders", "trend: wavelet leaders (3 vanishing moments) ignore polynomial "
              "trends of degree < 3; MF-DFA-2 removes only linear ones"),
    "unit-root": ("both", "difference-stationary: MF-DFA-2 and the integrated leaders "
                  "both cope with motion-like series"),
    "drifting": ("none", "mean or SD drift beyond surrogates: level changes dominate the "
                 "large moments and bias h(q), c2 and the width"),
    "inconclusive": ("both", "stationarity tests disagree or lack power: both estimates "
                     "shown, read with that caution"),
    "too-short": ("none", "too few NN intervals"),
}

_SCALARS = ("c1", "c2", "c2_slope", "c2_pvalue", "mf_width", "mf_width_slope")
_PAIRS = ("c1_ci", "c2_ci", "mf_width_ci")
_CURVES = ("mf_h", "mf_alpha", "mf_f")


#: The reason stored for every 4-h window when the multifractal analysis is switched off
#: (``ScanOptions.multifractal``, ``--no-multifractal``).
MULTIFRACTAL_OFF = "not computed: multifractal analysis switched off (--no-multifractal)"


def empty_multifractal(n: int, /) -> dict[str, np.ndarray]:
    """The per-window multifractal arrays of a tier of ``n`` windows, all missing."""
    nq = DEFAULT_Q.size
    v: dict[str, np.ndarray] = {name: np.full(n, np.nan) for name in _SCALARS}
    v.update({name: np.full((n, 2), np.nan) for name in _PAIRS})
    v.update({name: np.full((n, nq), np.nan) for name in _CURVES})
    v["mf_h_ci"] = np.full((n, nq, 2), np.nan)
    v["mf_estimator"] = np.zeros(n, dtype=np.int8)
    v["mf_reason"] = np.full(n, "", dtype=object)
    return v


def _store(v: dict, w: int, est: MultifractalEstimate) -> None:
    v["c1"][w], v["c1_ci"][w] = est.c1, est.c1_ci
    v["c2"][w], v["c2_ci"][w], v["c2_slope"][w] = est.c2, est.c2_ci, est.c2_slope
    v["c2_pvalue"][w] = est.c2_pvalue
    v["mf_width"][w], v["mf_width_ci"][w] = est.width, est.width_ci
    v["mf_width_slope"][w] = est.width_slope
    v["mf_h"][w], v["mf_h_ci"][w] = est.h, est.h_ci
    v["mf_alpha"][w], v["mf_f"][w] = est.alpha, est.f


def window_multifractal(v: dict, w: int, nn_ms: np.ndarray, category: str, /, *,
                        vanishing_moments: int = 3) -> None:
    """Fill row ``w`` of the multifractal arrays ``v`` for one long window.

    Windows with fewer than :data:`MIN_BEATS` NN intervals are left missing (with the
    reason); the category decides the primary estimate (:data:`MF_DECISION`), the values
    are stored whatever it says.
    """
    primary, why = MF_DECISION[category]
    if nn_ms.size < MIN_BEATS:
        v["mf_reason"][w] = f"{nn_ms.size} NN intervals, fewer than {MIN_BEATS}"
        return
    _store(v, w, estimate_multifractal(nn_ms, vanishing_moments=vanishing_moments))
    v["mf_estimator"][w] = MF_ESTIMATORS.index(primary)
    v["mf_reason"][w] = why


def record_multifractal(nn_ms: np.ndarray, /, *, vanishing_moments: int = 3
                        ) -> MultifractalEstimate | None:
    """Multifractal estimates of the whole record's NN series (None below
    :data:`MIN_BEATS` intervals)."""
    if np.size(nn_ms) < MIN_BEATS:
        return None
    return estimate_multifractal(nn_ms, vanishing_moments=vanishing_moments)
