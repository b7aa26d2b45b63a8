"""Looking into the house library: find, show, stats and check.

* :func:`find` ranks compounds by how well a text matches their name, a
  synonym, the CAS number or the formula (rapidfuzz, via
  :func:`matcher.chem.names.rank`), tolerant of typos and of spelling variants.
* :func:`show` gives one compound with its per-class summary, computed by
  :func:`matcher.store.snapshot.summarise` exactly as screening sees it, and every
  observation with its provenance.
* :func:`stats` counts entries per class and how densely the index range is
  covered (entries per 100 index units).
* :func:`check` lists integrity problems; an empty list means healthy.
"""

from __future__ import annotations

import math
import re
from dataclasses import asdict, dataclass

from matcher.errors import LibraryError


@dataclass(frozen=True)
class Hit:
    """One :func:`find` result."""

    name: str
    cas: str
    formula: str
    name_similarity: float  # 0-100: how close the text is to the matched name, synonym, CAS number or formula
    matched: str  # the text that matched
    field: str  # name | synonym | cas | formula

    def as_dict(self) -> dict:
        return asdict(self)


_CAS_LIKE = re.compile(r"^\s*\d[\d\s-]*\d\s*$")
_FORMULA_LIKE = re.compile(r"^\s*(?:[A-Z][a-z]?\d*){2,}\s*$")


#: Name similarity (0-100) from which ``library find`` lists a compound (our own choice: a name with one or
#: two letters wrong, or a clear part of a name, scores above it; an unrelated name with some letters in
#: common scores 50-82 and is left out).
FIND_SIMILARITY = 85.0


def find(db: str | None, text: str, limit: int = 10) -> list[Hit]:
    """Compounds ranked by similarity of ``text`` to their names, synonyms, CAS number or formula.

    Only genuinely close names are listed (similarity at least :data:`FIND_SIMILARITY`); Greek letters
    and their shorthand (``a-``, ``b-``) are read alike, as when adding or confirming a compound.
    """
    from matcher.chem.names import rank
    from matcher.store.snapshot_loader import load_snapshot

    snap = load_snapshot(db)
    ct = snap.compounds
    choices: list[str] = []
    owner: list[tuple[int, str]] = []
    for i in range(len(ct)):
        choices.append(ct.name[i]); owner.append((i, "name"))
        for s in ct.synonyms[i]:
            choices.append(s); owner.append((i, "synonym"))
    best: dict[int, tuple[float, str, str]] = {}

    def offer(i: int, score: float, matched: str, fld: str) -> None:
        if i not in best or score > best[i][0]:
            best[i] = (score, matched, fld)

    query = str(text).strip()
    if not query:
        return []
    if _CAS_LIKE.match(query):
        from rapidfuzz import fuzz

        q = re.sub(r"\D", "", query)
        for i in range(len(ct)):
            if ct.cas[i]:
                sc = float(fuzz.ratio(q, ct.cas[i].replace("-", "")))
                if sc >= 75:
                    offer(i, sc, ct.cas[i], "cas")
    if _FORMULA_LIKE.match(query):
        from matcher.chem.formula import hill_formula

        try:
            hf = hill_formula(query)
        except ValueError:
            hf = None
        if hf:
            for i in range(len(ct)):
                if ct.formula[i] == hf:
                    offer(i, 100.0, ct.formula[i], "formula")
    for j, score in rank(query, choices, limit=max(limit * 5, 50)):
        i, fld = owner[j]
        offer(i, score, choices[j], fld)
    ordered = sorted(((i, v) for i, v in best.items() if v[0] >= FIND_SIMILARITY),
                     key=lambda kv: (-kv[1][0], ct.name[kv[0]].lower()))
    return [
        Hit(name=ct.name[i], cas=ct.cas[i], formula=ct.formula[i], name_similarity=round(sc, 1), matched=m, field=f)
        for i, (sc, m, f) in ordered[:limit]
    ]


def _compound_by_name(session, name: str):
    from sqlalchemy import select

    from matcher.chem.cas import normalise_cas
    from matcher.chem.names import matching_key
    from matcher.store.models import Compound, Synonym

    key = matching_key(name)
    c = session.scalar(select(Compound).where(Compound.key == key))
    if c is None:
        syn = session.scalar(select(Synonym).where(Synonym.key == key))
        c = syn.compound if syn is not None else None
    if c is None:
        try:
            cas = normalise_cas(name)
        except ValueError:
            cas = None
        if cas:
            c = session.scalar(select(Compound).where(Compound.cas == cas).order_by(Compound.id))
    return c


