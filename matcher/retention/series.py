"""Reference series: how each standard of a ladder gets its assigned index.

============  ===========================  =================================================
series        ladder column                assigned index
============  ===========================  =================================================
``alkanes``   ``carbons`` (whole numbers)  100 × carbons (Kováts 1958: the definition)
``fame``      ``carbons`` (whole numbers)  100 × chain length, i.e. ECL × 100
``pah``       ``name`` or ``index``        Lee index: naphthalene 200, phenanthrene 300,
                                           chrysene 400, picene 500
``custom``    ``index``                    as given
============  ===========================  =================================================

* **n-alkanes**: the index of an n-alkane with *n* carbons is 100·n on every
  stationary phase (E. Kováts, Helv. Chim. Acta 41, 1915, 1958).
* **Fatty-acid methyl esters**: the equivalent chain length (ECL) of a FAME
  is the chain length of the hypothetical saturated straight-chain FAME that
  would elute with it; the standards are the saturated straight-chain FAMEs
  themselves, ECL = their chain length (T. K. Miwa, K. L. Mikolajczak,
  F. R. Earle and I. A. Wolff, Anal. Chem. 32, 1739-1742, 1960). *Our
  choice*: the index scale of a ``fame`` calibration is **ECL × 100**, so that
  the same tolerance windows and library columns work; divide by 100 to read
  an ECL (methyl hexadecanoate = 1600 = ECL 16.00).
* **PAHs**: the Lee retention index with naphthalene 200, phenanthrene 300,
  chrysene 400 and picene 500 (M. L. Lee, D. L. Vassilaros, C. M. White and
  M. Novotny, Anal. Chem. 51, 768-773, 1979).
* **custom**: any series; each standard carries its assigned ``index``.

>>> assigned_index("alkanes", carbons=[8, 9, 12]).tolist()
[800.0, 900.0, 1200.0]
>>> assigned_index("pah", names=["Naphthalene", "phenanthrene", "CHRYSENE"]).tolist()
[200.0, 300.0, 400.0]
>>> SERIES["fame"].scale
'ECL x 100'
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matcher.errors import MatcherError


@dataclass(frozen=True)
class Series:
    """A reference series: its key, description, index scale and nominal step between members."""

    key: str
    label: str
    scale: str
    step: float | None  # nominal index step between consecutive members (None: no nominal step)
    source: str


SERIES: dict[str, Series] = {
    "alkanes": Series("alkanes", "n-alkanes", "retention index (100 x carbon number)", 100.0,
                      "Kovats, Helv. Chim. Acta 41, 1915 (1958)"),
    "fame": Series("fame", "saturated straight-chain fatty-acid methyl esters", "ECL x 100", 100.0,
                   "Miwa et al., Anal. Chem. 32, 1739 (1960)"),
    "pah": Series("pah", "polycyclic aromatic hydrocarbons", "Lee retention index", 100.0,
                  "Lee et al., Anal. Chem. 51, 768 (1979)"),
    "custom": Series("custom", "user-defined series", "assigned index", None, "as given in the ladder file"),
}

#: Lee retention index of the PAH standards (Lee et al. 1979).
LEE_INDEX: dict[str, float] = {
    "naphthalene": 200.0,
    "phenanthrene": 300.0,
    "chrysene": 400.0,
    "picene": 500.0,
}


def check_series(key: str) -> Series:
    """The :class:`Series` for a key (case ignored), or a one-line error naming the keys.

    >>> check_series("FAME").label
    'saturated straight-chain fatty-acid methyl esters'
    """
    k = str(key).strip().lower()
    if k not in SERIES:
        raise MatcherError(f"unknown reference series {key!r}; use one of {', '.join(SERIES)}")
    return SERIES[k]


def lee_index(name: str) -> float | None:
    """Lee retention index of a PAH standard by name (None if it is not one of the four) [1]_.

    Parameters
    ----------
    name : str
        Naphthalene, phenanthrene, chrysene or picene (case and spacing ignored)

    Returns
    -------
    index : float or None
        200, 300, 400 or 500, [-]

    Examples
    --------
    The four standards as defined in [1]_:

    >>> [lee_index(n) for n in ("naphthalene", "Phenanthrene", "chrysene", "picene", "pyrene")]
    [200.0, 300.0, 400.0, 500.0, None]

    References
    ----------
    .. [1] Lee, M. L., D. L. Vassilaros, C. M. White, and M. Novotny.
       "Retention Indices for Programmed-Temperature Capillary-Column Gas
       Chromatography of Polycyclic Aromatic Hydrocarbons." Analytical
       Chemistry 51, no. 6 (1979): 768-73.
    """
    return LEE_INDEX.get(" ".join(str(name).lower().split()))


def assigned_index(key: str, *, carbons=None, index=None, names=None) -> np.ndarray:
    r"""Assigned index of each standard of a reference series (values not validated; see :mod:`matcher.retention.ladder`).

    .. math::

        I = 100 \, n_C \;\text{(n-alkanes [1]_; FAMEs as ECL × 100 [2]_)}, \qquad
        I = I_{Lee} \;\text{(PAHs [3]_)}

    Parameters
    ----------
    key : str
        ``alkanes``, ``fame``, ``pah`` or ``custom``
    carbons : array-like, optional
        Chain lengths (alkanes, fame), [-]
    index : array-like, optional
        Assigned indices given directly (any series), [-]
    names : sequence of str, optional
        Standard names (pah)

    Returns
    -------
    index : numpy.ndarray
        Assigned index of each standard, [-]

    Examples
    --------
    By definition an n-alkane with n carbons has index 100 n on every phase [1]_;
    methyl hexadecanoate has ECL 16.00 [2]_:

    >>> assigned_index("alkanes", carbons=[8, 9, 12]).tolist(), assigned_index("fame", carbons=[16]).tolist()
    ([800.0, 900.0, 1200.0], [1600.0])

    References
    ----------
    .. [1] Kováts, E. Helvetica Chimica Acta 41 (1958): 1915-32.
    .. [2] Miwa, T. K., K. L. Mikolajczak, F. R. Earle, and I. A. Wolff.
       "Gas Chromatographic Characterization of Fatty Acids. Identification
       Constants for Mono- and Dicarboxylic Methyl Esters." Analytical
       Chemistry 32, no. 13 (1960): 1739-42.
    .. [3] Lee, M. L., et al. Analytical Chemistry 51 (1979): 768-73.
    """
    s = check_series(key)
    if index is not None:
        return np.asarray(index, dtype=np.float64)
    if s.key in ("alkanes", "fame"):
        if carbons is None:
            raise MatcherError(f"series {s.key!r} needs a 'carbons' column (or an 'index' column)")
        return 100.0 * np.asarray(carbons, dtype=np.float64)
    if s.key == "pah":
        if names is None:
            raise MatcherError("series 'pah' needs a 'name' column (naphthalene, phenanthrene, chrysene, picene) or an 'index' column")
        vals = [lee_index(n) for n in names]
        bad = [n for n, v in zip(names, vals) if v is None]
        if bad:
            raise MatcherError(f"not a Lee-index standard: {bad[0]!r}; give an 'index' column for other PAHs")
        return np.asarray(vals, dtype=np.float64)
    raise MatcherError("a custom series needs an 'index' column giving each standard's assigned index")


__all__ = ["Series", "SERIES", "LEE_INDEX", "check_series", "lee_index", "assigned_index"]
