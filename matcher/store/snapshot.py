"""The library snapshot: the house library read once into sorted NumPy arrays.

Screening and queries never touch the database per peak. The store reads all
active observations in one pass and hands them to :func:`build_snapshot`,
which summarises each (compound, class) pair into one *entry*:

* **centre** – the weighted median of the observations (a literature summary
  row with ``n`` = k counts k times). The median is robust: one typo'd value
  among three does not drag the centre.
* **spread** – the expected scatter of a *new* measurement of this compound
  around the centre:

  .. math::

     s = \\max(s_{obs}, s_{floor}(\\text{class})) \\cdot \\sqrt{1 + 1/N}

  where :math:`s_{obs}` combines the robust between-record scatter
  (1.4826 × weighted median absolute deviation) with the within-record
  spreads of literature summaries (``ri_sd``), :math:`N` is the total number
  of observations, and :math:`s_{floor}` is a per-class floor
  (:data:`SPREAD_FLOOR`, 0.15 × the default window: 1.5 units on non-polar columns, about the repeatability of one lab on one column; common practice, no single source). The factor
  :math:`\\sqrt{1+1/N}` is the usual predictive inflation for a centre
  estimated from N values: an entry that rests on one observation is 41 %
  wider than one resting on many.
* **count** – N.

Entries of each class are sorted by centre so that a tolerance window is two
``searchsorted`` calls.

>>> snap = build_snapshot(
...     compounds=CompoundTable.from_records([
...         {"id": 1, "name": "limonene", "formula": "C10H16"},
...         {"id": 2, "name": "linalool", "formula": "C10H18O"},
...     ]),
...     obs_compound_id=np.array([1, 1, 1, 2]),
...     obs_class=np.array(["nonpolar"] * 4),
...     obs_ri=np.array([1018.0, 1020.0, 1090.0, 1082.0]),
... )
>>> e = snap.entries("nonpolar")
>>> e.ri.tolist()
[1020.0, 1082.0]
>>> [int(x) for x in e.n]
[3, 1]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Iterable, Mapping, Sequence

import numpy as np

from matcher.chem.spectra import ReferenceSpectra
from matcher.classes import DEFAULT_WINDOWS, PHASE_CLASSES

#: Per-class floor of the library spread (index units): 0.15 × the default window.
SPREAD_FLOOR: dict[str, float] = {k: 0.15 * v for k, v in DEFAULT_WINDOWS.items()}

#: Consistency constant of the median absolute deviation for a normal distribution (1 / Φ⁻¹(3/4)).
MAD_TO_SD = 1.4826


@dataclass(frozen=True)
class CompoundTable:
    """Per-compound attributes, aligned arrays; row ``i`` is compound ``ids[i]``."""

    ids: np.ndarray  # int64 store ids
    name: np.ndarray  # object (str)
    cas: np.ndarray  # object (str, "" when unknown)
    formula: np.ndarray  # object (str, "" when unknown)
    nominal_mass: np.ndarray  # float64, NaN when the formula is unknown
    carbons: np.ndarray  # int64 carbon count from the formula, -1 when unknown
    series: np.ndarray  # object (str, "" when not in a homologous series)
    key_ions: tuple[tuple[int, ...], ...]
    synonyms: tuple[tuple[str, ...], ...]

    def __len__(self) -> int:
        return len(self.ids)

    @classmethod
    def from_records(cls, records: Iterable[Mapping]) -> "CompoundTable":
        """Build from dicts with keys id, name and optional cas, formula,
        nominal_mass, series, key_ions (sequence of int), synonyms (sequence of str)."""
        from matcher.chem.formula import carbon_count, nominal_mass as _mass

        recs = list(records)
        masses, carbons = [], []
        for r in recs:
            f = r.get("formula") or ""
            m = r.get("nominal_mass")
            if m is None or (isinstance(m, float) and np.isnan(m)):
                m = _mass(f) if f else np.nan
            masses.append(float(m) if m is not None else np.nan)
            carbons.append(carbon_count(f) if f else -1)
        return cls(
            ids=np.array([int(r["id"]) for r in recs], dtype=np.int64),
            name=np.array([str(r["name"]) for r in recs], dtype=object),
            cas=np.array([r.get("cas") or "" for r in recs], dtype=object),
            formula=np.array([r.get("formula") or "" for r in recs], dtype=object),
            nominal_mass=np.array(masses, dtype=np.float64),
            carbons=np.array(carbons, dtype=np.int64),
            series=np.array([r.get("series") or "" for r in recs], dtype=object),
            key_ions=tuple(tuple(int(i) for i in (r.get("key_ions") or ())) for r in recs),
            synonyms=tuple(tuple(r.get("synonyms") or ()) for r in recs),
        )


@dataclass(frozen=True)
class ClassEntries:
    """One class's entries, sorted by ``ri``; ``compound`` indexes the CompoundTable rows."""

    phase_class: str
    ri: np.ndarray  # float64 centre, ascending
    sd: np.ndarray  # float64 spread (floored, inflated for small N)
    n: np.ndarray  # int64 number of observations
    compound: np.ndarray  # int64 row in CompoundTable
    predicted: np.ndarray  # bool: homologue prediction, not a measured value

    def __len__(self) -> int:
        return len(self.ri)

    @classmethod
    def empty(cls, phase_class: str) -> "ClassEntries":
        z = np.zeros(0)
        return cls(phase_class, z, z.copy(), z.astype(np.int64), z.astype(np.int64), z.astype(bool))