def show(db: str | None, name: str) -> dict:
    """One compound (by name, synonym or CAS): identity, per-class summary and observations."""
    import numpy as np
    from sqlalchemy.orm import Session

    from matcher.store.snapshot import SPREAD_FLOOR, summarise
    from matcher.store.database import open_library

    engine = open_library(db)
    with Session(engine) as s:
        c = _compound_by_name(s, name)
        if c is None:
            close = [h.name for h in find(db, name, limit=5)]
            hint = f"; close names: {', '.join(close)}" if close else ""
            raise LibraryError(f"no compound {name!r} in the library{hint}")
        obs = list(c.observations)
        classes: dict[str, dict] = {}
        from matcher.classes import PHASE_CLASSES

        for cls in [k for k in PHASE_CLASSES if any(o.active and o.phase_class == k for o in obs)]:
            sel = [o for o in obs if o.active and o.phase_class == cls]
            ri = np.array([o.ri for o in sel], float)
            n = np.array([o.n if o.n is not None else 1 for o in sel], float)
            sd = np.array([o.ri_sd if o.ri_sd is not None else np.nan for o in sel], float)
            centre, spread, count = summarise(ri, n, sd, SPREAD_FLOOR[cls])
            classes[cls] = {"ri": centre, "sd": spread, "n": count}
        return {
            "name": c.name, "cas": c.cas or "", "formula": c.formula or "", "nominal_mass": c.nominal_mass,
            "inchikey": c.inchikey or "", "smiles": c.smiles or "", "series": c.series or "",
            "key_ions": [int(i) for i in (c.key_ions or "").split()], "notes": c.notes or "",
            "synonyms": [x.name for x in c.synonyms],
            "classes": classes,
            "observations": [
                {
                    "id": o.id, "phase_class": o.phase_class, "ri": o.ri, "mode": o.mode,
                    "ri_sd": o.ri_sd, "n": o.n, "phase": o.phase.name if o.phase else "",
                    "source": o.source or "", "analyst": o.analyst or "", "date": o.date or "",
                    "active": bool(o.active), "retired_reason": o.retired_reason or "",
                    "added": o.created_at,
                }
                for o in obs
            ],
            "spectra": [
                {"id": sp.id, "title": sp.title, "peaks": sp.n_peaks, "base_peak": _base_peak(sp.peaks),
                 "source": sp.source or "", "origin": sp.origin or "", "owner": sp.owner or "",
                 "file": sp.file or "", "analyst": sp.analyst or "", "added": sp.created_at}
                for sp in c.spectra
            ],
        }


def _base_peak(peaks: str) -> float | None:
    """The m/z of the most intense peak of a stored spectrum text."""
    from matcher.io.spectrum_text import parse_spectrum_text

    got = parse_spectrum_text(peaks)
    return None if got is None else float(got[0][int(got[1].argmax())])


def stats(db: str | None) -> dict:
    """Counts per class and coverage of the index range (entries per 100 units, widest gap)."""
    import numpy as np

    from matcher.classes import PHASE_CLASSES
    from matcher.store.snapshot_loader import load_snapshot

    snap = load_snapshot(db)
    per_class = {}
    for cls in PHASE_CLASSES:
        e = snap.entries(cls)
        if not len(e):
            continue
        lo, hi = float(e.ri[0]), float(e.ri[-1])
        span = hi - lo
        gaps = np.diff(e.ri)
        g = int(np.argmax(gaps)) if len(gaps) else None
        per_class[cls] = {
            "compounds": int(len(e)),
            "observations": int(e.n.sum()),
            "ri_min": round(lo, 1),
            "ri_max": round(hi, 1),
            "per_100_units": round(100.0 * len(e) / span, 2) if span > 0 else None,
            "widest_gap": None if g is None else {"from": round(float(e.ri[g]), 1), "to": round(float(e.ri[g + 1]), 1)},
        }
    return {
        "source": snap.source, "revision": snap.revision, "compounds": int(len(snap.compounds)),
        "entries": int(snap.size), "classes": per_class,
    }


