"""The beat series: the Recording type, NN extraction (cleaning) and even resampling.
numpy/scipy only.
"""
