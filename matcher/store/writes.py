"""Changes to the house library, each with its audit entry and a revision bump.

Every function here takes a :class:`~sqlalchemy.orm.Session` opened by
:func:`matcher.store.database.transaction` (or :func:`~matcher.store.database.run_write`)
and leaves committing to it, so a caller can group many changes into one
transaction that either happens whole or not at all. Values must already be
validated (:mod:`matcher.store.library_io` and the curation commands do that).

Example, adding one observation to a new compound::

    from matcher.store.database import run_write
    from matcher.store import writes

    def add(s):
        c = writes.create_compound(s, {"name": "sabinene", "cas": "3387-41-5", "formula": "C10H16"})
        writes.add_observation(s, c, {"phase_class": "nonpolar", "ri": 970.0, "source": "run 12"})
    run_write("lib.sqlite", add, who="ana")
"""

from __future__ import annotations

import json

from dataclasses import dataclass, field

from sqlalchemy import select
from sqlalchemy.orm import Session

from matcher.chem.formula import nominal_mass
from matcher.chem.names import matching_key
from matcher.store.database import now, record
from matcher.store.models import Compound, Observation, Phase, Synonym

COMPOUND_FIELDS = ("cas", "formula", "inchikey", "smiles", "notes", "series", "key_ions")
OBSERVATION_FIELDS = ("phase_class", "ri", "mode", "ri_sd", "n", "source", "analyst", "date")


def phase_key(name: str) -> str:
    return " ".join(str(name).lower().split())


def compound_dict(c: Compound) -> dict:
    """The compound's fields as plain JSON-ready values (audit before/after)."""
    return {
        "id": c.id, "name": c.name, "key": c.key,
        **{f: getattr(c, f) for f in COMPOUND_FIELDS},
        "nominal_mass": c.nominal_mass,
    }


def observation_dict(o: Observation) -> dict:
    return {
        "id": o.id, "compound_id": o.compound_id,
        **{f: getattr(o, f) for f in OBSERVATION_FIELDS},
        "phase_id": o.phase_id, "active": bool(o.active), "retired_reason": o.retired_reason,
    }


@dataclass
class CompoundIndex:
    """Lookup of existing compounds by matching key (names and synonyms), CAS and InChIKey."""

    by_key: dict[str, int] = field(default_factory=dict)
    by_cas: dict[str, list[int]] = field(default_factory=dict)
    by_inchikey: dict[str, list[int]] = field(default_factory=dict)
    names: dict[int, str] = field(default_factory=dict)

    @classmethod
    def read(cls, session: Session) -> "CompoundIndex":
        idx = cls()
        for cid, name, key, cas, ik in session.execute(
            select(Compound.id, Compound.name, Compound.key, Compound.cas, Compound.inchikey)
        ):
            idx.by_key[key] = cid
            idx.names[cid] = name
            if cas:
                idx.by_cas.setdefault(cas, []).append(cid)
            if ik:
                idx.by_inchikey.setdefault(ik, []).append(cid)
        for cid, key in session.execute(select(Synonym.compound_id, Synonym.key)):
            idx.by_key.setdefault(key, cid)
        return idx


def create_compound(session: Session, fields: dict, synonyms: list[str] = ()) -> Compound:
    """A new compound (``fields``: name plus any of :data:`COMPOUND_FIELDS`), flushed and audited."""
    formula = fields.get("formula") or None
    c = Compound(
        name=fields["name"], key=matching_key(fields["name"]),
        nominal_mass=nominal_mass(formula) if formula else None, created_at=now(),
        **{f: (fields.get(f) or None) for f in COMPOUND_FIELDS},
    )
    session.add(c)
    session.flush()
    for syn in synonyms:
        session.add(Synonym(compound_id=c.id, name=syn, key=matching_key(syn)))
    session.flush()
    after = compound_dict(c)
    after["synonyms"] = list(synonyms)
    record(session, "add-compound", f"compound:{c.id}", None, after)
    return c


def update_compound(session: Session, c: Compound, changes: dict, new_synonyms: list[str] = ()) -> None:
    """Set fields and add synonyms on an existing compound, audited with before and after."""
    if not changes and not new_synonyms:
        return
    before = compound_dict(c)
    before["synonyms"] = [s.name for s in c.synonyms]
    for f, v in changes.items():
        setattr(c, f, v)
        if f == "formula":
            c.nominal_mass = nominal_mass(v) if v else None
    for syn in new_synonyms:
        c.synonyms.append(Synonym(name=syn, key=matching_key(syn)))
    session.flush()
    after = compound_dict(c)
    after["synonyms"] = [s.name for s in c.synonyms]
    record(session, "update-compound", f"compound:{c.id}", before, after)


