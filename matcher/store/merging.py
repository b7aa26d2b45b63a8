"""The store's side of merging two libraries: one transaction that adds what is new and reports conflicts.

:func:`matcher.curate.merge.merge` reads the other library's rows (and, from a library, its reference
spectra with :func:`other_spectra`) and passes them here with the outlier guard's rule and the rule telling
two spectra apart; nothing is overwritten, and running the same merge twice adds nothing.

**Spectra.** Each of the other library's spectra follows its compound: it goes to the compound the merge
maps that compound to (an existing one, found by name, synonym or CAS as for the observations, or the one
the merge creates; a compound of theirs with spectra only is created as well). It is skipped when our
compound already holds the same peaks (``same_spectrum``, :mod:`matcher.chem.same_peaks`, whatever the
source) and held back, never attached, when that compound is in conflict (identity differs, or the
centres of a class lie beyond the outlier guard: a spectrum of a possibly mislabelled compound is worse
than none). The spectrum keeps its title, peaks, source, origin, owner, records and analyst; its ``file``
says it came by merge.
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
    """What :func:`merge` did (or, with ``dry_run``, would do)."""

    other: str
    observations_added: int = 0
    observations_present: int = 0
    observations_held: int = 0  # not added because of a conflict
    compounds_created: int = 0
    compounds_updated: int = 0
    spectra_added: int = 0
    spectra_present: int = 0  # our compound already holds the same peaks
    spectra_held: int = 0  # not added because of a conflict (or unreadable in the other library)
    spectra_read: bool = True  # False: the other is a library file (CSV/XLSX), which carries no spectra
    conflicts: list[Conflict] = field(default_factory=list)
    dry_run: bool = False
    revision: int | None = None

    def summary(self) -> str:
        text = (f"merged {self.other}: {self.observations_added} observations added "
                f"({self.observations_present} already present, {self.observations_held} held back by "
                f"{len(self.conflicts)} conflict(s)), {self.compounds_created} new compounds, "
                f"{self.compounds_updated} compounds updated")
        if self.spectra_read:
            text += (f"; {self.spectra_added} reference spectra added ({self.spectra_present} already present, "
                     f"{self.spectra_held} held back)")
        else:
            text += "; no reference spectra (a library file carries none: merge the library itself, or "\
                    "export-spectra and import-spectra)"
        return text

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class OtherSpectrum:
    """One reference spectrum of the other library, with its compound's identity."""

    id: int
    compound: str  # the compound's name in the other library ("" when its compound row is missing)
    synonyms: tuple[str, ...]
    identity: dict  # cas, formula, inchikey, smiles, notes, series, key_ions ("" when empty)
    title: str
    peaks: str
    source: str | None
    origin: str | None
    owner: str | None
    records: str | None
    file: str | None
    analyst: str | None


def other_spectra(other_db: str) -> list[OtherSpectrum]:
    """The reference spectra of the library at ``other_db`` (path or URL), in the order they were added."""
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from matcher.store.database import open_library
    from matcher.store.models import Compound, Spectrum, Synonym
    from matcher.store.writes import COMPOUND_FIELDS

    engine = open_library(other_db)
    with Session(engine) as s:
        syns: dict[int, list[str]] = {}
        for cid, name in s.execute(select(Synonym.compound_id, Synonym.name).order_by(Synonym.id)):
            syns.setdefault(cid, []).append(name)
        out = []
        for sp, c in s.execute(select(Spectrum, Compound).outerjoin(Compound, Compound.id == Spectrum.compound_id)
                               .order_by(Spectrum.id)):
            out.append(OtherSpectrum(
                id=sp.id, compound=c.name if c is not None else "",
                synonyms=tuple(syns.get(c.id, ())) if c is not None else (),
                identity={f: (getattr(c, f) or "") if c is not None else "" for f in COMPOUND_FIELDS},
                title=sp.title, peaks=sp.peaks, source=sp.source, origin=sp.origin, owner=sp.owner,
                records=sp.records, file=sp.file, analyst=sp.analyst))
    return out


def _sig(phase_class, ri, mode, ri_sd, n, phase, source, analyst, date) -> tuple:
    from matcher.store.writes import phase_key

    return (phase_class, float(ri), mode or "programmed", ri_sd, n, phase_key(phase) if phase else "",
            source or "", analyst or "", date or "")


