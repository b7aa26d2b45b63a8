"""The house library on a PostgreSQL server (issue 9), against a throwaway server on loopback.

The same store tests run on both backends through ``library_url`` (tests/conftest.py);
these add what only a server has: several processes writing at once, roles with
read-only rights, passwords, and copying a library between backends. Without
server binaries every test here is skipped with the reason (see conftest.py).

The compound names, CAS numbers and indices used come from the shipped demo
library (invented indices, real CAS numbers) or are invented here and say so.
"""

from __future__ import annotations

import importlib.resources
import json
import os
import subprocess
import sys
import tempfile
import time

import pytest
from sqlalchemy import create_engine, func, select, text

from matcher.errors import LibraryError
from matcher.store import database as dbm
from matcher.store import writes
from matcher.store.copying import copy_library
from matcher.store.library_io import export_library, import_library
from matcher.store.models import AuditEntry, Compound, Observation, Phase, SchemaVersion, Synonym
from matcher.store.snapshot_loader import load_snapshot

pytestmark = pytest.mark.postgres

PASSWORD = "Zq7-s3cret-pw!x"  # distinctive, so that a leak in any output is found

# Subprocesses start outside the source tree, so they import the INSTALLED package
# (from the repository root, ``python -m matcher`` would pick up the source folder).
NEUTRAL_CWD = tempfile.gettempdir()


def _cli(*args: str, env: dict | None = None, timeout: float = 120) -> subprocess.CompletedProcess:
    full_env = {**os.environ, **(env or {})}
    full_env.pop("MATCHER_DB", None)
    return subprocess.run([sys.executable, "-m", "matcher", *args], capture_output=True, text=True,
                          env=full_env, timeout=timeout, cwd=NEUTRAL_CWD)


def _example(tmp_path, name: str):
    p = tmp_path / name
    p.write_text(importlib.resources.files("matcher.examples").joinpath(name).read_text(encoding="utf-8"), encoding="utf-8")
    return p


def _rows(url: str, model, order) -> list[dict]:
    """Every row of a table as plain values, in a fixed order (backend-neutral comparison)."""
    eng = dbm.engine_for(url)
    cols = list(model.__table__.columns)
    with eng.connect() as conn:
        out = []
        for r in conn.execute(select(*cols).order_by(order)):
            d = dict(r._mapping)
            if "active" in d:
                d["active"] = bool(d["active"])
            out.append(d)
    return out


# --------------------------------------------------------------------------- round trips


def test_import_export_on_server_equals_sqlite(pg_database, tmp_path, demo_csv):
    lite = str(tmp_path / "lab.sqlite")
    pg = pg_database.url()
    for url in (lite, pg):
        dbm.init_library(url)
        rep = import_library(url, demo_csv)
        assert rep.observations_added > 700 and rep.compounds_created > 100
    a, b = export_library(lite), export_library(pg)
    assert a == b
    # export -> import (replace) -> export on the server is byte-identical (docs/formats.md, "Library CSV")
    exp = tmp_path / "exp.csv"
    exp.write_text(b, encoding="utf-8")
    import_library(pg, exp, replace=True)
    assert export_library(pg) == b
    # the snapshot read from the server equals the one read from the file
    sa, sb = load_snapshot(lite), load_snapshot(pg)
    assert sa.size == sb.size and list(sa.compounds.name) == list(sb.compounds.name)
    for cls in sa.classes:
        assert list(sa.classes[cls].ri) == list(sb.classes[cls].ri)


def test_long_names_kept_whole_on_the_server(library_url, tmp_path):
    # SQLite does not enforce VARCHAR lengths; the server would, so bounded columns are TEXT there
    name = "invented compound " + "x" * 480
    f = tmp_path / "long.csv"
    f.write_text(f"name,phase_class,ri,source\n{name},nonpolar,1234,{'s' * 900}\n", encoding="utf-8")
    import_library(library_url, f)
    assert export_library(library_url).splitlines()[1].startswith(name + ",nonpolar,1234,")


# --------------------------------------------------------------------------- copy between backends


