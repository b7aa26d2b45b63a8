"""The store: connection settings, schema versions, transactions, revision and audit log, snapshots."""

from __future__ import annotations

import json
import sqlite3

import numpy as np
import pytest
from sqlalchemy import func, select, text

from matcher.errors import LibraryError
from matcher.store import database as dbm
from matcher.store import writes
from matcher.store.library_io import import_library
from matcher.store.models import AuditEntry, Compound, Observation
from matcher.store.snapshot_loader import load_snapshot, load_snapshot_sqlalchemy


def _sqlite_only(url):
    if not url.startswith("sqlite"):
        pytest.skip("SQLite-specific")


def test_sqlite_connection_settings(library_url):
    _sqlite_only(library_url)
    eng = dbm.engine_for(library_url)
    with eng.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar().lower() == "wal"
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == dbm.BUSY_TIMEOUT_MS


def test_init_is_idempotent_and_versioned(library_url):
    assert dbm.schema_version(dbm.engine_for(library_url)) == dbm.latest_version()
    rev = dbm.revision(library_url)
    dbm.init_library(library_url)
    assert dbm.revision(library_url) == rev  # nothing new to seed, nothing changed


def test_missing_library_is_one_clear_line(tmp_path):
    with pytest.raises(LibraryError, match="no house library .* matcher library init"):
        dbm.open_library(str(tmp_path / "absent.sqlite"))
    assert not (tmp_path / "absent.sqlite").exists()
    with pytest.raises(LibraryError, match="no house library"):
        load_snapshot(str(tmp_path / "absent.sqlite"))


def test_newer_schema_refused(library_url):
    with dbm.engine_for(library_url).begin() as conn:
        conn.execute(text("INSERT INTO schema_version (version, description, applied_at) VALUES (99, 'future', 'x')"))
    with pytest.raises(LibraryError, match="newer"):
        dbm.open_library(library_url)


def test_migration_path_applies_missing_steps(library_url, monkeypatch):
    def add_column(conn):
        conn.execute(text("ALTER TABLE compounds ADD COLUMN odour TEXT"))

    latest = dbm.latest_version()
    monkeypatch.setattr(dbm, "MIGRATIONS", dbm.MIGRATIONS + [(latest + 1, "test: odour column", add_column)])
    with pytest.raises(LibraryError, match=f"schema version {latest}"):
        dbm.open_library(library_url)
    dbm.init_library(library_url)
    eng = dbm.open_library(library_url)
    with eng.connect() as conn:
        cols = [r[1] for r in conn.exec_driver_sql("PRAGMA table_info(compounds)")] if eng.dialect.name == "sqlite" else []
        versions = [r[0] for r in conn.execute(text("SELECT version FROM schema_version ORDER BY version"))]
    assert versions == list(range(1, latest + 2))
    if cols:
        assert "odour" in cols


def test_writes_bump_revision_once_and_audit(library_url):
    before = dbm.revision(library_url)

    def add(s):
        c = writes.create_compound(s, {"name": "sabinene", "cas": "3387-41-5", "formula": "C10H16"}, ["4(10)-thujene"])
        writes.add_observation(s, c, {"phase_class": "nonpolar", "ri": 970.0, "source": "run 12 (invented)"})
        writes.add_observation(s, c, {"phase_class": "nonpolar", "ri": 972.0})
        return c.id

    cid = dbm.run_write(library_url, add, who="ana")
    assert dbm.revision(library_url) == before + 1
    with dbm.transaction(library_url, write=False) as s:
        entries = s.scalars(select(AuditEntry).where(AuditEntry.target == f"compound:{cid}").order_by(AuditEntry.id)).all()
        assert [e.action for e in entries] == ["add-compound", "add-observation", "add-observation"]
        assert {e.who for e in entries} == {"ana"} and {e.revision for e in entries} == {before + 1}
        after = json.loads(entries[0].after)
        assert after["nominal_mass"] == 136 and after["synonyms"] == ["4(10)-thujene"]


def test_failed_transaction_changes_nothing(library_url):
    before = dbm.revision(library_url)

    def boom(s):
        writes.create_compound(s, {"name": "camphene", "formula": "C10H16"})
        raise RuntimeError("stop")

    with pytest.raises(RuntimeError):
        dbm.run_write(library_url, boom)
    assert dbm.revision(library_url) == before
    with dbm.transaction(library_url, write=False) as s:
        assert s.scalar(select(func.count()).select_from(Compound)) == 0
        assert s.scalar(select(func.count()).select_from(AuditEntry).where(AuditEntry.action == "add-compound")) == 0


def test_unique_matching_key_enforced_by_database(library_url):
    dbm.run_write(library_url, lambda s: writes.create_compound(s, {"name": "α-Pinene"}))
    with pytest.raises(Exception):
        dbm.run_write(library_url, lambda s: writes.create_compound(s, {"name": "alpha pinene"}))


def test_retire_keeps_row_and_leaves_snapshot(library_url, demo_csv):
    import_library(library_url, demo_csv)
    snap = load_snapshot(library_url)
    with dbm.transaction(library_url, write=False) as s:
        oid = s.scalar(select(Observation.id).where(Observation.active.is_(True)).order_by(Observation.id))
    dbm.run_write(library_url, lambda s: writes.retire_observation(s, oid, "typo in the run sheet (test)"))
    snap2 = load_snapshot(library_url)
    assert int(snap2.revision) == int(snap.revision) + 1
    total = lambda sn: sum(int(e.n.sum()) for e in sn.classes.values())
    assert total(snap2) == total(snap) - 1
    with dbm.transaction(library_url, write=False) as s:
        o = s.get(Observation, oid)
        assert o.active is False and o.retired_reason.startswith("typo")


