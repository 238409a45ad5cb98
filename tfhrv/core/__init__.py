"""Foundation shared by every layer: error and warning classes, argument validation, the
research-use caution. Imports nothing else from tfhrv.
"""