class _DryRun(Exception):
    """Raised at the end of a dry run's transaction so that it is rolled back."""


def merge_rows(db: str | None, rows: list, shown: str, *, guard_limit: Callable[[Summary, str], float],
               same_spectrum: Callable | None = None, spectra: list[OtherSpectrum] | None = None,
               analyst: str | None = None, dry_run: bool = False) -> MergeReport:
    """Add the library rows ``rows`` and reference spectra ``spectra`` (of the library shown as ``shown``) to ``db``.

    One write transaction; with ``dry_run`` it is rolled back and the report says what would have changed.
    ``spectra=None`` means the other library carried none (a library file); then ``same_spectrum`` is unused.
    """
    from matcher.chem.names import matching_key
    from matcher.store import writes
    from matcher.store.database import open_library, record, run_write
    from matcher.store.models import Compound
    from matcher.store.writes import CompoundIndex

    if spectra and same_spectrum is None:
        raise ValueError("merging spectra needs the rule telling two spectra apart (same_spectrum)")
    engine = open_library(db)
    groups: dict[str, list] = {}
    for r in rows:
        groups.setdefault(matching_key(r.name), []).append(r)
    theirs: dict[str, list[OtherSpectrum]] = {}
    orphans: list[OtherSpectrum] = []
    for sp in spectra or ():
        if sp.compound:
            theirs.setdefault(matching_key(sp.compound), []).append(sp)
        else:
            orphans.append(sp)
    keys = list(groups) + [k for k in theirs if k not in groups]
    outcome: dict = {}  # the report of a dry run, kept past its rollback

    def work(session) -> MergeReport:
        rep = MergeReport(other=shown, spectra_read=spectra is not None, dry_run=dry_run)
        for sp in orphans:
            rep.spectra_held += 1
            rep.conflicts.append(Conflict(sp.title, "", f"their spectrum {sp.id} belongs to no compound there "
                                                        f"(a missing compound row); not merged"))
        idx = CompoundIndex.read(session)
        ours_spectra: dict[int, list] = {}  # our compound id -> its spectra as (mz, intensity), kept up to date
        for key in keys:
            grp = groups.get(key, [])
            sps = theirs.get(key, [])
            if grp:
                first = grp[0]
                name, synonyms, cas = first.name, list(first.synonyms), first.cas
                fields = {f: next((getattr(r, f) for r in grp if getattr(r, f)), "") for f in writes.COMPOUND_FIELDS}
            else:
                name, synonyms, fields = sps[0].compound, list(sps[0].synonyms), dict(sps[0].identity)
                cas = fields["cas"]
            names = [name] + synonyms
            cid = next((idx.by_key[matching_key(nm)] for nm in names if matching_key(nm) in idx.by_key), None)
            if cid is None and cas and len(idx.by_cas.get(cas, ())) == 1:
                cid = idx.by_cas[cas][0]
            c = session.get(Compound, cid) if cid is not None else None
            if c is not None:
                bad = [f"{f} {fields[f]} (ours {getattr(c, f)})" for f in ("cas", "formula", "inchikey")
                       if fields[f] and getattr(c, f) and getattr(c, f) != fields[f]]
                owners = {idx.by_key[matching_key(nm)] for nm in names if matching_key(nm) in idx.by_key}
                if len(owners) > 1:
                    bad.append("its names belong to different compounds here: " + ", ".join(sorted(idx.names[i] for i in owners)))
                if bad:
                    held = _held_text(len(grp), len(sps))
                    rep.conflicts.append(Conflict(c.name, "", "identity differs: " + "; ".join(bad) + held))
                    rep.observations_held += len(grp)
                    rep.spectra_held += len(sps)
                    continue

            def ensure_compound(c):
                """Our compound for this group: the mapped one, or a new one created now."""
                if c is not None:
                    return c
                syns = [nm for nm in synonyms if matching_key(nm) not in idx.by_key and matching_key(nm) != key]
                c = writes.create_compound(session, {"name": name, **fields}, syns)
                rep.compounds_created += 1
                for nm in [name] + syns:
                    idx.by_key[matching_key(nm)] = c.id
                idx.names[c.id] = c.name
                if c.cas:
                    idx.by_cas.setdefault(c.cas, []).append(c.id)
                return c

            c, guard_conflict = _merge_observations(session, rep, c, grp, names, fields, shown, idx, guard_limit,
                                                    ensure_compound, writes, matching_key)
            if not sps:
                continue
            if guard_conflict is not None:
                rep.spectra_held += len(sps)
                guard_conflict.reason += f"; its {len(sps)} reference spectr{'um' if len(sps) == 1 else 'a'} held back too"
                continue
            _merge_spectra(session, rep, sps, c, ensure_compound, same_spectrum, shown, ours_spectra)
        if rep.observations_added or rep.compounds_updated or rep.spectra_added or rep.compounds_created:
            record(session, "merge", f"library:{shown}", None,
                   {"added": rep.observations_added, "present": rep.observations_present,
                    "held": rep.observations_held, "spectra_added": rep.spectra_added,
                    "spectra_present": rep.spectra_present, "spectra_held": rep.spectra_held,
                    "conflicts": [x.text() for x in rep.conflicts]})
            rep.revision = session.info.get("revision")
        if dry_run:
            outcome["report"] = rep
            raise _DryRun()
        return rep

    try:
        return run_write(engine, work, who=analyst)
    except _DryRun:
        rep = outcome["report"]
        rep.revision = None
        return rep


