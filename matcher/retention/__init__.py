"""Retention-index formulas and ladders: Kováts and van den Dool–Kratz indices, hold-up time,
reference series, ladder checks, the fitted calibration and the stationary-phase catalog.

Arrays in, arrays out: no file or database access (the calibration file lives in :mod:`matcher.io`).
"""