def _library_with_history(path: str, demo_csv) -> None:
    dbm.init_library(path)
    import_library(path, demo_csv, who="ana")

    def curate(s):
        c = writes.create_compound(s, {"name": "invented-ol", "formula": "C10H18O"}, ["invented alcohol (test)"])
        writes.add_observation(s, c, {"phase_class": "polar", "ri": 1701.5, "ri_sd": 2.5, "n": 3,
                                      "source": "invented for the test", "analyst": "bo", "date": "2024-05-02"})
        oid = s.scalar(select(Observation.id).where(Observation.active.is_(True)).order_by(Observation.id))
        writes.retire_observation(s, oid, "mislabelled vial (invented)")

    dbm.run_write(path, curate, who="bo")


def test_copy_sqlite_to_server_and_back_is_lossless(pg_database, tmp_path, demo_csv):
    a, b = str(tmp_path / "a.sqlite"), str(tmp_path / "b.sqlite")
    pg = pg_database.url()
    _library_with_history(a, demo_csv)
    rep = copy_library(a, pg)
    assert rep.rows["observations"] > 800 and rep.revision == dbm.revision(a)
    copy_library(pg, b)
    for x, y in ((a, pg), (a, b)):
        assert export_library(x) == export_library(y)
        assert dbm.revision(x) == dbm.revision(y)
        for model, order in ((AuditEntry, AuditEntry.id), (Compound, Compound.id), (Synonym, Synonym.id),
                             (Observation, Observation.id), (Phase, Phase.id), (SchemaVersion, SchemaVersion.version)):
            assert _rows(x, model, order) == _rows(y, model, order), model.__tablename__
    audit = _rows(b, AuditEntry, AuditEntry.id)
    assert {e["who"] for e in audit} >= {"ana", "bo"}
    assert [e["action"] for e in audit][-1] == "retire-observation"
    # the server copy continues its ids after the copied ones (sequences reset)
    top = max(r["id"] for r in _rows(pg, Observation, Observation.id))
    new = dbm.run_write(pg, lambda s: writes.add_observation(
        s, s.scalar(select(Compound).where(Compound.name == "invented-ol")), {"phase_class": "polar", "ri": 1703.0}).id)
    assert new == top + 1


def test_copy_refuses_a_filled_destination_unless_replace(pg_database, tmp_path, demo_csv):
    a = str(tmp_path / "a.sqlite")
    pg = pg_database.url()
    dbm.init_library(pg)  # a freshly initialised library counts as empty
    _library_with_history(a, demo_csv)
    copy_library(a, pg)
    dbm.run_write(pg, lambda s: writes.create_compound(s, {"name": "invented-one (test)"}))
    before = export_library(pg)
    with pytest.raises(LibraryError, match="already holds a library .*--replace"):
        copy_library(a, pg)
    assert export_library(pg) == before  # nothing changed
    r = _cli("library", "copy", a, pg, "--replace")
    assert r.returncode == 0, r.stderr
    assert "destination replaced" in r.stdout and export_library(pg) == export_library(a)
    with pytest.raises(LibraryError, match="same library"):
        copy_library(pg, pg)


# --------------------------------------------------------------------------- concurrency


WRITER = r"""
import sys, time
from sqlalchemy import select
from matcher.store.database import run_write
from matcher.store import writes
from matcher.store.models import Compound
from matcher.chem.names import matching_key

url, me, start = sys.argv[1], int(sys.argv[2]), float(sys.argv[3])
NAMES = ["invented-ene A", "invented-ene B", "invented-ol C", "invented-one D", "invented-al E"]

def add(s, i):
    name = NAMES[(i + me) % len(NAMES)]
    c = s.scalar(select(Compound).where(Compound.key == matching_key(name)))
    if c is None:
        c = writes.create_compound(s, {"name": name})
    writes.add_observation(s, c, {"phase_class": "nonpolar", "ri": 1000.0 + me * 100 + i, "analyst": f"w{me}"})

while time.time() < start:
    time.sleep(0.005)
for i in range(25):
    run_write(url, lambda s: add(s, i), who=f"w{me}")
"""


