"""Day/night contrasts and the 24-h cosinor of each exponent: the numerical core (core) and its
application to a scan file (days).
"""