def check(db: str | None, *, strict: bool = False) -> list[str]:
    """Integrity problems of the library, one line each (empty list: healthy).

    With ``strict``, a CAS number shared by two compounds is also listed (it may be
    deliberate, e.g. a table listing an isomer mixture under two names), and so are the
    reference-spectrum findings that may be deliberate (see :func:`_spectrum_problems`).
    """
    from sqlalchemy import text

    from matcher.chem.cas import normalise_cas
    from matcher.rules import MODES, PHASE_CLASSES
    from matcher.chem.formula import hill_formula, nominal_mass
    from matcher.chem.identifiers import is_inchikey
    from matcher.chem.names import matching_key
    from matcher.store.database import latest_version, open_library, schema_version

    from matcher.limits import MAX_N, MAX_SD
    from matcher.store.database import sqlite_file, probe_sqlite
    from matcher.location import mask_secrets, resolve

    problems: list[str] = []
    path = sqlite_file(resolve(db))
    if path:  # read-only and first: a damaged file is reported, never written to
        probe = probe_sqlite(path, source=mask_secrets(resolve(db)), check="full")
        if probe.integrity:
            return [f"integrity: {r}" for r in probe.integrity]
    engine = open_library(db, check="none")
    with engine.connect() as conn:
        if engine.dialect.name == "sqlite":
            for r in conn.exec_driver_sql("PRAGMA foreign_key_check").fetchall():
                problems.append(f"foreign key: table {r[0]} row {r[1]} points to a missing row of {r[2]}")
        v = schema_version(engine)
        if v != latest_version():
            problems.append(f"schema version {v}, expected {latest_version()}")
        orphan_sql = {
            "synonym": "SELECT s.id FROM synonyms s LEFT JOIN compounds c ON c.id = s.compound_id WHERE c.id IS NULL",
            "observation": "SELECT o.id FROM observations o LEFT JOIN compounds c ON c.id = o.compound_id WHERE c.id IS NULL",
            "observation phase": "SELECT o.id FROM observations o LEFT JOIN phases p ON p.id = o.phase_id "
                                 "WHERE o.phase_id IS NOT NULL AND p.id IS NULL",
            "spectrum": "SELECT s.id FROM spectra s LEFT JOIN compounds c ON c.id = s.compound_id WHERE c.id IS NULL",
        }
        for what, sql in orphan_sql.items():
            for (i,) in conn.execute(text(sql)):
                problems.append(f"orphan {what} {i}: points to a missing row")
        if conn.execute(text("SELECT COUNT(*) FROM library_state")).scalar() != 1:
            problems.append("library_state must hold exactly one row (the revision)")
        keys: dict[str, str] = {}
        cas_seen: dict[str, str] = {}
        for cid, name, key, cas, formula, mass, ik in conn.execute(
            text("SELECT id, name, key, cas, formula, nominal_mass, inchikey FROM compounds ORDER BY id")
        ):
            who = f"compound {cid} {name!r}"
            if key != matching_key(name):
                problems.append(f"{who}: stored matching key {key!r} differs from {matching_key(name)!r}")
            k = matching_key(name)
            if k in keys:
                problems.append(f"{who}: same matching key as {keys[k]}")
            keys.setdefault(k, who)
            if cas:
                try:
                    if normalise_cas(cas) != cas:
                        problems.append(f"{who}: CAS {cas!r} not in canonical form")
                except ValueError as exc:
                    problems.append(f"{who}: {exc}")
                if strict and cas in cas_seen:
                    problems.append(f"{who}: CAS {cas} also belongs to {cas_seen[cas]}")
                cas_seen.setdefault(cas, who)
            if formula:
                try:
                    hill_formula(formula)
                    if mass != nominal_mass(formula):
                        problems.append(f"{who}: nominal mass {mass} does not follow from {formula} ({nominal_mass(formula)})")
                except ValueError as exc:
                    problems.append(f"{who}: {exc}")
            elif mass is not None:
                problems.append(f"{who}: nominal mass without a formula")
            if ik and not is_inchikey(ik):
                problems.append(f"{who}: not an InChIKey: {ik!r}")
        for sid, cid, name, key in conn.execute(text("SELECT id, compound_id, name, key FROM synonyms ORDER BY id")):
            k = matching_key(name)
            if key != k:
                problems.append(f"synonym {sid} {name!r}: stored matching key differs from {k!r}")
            if k in keys:
                problems.append(f"synonym {sid} {name!r} of compound {cid}: same matching key as {keys[k]}")
            keys.setdefault(k, f"synonym {sid} {name!r}")
        for oid, cls, ri, mode, sd, n in conn.execute(
            text("SELECT id, phase_class, ri, mode, ri_sd, n FROM observations ORDER BY id")
        ):
            if cls not in PHASE_CLASSES:
                problems.append(f"observation {oid}: unknown phase class {cls!r}")
            if ri is None or not math.isfinite(ri) or ri < 0:
                problems.append(f"observation {oid}: index {ri!r} is not a finite non-negative number")
            if mode not in MODES:
                problems.append(f"observation {oid}: mode {mode!r}")
            if sd is not None and (not math.isfinite(sd) or sd < 0 or sd > MAX_SD):
                problems.append(f"observation {oid}: ri_sd {sd!r} (must be 0 to {MAX_SD:g} index units)")
            if n is not None and not 1 <= n <= MAX_N:
                problems.append(f"observation {oid}: n {n!r} (must be 1 to {MAX_N})")
        problems.extend(_spectrum_problems(conn, strict=strict))
    return problems