def test_four_processes_25_additions_each_lose_nothing(library_url):
    rev = dbm.revision(library_url)
    procs = []
    start = time.time() + 2.0  # all four begin writing at the same moment
    for me in range(4):
        procs.append(subprocess.Popen([sys.executable, "-c", WRITER, library_url, str(me), str(start)],
                                      stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=NEUTRAL_CWD))
    results = [p.communicate(timeout=180) for p in procs]
    assert all(p.returncode == 0 for p in procs), [e for _, e in results]
    dbm.dispose_all()
    with dbm.transaction(library_url, write=False) as s:
        assert s.scalar(select(func.count()).select_from(Observation)) == 100
        assert s.scalar(select(func.count()).select_from(Compound)) == 5  # no duplicate compound
        ri = sorted(s.scalars(select(Observation.ri)))
        assert ri == sorted(1000.0 + me * 100 + i for me in range(4) for i in range(25))
        per_writer = dict(s.execute(select(Observation.analyst, func.count()).group_by(Observation.analyst)).all())
        assert per_writer == {"w0": 25, "w1": 25, "w2": 25, "w3": 25}
        assert s.scalar(select(func.count()).select_from(AuditEntry).where(AuditEntry.action == "add-compound")) == 5
    # every write transaction bumped the revision exactly once
    assert dbm.revision(library_url) == rev + 100


def test_two_processes_creating_the_schema_at_once(pg_database):
    url = pg_database.url()
    code = ("import sys, time\nfrom matcher.store.database import init_library, revision\n"
            "t = float(sys.argv[2])\nwhile time.time() < t: time.sleep(0.005)\n"
            "print(revision(init_library(sys.argv[1])))")
    start = time.time() + 1.5
    procs = [subprocess.Popen([sys.executable, "-c", code, url, str(start)], stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True, cwd=NEUTRAL_CWD) for _ in range(2)]
    outs = [p.communicate(timeout=120) for p in procs]
    assert all(p.returncode == 0 for p in procs), [e for _, e in outs]
    with dbm.transaction(url, write=False) as s:
        assert s.scalar(select(func.count()).select_from(SchemaVersion)) == len(dbm.MIGRATIONS)  # each version once
        names = list(s.scalars(select(Phase.name)))
        assert len(names) == len(set(names)) > 10  # the phase catalog seeded once


# --------------------------------------------------------------------------- roles and passwords


def test_read_only_role_screens_but_cannot_change(pg_database, tmp_path, demo_csv):
    owner = pg_database.url()
    dbm.init_library(owner)
    import_library(owner, demo_csv)
    lite = str(tmp_path / "same.sqlite")
    copy_library(owner, lite)
    reader = pg_database.create_role("reader", PASSWORD, read_only=True)
    url = pg_database.url(reader)  # no password in the address: libpq reads $PGPASSWORD
    env = {"PGPASSWORD": PASSWORD}
    run, ladder = _example(tmp_path, "run.csv"), _example(tmp_path, "ladder.csv")
    outs = {}
    for label, db in (("server", url), ("file", lite)):
        out = tmp_path / f"shortlist-{label}.csv"
        r = _cli("screen", str(run), "--ladder", str(ladder), "--class", "slightly-polar", "-o", str(out), "--db", db, env=env)
        assert r.returncode == 0, r.stderr
        assert PASSWORD not in r.stdout + r.stderr
        outs[label] = out.read_text(encoding="utf-8")
    assert outs["server"] == outs["file"] and outs["server"].count("\n") > 20
    rev = dbm.revision(owner)
    one = tmp_path / "one.csv"
    one.write_text("name,phase_class,ri\ninvented-ane (test),nonpolar,1111\n", encoding="utf-8")
    r = _cli("library", "import", str(one), "--db", url, env=env)
    assert r.returncode == 2 and r.stdout == ""
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert "may read this library but not change it" in lines[0] and reader in lines[0]
    assert PASSWORD not in r.stderr
    assert dbm.revision(owner) == rev
    with pytest.raises(LibraryError, match="may read this library but not change it"):
        dbm.run_write(url.replace(f"{reader}@", f"{reader}:{PASSWORD}@"),
                      lambda s: writes.create_compound(s, {"name": "invented-ane (test)"}))


