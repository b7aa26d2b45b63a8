"""The store's side of curation: name lookup, one checked observation added, the audit trail, retiring.

:mod:`matcher.curate.library_edits` validates the user's input and decides the rules
(the outlier guard's limit); this module carries each change out in ONE write
transaction through :func:`matcher.store.database.run_write`, through
:mod:`matcher.store.writes` (audited, revision bumped). A refused change raises
:class:`~matcher.errors.RefusedChange` inside the transaction, so nothing is written.

>>> summarise_observations([1030.0, 1032.0, 1031.0], phase_class="nonpolar").count
3
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from typing import Callable, Sequence

import numpy as np

from matcher.chem.names import CLOSE_SCORE, closeness
from matcher.errors import LibraryError, RefusedChange

#: What ``ask`` returns to create a new compound.
NEW = "new"


# --------------------------------------------------------------------------- records


@dataclass(frozen=True)
class Summary:
    """Centre, spread and count of one compound's active observations in one class."""

    centre: float
    spread: float
    count: int

    def as_dict(self) -> dict:
        return {"centre": self.centre, "spread": self.spread, "count": self.count}


@dataclass(frozen=True)
class Match:
    """A library compound that a new name may mean."""

    name: str
    reason: str
    score: float = 100.0


@dataclass
class AddResult:
    """What :func:`add_confirmed` did."""

    name: str
    compound_id: int
    observation_id: int
    phase_class: str
    ri: float
    created: bool
    attached_by: str  # name | synonym | as | new
    before: Summary | None
    after: Summary
    forced: bool = False
    notes: list[str] = field(default_factory=list)
    revision: int | None = None

    def as_dict(self) -> dict:
        d = asdict(self)
        d["before"] = None if self.before is None else self.before.as_dict()
        d["after"] = self.after.as_dict()
        return d

    def summary(self) -> str:
        what = "new compound" if self.created else "added to"
        s = (f"{what} {self.name!r}: observation {self.observation_id}, {self.phase_class} index {self.ri:g}; "
             f"centre now {self.after.centre:.1f} (spread {self.after.spread:.1f}, {self.after.count} observations)")
        if self.forced:
            s += "; accepted past the outlier guard (--force)"
        return s


class Unresolved(RefusedChange):
    """A name that may mean an existing compound; nothing was written. ``matches`` lists them."""

    def __init__(self, name: str, matches: Sequence[Match]):
        self.name = name
        self.matches = list(matches)
        listed = "; ".join(f"{m.name} ({m.reason})" for m in self.matches)
        super().__init__(
            f"{name!r} is not in the library but may be: {listed}; nothing written. "
            f"Give --as NAME to add it to one of them, or --new to create a new compound"
        )


def summarise_observations(ri: Sequence[float], n: Sequence[float | None] = (), sd: Sequence[float | None] = (),
                           *, phase_class: str) -> Summary | None:
    """The class summary exactly as screening computes it (None without observations).

    >>> s = summarise_observations([1030.0, 1032.0, 1031.0], phase_class="nonpolar")
    >>> s.centre, s.count
    (1031.0, 3)
    """
    from matcher.store.snapshot import SPREAD_FLOOR, summarise

    ri = np.asarray(list(ri), dtype=float)
    if not len(ri):
        return None
    n = np.asarray([1.0 if v is None else float(v) for v in n] if len(n) else np.ones(len(ri)), dtype=float)
    sd = np.asarray([np.nan if v is None else float(v) for v in sd] if len(sd) else np.full(len(ri), np.nan), dtype=float)
    centre, spread, count = summarise(ri, np.maximum(n, 1.0), sd, SPREAD_FLOOR[phase_class])
    return Summary(float(centre), float(spread), int(count))


# --------------------------------------------------------------------------- store helpers (ORM, no SQL text)


def class_summary(compound, phase_class: str) -> Summary | None:
    obs = [o for o in compound.observations if o.active and o.phase_class == phase_class]
    return summarise_observations([o.ri for o in obs], [o.n for o in obs], [o.ri_sd for o in obs],
                                  phase_class=phase_class)


def _lookup(session, idx, text: str):
    """The compound whose name, synonym or CAS number is exactly ``text`` (None when absent)."""
    from matcher.chem.cas import normalise_cas
    from matcher.chem.names import matching_key
    from matcher.store.models import Compound

    cid = idx.by_key.get(matching_key(text))
    if cid is None:
        try:
            cas = normalise_cas(text)
        except ValueError:
            cas = None
        if cas and len(idx.by_cas.get(cas, ())) == 1:
            cid = idx.by_cas[cas][0]
    return None if cid is None else session.get(Compound, cid)


