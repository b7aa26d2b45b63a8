"""One unknown against the house library: the importable form of ``matcher query``.

>>> from matcher.snapshot import CompoundTable, build_snapshot
>>> snap = build_snapshot(
...     CompoundTable.from_records([{"id": 1, "name": "limonene", "formula": "C10H16"},
...                                 {"id": 2, "name": "decane", "formula": "C10H22"}]),
...     np.array([1, 1, 2]), np.array(["slightly-polar"] * 3), np.array([1029.0, 1031.0, 1000.0]))
>>> answer = query(1031, "slightly-polar", mol_ion=136, snapshot=snap)
>>> [c["name"] for c in answer["candidates"]]
['limonene']
>>> round(sum(c["probability"] for c in answer["candidates"]) + answer["not_in_library"], 9)
1.0
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from . import CAUTION
from .candidates import window_description
from .classes import check_class
from .evidence import DEFAULT_MEASUREMENT_SD, DEFAULT_PRESENCE, Model
from .unlisted import UnlistedField, crowding_density
from .shortlist import PeakInput, Shortlist, neighbour_of, prepare, shortlist
from .snapshot import LibrarySnapshot


def _f(v, nd=4):
    v = float(v)
    return None if not np.isfinite(v) else round(v, nd) + 0.0  # + 0.0 turns -0.0 into 0.0


def candidate_records(sl: Shortlist, rows: np.ndarray) -> list[dict]:
    """JSON-ready candidate dicts (with an ``evidence`` object) for shortlist rows."""
    c = sl.columns
    out = []
    for i in rows:
        if c["rank"][i] == 0:
            continue
        out.append({
            "rank": int(c["rank"][i]),
            "name": str(c["name"][i]),
            "cas": str(c["cas"][i]) or None,
            "formula": str(c["formula"][i]) or None,
            "library_ri": _f(c["library_ri"][i], 2),
            "delta_ri": _f(c["delta_ri"][i], 2),
            "score": _f(c["score"][i], 3),
            "probability": _f(c["probability"][i], 12),
            "flags": [f for f in str(c["flags"][i]).split(";") if f],
            "evidence": {
                "index": _f(c["ev_index"][i], 3),
                "mol_ion": _f(c["ev_mol_ion"][i], 3),
                "ions": _f(c["ev_ions"][i], 3),
                "hit": _f(c["ev_hit"][i], 3),
                "library_sd": _f(c["library_sd"][i], 3),
                "library_n": int(c["library_n"][i]),
                "combined_sd": _f(c["sd"][i], 3),
                "nominal_mass": _f(c["nominal_mass"][i], 0),
                "cross_class": bool(c["cross_class"][i]),
                "predicted": bool(c["predicted"][i]),
            },
        })
    return out


def query(
    ri: float,
    phase_class: str,
    *,
    db: str | None = None,
    snapshot: LibrarySnapshot | None = None,
    window: float | None = None,
    window_percent: float | None = None,
    mol_ion: float | None = None,
    ions: Sequence[int] | None = None,
    hit: str | None = None,
    hit_score: float | None = None,
    top: int | None = None,
    fallback: bool = False,
    homologues: bool = False,
    measurement_sd: float | None = None,
    presence: float = DEFAULT_PRESENCE,
    crowding: str | float | None = None,
) -> dict:
    """Ranked shortlist for one index; returns the document ``matcher query --json`` prints.

    Candidates' ``probability`` plus ``not_in_library`` sum to 1 over the
    whole window (``top`` only shortens the list). Without a run the
    not-in-library alternative uses the crowding prior (``crowding``: a name
    of :data:`matcher.unlisted.CROWDING` or unlisted peaks per 100 index
    units) and each listed compound the presence prior ``presence``.
    """
    from .limits import check_mol_ion, check_ri, check_sd

    phase_class = check_class(phase_class)
    ri = check_ri(ri, "retention index")
    if measurement_sd is not None:
        measurement_sd = check_sd(measurement_sd)
    if mol_ion is not None:
        mol_ion = check_mol_ion(mol_ion)
    if snapshot is None:
        from .store.snapshot_loader import load_snapshot

        snapshot = load_snapshot(db)
    home = prepare(snapshot, phase_class, homologues=homologues)
    neighbour = neighbour_of(snapshot, phase_class) if fallback else None
    sd = DEFAULT_MEASUREMENT_SD[phase_class] if measurement_sd is None else float(measurement_sd)
    peaks = PeakInput(
        np.array([ri]),
        mol_ion=None if mol_ion is None else np.array([float(mol_ion)]),
        ions=None if not ions else [tuple(int(i) for i in ions)],
        hit=None if not hit else np.array([hit], dtype=object),
        hit_score=None if hit_score is None else np.array([float(hit_score)]),
    )
    lam0 = crowding_density(crowding)
    model = Model(sd, presence=float(presence), unlisted=UnlistedField.flat(lam0))
    sl = shortlist(home, peaks, model, window=window, window_percent=window_percent,
                   top=top, neighbour=neighbour)
    rows = np.arange(len(sl.columns["peak"]))
    doc = {
        "ri": ri,
        "class": phase_class,
        "window": window_description(phase_class, window, window_percent) | {"half_width": _f(sl.window[0], 3)},
        "candidates": candidate_records(sl, rows),
        "not_in_library": _f(sl.not_in_library[0], 12),
        "candidates_in_window": int(sl.candidate_count[0]),
        "model": {"index_scatter": sd, "presence": float(presence), "unlisted_per_100": round(lam0 * 100, 3)},
        "library": {"location": snapshot.source, "revision": snapshot.revision, "entries": len(home.entries)},
        "notes": sl.notes,
        "caution": CAUTION,
    }
    return doc