def test_password_never_appears_in_output(pg_database, tmp_path, demo_csv):
    from urllib.parse import quote

    dbm.init_library(pg_database.url())  # the owner creates the schema, then grants the curator its rights
    role = pg_database.create_role("curator", PASSWORD)
    plain = pg_database.url(role)
    env = {"PGPASSWORD": PASSWORD}
    lite = str(tmp_path / "lab.sqlite")
    exp = tmp_path / "exp.csv"
    seen = []

    def run(*args, env=env, ok=True):
        r = _cli(*args, env=env)
        seen.append(r.stdout + r.stderr)
        if ok:
            assert r.returncode == 0, r.stderr
        return r

    run("library", "init", "--db", plain)
    run("library", "import", str(demo_csv), "--db", plain)
    run("library", "stats", "--db", plain)
    run("library", "check", "--db", plain)
    run("library", "export", "-o", str(exp), "--db", plain)
    run("library", "copy", plain, lite)
    run("query", "1031", "--class", "slightly-polar", "--db", plain)
    # a password written into the address anyway (percent-encoded, as URLs need) is masked
    inline = plain.replace(f"{role}@", f"{role}:{quote(PASSWORD, safe='')}@")
    r = run("library", "stats", "--db", inline, env={"PGPASSWORD": ""})
    assert f"{role}:***@" in r.stdout
    r = run("library", "init", "--db", inline, env={"PGPASSWORD": ""})
    assert f"{role}:***@" in r.stdout
    # wrong passwords and an unreachable server: one line, exit 2, nothing secret
    bad = plain.replace(f"{role}@", f"{role}:{quote(PASSWORD + 'Q', safe='')}@")
    r = run("library", "stats", "--db", bad, env={"PGPASSWORD": ""}, ok=False)
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1 and "password authentication failed" in r.stderr
    r = run("library", "stats", "--db", plain, env={"PGPASSWORD": PASSWORD + "Q"}, ok=False)
    assert r.returncode == 2 and "password authentication failed" in r.stderr
    port_free = __import__("pg_throwaway").free_port()
    r = run("library", "stats", "--db", inline.replace(f":{pg_database._base.port}/", f":{port_free}/"), ok=False)
    assert r.returncode == 2 and f"{role}:***@" in r.stderr
    joined = "\n".join(seen)
    assert PASSWORD not in joined and quote(PASSWORD, safe="") not in joined
    assert "Traceback" not in joined


def test_password_from_the_users_password_file(pg_database, tmp_path, demo_csv):
    owner = pg_database.url()
    dbm.init_library(owner)
    import_library(owner, demo_csv)
    role = pg_database.create_role("analyst", PASSWORD, read_only=True)
    passfile = tmp_path / "pgpass"
    # libpq's password file: hostname:port:database:username:password, mode 0600 (PostgreSQL docs, "The Password File")
    passfile.write_text(f"127.0.0.1:{pg_database._base.port}:{pg_database.name}:{role}:{PASSWORD}\n", encoding="utf-8")
    passfile.chmod(0o600)
    r = _cli("library", "stats", "--json", "--db", pg_database.url(role), env={"PGPASSFILE": str(passfile), "PGPASSWORD": ""})
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["compounds"] > 100 and PASSWORD not in r.stdout + r.stderr


def test_role_without_rights_is_told_so(pg_database):
    owner = pg_database.url()
    dbm.init_library(owner)
    pg_database.admin("REVOKE SELECT ON schema_version FROM PUBLIC")
    role = pg_database.create_role("stranger", PASSWORD, read_only=True)
    pg_database.admin(f'REVOKE SELECT ON ALL TABLES IN SCHEMA public FROM "{role}"')
    with pytest.raises(LibraryError, match="may not read this library .*grant read access") as e:
        load_snapshot(pg_database.url(role, PASSWORD))
    assert PASSWORD not in str(e.value) and f"{role}:***@" in str(e.value)


def test_plain_postgresql_address_uses_psycopg(pg_database):
    url = pg_database.url().replace("postgresql+psycopg://", "postgresql://")
    eng = dbm.init_library(url)
    assert eng.dialect.driver == "psycopg" and dbm.revision(url) >= 1


def test_writer_lock_serialises_on_the_revision_row(library_url):
    # a writer holding the lock makes a second writer wait instead of interleaving with it
    if not library_url.startswith("postgresql"):
        pytest.skip("server only")
    import threading

    order = []
    first_in = threading.Event()

    def slow(s):
        order.append("a-start")
        first_in.set()
        time.sleep(0.6)
        writes.create_compound(s, {"name": "invented-a (test)"})
        order.append("a-end")

    def fast(s):
        order.append("b-start")
        writes.create_compound(s, {"name": "invented-b (test)"})

    t = threading.Thread(target=lambda: dbm.run_write(library_url, slow))
    t.start()
    first_in.wait(10)
    time.sleep(0.1)
    dbm.run_write(library_url, fast)
    t.join(10)
    assert order == ["a-start", "a-end", "b-start"]
    eng = dbm.engine_for(library_url)
    with eng.connect() as conn:
        assert conn.execute(text("SELECT COUNT(*) FROM compounds")).scalar() == 2
