"""Opening the house library: engines, schema creation and migration, transactions.

* :func:`engine_for` builds (and caches) an engine for ``--db`` / ``$MATCHER_DB``
  (see :mod:`matcher.location`). On SQLite every connection gets
  ``PRAGMA journal_mode=WAL`` (readers never block the writer),
  ``busy_timeout`` (a writer waits for another instead of failing) and
  ``foreign_keys=ON``; write transactions start with ``BEGIN IMMEDIATE`` so
  that two writers queue up instead of deadlocking on a lock upgrade.
* On a PostgreSQL server (``postgresql+psycopg://user@host/db``; the password
  comes from ``$PGPASSWORD`` or ``~/.pgpass``, read by libpq) a write
  transaction runs at READ COMMITTED and its first statement locks the one
  ``library_state`` row (``SELECT ... FOR UPDATE``), the server's counterpart of
  ``BEGIN IMMEDIATE``: writers queue on that row, and every later statement of
  the transaction sees what the writer before it committed, so two analysts
  adding the same new compound at once give one compound (the unique matching
  key backs this up). Readers are never blocked. Schema creation and
  migrations take a transaction-scoped advisory lock, so two ``library init``
  at once create the schema once. A role that may only read gets a one-line
  refusal on any change.
* :func:`init_library` creates the schema (or migrates an older one) and seeds
  the stationary-phase catalog; :func:`open_library` refuses a missing or
  too-new library with one line.
* :func:`transaction` is a context manager giving a :class:`Session` inside one
  transaction; :func:`run_write` runs a function in one, retrying when the
  database is locked or the server reports a serialization failure.
* Every change goes through :func:`record`, which writes the audit entry and
  bumps the library revision (once per transaction).

Migrations: :data:`MIGRATIONS` is an ordered list of ``(version, description,
function)``. A fresh library is created from the models (``create_all``) and
stamped with the latest version; an older library gets each missing
migration applied in order, each in its own transaction.
"""

from __future__ import annotations

import json
import os
import time
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Callable, Iterator, TypeVar

from sqlalchemy import Connection, Engine, create_engine, event, inspect, select, text, update
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session

from matcher.errors import LibraryError
from matcher.location import mask_secrets, resolve
from matcher.store.models import AuditEntry, Base, LibraryState, Phase, SchemaVersion

T = TypeVar("T")

BUSY_TIMEOUT_MS = 30_000


#: Key of the advisory lock held while the schema is created or migrated on a server.
SCHEMA_LOCK_KEY = 0x6D617463  # "matc"


def _initial(conn: Connection) -> None:  # version 1: the models as first released
    Base.metadata.create_all(conn)


def _spectra_table(conn: Connection) -> None:  # version 2: reference mass spectra
    from matcher.store.models import Spectrum

    Spectrum.__table__.create(conn, checkfirst=True)  # the table and its index, on SQLite and PostgreSQL alike


#: Ordered migrations: (version, description, function(connection)).
MIGRATIONS: list[tuple[int, str, Callable[[Connection], None]]] = [
    (1, "initial schema: compounds, synonyms, phases, observations, audit log, revision", _initial),
    (2, "spectra: reference mass spectra per compound, with provenance", _spectra_table),
]


def latest_version() -> int:
    return MIGRATIONS[-1][0]


def now() -> str:
    """Current UTC time as ISO-8601 text (seconds)."""
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat()


_ENGINES: dict[str, Engine] = {}

from matcher.store.probe import OUR_TABLES, Probe, connect_readonly, is_verified, sqlite_uri  # noqa: E402,F401  (no SQLAlchemy there)
from matcher.store.probe import probe_sqlite as _probe_file  # noqa: E402


def probe_sqlite(path: str, *, source: str | None = None, check: str = "quick") -> Probe:
    """:func:`matcher.store.probe.probe_sqlite`, first closing this process's pooled connections to
    the file when a probe connection is needed (a second, short-lived connection closing beside
    pooled ones could check the WAL out from under them)."""
    if check == "full" or not is_verified(path):
        for eng in list(_ENGINES.values()):
            if sqlite_file(eng) == path:
                eng.dispose()
    return _probe_file(path, source=source, check=check)


def sqlite_file(engine_or_url) -> str | None:
    from sqlalchemy.engine import make_url

    url = engine_or_url.url if isinstance(engine_or_url, Engine) else make_url(engine_or_url)
    if url.get_backend_name() != "sqlite":
        return None
    path = url.database
    return path if path and path != ":memory:" else None