def _held_text(n_obs: int, n_spectra: int) -> str:
    if not n_spectra:
        return ""
    return f"; {n_obs} observation(s) and {n_spectra} reference spectr{'um' if n_spectra == 1 else 'a'} held back"


def _merge_observations(session, rep: MergeReport, c, grp: list, names: list, fields: dict, shown: str, idx,
                        guard_limit, ensure_compound, writes, matching_key):
    """Add one compound's new observations; returns (our compound or None, the outlier-guard conflict or None)."""
    if c is not None:
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
        return c, None
    held_classes = set()
    guard_conflict = None
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
                    guard_conflict = guard_conflict or rep.conflicts[-1]
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
                rep.conflicts.append(Conflict(c.name if c is not None else names[0], r.phase_class, str(exc)))
                rep.observations_held += 1
                continue
        todo.append((r, phase_row))
    if not todo:
        return c, guard_conflict
    if c is None:
        c = ensure_compound(None)
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
    return c, guard_conflict


def _merge_spectra(session, rep: MergeReport, sps: list[OtherSpectrum], c, ensure_compound, same_spectrum,
                   shown: str, ours_spectra: dict) -> None:
    """Add the other library's spectra of one compound that ours does not hold yet (see the module doc)."""
    from matcher.io.spectrum_text import format_spectrum_text, parse_spectrum_text
    from matcher.store.database import now, record
    from matcher.store.models import Spectrum

    readable = []
    for sp in sps:
        try:
            got = parse_spectrum_text(sp.peaks)
        except ValueError as exc:
            got, why = None, str(exc)
        else:
            why = "it holds no peaks"
        if got is None:
            rep.spectra_held += 1
            rep.conflicts.append(Conflict(sp.compound, "", f"their spectrum {sp.id} {sp.title!r} is unreadable "
                                                           f"({why}); not merged"))
            continue
        readable.append((sp, got))
    if not readable:
        return
    if c is not None and c.id not in ours_spectra:
        held = ours_spectra[c.id] = []
        for row in c.spectra:
            try:
                got = parse_spectrum_text(row.peaks)
            except ValueError:  # a damaged row of ours: `library check` lists it
                continue
            if got is not None:
                held.append(got)
    held = ours_spectra[c.id] if c is not None else []
    for sp, got in readable:
        if any(same_spectrum(got, h) for h in held):
            rep.spectra_present += 1
            continue
        if c is None:
            c = ensure_compound(None)
            ours_spectra[c.id] = held
        row = Spectrum(compound_id=c.id, title=sp.title, peaks=format_spectrum_text(*got), n_peaks=len(got[0]),
                       source=sp.source, origin=sp.origin, owner=sp.owner, records=sp.records,
                       file=f"merged from {shown}" + (f" ({sp.file})" if sp.file else ""),
                       analyst=sp.analyst, created_at=now())
        session.add(row)
        session.flush()
        record(session, "add-spectrum", f"spectrum:{row.id}", None,
               {"compound": c.name, "title": row.title, "peaks": row.n_peaks, "source": row.source,
                "file": row.file})
        held.append(got)
        rep.spectra_added += 1


__all__ = ["Conflict", "MergeReport", "OtherSpectrum", "merge_rows", "other_spectra"]
