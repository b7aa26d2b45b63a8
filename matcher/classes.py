"""Stationary-phase polarity classes and their default tolerance windows.

The five classes order phases by polarity (sum of the five McReynolds
constants, McReynolds, J. Chromatogr. Sci. 8, 685, 1970). The boundaries
and the default windows are **common practice with no single published
source**; they are approximate and every window can be overridden.

=================  ==============================================  ============  ======
class              typical compositions                            McReynolds Σ  window
=================  ==============================================  ============  ======
nonpolar           squalane, 100 % dimethylpolysiloxane            < 250         ±10
slightly-polar     5 % diphenyl / 95 % dimethylpolysiloxane        250-450       ±10
mid-polar          20-65 % phenyl, cyanopropylphenyl, trifluoro-   450-1600      ±15
polar              polyethylene glycol, acid-modified PEG          1600-3000     ±20
highly-polar       biscyanopropyl polysiloxane and similar         > 3000        ±25
=================  ==============================================  ============  ======

>>> default_window("polar")
20.0
>>> check_class("Slightly-Polar")
'slightly-polar'
"""

from __future__ import annotations

from matcher.rules import PHASE_CLASSES, check_class  # the class names and their check are declared in matcher.rules

__all__ = ["PHASE_CLASSES", "check_class", "DEFAULT_WINDOWS", "MCREYNOLDS_SUM_UPPER", "NEIGHBOUR_CLASS", "default_window"]

#: Default half-widths of the index tolerance window (common practice).
DEFAULT_WINDOWS: dict[str, float] = {
    "nonpolar": 10.0,
    "slightly-polar": 10.0,
    "mid-polar": 15.0,
    "polar": 20.0,
    "highly-polar": 25.0,
}

#: Upper bounds of the McReynolds sum for each class (common practice, approximate).
MCREYNOLDS_SUM_UPPER: dict[str, float] = {
    "nonpolar": 250.0,
    "slightly-polar": 450.0,
    "mid-polar": 1600.0,
    "polar": 3000.0,
    "highly-polar": float("inf"),
}

#: Neighbouring class consulted by the cross-class fallback.
NEIGHBOUR_CLASS: dict[str, str] = {
    "nonpolar": "slightly-polar",
    "slightly-polar": "nonpolar",
    "mid-polar": "slightly-polar",
    "polar": "highly-polar",
    "highly-polar": "polar",
}


def default_window(phase_class: str) -> float:
    """Default half-width (index units) of the tolerance window for a class."""
    return DEFAULT_WINDOWS[check_class(phase_class)]
