"""Vectorised tolerance-window search on a class's sorted library entries.

For measured indices ``x`` (any number of peaks) and half-widths ``w`` the
candidates of peak ``p`` are the entries ``k`` with
``|x[p] - ri[k]| <= w[p]``. Because entries are sorted by index the window
is two :func:`numpy.searchsorted` calls per peak, done for all peaks at once;
the result is a flat list of (peak, entry) pairs, grouped by peak.

>>> ri = np.array([900.0, 1000.0, 1031.0, 1035.0, 1100.0])
>>> pairs = window_pairs(ri, np.array([1030.0, 1500.0, 905.0]), np.array([10.0, 10.0, 10.0]))
>>> pairs.peak.tolist(), pairs.entry.tolist()
([0, 0, 2], [2, 3, 0])
>>> pairs.count.tolist()
[2, 0, 1]
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matcher.classes import DEFAULT_WINDOWS, check_class
from matcher.rules import check_window


@dataclass(frozen=True)
class Pairs:
    """Flat (peak, entry) candidate pairs, grouped by peak in ascending entry order."""

    peak: np.ndarray  # int64 peak position
    entry: np.ndarray  # int64 entry position in the class arrays
    count: np.ndarray  # int64 number of candidates per peak

    def __len__(self) -> int:
        return len(self.peak)


def window_pairs(sorted_ri: np.ndarray, x: np.ndarray, half_width: np.ndarray) -> Pairs:
    """All entries of ``sorted_ri`` inside ``x ± half_width``, for every peak at once.

    Peaks with a NaN index get no candidates.
    """
    x = np.asarray(x, dtype=np.float64)
    w = np.broadcast_to(np.asarray(half_width, dtype=np.float64), x.shape)
    ok = np.isfinite(x)
    lo = np.searchsorted(sorted_ri, np.where(ok, x - w, np.inf), side="left")
    hi = np.searchsorted(sorted_ri, np.where(ok, x + w, -np.inf), side="right")
    count = np.maximum(hi - lo, 0).astype(np.int64)
    total = int(count.sum())
    peak = np.repeat(np.arange(len(x), dtype=np.int64), count)
    # entry index = lo[peak] + position within the peak's group
    starts = np.cumsum(count) - count
    within = np.arange(total, dtype=np.int64) - np.repeat(starts, count)
    entry = np.repeat(lo.astype(np.int64), count) + within
    return Pairs(peak=peak, entry=entry, count=count)


def half_widths(
    x: np.ndarray,
    phase_class: str,
    window: float | None = None,
    window_percent: float | None = None,
) -> np.ndarray:
    """Window half-width for each index: fixed (``window`` or the class default,
    common practice) or proportional to the index (``window_percent`` % of it).

    >>> half_widths(np.array([1000.0, 2000.0]), "polar").tolist()
    [20.0, 20.0]
    >>> half_widths(np.array([1000.0, 2000.0]), "polar", window_percent=1.0).tolist()
    [10.0, 20.0]
    """
    x = np.asarray(x, dtype=np.float64)
    window, window_percent = check_window(window, window_percent)
    if window_percent is not None:
        return np.abs(x) * (window_percent / 100.0)
    w = DEFAULT_WINDOWS[check_class(phase_class)] if window is None else window
    return np.full(x.shape, w)


def window_description(phase_class: str, window: float | None, window_percent: float | None) -> dict:
    """How the window was set, for outputs."""
    if window_percent is not None:
        return {"mode": "percent", "value": float(window_percent)}
    source = "given" if window is not None else "class default (common practice)"
    return {"mode": "fixed", "value": float(window if window is not None else DEFAULT_WINDOWS[phase_class]), "source": source}
