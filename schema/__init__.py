"""Shipped data files (this marker makes the folder reachable with importlib.resources)."""
