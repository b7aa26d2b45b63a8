"""Snapshot loading from a PostgreSQL server against the same from a SQLite file.

Run:  python tests/benchmarks/bench_snapshot_pg.py [--observations 100000] [--repeat 5]

Builds a synthetic library (invented names and indices: 10 observations per compound,
two in each of the five polarity classes, a synonym for every fifth compound) in a
temporary SQLite file, copies it with ``matcher.store.copying.copy_library`` to a
server (``$MATCHER_TEST_PG_URL``, an admin URL that may create databases, or else a
throwaway server started for the run, as in the tests), then times
``load_snapshot`` (best of ``--repeat``, a fresh engine each time so connecting is
included):

* SQLite, standard-library fast path (what ``matcher screen`` uses on a file);
* SQLite through SQLAlchemy;
* PostgreSQL (loopback).

Prints seconds and the ratio server / SQLite fast path; the aim is within 2x.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
import uuid

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))


def build_sqlite(path: str, n_obs: int) -> None:
    from sqlalchemy import insert

    from matcher.classes import PHASE_CLASSES
    from matcher.chem.names import matching_key
    from matcher.store.database import engine_for, init_library, now
    from matcher.store.models import Compound, LibraryState, Observation, Synonym
    from sqlalchemy import update

    init_library(path)
    rng = np.random.default_rng(9)
    n_comp = max(1, n_obs // 10)
    stamp = now()
    compounds = [{"id": i + 1, "name": f"synthetic compound {i}", "key": matching_key(f"synthetic compound {i}"),
                  "formula": "C10H16", "nominal_mass": 136, "key_ions": "93 136", "created_at": stamp}
                 for i in range(n_comp)]
    synonyms = [{"compound_id": i + 1, "name": f"synthetic alias {i}", "key": matching_key(f"synthetic alias {i}")}
                for i in range(0, n_comp, 5)]
    centre = rng.uniform(700, 3500, n_comp)
    cid = np.arange(n_obs) % n_comp
    ri = np.round(centre[cid] + rng.normal(0, 3, n_obs), 2)
    observations = [{"compound_id": int(c) + 1, "phase_class": PHASE_CLASSES[(k // n_comp) % len(PHASE_CLASSES)], "ri": float(r),
                     "mode": "programmed", "n": None if k % 7 else 3, "ri_sd": None if k % 7 else 1.5,
                     "source": "synthetic (invented)", "active": True, "created_at": stamp}
                    for k, (c, r) in enumerate(zip(cid, ri))]
    eng = engine_for(path)
    with eng.begin() as conn:
        conn.execute(insert(Compound), compounds)
        conn.execute(insert(Synonym), synonyms)
        conn.execute(insert(Observation), observations)
        conn.execute(update(LibraryState).values(revision=1))


def best_of(fn, repeat: int) -> float:
    from matcher.store.database import dispose_all

    times = []
    for _ in range(repeat):
        dispose_all()
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--observations", type=int, default=100_000)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()

    from sqlalchemy import create_engine

    from matcher.store.copying import copy_library
    from matcher.store.snapshot_loader import load_snapshot

    server = None
    admin = os.environ.get("MATCHER_TEST_PG_URL")
    if not admin:
        import pg_throwaway

        why = pg_throwaway.available()
        if why:
            sys.exit(f"cannot run: {why} and $MATCHER_TEST_PG_URL is not set")
        server = pg_throwaway.start()
        admin = server.url()
    name = "matcher_bench_" + uuid.uuid4().hex[:8]
    admin_eng = create_engine(admin, isolation_level="AUTOCOMMIT")
    with admin_eng.connect() as conn:
        conn.exec_driver_sql(f'CREATE DATABASE "{name}"')
    from sqlalchemy.engine import make_url

    pg = make_url(admin).set(database=name).render_as_string(hide_password=False)
    try:
        with tempfile.TemporaryDirectory() as tmp:
            lite = os.path.join(tmp, "bench.sqlite")
            t = time.perf_counter()
            build_sqlite(lite, args.observations)
            t_build = time.perf_counter() - t
            t = time.perf_counter()
            rep = copy_library(lite, pg)
            t_copy = time.perf_counter() - t
            snap_a, snap_b = load_snapshot(lite), load_snapshot(pg)
            assert snap_a.size == snap_b.size and snap_a.revision == snap_b.revision
            n_entries = snap_a.size
            fast = best_of(lambda: load_snapshot(lite), args.repeat)
            via_sa = best_of(lambda: load_snapshot(lite, fast=False), args.repeat)
            server_t = best_of(lambda: load_snapshot(pg), args.repeat)
            print(f"library: {rep.rows['observations']} observations, {rep.rows['compounds']} compounds, "
                  f"{n_entries} snapshot entries (synthetic, invented values)")
            print(f"built the SQLite file in {t_build:.2f} s; copied it to the server in {t_copy:.2f} s")
            print(f"load_snapshot, best of {args.repeat}:")
            print(f"  SQLite, sqlite3 fast path   {fast:8.3f} s")
            print(f"  SQLite, SQLAlchemy          {via_sa:8.3f} s")
            print(f"  PostgreSQL (loopback)       {server_t:8.3f} s")
            print(f"ratio server / SQLite fast path: {server_t / fast:.2f}x (aim: within 2x); "
                  f"server / SQLite via SQLAlchemy: {server_t / via_sa:.2f}x")
            # the reading alone: the same loaders with the array building replaced by a no-op
            import matcher.store.snapshot_loader as sl

            real_build = sl._build
            sl._build = lambda *a, **k: None
            try:
                r_fast = best_of(lambda: load_snapshot(lite), args.repeat)
                r_server = best_of(lambda: load_snapshot(pg), args.repeat)
            finally:
                sl._build = real_build
            print(f"reading the rows only (no array building): SQLite {r_fast:.3f} s, server {r_server:.3f} s, "
                  f"ratio {r_server / r_fast:.2f}x")
    finally:
        from matcher.store.database import dispose_all

        dispose_all()
        with admin_eng.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin_eng.dispose()
        if server is not None:
            server.stop()


if __name__ == "__main__":
    main()
