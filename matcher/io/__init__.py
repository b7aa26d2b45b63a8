"""File reading and writing at the edges: delimited tables, peak tables, ladders, calibration and library files."""
