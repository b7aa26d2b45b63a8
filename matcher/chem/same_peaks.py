"""When two stored reference spectra are the same spectrum (merging libraries, checking one).

A library should not hold one spectrum twice for one compound: the spectral
evidence learns how alike *replicate* spectra of one compound are from every
pair of a compound's spectra (:mod:`matcher.identify.spectral_evidence`), and a
copy is a "replicate" with similarity exactly 1 that makes real replicates look
worse than they are. So ``matcher library merge`` skips a spectrum the compound
already holds, and ``matcher library check`` lists copies.

**The rule** (ours): two spectra are the same when, after

* dropping peaks of intensity 0 (they carry nothing),
* rounding m/z to :data:`MZ_DECIMALS` decimals (0.01 u), and
* expressing intensities in per cent of the spectrum's base peak,

they list the same m/z values and every relative intensity agrees within
:data:`INTENSITY_TOLERANCE` percentage points. The tolerance covers one
spectrum kept as relative intensities rounded to one decimal (0–100, error up to
0.05) and the other rounded to whole numbers on a 0–999 scale (error up to 0.05
points), which is how the same reference travels between programs (common
practice, no source). Two genuine replicate measurements differ by far more
(ion-counting noise alone moves small peaks by several per cent).
Provenance (source, title, file) is not part of the rule: the same peaks held
under two sources are still one spectrum.

>>> import numpy as np
>>> a = (np.array([41.0, 68.0, 93.0]), np.array([12.0, 100.0, 45.0]))
>>> b = (np.array([41.0, 68.0, 93.0]), np.array([120.0, 999.0, 450.0]))   # same peaks on a 0-999 scale
>>> same_peaks(a, b)
True
>>> same_peaks(a, (np.array([41.0, 68.0, 93.0]), np.array([14.0, 100.0, 45.0])))   # a replicate
False
>>> same_peaks(a, (np.array([41.0, 67.0, 93.0]), np.array([12.0, 100.0, 45.0])))   # another m/z
False
"""

from __future__ import annotations

import numpy as np

#: m/z are compared after rounding to this many decimals (0.01 u)
MZ_DECIMALS = 2

#: largest difference of a relative intensity (percentage points of the base peak) still "the same"
INTENSITY_TOLERANCE = 0.1


def relative_peaks(spectrum) -> tuple[np.ndarray, np.ndarray]:
    """``(mz, intensity)`` as compared: zero peaks dropped, m/z rounded, intensities in % of the base peak.

    A spectrum whose intensities are all 0 gives two empty arrays.

    >>> mz, rel = relative_peaks((np.array([41.004, 68.0, 70.0]), np.array([50.0, 200.0, 0.0])))
    >>> mz.tolist(), rel.tolist()
    ([41.0, 68.0], [25.0, 100.0])
    """
    mz, y = (np.asarray(v, dtype=np.float64) for v in spectrum)
    keep = y > 0
    mz, y = mz[keep], y[keep]
    if not len(y):
        return mz, y
    order = np.argsort(mz, kind="stable")
    return np.round(mz[order], MZ_DECIMALS), 100.0 * y[order] / y.max()


def same_peaks(a, b, *, tolerance: float = INTENSITY_TOLERANCE) -> bool:
    """True when spectra ``a`` and ``b`` (each ``(mz, intensity)``) are the same spectrum by the module's rule."""
    ma, ya = relative_peaks(a)
    mb, yb = relative_peaks(b)
    if len(ma) != len(mb) or not np.array_equal(ma, mb):
        return False
    return bool(np.all(np.abs(ya - yb) <= tolerance + 1e-9))


__all__ = ["MZ_DECIMALS", "INTENSITY_TOLERANCE", "relative_peaks", "same_peaks"]
