"""Copy a whole house library between backends (SQLite file ↔ PostgreSQL server).

:func:`copy_library` copies every row of every table, ids included: compounds,
synonyms, phases, observations (retired ones too), the audit log, the library
revision and the schema versions. The copy is a faithful replica, so it adds
no audit entry of its own: the destination's export, audit log and revision
equal the source's, and a snapshot of either gives the same shortlists.

* The source is read inside one read transaction (a consistent picture even
  while someone writes to it).
* The destination is created (schema and migrations) when it holds no library
  yet, then filled inside ONE write transaction: a failed copy leaves it as it
  was. Row counts are compared before committing.
* A destination that already holds compounds, observations or a change history
  beyond the seeded phase catalog is refused unless ``replace=True``.

Example::

    from matcher.store.copying import copy_library
    copy_library("lab.sqlite", "postgresql+psycopg://curator@db.lab/ri")
"""

from __future__ import annotations

from dataclasses import dataclass, field

from matcher.errors import LibraryError

#: Tables in the order they are filled (a referenced table before the tables that refer to it).
ORDER = ("schema_version", "phases", "compounds", "synonyms", "observations", "spectra", "audit_log")
CHUNK = 5000


@dataclass
class CopyReport:
    source: str
    destination: str
    rows: dict[str, int] = field(default_factory=dict)
    revision: int = 0
    replaced: bool = False

    def summary(self) -> str:
        r = self.rows
        return (f"copied {self.source} to {self.destination}: {r.get('compounds', 0)} compounds, "
                f"{r.get('synonyms', 0)} synonyms, {r.get('observations', 0)} observations, {r.get('spectra', 0)} spectra, "
                f"{r.get('phases', 0)} phases, {r.get('audit_log', 0)} audit entries; library revision {self.revision}"
                + (" (destination replaced)" if self.replaced else ""))


def _tables():
    from matcher.store.models import Base

    return {t.name: t for t in Base.metadata.sorted_tables}


def destination_contents(session) -> dict[str, int]:
    """What a destination holds beyond a freshly initialised library (empty dict: nothing)."""
    from sqlalchemy import func, select

    from matcher.store.models import AuditEntry, Compound, Observation, Synonym

    held = {
        "compounds": session.scalar(select(func.count()).select_from(Compound)),
        "synonyms": session.scalar(select(func.count()).select_from(Synonym)),
        "observations": session.scalar(select(func.count()).select_from(Observation)),
        "changes": session.scalar(select(func.count()).select_from(AuditEntry).where(AuditEntry.action != "add-phase")),
    }
    return {k: v for k, v in held.items() if v}


def _read_all(engine) -> tuple[dict[str, list[dict]], dict]:
    from sqlalchemy import select

    tables = _tables()
    data: dict[str, list[dict]] = {}
    with engine.connect() as conn, conn.begin():
        for name in ORDER:
            t = tables[name]
            pk = list(t.primary_key.columns)
            data[name] = [dict(r._mapping) for r in conn.execute(select(t).order_by(*pk))]
        state = conn.execute(select(tables["library_state"]).where(tables["library_state"].c.id == 1)).one()._mapping
    return data, dict(state)


def _reset_sequences(session) -> None:
    """After inserting explicit ids on a server, let new rows continue after the largest id."""
    from sqlalchemy import text

    if session.get_bind().dialect.name != "postgresql":
        return  # SQLite's INTEGER PRIMARY KEY continues after MAX(id) by itself
    for name in ("phases", "compounds", "synonyms", "observations", "spectra", "audit_log", "library_state"):
        session.execute(text(
            f"SELECT setval(pg_get_serial_sequence('{name}', 'id'), COALESCE(MAX(id), 1), MAX(id) IS NOT NULL) FROM {name}"
        ))


def copy_library(src: str | None, dst: str, *, replace: bool = False) -> CopyReport:
    """Copy the library at ``src`` to ``dst`` losslessly (see the module notes)."""
    from sqlalchemy import delete, func, select, update

    from matcher.store.database import init_library, open_library, transaction
    from matcher.location import mask_url, resolve

    src_url, dst_url = resolve(src), resolve(dst)
    report = CopyReport(source=mask_url(src_url), destination=mask_url(dst_url), replaced=False)
    if src_url == dst_url:
        raise LibraryError(f"source and destination are the same library ({report.source})")
    source = open_library(src_url)
    data, state = _read_all(source)
    target = init_library(dst_url)
    tables = _tables()

    def fill(s) -> None:
        held = destination_contents(s)
        if held:
            if not replace:
                what = ", ".join(f"{v} {k}" for k, v in held.items())
                raise LibraryError(
                    f"the destination {report.destination} already holds a library ({what}); "
                    "copy into an empty one, or add --replace to overwrite it"
                )
            report.replaced = True
        for name in reversed(ORDER):  # referring tables first
            s.execute(delete(tables[name]))
        for name in ORDER:
            rows = data[name]
            for k in range(0, len(rows), CHUNK):
                s.execute(tables[name].insert(), rows[k:k + CHUNK])
        s.execute(update(tables["library_state"]).where(tables["library_state"].c.id == 1)
                  .values(revision=state["revision"], changed_at=state["changed_at"]))
        _reset_sequences(s)
        for name in ORDER:
            n = s.scalar(select(func.count()).select_from(tables[name]))
            if n != len(data[name]):  # pragma: no cover - a safety net, never expected
                raise LibraryError(f"copy to {report.destination} is incomplete ({name}: {n} of {len(data[name])} rows); nothing was changed")
            report.rows[name] = n
        report.revision = int(state["revision"])

    with transaction(target, who="matcher") as s:
        fill(s)
    return report


__all__ = ["copy_library", "CopyReport", "destination_contents", "ORDER"]
