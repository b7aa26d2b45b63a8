"""Read the house library into a :class:`matcher.store.snapshot.LibrarySnapshot` in one pass.

Five SELECTs inside one read transaction (so the snapshot is consistent even
while someone writes): the revision, all compounds, all synonyms, and all
*active* observations, and the reference spectra. Never one query per compound or per peak.

Two paths give the same result (a test checks it):

* SQLite file URLs are read with the standard-library :mod:`sqlite3` module,
  opened read-only, so ``matcher query`` never imports SQLAlchemy and starts
  fast;
* every other URL goes through SQLAlchemy (:func:`load_snapshot_sqlalchemy`).
"""

from __future__ import annotations

import os
from urllib.parse import unquote

from matcher.location import mask_url, resolve

SQL_REVISION = "SELECT revision FROM library_state WHERE id = 1"
SQL_COMPOUNDS = "SELECT id, name, cas, formula, nominal_mass, series, key_ions FROM compounds ORDER BY id"
SQL_SYNONYMS = "SELECT compound_id, name FROM synonyms ORDER BY compound_id, id"
_SQL_OBS_SQLITE = "SELECT compound_id, phase_class, ri, n, ri_sd FROM observations WHERE active = 1 ORDER BY id"
SQL_SPECTRA = "SELECT compound_id, id, peaks FROM spectra ORDER BY compound_id, id"


def _sqlite_path(url: str) -> str | None:
    """The file of a plain ``sqlite:///path`` URL, or None when the fast path does not apply."""
    for prefix in ("sqlite:///", "sqlite+pysqlite:///"):
        if url.startswith(prefix):
            rest = url[len(prefix):]
            if not rest or "?" in rest or rest == ":memory:":
                return None
            return unquote(rest)
    return None


def reference_spectra(rows, table):
    """:class:`matcher.chem.spectra.ReferenceSpectra` from (compound_id, spectrum id, peaks text) rows."""
    import numpy as np

    from matcher.chem.spectra import ReferenceSpectra, SpectrumSet

    if not rows:
        return None
    row_of = {int(i): k for k, i in enumerate(table.ids)}
    comp = np.fromiter((row_of[int(r[0])] for r in rows), dtype=np.int64, count=len(rows))
    ids = np.fromiter((int(r[1]) for r in rows), dtype=np.int64, count=len(rows))
    # the stored text is "m/z:intensity" pairs; one split over all spectra, parsed in C
    texts = [r[2] or "" for r in rows]
    counts = np.fromiter((t.count(":") for t in texts), dtype=np.int64, count=len(texts))
    flat = np.array(" ".join(texts).replace(":", " ").split(), dtype=np.float64).reshape(-1, 2)
    order = np.argsort(comp, kind="stable")
    which = np.repeat(np.arange(len(rows), dtype=np.int64), counts)
    rank = np.empty(len(rows), dtype=np.int64)
    rank[order] = np.arange(len(rows))
    packed = SpectrumSet.from_arrays(rank[which], flat[:, 0], flat[:, 1], len(rows))
    return ReferenceSpectra(packed, comp[order], ids[order])


def _build(rev, compounds, synonyms, observations, source: str, spectra=()):
    import numpy as np

    from matcher.store.snapshot import CompoundTable, build_snapshot

    syn: dict[int, list[str]] = {}
    for cid, name in synonyms:
        syn.setdefault(int(cid), []).append(name)
    records = [
        {
            "id": cid, "name": name, "cas": cas or "", "formula": formula or "",
            "nominal_mass": float(mass) if mass is not None else float("nan"),
            "series": series or "",
            "key_ions": [int(i) for i in (ions or "").split()],
            "synonyms": syn.get(int(cid), []),
        }
        for cid, name, cas, formula, mass, series, ions in compounds
    ]
    table = CompoundTable.from_records(records)
    m = len(observations)
    cid = np.fromiter((o[0] for o in observations), dtype=np.int64, count=m)
    cls = np.array([o[1] for o in observations], dtype=object)
    ri = np.fromiter((o[2] for o in observations), dtype=np.float64, count=m)
    n = np.fromiter((np.nan if o[3] is None else o[3] for o in observations), dtype=np.float64, count=m)
    sd = np.fromiter((np.nan if o[4] is None else o[4] for o in observations), dtype=np.float64, count=m)
    return build_snapshot(table, cid, cls, ri, n, sd, source=source, revision=str(rev),
                          spectra=reference_spectra(list(spectra), table))


