"""The store's side of merging two libraries: one transaction that adds what is new and reports conflicts.

:func:`matcher.curate.merge.merge` reads the other library's rows and passes them here with the
outlier guard's rule; nothing is overwritten, and running the same merge twice adds nothing.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Callable

from matcher.store.compound_edits import Summary, class_summary, summarise_observations


@dataclass
class Conflict:
    """Something in the other library that was not merged, and why."""

    compound: str
    phase_class: str
    reason: str
    ours: dict | None = None
    theirs: dict | None = None

    def text(self) -> str:
        return f"{self.compound} [{self.phase_class or '-'}]: {self.reason}"


@dataclass
class MergeReport:
    """What :func:`merge` did."""

    other: str
    observations_added: int = 0
    observations_present: int = 0
    observations_held: int = 0  # not added because of a conflict
    compounds_created: int = 0
    compounds_updated: int = 0
    conflicts: list[Conflict] = field(default_factory=list)
    revision: int | None = None

    def summary(self) -> str:
        return (f"merged {self.other}: {self.observations_added} observations added "
                f"({self.observations_present} already present, {self.observations_held} held back by "
                f"{len(self.conflicts)} conflict(s)), {self.compounds_created} new compounds, "
                f"{self.compounds_updated} compounds updated")

    def as_dict(self) -> dict:
        return asdict(self)


def _sig(phase_class, ri, mode, ri_sd, n, phase, source, analyst, date) -> tuple:
    from matcher.store.writes import phase_key

    return (phase_class, float(ri), mode or "programmed", ri_sd, n, phase_key(phase) if phase else "",
            source or "", analyst or "", date or "")



def merge_rows(db: str | None, rows: list, shown: str, *, guard_limit: Callable[[Summary, str], float],
               analyst: str | None = None) -> MergeReport:
    """Add the library rows ``rows`` (of the library shown as ``shown``) to ``db`` in one write transaction."""
    from matcher.chem.names import matching_key
    from matcher.store import writes
    from matcher.store.database import open_library, record, run_write
    from matcher.store.models import Compound
    from matcher.store.writes import CompoundIndex

    engine = open_library(db)
    groups: dict[str, list] = {}
    for r in rows:
        groups.setdefault(matching_key(r.name), []).append(r)

    def work(session) -> MergeReport:
        rep = MergeReport(other=shown)
        idx = CompoundIndex.read(session)
        for key, grp in groups.items():
            first = grp[0]
            names = [first.name] + list(first.synonyms)
            cid = next((idx.by_key[matching_key(nm)] for nm in names if matching_key(nm) in idx.by_key), None)
            if cid is None and first.cas and len(idx.by_cas.get(first.cas, ())) == 1:
                cid = idx.by_cas[first.cas][0]
            c = session.get(Compound, cid) if cid is not None else None
            fields = {f: next((getattr(r, f) for r in grp if getattr(r, f)), "") for f in ("cas", "formula", "inchikey", "smiles", "notes", "series", "key_ions")}
            if c is not None:
                bad = [f"{f} {fields[f]} (ours {getattr(c, f)})" for f in ("cas", "formula", "inchikey")
                       if fields[f] and getattr(c, f) and getattr(c, f) != fields[f]]
                owners = {idx.by_key[matching_key(nm)] for nm in names if matching_key(nm) in idx.by_key}
                if len(owners) > 1:
                    bad.append("its names belong to different compounds here: " + ", ".join(sorted(idx.names[i] for i in owners)))
                if bad:
                    rep.conflicts.append(Conflict(c.name, "", "identity differs: " + "; ".join(bad)))
                    rep.observations_held += len(grp)
                    continue
                have = {_sig(o.phase_class, o.ri, o.mode, o.ri_sd, o.n, o.phase.name if o.phase else "", o.source,
                             o.analyst, o.date) for o in c.observations}
            else:
                have = set()
            fresh = []
            for r in grp:
                if _sig(r.phase_class, r.ri, r.mode, r.ri_sd, r.n, r.phase, r.source, r.analyst, r.date) in have:
                    rep.observations_present += 1
                else:
                    fresh.append(r)
            if not fresh:
                continue
            held_classes = set()
            if c is not None:
                for cls in sorted({r.phase_class for r in fresh}):
                    ours = class_summary(c, cls)
                    act = [r for r in grp if r.phase_class == cls and not r.retired]
                    theirs = summarise_observations([r.ri for r in act], [r.n for r in act], [r.ri_sd for r in act],
                                                    phase_class=cls) if act else None
                    if ours is not None and theirs is not None:
                        limit = guard_limit(ours, cls)
                        if abs(theirs.centre - ours.centre) > limit:
                            held_classes.add(cls)
                            rep.conflicts.append(Conflict(
                                c.name, cls,
                                f"centres {ours.centre:.1f} (ours, n={ours.count}) and {theirs.centre:.1f} "
                                f"(theirs, n={theirs.count}) are {theirs.centre - ours.centre:+.1f} apart, "
                                f"beyond the guard {limit:.1f}", ours.as_dict(), theirs.as_dict()))
            todo = []
            for r in fresh:
                if r.phase_class in held_classes:
                    rep.observations_held += 1
                    continue
                phase_row = None
                if r.phase:
                    try:
                        phase_row = writes.get_phase(session, r.phase, r.phase_class, note=f"added by merge of {shown}")
                    except ValueError as exc:
                        rep.conflicts.append(Conflict(c.name if c is not None else first.name, r.phase_class, str(exc)))
                        rep.observations_held += 1
                        continue
                todo.append((r, phase_row))
            if not todo:
                continue
            if c is None:
                syns = []
                for nm in first.synonyms:
                    if matching_key(nm) not in idx.by_key and matching_key(nm) != key:
                        syns.append(nm)
                c = writes.create_compound(session, {"name": first.name, **fields}, syns)
                rep.compounds_created += 1
                for nm in [first.name] + syns:
                    idx.by_key[matching_key(nm)] = c.id
                idx.names[c.id] = c.name
                if c.cas:
                    idx.by_cas.setdefault(c.cas, []).append(c.id)
            else:
                changes = {f: v for f, v in fields.items() if v and not getattr(c, f)}
                syns = [nm for nm in names if matching_key(nm) not in idx.by_key]
                if changes or syns:
                    writes.update_compound(session, c, changes, syns)
                    rep.compounds_updated += 1
                    for nm in syns:
                        idx.by_key[matching_key(nm)] = c.id
            for r, phase_row in todo:
                writes.add_observation(session, c, {
                    "phase_class": r.phase_class, "ri": r.ri, "mode": r.mode, "ri_sd": r.ri_sd, "n": r.n,
                    "source": r.source, "analyst": r.analyst, "date": r.date, "retired_reason": r.retired or None,
                }, phase_row)
                rep.observations_added += 1
        if rep.observations_added or rep.compounds_updated:
            record(session, "merge", f"library:{shown}", None,
                   {"added": rep.observations_added, "present": rep.observations_present,
                    "held": rep.observations_held, "conflicts": [x.text() for x in rep.conflicts]})
            rep.revision = session.info.get("revision")
        return rep

    return run_write(engine, work, who=analyst)


__all__ = ["Conflict", "MergeReport", "merge_rows"]
