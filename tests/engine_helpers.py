"""Builders of synthetic libraries and runs for the engine tests (invented numbers)."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from matcher.store.snapshot import CompoundTable, build_snapshot

DATA = Path(__file__).resolve().parent / "data"


def synthetic_snapshot(ri, phase_class="nonpolar", masses=None, names=None, obs_per_compound=1, rng=None, spread=0.0):
    """A snapshot with one compound per value in ``ri``; optional repeated noisy observations."""
    ri = np.asarray(ri, dtype=float)
    m = len(ri)
    names = names if names is not None else [f"compound {i}" for i in range(m)]
    recs = [{"id": i + 1, "name": names[i], "nominal_mass": None if masses is None else float(masses[i])} for i in range(m)]
    comp = CompoundTable.from_records(recs)
    ids = np.repeat(np.arange(1, m + 1), obs_per_compound)
    vals = np.repeat(ri, obs_per_compound)
    if spread and rng is not None:
        vals = vals + rng.normal(0, spread, len(vals))
    return build_snapshot(comp, ids, np.array([phase_class] * len(ids)), vals)


def essential_oils():
    """Rows of tests/data/essential_oil_indices.csv (two published compilations, from memory)."""
    with open(DATA / "essential_oil_indices.csv", encoding="utf-8") as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


def oils_snapshot(column="ri_adams", phase_class="slightly-polar"):
    from matcher.chem.formula import nominal_mass

    rows = essential_oils()
    comp = CompoundTable.from_records(
        [{"id": i + 1, "name": r["name"], "formula": r["formula"], "cas": r["cas"]} for i, r in enumerate(rows)])
    snap = build_snapshot(comp, np.arange(1, len(rows) + 1), np.array([phase_class] * len(rows)),
                          np.array([float(r[column]) for r in rows]))
    return rows, snap, [nominal_mass(r["formula"]) for r in rows]


def top_of(shortlist_obj, n_peaks):
    """(top name per peak, top probability per peak) from a Shortlist."""
    c = shortlist_obj.columns
    top = c["rank"] == 1
    names = np.array([""] * n_peaks, dtype=object)
    prob = np.zeros(n_peaks)
    names[c["peak"][top]] = c["name"][top]
    prob[c["peak"][top]] = c["probability"][top]
    return names, prob


def expected_calibration_error(prob, correct, bins=10):
    """ECE of predicted top probabilities against hits (equal-width bins)."""
    prob = np.asarray(prob, float)
    correct = np.asarray(correct, bool)
    edges = np.linspace(0, 1, bins + 1)
    idx = np.clip(np.digitize(prob, edges[1:-1]), 0, bins - 1)
    ece = 0.0
    for b in range(bins):
        s = idx == b
        if s.any():
            ece += s.mean() * abs(prob[s].mean() - correct[s].mean())
    return ece
