"""Reference mass spectra in the house library: import from JCAMP-DX, export back, listing.

**Import** (:func:`import_spectra`, ``matcher library import-spectra``) reads
every block of a JCAMP-DX file (:mod:`matcher.io.jcamp`; a damaged block
refuses the whole file before the library is touched), then, in ONE write
transaction, finds each spectrum's compound:

1. by name: the matching key (:func:`matcher.chem.names.matching_key`) of
   ``##TITLE`` or of any ``##NAMES`` line equals a library name or synonym;
   names that point at two different compounds are refused;
2. else by ``##CAS REGISTRY NO``, when exactly one compound holds it;
3. else a **new compound** is created (title as name, the other names as
   synonyms, ``##MOLFORM`` and CAS as its identity), unless a library name is
   close to it or its CAS number belongs to several compounds: then, as with
   ``matcher library add``, the file is refused with the names it may mean
   (``new=True`` creates the compound anyway). Only compounds held before the
   import count here: blocks of one file with different names stay different
   compounds (as in a library CSV import).

A ``##MOLFORM`` or CAS number that contradicts the compound's own is refused;
missing ones are filled in (audited). A spectrum already held for the
compound with the same peaks and source is skipped, so importing a file twice
adds nothing. Every refusal names the file, the block and its line; nothing
is written.

**Export** (:func:`export_spectra`) writes every spectrum (or one compound's)
as a JCAMP-DX block with its stored records; provenance travels as the
block's ``##$SOURCE`` record, so export → import → export gives the same text.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path

from matcher.errors import InputError, LibraryError, RefusedChange

#: user-defined JCAMP-DX label carrying the spectrum's provenance on export
SOURCE_LABEL = "$SOURCE"


@dataclass
class SpectraImport:
    """What :func:`import_spectra` did."""

    file: str
    added: int = 0
    skipped: int = 0
    new_compounds: list[str] = field(default_factory=list)
    compounds: dict[str, int] = field(default_factory=dict)  # compound name -> spectra added
    revision: int | None = None

    def summary(self) -> str:
        s = f"{self.added} spectra added to {len(self.compounds)} compounds from {self.file}"
        if self.skipped:
            s += f"; {self.skipped} already held (skipped)"
        if self.new_compounds:
            s += f"; {len(self.new_compounds)} new compounds: {', '.join(self.new_compounds[:10])}" + (
                ", ..." if len(self.new_compounds) > 10 else "")
        return s

    def as_dict(self) -> dict:
        return {"file": self.file, "added": self.added, "skipped": self.skipped, "new_compounds": self.new_compounds,
                "compounds": self.compounds, "revision": self.revision}


def _checked(spectra, file: str):
    """Validated identity of each block: (names, cas, formula, source) or InputError naming block and line."""
    from matcher.chem.cas import normalise_cas
    from matcher.chem.formula import hill_formula
    from matcher.chem.names import display_name, matching_key
    from matcher.io.jcamp import label_key

    out = []
    for sp in spectra:
        where = f"block {sp.block} ({sp.title!r}), line {sp.line}"
        if not len(sp.mz):
            raise InputError(f"{where}: the block's table holds no m/z,intensity pairs; nothing was imported", file=file)
        names = [display_name(n) for n in [sp.title, *sp.names] if n and n.strip()]
        names = list(dict.fromkeys(n for n in names if matching_key(n)))
        if not names:
            raise InputError(f"{where}: the block has no ##TITLE or ##NAMES naming a compound; nothing was imported",
                             file=file)
        cas = ""
        if sp.cas.strip():
            try:
                cas = normalise_cas(sp.cas.strip())
            except ValueError as exc:
                raise InputError(f"{where}: ##CAS REGISTRY NO {sp.cas.strip()!r}: {exc}; nothing was imported",
                                 file=file) from None
        formula = ""
        if sp.molform.strip():
            try:
                formula = hill_formula("".join(sp.molform.split()))
            except ValueError as exc:
                raise InputError(f"{where}: ##MOLFORM {sp.molform.strip()!r}: {exc}; nothing was imported",
                                 file=file) from None
        source = next((v for lbl, v in sp.records if label_key(lbl) == SOURCE_LABEL), "")
        out.append((names, cas, formula, source))
    return out


def import_spectra(db: str | None, path: str | os.PathLike, *, source: str | None = None, new: bool = False,
                   who: str | None = None) -> SpectraImport:
    """Import the reference spectra of a JCAMP-DX file (see module doc); all or nothing."""
    from matcher.io.jcamp import label_key, read_jcamp
    from matcher.limits import check_text
    from matcher.store.database import open_library, run_write

    file = os.fspath(path)
    if source is not None:
        source = check_text(source, "--source") if source.strip() else None
    spectra = read_jcamp(file)
    idents = _checked(spectra, file)
    engine = open_library(db)
    shown = Path(file).name

    def work(session) -> SpectraImport:
        from matcher.chem.names import closeness, CLOSE_SCORE, matching_key
        from matcher.io.spectrum_text import format_spectrum_text
        from matcher.store import writes
        from matcher.store.compound_edits import _identity_changes
        from matcher.store.database import now, record
        from matcher.store.models import Compound, Spectrum

        rep = SpectraImport(file=file)
        idx = writes.CompoundIndex.read(session)
        before = set(idx.names)  # compounds held before this import (new ones of this file are never "close")
        held: dict[int, set] = {}
        for cid, peaks, src in session.execute(_held_query()):
            held.setdefault(cid, set()).add((peaks, src or ""))
        for sp, (names, cas, formula, own_source) in zip(spectra, idents):
            where = f"{file}: block {sp.block} ({sp.title!r}), line {sp.line}"
            keys = [matching_key(n) for n in names]
            owners = list(dict.fromkeys(idx.by_key[k] for k in keys if k in idx.by_key))
            if len(owners) > 1:
                raise RefusedChange(f"{where}: its names point at different compounds "
                                    f"({', '.join(idx.names[o] for o in owners)}); nothing was imported")
            comp = session.get(Compound, owners[0]) if owners else None
            if comp is None and cas and len(idx.by_cas.get(cas, ())) == 1:
                comp = session.get(Compound, idx.by_cas[cas][0])
            if comp is None:
                if not new:
                    maybe = [f"{idx.names[c]} (same CAS {cas})" for c in idx.by_cas.get(cas, ()) if c in before] if cas else []
                    for cid, nm in idx.names.items():
                        if cid not in before:
                            continue
                        sc = max(closeness(n, nm) for n in names)
                        if sc >= CLOSE_SCORE:
                            maybe.append(f"{nm} (close name, {sc:.0f})")
                    if maybe:
                        raise RefusedChange(f"{where}: {names[0]!r} is not in the library but may be: "
                                            f"{'; '.join(maybe[:5])}; nothing was imported. Name the block as the "
                                            f"library does, or import with --new to create new compounds")
                free = [n for n in names[1:] if matching_key(n) not in idx.by_key and matching_key(n) != keys[0]]
                comp = writes.create_compound(session, {"name": names[0], "cas": cas, "formula": formula},
                                              list(dict.fromkeys(free)))
                for n in [names[0], *free]:
                    idx.by_key[matching_key(n)] = comp.id
                idx.names[comp.id] = comp.name
                if cas:
                    idx.by_cas.setdefault(cas, []).append(comp.id)
                rep.new_compounds.append(comp.name)
            else:
                try:
                    changes = _identity_changes(session, comp, {"cas": cas, "formula": formula, "inchikey": ""})
                except RefusedChange as exc:
                    raise RefusedChange(f"{where}: {str(exc).replace('; nothing written', '')}; nothing was imported") from None
                if changes:
                    writes.update_compound(session, comp, changes)
                    if "cas" in changes:
                        idx.by_cas.setdefault(changes["cas"], []).append(comp.id)
            peaks = format_spectrum_text(sp.mz, sp.intensity)
            src = source if source is not None else (own_source or None)
            sig = (peaks, src or "")
            if sig in held.setdefault(comp.id, set()):
                rep.skipped += 1
                continue
            held[comp.id].add(sig)
            kept = [[lbl, v] for lbl, v in sp.records if label_key(lbl) != SOURCE_LABEL]
            row = Spectrum(compound_id=comp.id, title=sp.title[:300] or comp.name, peaks=peaks, n_peaks=len(sp.mz),
                           source=src, origin=sp.origin or None, owner=sp.owner or None,
                           records=json.dumps(kept, ensure_ascii=False) if kept else None,
                           file=f"{shown} block {sp.block}", analyst=(who or None), created_at=now())
            session.add(row)
            session.flush()
            record(session, "add-spectrum", f"spectrum:{row.id}", None,
                   {"compound": comp.name, "title": row.title, "peaks": row.n_peaks, "source": src, "file": row.file})
            rep.added += 1
            rep.compounds[comp.name] = rep.compounds.get(comp.name, 0) + 1
        return rep

    rep = run_write(engine, work, who=who)
    from matcher.store.database import revision

    rep.revision = revision(engine)
    return rep


def _held_query():
    from sqlalchemy import select

    from matcher.store.models import Spectrum

    return select(Spectrum.compound_id, Spectrum.peaks, Spectrum.source)


def stored_spectra(db: str | None, name: str | None = None) -> list:
    """The library's spectra as :class:`matcher.io.jcamp.JcampSpectrum` items (one compound's when ``name``)."""
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from matcher.io.jcamp import JcampSpectrum
    from matcher.io.spectrum_text import parse_spectrum_text
    from matcher.store.database import open_library
    from matcher.store.inspect import _compound_by_name
    from matcher.store.models import Compound, Spectrum

    engine = open_library(db)
    out = []
    with Session(engine) as s:
        q = select(Spectrum, Compound.name).join(Compound, Compound.id == Spectrum.compound_id).order_by(Spectrum.id)
        if name is not None:
            c = _compound_by_name(s, name)
            if c is None:
                raise LibraryError(f"no compound {name!r} in the library")
            q = q.where(Spectrum.compound_id == c.id)
        for sp, cname in s.execute(q):
            mz, y = parse_spectrum_text(sp.peaks)
            records = [tuple(r) for r in json.loads(sp.records)] if sp.records else []
            if sp.source:
                records.append((SOURCE_LABEL, sp.source))
            out.append(JcampSpectrum(title=sp.title, mz=mz, intensity=y, origin=sp.origin or "",
                                     owner=sp.owner or "", records=records, block=sp.id))
    return out


def export_spectra(db: str | None, path: str | os.PathLike | None = None, *, name: str | None = None) -> str:
    """The library's spectra as JCAMP-DX text, also written to ``path`` (atomically) when given."""
    from matcher.io.jcamp import jcamp_text, write_jcamp

    items = stored_spectra(db, name)
    if path is not None:
        write_jcamp(items, path)
    return jcamp_text(items)


__all__ = ["import_spectra", "export_spectra", "stored_spectra", "SpectraImport", "SOURCE_LABEL"]
