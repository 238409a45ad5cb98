"""Which estimator is primary for a window, and why: the decision table.

The decision table lives here and only here; the README, ``tfhrv inspect --explain`` and
the report print it from :data:`DECISION_TABLE`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np

__all__ = [
    "Choice",
    "DECISION_TABLE",
    "ESTIMATORS",
    "choose_estimator",
    "explain_table",
]

Estimator = Literal["spectral", "wavelet", "dfa", "none"]
#: Estimator codes in the order used for ``flag_values`` in the DataTree.
ESTIMATORS: tuple[str, ...] = ("none", "spectral", "wavelet", "dfa")


@dataclass(frozen=True, slots=True)
class _Rule:
    valid: tuple[str, ...]
    reason: str


#: category -> (estimators whose assumptions hold there, reason).  Among the valid
#: estimators that could be computed on the window, the one with the narrowest calibrated
#: 95 % interval (in beta units) is primary; ties go to the earlier one.  Sources:
#: Eke et al. 2002 (classify noise vs motion before choosing a method); Abry & Veitch 1998
#: (wavelets with N vanishing moments ignore polynomial trends of degree < N); Hu et al. 2001
#: and Kantelhardt et al. 2001 (DFA of order q removes polynomial trends of degree q in the
#: profile, i.e. of degree q - 1 in the NN series, and copes with non-stationary
#: increments); Kwiatkowski et al. 1992 and Said & Dickey 1984 for the ADF/KPSS reading
#: (see tfhrv.stationarity.battery).
DECISION_TABLE: dict[str, _Rule] = {
    "stationary": _Rule(
        ("spectral", "wavelet", "dfa"),
        "stationary (no drift or slope beyond surrogates; KPSS level kept, or its "
        "rejection explained by long memory): the periodogram "
        "slope's assumptions hold, as do the others'; the most precise is primary",
    ),
    "trend": _Rule(
        ("wavelet",),
        "trend-stationary: a trend leaks into the low-frequency periodogram and bends DFA-1; "
        "wavelets with N vanishing moments (default 3) ignore polynomial trends of degree < N",
    ),
    "unit-root": _Rule(
        ("dfa", "wavelet"),
        "difference-stationary (fBm-like, unit root not rejected): the periodogram of a motion "
        "is biased by leakage; DFA and wavelets handle non-stationary increments",
    ),
    "drifting": _Rule(
        ("wavelet", "dfa"),
        "mean or SD drifts beyond what surrogates with the same spectrum show: the periodogram "
        "is distorted; local wavelet energies and DFA are robust to slow drift",
    ),
    "inconclusive": _Rule(
        ("dfa", "wavelet"),
        "the unit-root and stationarity tests disagree or lack power: DFA and wavelets make "
        "fewer assumptions than the periodogram",
    ),
    "too-short": _Rule((), "too few NN intervals for any estimator"),
}


@dataclass(frozen=True, slots=True)
class Choice:
    """The primary estimator of one window and why."""

    estimator: str
    reason: str


def choose_estimator(category: str, /, *, available: Mapping[str, float]) -> Choice:
    """Pick the primary estimator for a window.

    Parameters
    ----------
    category : str
        Stationarity category of the window (see :data:`tfhrv.stationarity.battery.CATEGORIES`).
    available : mapping of str to float
        Estimators that produced a finite exponent on this window, with the width of their
        calibrated 95 % interval in beta units (NaN when unknown).

    Returns
    -------
    Choice

    Examples
    --------
    >>> choose_estimator("trend", available={"spectral": 0.2, "wavelet": 0.3}).estimator
    'wavelet'
    >>> choose_estimator("stationary", available={"spectral": 0.5, "dfa": 0.2}).estimator
    'dfa'
    """
    if category not in DECISION_TABLE:
        raise ValueError(f"category must be one of {tuple(DECISION_TABLE)!r}, got {category!r}")
    rule = DECISION_TABLE[category]
    if not rule.valid:
        return Choice("none", rule.reason)
    usable = [e for e in rule.valid if e in available]
    if not usable:
        return Choice("none", rule.reason + f"; none of {', '.join(rule.valid)} computable here")

    def width(e: str) -> float:
        w = float(available[e])
        return w if np.isfinite(w) else np.inf

    best = min(usable, key=lambda e: (width(e), rule.valid.index(e)))
    note = f" ({best}: narrowest interval)" if len(usable) > 1 else ""
    return Choice(best, rule.reason + note)


def explain_table() -> str:
    """The decision table as aligned text (for ``--explain``, the README and the report)."""
    rows = [("category", "valid estimators", "reason")]
    rows += [(c, ", ".join(r.valid) or "none", r.reason) for c, r in DECISION_TABLE.items()]
    w0 = max(len(r[0]) for r in rows)
    w1 = max(len(r[1]) for r in rows)
    lines = [f"{a:<{w0}}  {b:<{w1}}  {c}" for a, b, c in rows]
    lines.append("Among the valid estimators computed on a window, the one with the narrowest "
                 "calibrated 95 % interval is primary.")
    return "\n".join(lines)