@dataclass(frozen=True)
class Observations:
    """The active observations behind a snapshot (for self-checks such as ``matcher evaluate``)."""

    compound: np.ndarray  # int64 CompoundTable row
    phase_class: np.ndarray  # object
    ri: np.ndarray
    n: np.ndarray  # weights ≥ 1
    sd: np.ndarray  # NaN where a record has no spread


@dataclass(frozen=True)
class LibrarySnapshot:
    """The whole library as arrays: compounds plus per-class sorted entries."""

    compounds: CompoundTable
    classes: Mapping[str, ClassEntries]
    source: str = ""  # masked location of the library it was read from
    revision: str = ""  # store revision marker, for provenance
    observations: "Observations | None" = field(default=None, repr=False, compare=False)
    #: the reference mass spectra (:class:`matcher.chem.spectra.ReferenceSpectra`), None when the library holds none
    spectra: "ReferenceSpectra | None" = field(default=None, repr=False, compare=False)
    _name_index: dict = field(default_factory=dict, repr=False, compare=False)

    def entries(self, phase_class: str) -> ClassEntries:
        return self.classes.get(phase_class) or ClassEntries.empty(phase_class)

    def row_of_id(self, compound_id: int) -> int:
        """CompoundTable row of a store id (KeyError if absent)."""
        if not self._name_index:
            self._name_index.update({int(i): k for k, i in enumerate(self.compounds.ids)})
        return self._name_index[int(compound_id)]

    @property
    def size(self) -> int:
        return sum(len(e) for e in self.classes.values())


def _weighted_median(values: np.ndarray, weights: np.ndarray) -> float:
    order = np.argsort(values, kind="stable")
    v, w = values[order], weights[order]
    cum = np.cumsum(w)
    half = cum[-1] / 2.0
    k = int(np.searchsorted(cum, half, side="left"))
    if math.isclose(cum[k], half, rel_tol=1e-9, abs_tol=1e-12) and k + 1 < len(v):
        return float((v[k] + v[k + 1]) / 2.0)
    return float(v[k])


def summarise(
    ri: np.ndarray, n: np.ndarray, sd: np.ndarray, floor: float
) -> tuple[float, float, int]:
    """Centre, spread and count of one compound's observations in one class.

    ``ri``, ``n`` (weights, ≥ 1) and ``sd`` (NaN where a record has no spread).

    Worked example: values 1000, 1002, 1040 → median 1002, absolute deviations
    2, 0, 38 → MAD 2 → 1.4826 × 2 = 2.965, inflated by √(1 + 1/3):

    >>> c, s, n = summarise(np.array([1000.0, 1002.0, 1040.0]), np.ones(3), np.full(3, np.nan), 2.5)
    >>> c, round(s, 3), n
    (1002.0, 3.424, 3)
    """
    ri = np.asarray(ri, dtype=float)
    n = np.asarray(n, dtype=float)
    sd = np.asarray(sd, dtype=float)
    total = float(n.sum())
    centre = _weighted_median(ri, n)
    between = MAD_TO_SD * _weighted_median(np.abs(ri - centre), n) if len(ri) > 1 else 0.0
    known = ~np.isnan(sd) & (n > 1)
    within = 0.0
    if known.any():
        dof = n[known] - 1.0
        within = float(np.sqrt(np.sum(dof * sd[known] ** 2) / np.sum(dof)))
    elif (~np.isnan(sd)).any():
        within = float(np.nanmax(sd))
    s_obs = float(np.hypot(between, within))
    spread = max(s_obs, floor) * np.sqrt(1.0 + 1.0 / total)
    return centre, float(spread), int(round(total))


