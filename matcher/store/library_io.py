"""Import and export of the library CSV (docs/formats.md, "Library CSV"), also ``.xlsx`` on import and export.

Columns (one row per observation or per literature summary):

* required: ``name``, ``phase_class``, ``ri``
* optional: ``cas``, ``formula``, ``ri_sd``, ``n``, ``mode``
  (programmed | isothermal, blank = programmed), ``phase``, ``source``,
  ``synonyms`` (separated by ``;``), ``inchikey``, ``smiles``, ``notes``
* optional, our own: ``series`` (homologous-series label), ``key_ions``
  (integers separated by spaces, commas or ``;``), ``analyst``, ``date``
  (ISO ``YYYY-MM-DD``), ``retired`` (reason; a non-empty cell marks a
  retired observation, kept but not used)

Compound-level cells (cas, formula, inchikey, smiles, notes, series,
key_ions, synonyms) may be repeated on every row of a compound or given
once; two rows that disagree are refused. Lines starting with ``#`` above the
header are comments.

**Import** validates *every* row before anything is written, then writes in
ONE transaction: a refused file changes nothing. Messages name the file, the
data row (data rows count from 1 after the header) with its physical line,
and the column. A row attaches to an existing compound when its name, or one
of its synonyms, has the matching key of a library name or synonym
(:func:`matcher.chem.names.matching_key`), or else when its CAS number belongs to
exactly one compound that was in the library before the import (the new name
becomes a synonym). Inside one file, rows with different names stay different
compounds even when they share a CAS number (``library check --strict`` lists
shared CAS numbers). A row that would tie two different compounds together,
or give a compound a CAS number that contradicts its own, is refused. An observation already in the library with identical values is
skipped, so importing a file twice adds nothing the second time.

**Export** writes every observation (retired ones too, with the reason) in
the order they were added, with a fixed column order and canonical number
formatting, so export → import → export is byte-identical.
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path

from matcher.limits import MAX_N, MAX_RI, MAX_SD
from matcher.chem.cas import normalise_cas
from matcher.classes import check_class
from matcher.errors import InputError, MatcherError
from matcher.chem.formula import hill_formula
from matcher.chem.identifiers import normalise_inchikey
from matcher.chem.names import display_name, matching_key
from matcher.rules import MODE_ALIASES, MODES

REQUIRED = ("name", "phase_class", "ri")
OPTIONAL = ("cas", "formula", "ri_sd", "n", "mode", "phase", "source", "synonyms", "inchikey", "smiles", "notes")
OURS = ("series", "key_ions", "analyst", "date", "retired")
#: The export's columns, in order.
COLUMNS = REQUIRED + OPTIONAL + OURS
COMPOUND_LEVEL = ("cas", "formula", "inchikey", "smiles", "notes", "series", "key_ions")

ALIASES: dict[str, list[str]] = {
    "name": ["compound", "compound name", "name"],
    "phase_class": ["class", "phase class", "polarity class", "phase_class"],
    "ri": ["ri", "retention index", "index", "ri_value"],
    "cas": ["cas", "cas number", "cas rn", "casrn", "cas no", "cas registry number"],
    "formula": ["formula", "molecular formula"],
    "ri_sd": ["ri_sd", "sd", "ri sd", "standard deviation"],
    "n": ["n", "count"],
    "mode": ["mode"],
    "phase": ["phase", "stationary phase"],
    "source": ["source", "reference"],
    "synonyms": ["synonyms", "synonym"],
    "inchikey": ["inchikey", "inchi key"],
    "smiles": ["smiles"],
    "notes": ["notes", "note", "comment"],
    "series": ["series", "homologous series"],
    "key_ions": ["key_ions", "key ions", "ions"],
    "analyst": ["analyst"],
    "date": ["date"],
    "retired": ["retired"],
}

_MODES = {m: m for m in MODES} | MODE_ALIASES
RI_MAX = MAX_RI  # declared in matcher.limits


@dataclass(frozen=True)
class LibraryRow:
    """One validated row of a library file."""

    row: int
    line: int
    name: str
    phase_class: str
    ri: float
    cas: str = ""
    formula: str = ""
    ri_sd: float | None = None
    n: int | None = None
    mode: str = "programmed"
    phase: str = ""
    source: str = ""
    synonyms: tuple[str, ...] = ()
    inchikey: str = ""
    smiles: str = ""
    notes: str = ""
    series: str = ""
    key_ions: str = ""
    analyst: str = ""
    date: str = ""
    retired: str = ""

    @property
    def key(self) -> str:
        return matching_key(self.name)


@dataclass
class ImportReport:
    """What an import did (or, with ``dry_run``, would do)."""

    file: str
    rows: int = 0
    compounds_created: int = 0
    compounds_updated: int = 0
    observations_added: int = 0
    observations_skipped: int = 0
    ignored_columns: list[str] = field(default_factory=list)
    revision: int | None = None

    def summary(self) -> str:
        text = (f"{self.file}: {self.rows} rows; {self.observations_added} observations added"
                f" ({self.observations_skipped} already present), {self.compounds_created} new compounds,"
                f" {self.compounds_updated} compounds updated")
        if self.revision is not None:
            text += f"; library revision {self.revision}"
        return text


# --------------------------------------------------------------------------- reading and validating


def canonical_ions(text: str) -> str:
    """Key ions as whole m/z values separated by single spaces (ValueError otherwise).

    >>> canonical_ions("93; 69,41")
    '93 69 41'
    """
    parts = [p for p in re.split(r"[\s,;]+", str(text).strip()) if p]
    out = []
    for p in parts:
        try:
            v = float(p)
        except ValueError:
            raise ValueError(f"key ions must be whole m/z values, got {p!r}") from None
        if not v.is_integer() or not 1 <= v <= 2000:
            raise ValueError(f"key ions must be whole m/z values between 1 and 2000, got {p!r}")
        out.append(str(int(v)))
    return " ".join(out)


def _iso_date(text: str) -> str:
    try:
        return date.fromisoformat(text).isoformat()
    except ValueError:
        raise ValueError(f"not an ISO date (YYYY-MM-DD): {text!r}") from None


def read_rows(path: str | Path) -> tuple[list[LibraryRow], list[str]]:
    """Validate a library file completely; the rows and the names of ignored (unknown) columns."""
    import numpy as np

    from matcher.io.delimited import load_table, map_headers, numbers, texts

    raw = load_table(path, what="library file")
    cols = map_headers(raw, ALIASES)
    missing = [c for c in REQUIRED if c not in cols]
    if missing:
        raise InputError(
            f"missing required column(s) {', '.join(missing)}; the header has: {', '.join(raw.header)}",
            file=raw.path, line=raw.first_line,
        )
    ignored = [h for h in raw.header if h not in cols.values()]
    n_rows = len(raw)

    def col_text(c: str) -> list[str]:
        return texts(raw, cols[c]) if c in cols else [""] * n_rows

    ri = numbers(raw, cols["ri"], required=True, minimum=0.0, maximum=RI_MAX)
    sd = (numbers(raw, cols["ri_sd"], required=False, nonnegative=True, maximum=MAX_SD)
          if "ri_sd" in cols else np.full(n_rows, np.nan))
    nn = (numbers(raw, cols["n"], required=False, integer=True, minimum=1, maximum=MAX_N)
          if "n" in cols else np.full(n_rows, np.nan))
    cells = {c: col_text(c) for c in COLUMNS if c not in ("ri", "ri_sd", "n")}

    rows: list[LibraryRow] = []
    for k in range(n_rows):
        r = k + 1

        def fail(msg: str, c: str) -> InputError:
            return raw.fail(msg, row=r, column=cols.get(c, c))

        name = display_name(cells["name"][k])
        if not name:
            raise fail("empty cell; a compound name is required", "name")
        if not matching_key(name):
            raise fail(f"the name {name!r} has no letters or digits", "name")
        try:
            phase_class = check_class(cells["phase_class"][k]) if cells["phase_class"][k] else ""
        except MatcherError as exc:
            raise fail(str(exc), "phase_class") from None
        if not phase_class:
            raise fail("empty cell; a phase class is required", "phase_class")
        values: dict = {}
        for c, fn in (("cas", normalise_cas), ("formula", hill_formula), ("inchikey", normalise_inchikey),
                      ("key_ions", canonical_ions), ("date", _iso_date)):
            v = cells[c][k]
            if v:
                try:
                    values[c] = fn(v)
                except ValueError as exc:
                    raise fail(str(exc), c) from None
        mode = cells["mode"][k].lower()
        if mode:
            if mode not in _MODES:
                raise fail(f"mode must be programmed or isothermal, got {cells['mode'][k]!r}", "mode")
            mode = _MODES[mode]
        syns: list[str] = []
        seen = {matching_key(name)}
        for part in cells["synonyms"][k].split(";"):
            s = display_name(part)
            if s and matching_key(s) and matching_key(s) not in seen:
                seen.add(matching_key(s))
                syns.append(s)
        rows.append(LibraryRow(
            row=r, line=raw.line_of(r), name=name, phase_class=phase_class, ri=float(ri[k]),
            ri_sd=None if math.isnan(sd[k]) else float(sd[k]),
            n=None if math.isnan(nn[k]) else int(nn[k]),
            mode=mode or "programmed", synonyms=tuple(syns),
            phase=display_name(cells["phase"][k]), source=cells["source"][k], smiles=cells["smiles"][k],
            notes=cells["notes"][k], series=display_name(cells["series"][k]), analyst=cells["analyst"][k],
            retired=cells["retired"][k],
            **values,
        ))
    return rows, ignored


# --------------------------------------------------------------------------- resolving rows to compounds


@dataclass
class _Slot:
    """One compound the file speaks about: an existing one (``cid``) or a new one."""

    name: str
    cid: int | None = None
    fields: dict = field(default_factory=dict)  # compound-level values given by the file
    origin: dict = field(default_factory=dict)  # field -> data row that gave it
    synonyms: list[str] = field(default_factory=list)
    rows: list[LibraryRow] = field(default_factory=list)


def _resolve(rows: list[LibraryRow], session, path: str) -> list[_Slot]:
    from sqlalchemy import select

    from matcher.store.models import Compound
    from matcher.store.writes import CompoundIndex

    idx = CompoundIndex.read(session)
    existing = {c.id: c for c in session.scalars(select(Compound))} if idx.names else {}
    slots: list[_Slot] = []
    by_key: dict[str, int] = {}
    by_cas: dict[str, int] = {}
    by_cid: dict[int, int] = {}

    def err(r: LibraryRow, msg: str, column: str) -> InputError:
        return InputError(msg, file=path, row=r.row, line=r.line, column=column)

    def slot_for_cid(cid: int) -> int:
        if cid not in by_cid:
            c = existing[cid]
            s = _Slot(name=c.name, cid=cid, fields={f: getattr(c, f) for f in COMPOUND_LEVEL if getattr(c, f)})
            s.origin = {f: "library" for f in s.fields}
            slots.append(s)
            by_cid[cid] = len(slots) - 1
            by_key[c.key] = by_cid[cid]
            if c.cas:
                by_cas.setdefault(c.cas, by_cid[cid])
            for syn in c.synonyms:
                by_key.setdefault(syn.key, by_cid[cid])
        return by_cid[cid]

    for r in rows:
        hits: dict[int, str] = {}  # slot -> how it was found (first reason wins)
        for k, how in [(r.key, "name")] + [(matching_key(s), f"synonym {s!r}") for s in r.synonyms]:
            if k in by_key:
                hits.setdefault(by_key[k], how)
            elif k in idx.by_key:
                hits.setdefault(slot_for_cid(idx.by_key[k]), how)
        if r.cas:
            # a CAS number attaches a new name to a compound that was in the library before this
            # import (when exactly one has it); inside one file, different names stay different
            if r.cas in by_cas:
                hits.setdefault(by_cas[r.cas], "CAS")
            elif len(idx.by_cas.get(r.cas, ())) == 1:
                hits.setdefault(slot_for_cid(idx.by_cas[r.cas][0]), "CAS")
        if len(hits) > 1:
            names = "; ".join(f"{slots[i].name!r} (by {how})" for i, how in hits.items())
            raise err(r, f"this row ties together different compounds: {names}", "name")
        if hits:
            si = next(iter(hits))
        else:
            slots.append(_Slot(name=r.name))
            si = len(slots) - 1
        s = slots[si]
        for f in COMPOUND_LEVEL:
            v = getattr(r, f)
            if not v:
                continue
            if f in s.fields and s.fields[f] != v:
                where = "the library" if s.origin[f] == "library" else f"data row {s.origin[f]}"
                raise err(r, f"{f} {v!r} contradicts {s.fields[f]!r} given for {s.name!r} in {where}", f)
            if f not in s.fields:
                s.fields[f] = v
                s.origin[f] = r.row
        names_here = [r.name] + list(r.synonyms)
        for nm in names_here:
            k = matching_key(nm)
            if k not in by_key:
                by_key[k] = si
                if k != matching_key(s.name) and nm not in s.synonyms:
                    s.synonyms.append(nm)
        s.rows.append(r)
    return slots


def _obs_signature(phase_class, ri, mode, ri_sd, n, phase_id, source, analyst, date_, retired) -> tuple:
    return (phase_class, float(ri), mode, ri_sd, n, phase_id, source or None, analyst or None, date_ or None, retired or None)


def import_library(db: str | None, path: str | Path, *, replace: bool = False, who: str | None = None,
                   dry_run: bool = False) -> ImportReport:
    """Import a library file (CSV or XLSX) into the library at ``db``, all or nothing."""
    from sqlalchemy import delete, func, select

    from matcher.store.database import open_library, record, run_write
    from matcher.store.models import Compound, Observation, Phase, Synonym
    from matcher.store import writes

    path = str(path)
    rows, ignored = read_rows(path)
    engine = open_library(db)
    report = ImportReport(file=path, rows=len(rows), ignored_columns=ignored)

    class _DryRun(Exception):
        pass

    def work(session):
        if replace:
            before = {
                "compounds": session.scalar(select(func.count()).select_from(Compound)),
                "observations": session.scalar(select(func.count()).select_from(Observation)),
            }
            session.execute(delete(Observation))
            session.execute(delete(Synonym))
            session.execute(delete(Compound))
            record(session, "replace-library", f"file:{Path(path).name}", before, None)
        slots = _resolve(rows, session, path)
        phases = {writes.phase_key(p.name): p for p in session.scalars(select(Phase))}
        report.compounds_created = report.compounds_updated = 0
        report.observations_added = report.observations_skipped = 0
        for s in slots:
            if s.cid is None:
                c = writes.create_compound(session, {"name": s.name, **s.fields}, s.synonyms)
                report.compounds_created += 1
                have: set = set()
            else:
                c = session.get(Compound, s.cid)
                changes = {f: v for f, v in s.fields.items() if not getattr(c, f)}
                if changes or s.synonyms:
                    writes.update_compound(session, c, changes, s.synonyms)
                    report.compounds_updated += 1
                have = {
                    _obs_signature(o.phase_class, o.ri, o.mode, o.ri_sd, o.n, o.phase_id, o.source, o.analyst, o.date, o.retired_reason)
                    for o in c.observations
                }
            s.compound = c
            s.have = have
        # observations in file order, so that ids follow the file
        order = sorted(((r, s) for s in slots for r in s.rows), key=lambda t: t[0].row)
        pending: list = []
        for r, s in order:
            phase = None
            if r.phase:
                pk = writes.phase_key(r.phase)
                phase = phases.get(pk)
                if phase is not None and phase.phase_class != r.phase_class:
                    raise InputError(f"phase {phase.name!r} is {phase.phase_class} in the library, not {r.phase_class}",
                                     file=path, row=r.row, line=r.line, column="phase")
                if phase is None:
                    phase = writes.get_phase(session, r.phase, r.phase_class, note=f"added by import of {Path(path).name}")
                    phases[pk] = phase
            sig = _obs_signature(r.phase_class, r.ri, r.mode, r.ri_sd, r.n, phase.id if phase else None,
                                 r.source, r.analyst, r.date, r.retired)
            if sig in s.have:
                report.observations_skipped += 1
                continue
            pending.append((s.compound, {
                "phase_class": r.phase_class, "ri": r.ri, "mode": r.mode, "ri_sd": r.ri_sd, "n": r.n,
                "source": r.source, "analyst": r.analyst, "date": r.date, "retired_reason": r.retired or None,
            }, phase))
            report.observations_added += 1
        writes.add_observations(session, pending)  # one bulk insert, audited row by row
        if report.observations_added or report.compounds_updated or replace:
            record(session, "import", f"file:{Path(path).name}", None, {
                "rows": report.rows, "added": report.observations_added,
                "skipped": report.observations_skipped, "new_compounds": report.compounds_created,
            })
            report.revision = session.info.get("revision")
        if dry_run:
            raise _DryRun()

    try:
        run_write(engine, work, who=who)
    except _DryRun:
        report.revision = None
    return report


# --------------------------------------------------------------------------- export


def format_number(x: float | int | None) -> str:
    """Shortest text that reads back as the same number; whole numbers without a decimal point.

    >>> format_number(1020.0), format_number(1020.25), format_number(None)
    ('1020', '1020.25', '')
    """
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return ""
    x = float(x)
    if x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return repr(x)


def export_rows(db: str | None) -> list[dict[str, str]]:
    """Every observation as a library-CSV row (text cells), in the order they were added."""
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from matcher.store.database import open_library
    from matcher.store.models import Compound, Observation, Phase, Synonym

    engine = open_library(db)
    with Session(engine) as s:
        compounds = {c.id: c for c in s.scalars(select(Compound))}
        syn: dict[int, list[str]] = {}
        for cid, name in s.execute(select(Synonym.compound_id, Synonym.name).order_by(Synonym.id)):
            syn.setdefault(cid, []).append(name)
        phases = {p.id: p.name for p in s.scalars(select(Phase))}
        out = []
        for o in s.scalars(select(Observation).order_by(Observation.id)):
            c = compounds[o.compound_id]
            out.append({
                "name": c.name, "phase_class": o.phase_class, "ri": format_number(o.ri),
                "cas": c.cas or "", "formula": c.formula or "", "ri_sd": format_number(o.ri_sd),
                "n": "" if o.n is None else str(o.n), "mode": o.mode, "phase": phases.get(o.phase_id, ""),
                "source": o.source or "", "synonyms": "; ".join(syn.get(c.id, [])),
                "inchikey": c.inchikey or "", "smiles": c.smiles or "", "notes": c.notes or "",
                "series": c.series or "", "key_ions": c.key_ions or "", "analyst": o.analyst or "",
                "date": o.date or "", "retired": o.retired_reason or "" if not o.active else "",
            })
    return out


def rows_to_csv(rows: list[dict[str, str]]) -> str:
    """The library CSV text of export rows (fixed columns, ``\\n`` line ends, minimal quoting)."""
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(COLUMNS), lineterminator="\n", extrasaction="raise")
    w.writeheader()
    for r in rows:
        w.writerow(r)
    return buf.getvalue()


def _write_xlsx(rows: list[dict], path) -> None:
    """The library as one sheet: every cell a *text* cell (never a formula), XML-illegal characters as U+FFFD.

    Text stays literal (``=HYPERLINK(...)`` is stored as that text, with the quote-prefix style so
    that editing the cell does not turn it into a formula), so re-importing the file gives the
    same library, except for control characters XML cannot hold (shown as U+FFFD).
    """
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell

    from matcher.safe_text import xml_text

    wb = Workbook(write_only=True)
    ws = wb.create_sheet("library")
    ws.append(list(COLUMNS))
    for r in rows:
        cells = []
        for col in COLUMNS:
            v = r.get(col, "")
            cell = WriteOnlyCell(ws, value=xml_text("" if v is None else str(v)))
            cell.data_type = "s"  # text, whatever it starts with: a spreadsheet never runs it
            if cell.value and cell.value[:1] in "=+-@":
                cell.quotePrefix = True
            cells.append(cell)
        ws.append(cells)
    wb.save(path)


def export_library(db: str | None, path: str | Path | None = None) -> str:
    """Export the library to ``path`` (``.csv`` or ``.xlsx``, written atomically); returns the CSV text."""
    from matcher.io.atomic import atomic_path, atomic_write, guard_output

    if path is not None:
        guard_output(path, db=db, allow_stream=True)
    rows = export_rows(db)
    text = rows_to_csv(rows)
    if path is not None:
        path = str(path)
        if path.lower().endswith(".xlsx"):
            with atomic_path(path) as tmp:
                _write_xlsx(rows, tmp)
        else:
            with atomic_write(path, newline="") as fh:
                fh.write(text)
    return text


__all__ = [
    "REQUIRED", "OPTIONAL", "OURS", "COLUMNS", "LibraryRow", "ImportReport", "read_rows",
    "import_library", "export_rows", "rows_to_csv", "export_library", "format_number", "canonical_ions",
]
