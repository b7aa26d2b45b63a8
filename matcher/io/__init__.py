"""File reading and writing at the edges: delimited tables, peak tables, ladders, calibration files,
index outputs, screen results read back, atomic writes and the output guard.

Everything here turns files into checked in-memory objects (or back); the engine rooms never open a file.
"""