def _sqlite_setup(engine: Engine, readonly: bool = False) -> None:
    memory = engine.url.database in (None, "", ":memory:")

    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record):  # pragma: no cover - exercised by every test
        dbapi_conn.isolation_level = None  # we emit BEGIN ourselves
        cur = dbapi_conn.cursor()
        cur.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        if not memory and not readonly:
            cur.execute("PRAGMA journal_mode = WAL")
        cur.execute("PRAGMA foreign_keys = ON")
        cur.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn):
        mode = conn.get_execution_options().get("sqlite_begin", "DEFERRED")
        conn.exec_driver_sql(f"BEGIN {mode}")


#: The install command that adds the PostgreSQL driver (named in the message when it is missing).
POSTGRES_INSTALL = 'pip install "matcher[postgres]"'


def engine_for(db: str | None = None) -> Engine:
    """A cached engine for a path or URL (``None``: ``$MATCHER_DB`` or the default file)."""
    url = resolve(db)
    eng = _ENGINES.get(url)
    if eng is not None:
        return eng
    if url.startswith("sqlite"):
        path = sqlite_file(url)
        folder = os.path.dirname(os.path.abspath(path)) if path else None
        readonly = bool(path and os.path.isfile(path)
                        and (not os.access(path, os.W_OK) or not os.access(folder or ".", os.W_OK)))
        if readonly:  # a library we may not write: read it without ever trying to (no journal switch, no -shm)
            import sqlite3

            eng = create_engine("sqlite://", creator=lambda p=path: connect_readonly(p))
        else:
            eng = create_engine(url, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
        _sqlite_setup(eng, readonly=readonly)
    else:
        try:
            eng = create_engine(url, pool_pre_ping=True)
        except (ImportError, ModuleNotFoundError) as exc:
            raise LibraryError(f"house library {mask_secrets(url)}: the database driver is not installed ({exc.name}); "
                               f"install it with: {POSTGRES_INSTALL}") from None
        except Exception as exc:  # an address SQLAlchemy cannot use
            raise LibraryError(f"house library {mask_secrets(url)}: unusable address ({mask_secrets(str(exc))})") from None
    _ENGINES[url] = eng
    return eng


def dispose_all() -> None:
    """Close every cached engine (tests, and before copying a SQLite file)."""
    for eng in _ENGINES.values():
        eng.dispose()
    _ENGINES.clear()


def _writer(engine: Engine) -> Engine:
    if engine.dialect.name == "sqlite":
        return engine.execution_options(sqlite_begin="IMMEDIATE")
    return engine


def _version_on(conn: Connection) -> int | None:
    if not inspect(conn).has_table("schema_version"):
        return None
    v = conn.execute(text("SELECT MAX(version) FROM schema_version")).scalar()
    return int(v) if v is not None else None


def schema_version(engine: Engine) -> int | None:
    """The applied schema version, or None when the database holds no library."""
    with engine.connect() as conn:
        return _version_on(conn)


def _schema_lock(conn: Connection) -> None:
    """On a server, serialise schema creation and migration (held until the transaction ends)."""
    if conn.dialect.name == "postgresql":
        conn.execute(text("SELECT pg_advisory_xact_lock(:k)"), {"k": SCHEMA_LOCK_KEY})


def _where(engine: Engine) -> str:
    return mask_secrets(engine.url.render_as_string(hide_password=True))


#: SQLSTATEs of a change refused because the role may only read (42501 insufficient privilege,
#: 25006 read-only transaction, as with ``default_transaction_read_only``).
READ_ONLY_STATES = ("42501", "25006")


def sqlstate(exc: BaseException) -> str | None:
    """The SQLSTATE a server reported for this error (None for SQLite and non-database errors)."""
    orig = getattr(exc, "orig", exc)
    return getattr(orig, "sqlstate", None) or getattr(orig, "pgcode", None)


def _wrap(engine: Engine, exc: Exception, *, writing: bool = False) -> LibraryError:
    from matcher.location import mask_secrets

    msg = mask_secrets(" ".join(str(getattr(exc, "orig", exc)).split()))
    user = engine.url.username or "this role"
    if sqlstate(exc) == "42501" and not writing:
        return LibraryError(
            f"house library {_where(engine)}: refused, {user!s} may not read this library ({msg}); "
            "ask its administrator to grant read access"
        )
    if sqlstate(exc) in READ_ONLY_STATES:
        return LibraryError(
            f"house library {_where(engine)}: refused, {user!s} may read this library but not change it "
            f"({msg}); screening and queries work, changes need a role with write access"
        )
    return LibraryError(f"house library {_where(engine)}: {msg}")


def init_library(db: str | None = None) -> Engine:
    """Create the library (schema, revision row, phase catalog) or migrate an older one; idempotent."""
    path = sqlite_file(resolve(db))
    if path:
        probe = probe_sqlite(path, source=mask_secrets(resolve(db)), check="quick")
        if probe.state == "missing":
            os.makedirs(os.path.dirname(os.path.abspath(path)) or ".", exist_ok=True)
    engine = engine_for(db)
    try:
        if not path:  # a server: never write our tables into another application's database
            with engine.connect() as conn:
                names = set(inspect(conn).get_table_names())
            if names and "schema_version" not in names:
                shown = ", ".join(sorted(names)[:6]) + (", ..." if len(names) > 6 else "")
                raise LibraryError(f"the database {_where(engine)} holds another application's tables ({shown}), "
                                   f"not a house library; nothing was changed; use an empty database")
        current = schema_version(engine)
        if current is None:
            with _writer(engine).begin() as conn:
                _schema_lock(conn)
                if _version_on(conn) is None:  # nobody created it while we waited for the lock
                    Base.metadata.create_all(conn)
                    stamp = now()
                    for v, desc, _fn in MIGRATIONS:
                        conn.execute(SchemaVersion.__table__.insert().values(version=v, description=desc, applied_at=stamp))
                    conn.execute(LibraryState.__table__.insert().values(id=1, revision=0, changed_at=stamp))
            current = schema_version(engine)
        if current > latest_version():
            raise LibraryError(
                f"house library {_where(engine)} has schema version {current}, newer than this "
                f"program knows ({latest_version()}); upgrade matcher"
            )
        for v, desc, fn in MIGRATIONS:
            if v > current:
                with _writer(engine).begin() as conn:
                    _schema_lock(conn)
                    if (_version_on(conn) or 0) >= v:  # applied by another process meanwhile
                        continue
                    fn(conn)
                    conn.execute(SchemaVersion.__table__.insert().values(version=v, description=desc, applied_at=now()))
        if _phases_missing(engine):
            _seed_phases(engine)
    except DBAPIError as exc:
        raise _wrap(engine, exc, writing=True) from None
    return engine


def _phases_missing(engine: Engine) -> bool:
    from matcher.retention.phases import catalog

    with engine.connect() as conn:
        have = set(conn.execute(select(Phase.name)).scalars())
    return any(p.name not in have for p in catalog())


def _seed_phases(engine: Engine) -> None:
    from matcher.retention.phases import catalog

    with transaction(engine, who="matcher") as s:
        have = set(s.scalars(select(Phase.name)))
        for p in catalog():
            if p.name in have:
                continue
            x, y, z, u, sv = p.constants or (None,) * 5
            row = Phase(name=p.name, phase_class=p.phase_class, x=x, y=y, z=z, u=u, s=sv, source=p.source)
            s.add(row)
            s.flush()
            record(s, "add-phase", f"phase:{row.id}", None, {"name": p.name, "class": p.phase_class})


def open_library(db: str | None = None, *, check: str = "quick") -> Engine:
    """The engine of an existing, current library; a one-line :class:`LibraryError` otherwise.

    A SQLite file is first checked read-only by :func:`probe_sqlite` (``check``: "quick" runs
    ``PRAGMA quick_check``, "none" skips it, "full" leaves the integrity findings to the caller).
    """
    url = resolve(db)
    path = sqlite_file(url)
    if path:
        probe = probe_sqlite(path, source=mask_secrets(url), check=check)
        if probe.state != "library":
            raise LibraryError(f"no house library at {mask_secrets(url)}; create one with: matcher library init")
    engine = engine_for(db)
    try:
        v = schema_version(engine)
    except DBAPIError as exc:
        raise _wrap(engine, exc) from None
    if v is None:
        raise LibraryError(f"no house library at {_where(engine)}; create one with: matcher library init")
    if v < latest_version():
        raise LibraryError(f"house library {_where(engine)} has schema version {v}; run: matcher library init (migrates it)")
    if v > latest_version():
        raise LibraryError(f"house library {_where(engine)} has schema version {v}, newer than this program; upgrade matcher")
    return engine


def _as_engine(target: Engine | str | None) -> Engine:
    return target if isinstance(target, Engine) else open_library(target)


@contextmanager
def transaction(target: Engine | str | None = None, *, who: str | None = None, write: bool = True) -> Iterator[Session]:
    """A session inside ONE transaction: committed on success, rolled back on any error.

    ``who`` is the default actor for :func:`record`. With ``write=True`` a
    SQLite transaction starts ``BEGIN IMMEDIATE`` (takes the write lock at once).
    """
    engine = _as_engine(target)
    bind = _writer(engine) if write else engine
    session = Session(bind=bind, expire_on_commit=False)
    session.info["who"] = who or default_user()
    try:
        with session.begin():
            if write and engine.dialect.name == "postgresql":
                # the writer lock: queue behind any other writer (see the module notes)
                session.execute(select(LibraryState.revision).where(LibraryState.id == 1).with_for_update())
            yield session
    except DBAPIError as exc:
        if is_retryable(exc):
            raise
        raise _wrap(engine, exc, writing=write) from None
    finally:
        session.close()


def is_retryable(exc: BaseException) -> bool:
    """True for "database is locked"/busy (SQLite) and serialization failures or deadlocks (server)."""
    if not isinstance(exc, DBAPIError):
        return False
    msg = str(getattr(exc, "orig", exc)).lower()
    if "database is locked" in msg or "database is busy" in msg:
        return True
    return sqlstate(exc) in ("40001", "40P01")


def run_write(target: Engine | str | None, fn: Callable[[Session], T], *, who: str | None = None, attempts: int = 8) -> T:
    """Run ``fn(session)`` in one write transaction, retrying on lock or serialization failure."""
    engine = _as_engine(target)
    delay = 0.05
    for attempt in range(attempts):
        try:
            with transaction(engine, who=who) as s:
                return fn(s)
        except DBAPIError as exc:
            if not is_retryable(exc) or attempt == attempts - 1:
                raise _wrap(engine, exc, writing=True) from None
            time.sleep(delay)
            delay = min(delay * 2, 1.0)
    raise AssertionError("unreachable")


def default_user() -> str:
    import getpass

    try:
        return getpass.getuser()
    except Exception:  # no user name in this environment
        return "unknown"


def bump_revision(session: Session) -> int:
    """Increase the library revision once per transaction; returns the new revision."""
    rev = session.info.get("revision")
    if rev is None:
        session.execute(update(LibraryState).where(LibraryState.id == 1).values(revision=LibraryState.revision + 1, changed_at=now()))
        rev = int(session.execute(select(LibraryState.revision).where(LibraryState.id == 1)).scalar_one())
        session.info["revision"] = rev
    return rev


def record(session: Session, action: str, target: str, before: dict | None, after: dict | None, *, who: str | None = None) -> None:
    """Write one audit entry (and bump the revision) for a change made in this session."""
    rev = bump_revision(session)
    session.add(
        AuditEntry(
            at=now(),
            who=who or session.info.get("who") or default_user(),
            action=action,
            target=target,
            before=None if before is None else json.dumps(before, sort_keys=True, ensure_ascii=False),
            after=None if after is None else json.dumps(after, sort_keys=True, ensure_ascii=False),
            revision=rev,
        )
    )


def revision(target: Engine | str | None = None) -> int:
    """The current library revision."""
    engine = _as_engine(target)
    with engine.connect() as conn:
        return int(conn.execute(select(LibraryState.revision).where(LibraryState.id == 1)).scalar_one())


def ddl(dialect: str = "sqlite") -> str:
    """The CREATE statements of the current schema for a dialect (``schema/store.sql`` is this for SQLite)."""
    from sqlalchemy.schema import CreateIndex, CreateTable
    from sqlalchemy.dialects import postgresql, sqlite

    d = {"sqlite": sqlite.dialect(), "postgresql": postgresql.dialect()}[dialect]
    parts = [
        "-- The house-library store of matcher: generated from matcher/store/models.py by",
        "-- matcher.store.database.ddl(); do not edit by hand (tests/test_store_schema.py checks it).",
        f"-- Schema version {latest_version()}.",
        "",
    ]
    for table in Base.metadata.sorted_tables:
        parts.append(str(CreateTable(table).compile(dialect=d)).strip() + ";")
        parts.append("")
        for idx in sorted(table.indexes, key=lambda i: i.name or ""):
            parts.append(str(CreateIndex(idx).compile(dialect=d)).strip() + ";")
        if table.indexes:
            parts.append("")
    return "\n".join(line.rstrip() for line in "\n".join(parts).splitlines()).rstrip() + "\n"


__all__ = [
    "MIGRATIONS", "latest_version", "engine_for", "dispose_all", "init_library", "open_library",
    "transaction", "run_write", "is_retryable", "record", "bump_revision", "revision", "ddl", "now",
    "schema_version", "sqlstate", "READ_ONLY_STATES",
]