def _close_names(session, text: str, limit: int = 5) -> list[Match]:
    from matcher.store.writes import CompoundIndex, synonym_names

    best: dict[str, Match] = {}
    idx = CompoundIndex.read(session)
    choices = [(cid, nm) for cid, nm in idx.names.items()]
    choices += synonym_names(session)
    for cid, nm in choices:
        sc = closeness(text, nm)
        if sc >= CLOSE_SCORE:
            owner = idx.names[cid]
            reason = f"close name, {sc:.0f}" if nm == owner else f"close to its synonym {nm!r}, {sc:.0f}"
            if owner not in best or best[owner].score < sc:
                best[owner] = Match(owner, reason, sc)
    return sorted(best.values(), key=lambda m: (-m.score, m.name.lower()))[:limit]


def _not_found(session, text: str) -> LibraryError:
    close = [m.name for m in _close_names(session, text)]
    hint = f"; close names: {', '.join(close)}" if close else ""
    return LibraryError(f"no compound {text!r} in the library{hint}")


def _resolve(session, v: dict, *, new: bool, as_existing: str | None):
    """(compound or None for a new one, how, synonym to add) or raises Unresolved/RefusedChange."""
    from matcher.chem.names import matching_key
    from matcher.store.models import Compound
    from matcher.store.writes import CompoundIndex

    idx = CompoundIndex.read(session)
    name, key = v["name"], matching_key(v["name"])
    owner = idx.by_key.get(key)
    if as_existing:
        target = _lookup(session, idx, as_existing)
        if target is None:
            raise RefusedChange(str(_not_found(session, as_existing)) + "; nothing written")
        if owner is not None and owner != target.id:
            raise RefusedChange(f"{name!r} already names {idx.names[owner]!r}, not {target.name!r}; nothing written")
        return target, "as", (name if owner is None else None)
    if owner is not None:
        c = session.get(Compound, owner)
        if new:
            raise RefusedChange(f"{name!r} is already in the library as {c.name!r}; --new cannot make a second copy; nothing written")
        return c, ("name" if c.key == key else "synonym"), None
    if new:
        return None, "new", None
    matches: list[Match] = []
    for what, value, table in (("CAS", v["cas"], idx.by_cas), ("InChIKey", v["inchikey"], idx.by_inchikey)):
        if value:
            for cid in table.get(value, ()):
                matches.append(Match(idx.names[cid], f"same {what} {value}"))
    seen = {m.name for m in matches}
    matches += [m for m in _close_names(session, name) if m.name not in seen]
    if matches:
        raise Unresolved(name, matches)
    return None, "new", None


def _identity_changes(session, c, v: dict) -> dict:
    """Fields to fill on an existing compound; RefusedChange when the given identity contradicts it."""
    from matcher.store.writes import CompoundIndex

    changes = {}
    idx = None
    for f in ("cas", "formula", "inchikey"):
        given = v.get(f)
        if not given:
            continue
        have = getattr(c, f)
        if have and have != given:
            raise RefusedChange(f"{f} {given} contradicts {have} of {c.name!r} in the library; nothing written")
        if not have:
            if f in ("cas", "inchikey"):
                idx = idx or CompoundIndex.read(session)
                others = [idx.names[i] for i in (idx.by_cas if f == "cas" else idx.by_inchikey).get(given, ()) if i != c.id]
                if others:
                    raise RefusedChange(f"{f} {given} belongs to {', '.join(others)}, not {c.name!r}; nothing written")
            changes[f] = given
    return changes


# --------------------------------------------------------------------------- adding