def build_snapshot(
    compounds: CompoundTable,
    obs_compound_id: np.ndarray,
    obs_class: np.ndarray,
    obs_ri: np.ndarray,
    obs_n: np.ndarray | None = None,
    obs_sd: np.ndarray | None = None,
    *,
    source: str = "",
    revision: str = "",
    spectra: "ReferenceSpectra | None" = None,
) -> LibrarySnapshot:
    """Summarise active observations into per-class sorted entries (see module doc)."""
    obs_compound_id = np.asarray(obs_compound_id, dtype=np.int64)
    obs_class = np.asarray(obs_class, dtype=object)
    obs_ri = np.asarray(obs_ri, dtype=np.float64)
    m = len(obs_ri)
    obs_n = np.ones(m) if obs_n is None else np.where(np.isnan(np.asarray(obs_n, float)), 1.0, np.asarray(obs_n, float))
    obs_n = np.maximum(obs_n, 1.0)
    obs_sd = np.full(m, np.nan) if obs_sd is None else np.asarray(obs_sd, dtype=np.float64)

    id_to_row = {int(i): k for k, i in enumerate(compounds.ids)}
    rows = np.array([id_to_row[int(i)] for i in obs_compound_id], dtype=np.int64)

    classes: dict[str, ClassEntries] = {}
    for cls in PHASE_CLASSES:
        sel = np.flatnonzero(obs_class == cls)
        if len(sel) == 0:
            continue
        r = rows[sel]
        order = np.argsort(r, kind="stable")
        sel, r = sel[order], r[order]
        uniq, starts = np.unique(r, return_index=True)
        bounds = list(starts[1:]) + [len(r)]
        centre = np.empty(len(uniq))
        spread = np.empty(len(uniq))
        count = np.empty(len(uniq), dtype=np.int64)
        floor = SPREAD_FLOOR[cls]
        for j, (a, b) in enumerate(zip(starts, bounds)):
            idx = sel[a:b]
            centre[j], spread[j], count[j] = summarise(obs_ri[idx], obs_n[idx], obs_sd[idx], floor)
        o = np.argsort(centre, kind="stable")
        classes[cls] = ClassEntries(
            phase_class=cls,
            ri=centre[o],
            sd=spread[o],
            n=count[o],
            compound=uniq[o].astype(np.int64),
            predicted=np.zeros(len(o), dtype=bool),
        )
    raw = Observations(rows, obs_class, obs_ri, obs_n, obs_sd)
    return LibrarySnapshot(compounds=compounds, classes=classes, source=source, revision=revision, observations=raw,
                           spectra=spectra)


def with_entries(snapshot: LibrarySnapshot, phase_class: str, extra: ClassEntries) -> LibrarySnapshot:
    """A copy of the snapshot with ``extra`` entries merged (sorted) into one class."""
    base = snapshot.entries(phase_class)
    ri = np.concatenate([base.ri, extra.ri])
    o = np.argsort(ri, kind="stable")
    merged = ClassEntries(
        phase_class,
        ri[o],
        np.concatenate([base.sd, extra.sd])[o],
        np.concatenate([base.n, extra.n])[o],
        np.concatenate([base.compound, extra.compound])[o],
        np.concatenate([base.predicted, extra.predicted])[o],
    )
    classes = dict(snapshot.classes)
    classes[phase_class] = merged
    return LibrarySnapshot(snapshot.compounds, classes, snapshot.source, snapshot.revision,
                           observations=snapshot.observations, spectra=snapshot.spectra)


__all__: Sequence[str] = [
    "SPREAD_FLOOR",
    "CompoundTable",
    "ClassEntries",
    "LibrarySnapshot",
    "Observations",
    "build_snapshot",
    "summarise",
    "with_entries",
]