def _record_pairs(records: str) -> bool:
    """True when a spectrum's ``records`` text is a JSON list of [label, value] text pairs."""
    import json

    try:
        got = json.loads(records)
    except ValueError:
        return False
    return isinstance(got, list) and all(
        isinstance(r, list) and len(r) == 2 and all(isinstance(v, str) for v in r) for r in got)


def _spectrum_problems(conn, *, strict: bool) -> list[str]:
    """Problems of the reference spectra (``check``); the ones that may be deliberate only with ``strict``.

    Always listed (a screen would fail on the row, or the spectrum is wrong): a spectrum without peaks,
    a pair that is not ``m/z:intensity``, m/z outside 1 to ``MAX_MZ``, a negative or non-finite intensity,
    an m/z listed twice, m/z not in ascending order (the stored form is sorted), ``n_peaks`` not the
    number of pairs, kept records that are not a JSON list of [label, value] pairs, every intensity 0
    (no base peak), and two spectra of one compound from the same source with the same peaks (:func:`matcher.chem.same_peaks.same_peaks`: a copy, which the spectral
    evidence would take for a perfect replicate). With ``strict``: the same peaks under two different
    sources (one spectrum kept with two provenances), and spectra of a compound whose observations are
    all retired (kept for the record, they stay in the library's spectral statistics).
    A spectrum whose compound is missing is an orphan (listed with the other orphans).
    """
    from sqlalchemy import select, text

    from matcher.chem.same_peaks import same_peaks
    from matcher.io.spectrum_text import parse_spectrum_text
    from matcher.store.models import Observation

    problems: list[str] = []
    observed: set[int] = set()
    active: set[int] = set()
    for cid, on in conn.execute(select(Observation.compound_id, Observation.active).distinct()):
        observed.add(cid)
        if on:
            active.add(cid)
    per_compound: dict[int, list] = {}
    for sid, cid, title, peaks, n_peaks, source, records in conn.execute(
        text("SELECT id, compound_id, title, peaks, n_peaks, source, records FROM spectra ORDER BY compound_id, id")
    ):
        who = f"spectrum {sid} {title!r} of compound {cid}"
        if records and not _record_pairs(records):
            problems.append(f"{who}: its kept records are not a JSON list of [label, value] pairs "
                            f"(export-spectra would fail on it)")
        parts = [p for p in re.split(r"[\s,;]+", peaks or "") if p]
        if not parts:
            problems.append(f"{who}: holds no peaks")
            continue
        try:
            got = parse_spectrum_text(peaks)
        except ValueError as exc:
            problems.append(f"{who}: {exc}")
            continue
        raw = [float(p.partition(":")[0]) for p in parts]
        if any(b <= a for a, b in zip(raw, raw[1:])):
            problems.append(f"{who}: m/z not in ascending order (the stored form is sorted by m/z)")
        if n_peaks != len(parts):
            problems.append(f"{who}: n_peaks is {n_peaks!r} but {len(parts)} m/z:intensity pairs are stored")
        if not (got[1] > 0).any():
            problems.append(f"{who}: every intensity is 0 (no base peak)")
            continue
        if strict and cid in observed and cid not in active:
            problems.append(f"{who}: every observation of its compound is retired")
        for other_id, other_source, other in per_compound.get(cid, ()):
            if same_peaks(got, other):
                if (source or "") == (other_source or ""):
                    problems.append(f"{who}: same peaks and source as spectrum {other_id} (a copy)")
                elif strict:
                    problems.append(f"{who}: same peaks as spectrum {other_id} under another source "
                                    f"({source or '-'} / {other_source or '-'})")
                break
        per_compound.setdefault(cid, []).append((sid, source, got))
    return problems


__all__ = ["Hit", "find", "show", "stats", "check"]
