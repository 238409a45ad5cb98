"""Figures (matplotlib, imported lazily) and the self-contained HTML report, read from a scan
file.
"""
