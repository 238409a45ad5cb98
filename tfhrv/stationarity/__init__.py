"""Stationarity battery per window: ADF, KPSS and drift against phase-randomised surrogates,
and the category decision. numpy/scipy/statsmodels only.
"""
