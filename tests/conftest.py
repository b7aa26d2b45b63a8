"""Shared fixtures. Store tests use ``library_url``, parametrised by backend: every
such test runs on a SQLite file and on a real PostgreSQL server (issue 9).

The server half: ``$MATCHER_TEST_PG_URL`` (an admin URL of a running server whose
role may create databases and roles, as ``.ci/postgres.sh`` exports) or, when it
is not set and the server binaries exist, a throwaway server started for the
session by :mod:`pg_throwaway` (initdb/pg_ctl in a temporary folder on a free
loopback port, as the ``postgres`` user when running as root) and always stopped
at session end. Each test gets a fresh database, dropped afterwards. Without a
server the PostgreSQL variants are skipped, with the reason in the skip notice.
"""

from __future__ import annotations

import importlib.resources
import os
import uuid

import pytest

import pg_throwaway

BACKENDS = ["sqlite", "postgresql"]
PG_ENV = "MATCHER_TEST_PG_URL"


def _pg_status() -> str:
    if os.environ.get(PG_ENV):
        return f"PostgreSQL: server given by ${PG_ENV}"
    why = pg_throwaway.available()
    return f"PostgreSQL: {why}; the server half of the store tests is skipped" if why else \
        "PostgreSQL: a throwaway server on loopback is started for the session"


def pytest_report_header(config):
    return _pg_status()


#: Tests that corrupt a SQLite file with the sqlite3 module (a server enforces its foreign keys,
#: so the corruption cannot be made there); their PostgreSQL variant is skipped.
SQLITE_ONLY = {"test_check_healthy_then_corrupted"}


def pytest_collection_modifyitems(config, items):
    for item in items:
        spec = getattr(item, "callspec", None)
        if spec and spec.params.get("library_url") == "postgresql" and item.originalname in SQLITE_ONLY:
            item.add_marker(pytest.mark.skip(reason="corrupts the file with sqlite3; SQLite only"))


@pytest.fixture(scope="session")
def pg_admin_url():
    """An SQLAlchemy URL of a superuser (or CREATEDB + CREATEROLE) connection to a test server."""
    given = os.environ.get(PG_ENV)
    if given:
        yield given
        return
    why = pg_throwaway.available()
    if why:
        pytest.skip(f"{why}; the server half of the store tests is skipped")
    try:
        server = pg_throwaway.start()
    except RuntimeError as exc:
        pytest.skip(f"PostgreSQL test server did not start ({exc}); the server half is skipped")
    try:
        yield server.url()
    finally:
        from matcher.store.database import dispose_all

        dispose_all()
        server.stop()


def _admin_exec(admin_url: str, *statements: str) -> None:
    from sqlalchemy import create_engine

    eng = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    try:
        with eng.connect() as conn:
            for st in statements:
                conn.exec_driver_sql(st)
    finally:
        eng.dispose()


class PgDatabase:
    """A fresh database on the test server; ``url(user)`` for other roles, ``admin(sql)`` as superuser."""

    def __init__(self, admin_url: str):
        from sqlalchemy.engine import make_url

        self.admin_url = admin_url
        self.name = "matcher_test_" + uuid.uuid4().hex[:12]
        self._base = make_url(admin_url)
        _admin_exec(admin_url, f'CREATE DATABASE "{self.name}"')
        self.roles: list[str] = []

    def url(self, user: str | None = None, password: str | None = None) -> str:
        u = self._base.set(database=self.name)
        if user is not None:
            u = u.set(username=user, password=password)
        return u.render_as_string(hide_password=False)

    def admin(self, *statements: str) -> None:
        """Run statements as the admin role inside this database (autocommit)."""
        _admin_exec(self.url(), *statements)

    def create_role(self, name: str, password: str, *, read_only: bool = False) -> str:
        """A login role with a password: read-only (SELECT) or read-write on the library's tables."""
        name = f"{name}_{uuid.uuid4().hex[:6]}"
        self.roles.append(name)
        rights = "SELECT" if read_only else "SELECT, INSERT, UPDATE, DELETE"
        self.admin(
            f"CREATE ROLE \"{name}\" LOGIN PASSWORD '{password}'",
            f'GRANT CONNECT ON DATABASE "{self.name}" TO "{name}"',
            f'GRANT USAGE ON SCHEMA public TO "{name}"',
            f'GRANT {rights} ON ALL TABLES IN SCHEMA public TO "{name}"',
            *([] if read_only else [f'GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO "{name}"']),
        )
        return name

    def drop(self) -> None:
        _admin_exec(self.admin_url, f'DROP DATABASE IF EXISTS "{self.name}" WITH (FORCE)',
                    *[f'DROP ROLE IF EXISTS "{r}"' for r in self.roles])


@pytest.fixture
def pg_database(pg_admin_url):
    """A fresh, empty database (no library yet) on the PostgreSQL test server."""
    from matcher.store.database import dispose_all

    db = PgDatabase(pg_admin_url)
    try:
        yield db
    finally:
        dispose_all()
        db.drop()


@pytest.fixture(params=BACKENDS)
def library_url(request, tmp_path):
    """The URL of a fresh, initialised, empty house library on each backend."""
    from matcher.store.database import dispose_all, init_library

    if request.param == "sqlite":
        url = "sqlite:///" + os.path.join(str(tmp_path), "library.sqlite")
    else:
        url = request.getfixturevalue("pg_database").url()
    init_library(url)
    yield url
    dispose_all()


@pytest.fixture
def demo_csv(tmp_path):
    """A copy of the shipped demo library file (from the installed package)."""
    text = importlib.resources.files("matcher.shipped").joinpath("demo_library.csv").read_text(encoding="utf-8")
    p = tmp_path / "demo_library.csv"
    p.write_text(text, encoding="utf-8")
    return p
