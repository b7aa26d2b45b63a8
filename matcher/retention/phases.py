"""The stationary-phase catalog and McReynolds classification.

McReynolds constants (McReynolds, J. Chromatogr. Sci. 8, 685, 1970) are the
retention-index differences of five probes on a phase against squalane at
120 °C:

.. math::

   x' = \\Delta I_{benzene},\\; y' = \\Delta I_{1\\text{-butanol}},\\;
   z' = \\Delta I_{2\\text{-pentanone}},\\; u' = \\Delta I_{1\\text{-nitropropane}},\\;
   s' = \\Delta I_{pyridine}, \\qquad \\Delta I = I_{phase} - I_{squalane}

Squalane is the zero reference (0 0 0 0 0 by definition; its own probe indices
are 653, 590, 627, 652, 699). The sum :math:`\\Sigma = x'+y'+z'+u'+s'` orders
phases by polarity; :func:`classify` maps it onto the classes of
:mod:`matcher.classes` with the boundaries of
:data:`matcher.classes.MCREYNOLDS_SUM_UPPER` (< 250, < 450, < 1600, < 3000,
above). Those boundaries are **common practice, no single source**, and
approximate: a phase near a boundary may be called either way in the trade.

Worked example: a 50 % phenyl phase with 119 158 162 243 202 sums to 884,
inside 450-1600:

>>> classify(119, 158, 162, 243, 202)
'mid-polar'
>>> classify(0, 0, 0, 0, 0)
'nonpolar'
>>> classify(322, 536, 368, 572, 510)    # polyethylene glycol, Σ 2308
'polar'

The catalog (``library/phases.csv``) holds generic compositions only.

>>> [p.name for p in catalog() if p.name == "squalane"]
['squalane']
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from functools import lru_cache

from matcher.classes import MCREYNOLDS_SUM_UPPER, PHASE_CLASSES
from matcher.errors import MatcherError

PROBES = ("benzene", "1-butanol", "2-pentanone", "1-nitropropane", "pyridine")
#: Probe indices on squalane at 120 °C (McReynolds 1970).
SQUALANE_PROBE_INDICES = (653, 590, 627, 652, 699)


@dataclass(frozen=True)
class Phase:
    """One catalog entry: a generic composition, its class and its constants (None when unknown)."""

    name: str
    phase_class: str
    constants: tuple[float, float, float, float, float] | None
    source: str

    @property
    def mcreynolds_sum(self) -> float | None:
        return None if self.constants is None else float(sum(self.constants))


def mcreynolds_sum(x: float, y: float, z: float, u: float, s: float) -> float:
    """The sum of the five McReynolds constants (finite numbers required), [-].

    >>> mcreynolds_sum(119, 158, 162, 243, 202)
    884.0
    """
    vals = [float(v) for v in (x, y, z, u, s)]
    if not all(math.isfinite(v) for v in vals):
        raise MatcherError("McReynolds constants must be five finite numbers")
    return float(sum(vals))


def classify(x: float, y: float, z: float, u: float, s: float) -> str:
    r"""Polarity class of a stationary phase from its five McReynolds constants [1]_.

    .. math::

        \Sigma = x' + y' + z' + u' + s', \qquad \Delta I = I_{phase} - I_{squalane}

    each constant the index difference of one probe (benzene, 1-butanol,
    2-pentanone, 1-nitropropane, pyridine) between the phase and squalane at
    120 °C. The class is the first whose upper bound exceeds :math:`\Sigma`:
    < 250 nonpolar, < 450 slightly-polar, < 1600 mid-polar, < 3000 polar,
    above highly-polar (common practice, no single source; approximate).

    Parameters
    ----------
    x, y, z, u, s : float
        The McReynolds constants x' y' z' u' s', [-] (index units)

    Returns
    -------
    phase_class : str
        One of :data:`matcher.rules.PHASE_CLASSES`

    Examples
    --------
    A 50 % phenyl / 50 % methyl polysiloxane with 119 158 162 243 202
    (values from memory of McReynolds' table [1]_), Σ 884; a polyethylene
    glycol with 322 536 368 572 510 (from memory), Σ 2308; squalane, the
    reference, 0 by definition:

    >>> classify(119, 158, 162, 243, 202), classify(322, 536, 368, 572, 510), classify(0, 0, 0, 0, 0)
    ('mid-polar', 'polar', 'nonpolar')

    References
    ----------
    .. [1] McReynolds, W. O. "Characterization of Some Liquid Phases."
       Journal of Chromatographic Science 8, no. 12 (1970): 685-91.
    """
    total = mcreynolds_sum(x, y, z, u, s)
    for cls in PHASE_CLASSES:
        if total < MCREYNOLDS_SUM_UPPER[cls]:
            return cls
    return PHASE_CLASSES[-1]


def _text() -> str:
    from importlib.resources import files

    return files("matcher.shipped").joinpath("phases.csv").read_text(encoding="utf-8")


@lru_cache(maxsize=1)
def catalog() -> tuple[Phase, ...]:
    """The shipped stationary-phase catalog, in file order."""
    lines = [ln for ln in _text().splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    out = []
    for row in csv.DictReader(io.StringIO("\n".join(lines))):
        vals = [row[k].strip() for k in ("x", "y", "z", "u", "s")]
        consts = tuple(float(v) for v in vals) if all(vals) else None
        out.append(Phase(row["name"].strip(), row["phase_class"].strip(), consts, row["source"].strip()))
    return tuple(out)


def find_phase(name: str) -> Phase | None:
    """The catalog entry with this name (case and spacing ignored), or None.

    >>> find_phase("  SQUALANE ").phase_class, find_phase("no such phase")
    ('nonpolar', None)
    """
    key = " ".join(str(name).lower().split())
    for p in catalog():
        if " ".join(p.name.lower().split()) == key:
            return p
    return None


__all__ = ["PROBES", "SQUALANE_PROBE_INDICES", "Phase", "mcreynolds_sum", "classify", "catalog", "find_phase"]