def _same_snapshot(a, b):
    assert a.revision == b.revision and a.source == b.source
    ca, cb = a.compounds, b.compounds
    for f in ("ids", "name", "cas", "formula", "carbons", "series"):
        assert list(getattr(ca, f)) == list(getattr(cb, f)), f
    assert np.array_equal(ca.nominal_mass, cb.nominal_mass, equal_nan=True)
    assert ca.key_ions == cb.key_ions and ca.synonyms == cb.synonyms
    assert set(a.classes) == set(b.classes)
    for cls in a.classes:
        ea, eb = a.classes[cls], b.classes[cls]
        for f in ("ri", "sd", "n", "compound", "predicted"):
            assert np.array_equal(getattr(ea, f), getattr(eb, f)), (cls, f)


def test_fast_and_sqlalchemy_snapshots_identical(library_url, demo_csv):
    _sqlite_only(library_url)
    import_library(library_url, demo_csv)
    _same_snapshot(load_snapshot(library_url), load_snapshot_sqlalchemy(library_url))


def test_snapshot_content_matches_direct_computation(library_url, demo_csv):
    # the centre of each entry is the median of the active observations (matcher.store.snapshot rules)
    import_library(library_url, demo_csv)
    snap = load_snapshot(library_url)
    assert snap.source == library_url and snap.revision == str(dbm.revision(library_url))
    e = snap.entries("nonpolar")
    assert np.all(np.diff(e.ri) >= 0)
    names = [snap.compounds.name[i] for i in e.compound]
    # n-alkanes sit exactly at 100 x carbon number (definition of the index)
    assert e.ri[names.index("decane")] == 1000.0 and e.ri[names.index("triacontane")] == 3000.0
    by_compound: dict[str, list] = {}
    with dbm.transaction(library_url, write=False) as s:
        for name, ri, n in s.execute(
            select(Compound.name, Observation.ri, Observation.n).join(Observation)
            .where(Observation.phase_class == "nonpolar", Observation.active.is_(True))
        ):
            by_compound.setdefault(name, []).append((ri, n))
    plain = {k: [r for r, _ in v] for k, v in by_compound.items() if all(n is None for _, n in v)}
    assert len(plain) > 80
    for name, vals in plain.items():
        k = names.index(name)
        assert e.ri[k] == pytest.approx(float(np.median(vals))), name
        assert e.n[k] == len(vals)


def test_snapshot_reads_in_few_queries(library_url, demo_csv):
    _sqlite_only(library_url)
    import_library(library_url, demo_csv)
    path = library_url[len("sqlite:///"):]
    statements = []
    real_connect = sqlite3.connect

    def tracing_connect(*a, **k):
        con = real_connect(*a, **k)
        con.set_trace_callback(statements.append)
        return con

    import matcher.store.snapshot_loader as sl

    sqlite3.connect = tracing_connect
    try:
        sl.load_snapshot_sqlite(path)
    finally:
        sqlite3.connect = real_connect
    selects = [s for s in statements if s.lstrip().upper().startswith("SELECT")]
    # the opening check (probe_sqlite: ours, schema version, revision row) is a fixed handful of
    # statements on the schema tables; the library itself is read in five SELECTs (the fifth: the spectra,
    # after a look whether the table exists, as a library from before schema version 2 has none)
    probe = {"SELECT 1 FROM sqlite_master LIMIT 1", "SELECT name FROM sqlite_master WHERE type = 'table'",
             "SELECT MAX(version) FROM schema_version", "SELECT COUNT(*) FROM library_state WHERE id = 1",
             "SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'spectra'"}
    data = [s for s in selects if s not in probe]
    assert len(data) == 5, data
    assert len(selects) - len(data) <= 4, selects


def test_query_path_does_not_import_sqlalchemy(library_url, demo_csv):
    _sqlite_only(library_url)
    import subprocess
    import sys

    import_library(library_url, demo_csv)
    code = ("import sys; from matcher.store.snapshot_loader import load_snapshot; "
            f"s = load_snapshot({library_url!r}); print(s.size, 'sqlalchemy' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert int(out[0]) > 300 and out[1] == "False"


def test_two_writers_lose_nothing(library_url):
    _sqlite_only(library_url)
    import subprocess
    import sys

    dbm.run_write(library_url, lambda s: writes.create_compound(s, {"name": "limonene"}))
    code = f"""
import sys
from matcher.store.database import run_write
from matcher.store import writes
from matcher.store.models import Compound
from sqlalchemy import select
def add(s, v):
    c = s.scalar(select(Compound).where(Compound.name == "limonene"))
    writes.add_observation(s, c, {{"phase_class": "nonpolar", "ri": v}})
for i in range(15):
    run_write({library_url!r}, lambda s: add(s, 1000.0 + i), who=sys.argv[1])
"""
    procs = [subprocess.Popen([sys.executable, "-c", code, f"w{i}"]) for i in range(2)]
    assert all(p.wait(timeout=120) == 0 for p in procs)
    with dbm.transaction(library_url, write=False) as s:
        assert s.scalar(select(func.count()).select_from(Observation)) == 30
    assert dbm.revision(library_url) >= 31