def _no_library(source: str):
    from matcher.errors import LibraryError

    return LibraryError(f"no house library at {source}; create one with: matcher library init")


def load_snapshot_sqlite(path: str, source: str | None = None):
    """The snapshot of a SQLite library file, read with :mod:`sqlite3` (no SQLAlchemy)."""
    import sqlite3

    from matcher.errors import LibraryError

    from matcher.store.probe import check_file, connect_readonly, probe_sqlite

    source = source or mask_url("sqlite:///" + path)
    if not check_file(path, source):  # folders, devices, empty and non-SQLite files are refused by name
        raise _no_library(source)
    if not os.path.exists(path + "-wal") and probe_sqlite(path, source=source, check="quick").state != "library":
        # no write-ahead log: checked as immutable first, so a refused file gets no -wal/-shm beside it
        raise _no_library(source)
    try:
        con = connect_readonly(path)
    except sqlite3.Error as exc:
        raise LibraryError(f"cannot open the house library {source}: {exc}") from None
    try:
        con.execute("PRAGMA busy_timeout = 30000")
        con.execute("BEGIN")
        # inside the read transaction: ours, a known version, intact (foreign or damaged files are refused)
        if probe_sqlite(path, source=source, check="quick", con=con).state != "library":
            raise _no_library(source)
        try:
            row = con.execute(SQL_REVISION).fetchone()
        except sqlite3.OperationalError as exc:
            if "no such table" in str(exc):
                raise _no_library(source) from None
            raise
        compounds = con.execute(SQL_COMPOUNDS).fetchall()
        synonyms = con.execute(SQL_SYNONYMS).fetchall()
        observations = con.execute(_SQL_OBS_SQLITE).fetchall()
        has_spectra = con.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'spectra'").fetchone()
        spectra = con.execute(SQL_SPECTRA).fetchall() if has_spectra else []  # a version-1 library has none
        con.execute("COMMIT")
    except sqlite3.DatabaseError as exc:
        raise LibraryError(f"cannot read the house library {source}: {exc}") from None
    finally:
        con.close()
    return _build(row[0] if row else 0, compounds, synonyms, observations, source, spectra)


def load_snapshot_sqlalchemy(url: str):
    """The snapshot read through SQLAlchemy (any backend)."""
    from sqlalchemy import select

    from matcher.store.database import open_library
    from matcher.store.models import Compound, LibraryState, Observation, Spectrum, Synonym

    engine = open_library(url)
    with engine.connect() as conn, conn.begin():
        rev = conn.execute(select(LibraryState.revision).where(LibraryState.id == 1)).scalar()
        compounds = conn.execute(
            select(Compound.id, Compound.name, Compound.cas, Compound.formula, Compound.nominal_mass,
                   Compound.series, Compound.key_ions).order_by(Compound.id)
        ).all()
        synonyms = conn.execute(select(Synonym.compound_id, Synonym.name).order_by(Synonym.compound_id, Synonym.id)).all()
        observations = conn.execute(
            select(Observation.compound_id, Observation.phase_class, Observation.ri, Observation.n, Observation.ri_sd)
            .where(Observation.active.is_(True)).order_by(Observation.id)
        ).all()
        spectra = conn.execute(
            select(Spectrum.compound_id, Spectrum.id, Spectrum.peaks).order_by(Spectrum.compound_id, Spectrum.id)
        ).all()
    return _build(rev or 0, compounds, synonyms, observations, mask_url(url), spectra)


def load_snapshot(url: str | None = None, *, fast: bool = True):
    """The library at ``url`` (path, URL, or None for ``$MATCHER_DB``/default) as a snapshot.

    ``source`` is the masked URL and ``revision`` the library revision.
    """
    url = resolve(url)
    path = _sqlite_path(url) if fast else None
    if path is not None:
        return load_snapshot_sqlite(path, mask_url(url))
    return load_snapshot_sqlalchemy(url)


__all__ = ["load_snapshot", "load_snapshot_sqlite", "load_snapshot_sqlalchemy"]
