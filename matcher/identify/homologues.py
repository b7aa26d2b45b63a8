"""Homologue proposals: missing members of a homologous series, predicted.

Along a homologous series each added CH2 raises the retention index by about
100 units on any phase (a fact of the trade, no single source; it is exact
for the n-alkanes by the definition of the index). Where the library holds
two or more members of a series (compounds sharing a ``series`` label, their
carbon numbers read from the formulas) in a class, the increment is fitted
by least squares, ``RI = a + b·C``, and the missing members between and just
beyond the known ones are proposed at ``a + b·C``:

.. math::

   s_{pred} = \\max(s_{fit}, s_{min}) \\cdot \\sqrt{1 + 1/k} + 2\\,d

with :math:`s_{fit}` the residual standard deviation of the fit (0 for two
members), :math:`s_{min}` = :data:`PREDICTION_SD_MIN`, k members, and d the
distance in carbons to the nearest member beyond the first. Predicted
entries carry ``predicted = True`` and a reduced prior
(:data:`matcher.identify.evidence.PREDICTED_PRIOR`), so they never outrank a measured
value without stronger evidence.

>>> fit_increment(np.array([6, 7, 9]), np.array([868.0, 969.0, 1171.0]))[:2]
(262.0, 101.0)
"""

from __future__ import annotations

import numpy as np

from matcher.chem.names import homologue_name

from matcher.chem.formula import parse_formula, hill_formula
from matcher.store.snapshot import ClassEntries, CompoundTable

PREDICTION_SD_MIN = 4.0
EXTEND_BEYOND = 1  # propose this many members beyond each end of the known ones


def fit_increment(carbons: np.ndarray, ri: np.ndarray) -> tuple[float, float, float]:
    """Least-squares ``RI = a + b·C``; returns (a, b, residual sd)."""
    c = np.asarray(carbons, dtype=float)
    y = np.asarray(ri, dtype=float)
    b, a = np.polyfit(c, y, 1)
    resid = y - (a + b * c)
    sd = float(np.sqrt(np.sum(resid**2) / (len(c) - 2))) if len(c) > 2 else 0.0
    return round(float(a), 6), round(float(b), 6), sd


def _shift_formula(formula: str, dc: int) -> str:
    counts = parse_formula(formula)
    counts["C"] = counts.get("C", 0) + dc
    counts["H"] = counts.get("H", 0) + 2 * dc
    return hill_formula("".join(f"{k}{v}" for k, v in counts.items() if v > 0))


def predict(entries: ClassEntries, compounds: CompoundTable) -> tuple[ClassEntries, CompoundTable]:
    """Predicted entries for the class and the compound table extended with their rows."""
    measured = ~entries.predicted
    series = compounds.series[entries.compound]
    carbons = compounds.carbons[entries.compound]
    new = {"ri": [], "sd": [], "name": [], "formula": [], "mass": [], "carbons": [], "series": []}
    for label in sorted({s for s in series[measured] if s}):
        sel = np.flatnonzero(measured & (series == label) & (carbons > 0))
        if len(sel) < 2:
            continue
        c = carbons[sel]
        uc = np.unique(c)
        if len(uc) < 2:
            continue
        a, b, s_fit = fit_increment(c, entries.ri[sel])
        if not (50.0 <= b <= 150.0):
            continue  # not behaving as a homologous series; propose nothing
        k = len(uc)
        wanted = [C for C in range(int(uc.min()) - EXTEND_BEYOND, int(uc.max()) + EXTEND_BEYOND + 1) if C >= 1 and C not in set(uc.tolist())]
        for C in wanted:
            nearest = sel[np.argmin(np.abs(c - C))]
            dist = int(np.min(np.abs(uc - C)))
            base_formula = compounds.formula[entries.compound[nearest]]
            dc = C - int(carbons[nearest])
            try:
                formula = _shift_formula(base_formula, dc) if base_formula else ""
            except ValueError:
                formula = ""
            mass = compounds.nominal_mass[entries.compound[nearest]] + 14 * dc
            new["ri"].append(a + b * C)
            new["sd"].append(max(s_fit, PREDICTION_SD_MIN) * np.sqrt(1 + 1 / k) + 2.0 * max(dist - 1, 0))
            named = homologue_name(str(compounds.name[entries.compound[nearest]]), dc)
            new["name"].append(f"{named} (predicted)" if named else f"{label} C{C} (predicted)")
            new["formula"].append(formula)
            new["mass"].append(mass)
            new["carbons"].append(C)
            new["series"].append(label)
    m = len(new["ri"])
    if m == 0:
        return ClassEntries.empty(entries.phase_class), compounds
    start = len(compounds)
    ext = CompoundTable(
        ids=np.concatenate([compounds.ids, -np.arange(1, m + 1, dtype=np.int64) - start]),
        name=np.concatenate([compounds.name, np.array(new["name"], dtype=object)]),
        cas=np.concatenate([compounds.cas, np.array([""] * m, dtype=object)]),
        formula=np.concatenate([compounds.formula, np.array(new["formula"], dtype=object)]),
        nominal_mass=np.concatenate([compounds.nominal_mass, np.array(new["mass"], dtype=float)]),
        carbons=np.concatenate([compounds.carbons, np.array(new["carbons"], dtype=np.int64)]),
        series=np.concatenate([compounds.series, np.array(new["series"], dtype=object)]),
        key_ions=compounds.key_ions + ((),) * m,
        synonyms=compounds.synonyms + ((),) * m,
    )
    extra = ClassEntries(
        entries.phase_class,
        np.array(new["ri"], dtype=float),
        np.array(new["sd"], dtype=float),
        np.zeros(m, dtype=np.int64),
        np.arange(start, start + m, dtype=np.int64),
        np.ones(m, dtype=bool),
    )
    return extra, ext