def add_checked_observation(db: str | None, v: dict, *, guard_limit: Callable[["Summary", str], float],
                            new: bool = False, as_existing: str | None = None, force: bool = False,
                            once: str | None = None, phase: str | None = None, source: str | None = None,
                            analyst: str | None = None, provenance: dict | None = None,
                            ask: Callable[[str, list["Match"]], str | None] | None = None) -> "AddResult":
    """Add one validated observation ``v`` (keys name, phase_class, ri, mode, date, cas, formula, inchikey).

    Name resolution, the twin check (``once``) and the outlier guard (``guard_limit(before, class)``,
    refused beyond it unless ``force``) run inside the write transaction.
    """
    from matcher.store import writes
    from matcher.store.database import open_library, record, run_write

    engine = open_library(db)

    def work(session, new=new, as_existing=as_existing) -> AddResult:
        c, how, synonym = _resolve(session, v, new=new, as_existing=as_existing)
        notes: list[str] = []
        cls = v["phase_class"]
        created = c is None
        before = None if created else class_summary(c, cls)
        forced = False
        if once and not force:  # one peak of one run, in one class, is recorded once (whatever name it gets)
            from sqlalchemy import select

            from matcher.store.models import Observation

            like = once.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
            twin = session.scalars(select(Observation).where(Observation.phase_class == cls,
                                                             Observation.source.like(f"%{like}%", escape="\\"))
                                   .order_by(Observation.id).limit(1)).first()
            if twin is not None:
                raise RefusedChange(f"peak already recorded as observation {twin.id} of {twin.compound.name!r} "
                                    f"({once}); nothing written; add --force to record it again")
        if before is not None:
            dev = v["ri"] - before.centre
            limit = guard_limit(before, cls)
            if abs(dev) > limit:
                if not force:
                    raise RefusedChange(
                        f"index {v['ri']:g} is {dev:+.1f} units from the centre of {c.name!r} on {cls} "
                        f"(centre {before.centre:.1f}, spread {before.spread:.1f}, {before.count} observations); "
                        f"the limit is {limit:.1f} (the larger of 3 spreads and the class window); nothing written. "
                        f"Check the value, or add --force if it is right")
                forced = True
        phase_row = None
        if phase:
            try:
                phase_row = writes.get_phase(session, phase, cls, note="added by matcher library add")
            except ValueError as exc:
                raise RefusedChange(f"{exc}; nothing written") from None
        if created:
            c = writes.create_compound(session, {"name": v["name"], "cas": v["cas"], "formula": v["formula"],
                                                 "inchikey": v["inchikey"]})
        else:
            changes = _identity_changes(session, c, v)
            if changes or synonym:
                writes.update_compound(session, c, changes, [synonym] if synonym else [])
                if synonym:
                    notes.append(f"{synonym!r} recorded as a synonym of {c.name!r}")
                if changes:
                    notes.append("filled in " + ", ".join(f"{k} {x}" for k, x in changes.items()))
        o = writes.add_observation(session, c, {
            "phase_class": cls, "ri": v["ri"], "mode": v["mode"], "source": source or None,
            "analyst": analyst or None, "date": v["date"],
        }, phase_row)
        target = f"compound:{c.id}"
        if forced:
            record(session, "force-outlier", target, before.as_dict(),
                   {"observation": o.id, "ri": v["ri"], "deviation": v["ri"] - before.centre,
                    "limit": guard_limit(before, cls)})
            notes.append(f"{v['ri'] - before.centre:+.1f} units from the centre; accepted with --force")
        if provenance:
            record(session, "confirm", target, None, {"observation": o.id, **provenance})
        session.flush()
        session.expire(c, ["observations"])
        after = class_summary(c, cls)
        return AddResult(name=c.name, compound_id=c.id, observation_id=o.id, phase_class=cls, ri=v["ri"],
                         created=created, attached_by=how, before=before, after=after, forced=forced,
                         notes=notes, revision=session.info.get("revision"))

    try:
        return run_write(engine, work, who=analyst)
    except Unresolved as exc:
        if ask is None:
            raise
        answer = ask(v["name"], exc.matches)
        if not answer:
            raise
        if answer == NEW:
            return run_write(engine, lambda s: work(s, new=True, as_existing=None), who=analyst)
        return run_write(engine, lambda s: work(s, new=False, as_existing=answer), who=analyst)




# --------------------------------------------------------------------------- history and retiring


def compound_history(db: str | None, name: str) -> list[dict]:
    """The audit trail of one compound (name, synonym or CAS): dicts when, who, action, before, after, revision."""
    from sqlalchemy.orm import Session

    from matcher.store.database import open_library
    from matcher.store.writes import CompoundIndex, audit_trail

    engine = open_library(db)
    with Session(engine) as s:
        c = _lookup(s, CompoundIndex.read(s), name)
        if c is None:
            raise _not_found(s, name)
        target = f"compound:{c.id}"
        entries = audit_trail(s, target)
    # ids can be reused after `import --replace`: start at this compound's own creation
    start = 0
    for k, e in enumerate(entries):
        if e.action == "add-compound" and e.after and json.loads(e.after).get("key") == c.key:
            start = k
    return [
        {"when": e.at, "who": e.who, "action": e.action,
         "before": None if e.before is None else json.loads(e.before),
         "after": None if e.after is None else json.loads(e.after), "revision": e.revision}
        for e in entries[start:]
    ]


def retire_checked(db: str | None, observation_id: int, why: str, *, analyst: str | None = None) -> dict:
    """Retire one observation (validated id and reason); returns what changed."""
    from matcher.store.database import open_library, run_write
    from matcher.store.models import Observation
    from matcher.store import writes

    engine = open_library(db)

    def work(session) -> dict:
        o = session.get(Observation, int(observation_id))
        if o is None:
            raise LibraryError(f"no observation {observation_id} in the library (see: matcher library show NAME)")
        if not o.active:
            raise RefusedChange(f"observation {observation_id} is already retired ({o.retired_reason}); nothing written")
        c = o.compound
        before = class_summary(c, o.phase_class)
        writes.retire_observation(session, o.id, why)
        session.flush()
        session.expire(c, ["observations"])
        after = class_summary(c, o.phase_class)
        return {"observation": o.id, "compound": c.name, "phase_class": o.phase_class, "ri": o.ri, "why": why,
                "before": None if before is None else before.as_dict(),
                "after": None if after is None else after.as_dict(), "revision": session.info.get("revision")}

    return run_write(engine, work, who=analyst)


__all__ = ["Summary", "Match", "AddResult", "Unresolved", "NEW", "summarise_observations", "add_checked_observation",
           "compound_history", "retire_checked"]
