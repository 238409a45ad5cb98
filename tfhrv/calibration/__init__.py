"""Calibrated bias and confidence intervals of the scaling estimators, from the tables shipped
in tfhrv/data (built by scripts/make_calibration.py).
"""
