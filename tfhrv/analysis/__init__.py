"""The record pipeline (numpy layer): windows in clock time, the battery per window, the
calibrated fits, the estimator decision table and the whole-record FFT-slope verdict.
Everything that inspect, scan, report and cohort compute goes through here.
"""
