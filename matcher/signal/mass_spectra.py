"""What a detected electron-ionisation spectrum says on its own: a molecular-ion hint, n-alkane evidence.

**Molecular-ion hint** (:func:`molecular_ion`). The candidate is the highest
nominal m/z whose intensity is at least :data:`MOL_ION_MIN` (2 %) of the base
peak; if the one below it is so much stronger that the candidate can be its
carbon-13 isotope peak (ratio under 1.1 % per carbon, with carbons
estimated as m/14, plus 5 %), the one below is the candidate. It is given
as a hint only when it is even (the nitrogen rule for compounds without
nitrogen; McLafferty and Tureček, *Interpretation of Mass Spectra*, 4th ed.,
1993) and no ion of at least 2 % lies 4 to 13 below it (losses of 4–13 u
from a molecular ion are implausible, same source; then the highest ion is
a fragment and the spectrum gives no hint). A wrong hint costs more than
none, so the rules lean to silence.

**n-Alkanes** (:func:`alkane_evidence`). An n-alkane's EI spectrum is the
CnH2n+1+ series 43, 57, 71, 85, 99, … falling smoothly after m/z 57, with a
weak molecular ion at 14n + 2 (the shape of published reference spectra of
n-alkanes, recalled from memory: n-octane has base peak 43 with 57, 71 and 85
at roughly 20–35 %; common practice, no single source). A spectrum is
alkane-like when its base peak is m/z 43 or 57, m/z 57 is at least a quarter
of the base peak, 71 and 85 are present and both below 57, and the
CnH2n+1 ions (m/z 29, 43, 57, 71, … = 14k + 1) carry at least 35 % of the
spectrum's intensity. The carbon
number is read from the highest ion of the form 14n + 2 that is at least
0.3 % of the base peak and outweighs the ion one below it (an isotope peak
of a CnH2n+1 fragment sits above a stronger fragment), provided no CnH2n+1
ion of at least 0.3 % stands above it (a fragment cannot outweigh the
molecule's mass); otherwise it is not known from the spectrum. Ions of
other forms above it (noise, an impurity) are ignored.

>>> mz = np.array([43., 57, 71, 85, 99, 113, 142]); y = np.array([80., 100, 55, 30, 15, 8, 3])
>>> alkane_evidence(mz, y)
(True, 10)
>>> molecular_ion(np.array([41., 68, 93, 121, 136]), np.array([30., 100, 45, 20, 18]))
136
>>> molecular_ion(np.array([41., 68, 93, 121, 127]), np.array([30., 100, 45, 20, 18])) is None   # 127 is odd
True
"""

from __future__ import annotations

import numpy as np

#: Least relative intensity of a molecular-ion hint (fraction of the base peak).
MOL_ION_MIN = 0.02
#: Least relative intensity of an n-alkane's molecular ion.
ALKANE_M_MIN = 0.003


def _at(mz: np.ndarray, y: np.ndarray, m: int) -> float:
    k = np.searchsorted(mz, m)
    return float(y[k]) if k < len(mz) and mz[k] == m else 0.0


def molecular_ion(mz, intensity) -> int | None:
    """A molecular-ion hint from a centroided spectrum (sorted m/z), or ``None``; see the module doc."""
    mz = np.asarray(mz, dtype=np.float64)
    y = np.asarray(intensity, dtype=np.float64)
    if mz.size == 0 or not np.any(y > 0):
        return None
    rel = y / y.max()
    big = np.flatnonzero(rel >= MOL_ION_MIN)
    m = int(round(mz[big[-1]]))
    below = _at(mz, rel, m - 1)
    if below > 0 and rel[big[-1]] <= below * (0.011 * m / 14.0 + 0.05):
        m -= 1
    if m % 2:
        return None
    near = (mz >= m - 13) & (mz <= m - 4) & (rel >= MOL_ION_MIN)
    if np.any(near):
        return None
    return m


def alkane_evidence(mz, intensity) -> tuple[bool, int | None]:
    """(alkane-like, carbon number from the molecular ion or ``None``); see the module doc."""
    mz = np.asarray(mz, dtype=np.float64)
    y = np.asarray(intensity, dtype=np.float64)
    if mz.size == 0 or not np.any(y > 0):
        return False, None
    base = float(y.max())
    base_mz = int(round(mz[int(np.argmax(y))]))
    i57, i71, i85 = (_at(mz, y, m) for m in (57, 71, 85))
    nominal = np.rint(mz).astype(np.int64)
    series = float(y[(nominal >= 29) & (nominal % 14 == 1)].sum())
    like = (base_mz in (43, 57) and i57 >= 0.25 * base and 0 < i71 < i57 and 0 < i85 < i57
            and series >= 0.35 * float(y.sum()))
    if not like:
        return False, None
    rel = y / base
    sig = rel >= ALKANE_M_MIN
    # molecular-ion candidates: 14n + 2, outweighing the ion below (not a fragment's 13C peak)
    cand = [int(m) for m, ok in zip(nominal, sig) if ok and m >= 58 and (m - 2) % 14 == 0
            and _at(mz, y, m) > _at(mz, y, m - 1)]
    if not cand:
        return True, None
    top = max(cand)
    # no CnH2n+1 fragment may stand above a molecular ion
    if np.any(sig & (nominal > top) & (nominal % 14 == 1)):
        return True, None
    return True, (top - 2) // 14


__all__ = ["molecular_ion", "alkane_evidence", "MOL_ION_MIN", "ALKANE_M_MIN"]