def get_phase(session: Session, name: str, phase_class: str, *, create: bool = True, note: str = "") -> Phase | None:
    """The phase of this name (case and spacing ignored); created with ``phase_class`` if new.

    Raises :class:`ValueError` when the phase exists under another class.
    """
    key = phase_key(name)
    for p in session.scalars(select(Phase)):
        if phase_key(p.name) == key:
            if p.phase_class != phase_class:
                raise ValueError(f"phase {p.name!r} is {p.phase_class} in the library, not {phase_class}")
            return p
    if not create:
        return None
    p = Phase(name=" ".join(str(name).split()), phase_class=phase_class, source=note or None)
    session.add(p)
    session.flush()
    record(session, "add-phase", f"phase:{p.id}", None, {"name": p.name, "class": phase_class})
    return p


def add_observation(session: Session, compound: Compound, fields: dict, phase: Phase | None = None) -> Observation:
    """A new active observation of ``compound`` (``fields``: :data:`OBSERVATION_FIELDS`, retired_reason), audited."""
    retired = fields.get("retired_reason") or None
    o = Observation(
        compound_id=compound.id, phase_id=phase.id if phase is not None else None,
        phase_class=fields["phase_class"], ri=float(fields["ri"]), mode=fields.get("mode") or "programmed",
        ri_sd=fields.get("ri_sd"), n=fields.get("n"), source=fields.get("source") or None,
        analyst=fields.get("analyst") or None, date=fields.get("date") or None,
        active=retired is None, retired_reason=retired, retired_at=now() if retired else None,
        created_at=now(),
    )
    session.add(o)
    session.flush()
    after = observation_dict(o)
    after["compound"] = compound.name
    record(session, "add-observation", f"compound:{compound.id}", None, after)
    return o


def add_observations(session: Session, items: list[tuple[Compound, dict, Phase | None]]) -> list[int]:
    """Many new observations in two bulk statements (observations, then their audit entries).

    The same rows and audit entries as calling :func:`add_observation` for each item, in order,
    without one ORM flush per row; returns the new ids in item order.
    """
    from sqlalchemy import insert

    from matcher.store.database import default_user, bump_revision
    from matcher.store.models import AuditEntry

    if not items:
        return []
    stamp = now()
    rows = []
    for compound, fields, phase in items:
        retired = fields.get("retired_reason") or None
        rows.append({
            "compound_id": compound.id, "phase_id": phase.id if phase is not None else None,
            "phase_class": fields["phase_class"], "ri": float(fields["ri"]), "mode": fields.get("mode") or "programmed",
            "ri_sd": fields.get("ri_sd"), "n": fields.get("n"), "source": fields.get("source") or None,
            "analyst": fields.get("analyst") or None, "date": fields.get("date") or None,
            "active": retired is None, "retired_reason": retired, "retired_at": stamp if retired else None,
            "created_at": stamp,
        })
    session.flush()
    ids = list(session.scalars(insert(Observation).returning(Observation.id, sort_by_parameter_order=True), rows))
    rev = bump_revision(session)
    who = session.info.get("who") or default_user()
    audit = []
    for oid, row, (compound, _, _) in zip(ids, rows, items):
        after = {"id": oid, "compound_id": row["compound_id"], **{f: row[f] for f in OBSERVATION_FIELDS},
                 "phase_id": row["phase_id"], "active": bool(row["active"]), "retired_reason": row["retired_reason"],
                 "compound": compound.name}
        audit.append({"at": stamp, "who": who, "action": "add-observation", "target": f"compound:{compound.id}",
                      "before": None, "after": json.dumps(after, sort_keys=True, ensure_ascii=False), "revision": rev})
    session.execute(insert(AuditEntry), audit)
    return ids


def synonym_names(session: Session) -> list[tuple[int, str]]:
    """(compound id, synonym) for every synonym in the library."""
    return [(s.compound_id, s.name) for s in session.scalars(select(Synonym))]


def audit_trail(session: Session, target: str) -> list:
    """The audit entries of one target (e.g. ``compound:12``), oldest first."""
    from matcher.store.models import AuditEntry

    return list(session.scalars(select(AuditEntry).where(AuditEntry.target == target).order_by(AuditEntry.id)))


def retire_observation(session: Session, obs_id: int, reason: str) -> Observation:
    """Stop using an observation (the row stays, with the reason); audited."""
    o = session.get(Observation, obs_id)
    if o is None:
        raise KeyError(obs_id)
    before = observation_dict(o)
    o.active, o.retired_reason, o.retired_at = False, reason, now()
    session.flush()
    record(session, "retire-observation", f"compound:{o.compound_id}", before, observation_dict(o))
    return o


__all__ = [
    "COMPOUND_FIELDS", "OBSERVATION_FIELDS", "CompoundIndex", "compound_dict", "observation_dict",
    "create_compound", "update_compound", "get_phase", "add_observation", "add_observations", "retire_observation",
    "phase_key", "synonym_names", "audit_trail",
]
