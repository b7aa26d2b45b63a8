"""Checking a SQLite file before opening it as a house library: read-only, standard library only.

Used by :func:`matcher.store.database.open_library` / ``init_library`` and by the
fast snapshot path (which must not import SQLAlchemy). Nothing here writes: the
file is opened with ``mode=ro`` (``immutable=1`` when a WAL library sits in a
folder we may not write to), so a foreign or damaged file is never switched to
WAL or otherwise touched.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

from matcher.errors import LibraryError

#: The newest schema version this program knows; equals ``database.latest_version()``
#: (``tests/test_store_schema.py`` checks it; bump both when adding a migration).
KNOWN_VERSION = 2


def _known() -> int:
    """The migrations' latest version when the store is loaded (it may hold more), else :data:`KNOWN_VERSION`."""
    import sys

    db = sys.modules.get("matcher.store.database")
    return db.latest_version() if db is not None else KNOWN_VERSION

#: The tables of a house library (all must be present).
OUR_TABLES = ("compounds", "synonyms", "phases", "observations", "audit_log", "library_state", "schema_version")
#: Libraries up to this size get a ``PRAGMA quick_check`` when opened for reading too (always for writing).
QUICK_CHECK_READ_BYTES = 64 * 1024 * 1024


def sqlite_uri(path: str, *, immutable: bool = False) -> str:
    """A read-only ``file:`` URI for ``path`` (percent-encoded, so ``?``, ``#`` and ``%`` in names are safe)."""
    from urllib.parse import quote

    return f"file:{quote(os.path.abspath(path))}?mode=ro" + ("&immutable=1" if immutable else "")


def _needs_immutable(path: str) -> bool:
    """A WAL library in a folder we may not write to, with no ``-shm`` file: readable only as immutable."""
    folder = os.path.dirname(os.path.abspath(path)) or "."
    return not os.access(folder, os.W_OK) and not os.path.exists(path + "-shm")


def connect_readonly(path: str, *, strict: bool = True):
    """A :mod:`sqlite3` connection that never changes the file's content (falls back to ``immutable=1``).

    With ``strict=False`` and a file we may write, the connection is opened ``mode=rw`` (never
    creating the file, never switching its journal mode; we only read through it): a
    ``mode=ro`` reader of a WAL library can fail with "disk I/O error" while another process
    is checkpointing, which a normal reader rides out.
    """
    import sqlite3

    if not strict and os.access(path, os.W_OK) and os.access(os.path.dirname(os.path.abspath(path)) or ".", os.W_OK):
        return sqlite3.connect(sqlite_uri(path).replace("mode=ro", "mode=rw"), uri=True, timeout=30.0,
                               isolation_level=None, check_same_thread=False)
    try:
        con = sqlite3.connect(sqlite_uri(path), uri=True, timeout=30.0, isolation_level=None,
                              check_same_thread=False)
        con.execute("SELECT 1 FROM sqlite_master LIMIT 1").fetchall()
        return con
    except sqlite3.OperationalError:
        if not _needs_immutable(path):
            raise
    return sqlite3.connect(sqlite_uri(path, immutable=True), uri=True, timeout=30.0,
                           isolation_level=None, check_same_thread=False)


@dataclass
class Probe:
    """What :func:`probe_sqlite` found: ``state`` is "missing", "blank" (an empty SQLite database) or "library"."""

    state: str
    version: int | None = None
    integrity: list[str] = field(default_factory=list)


#: Files already verified by this process: (device, inode) -> Probe (a command checks once, at its start).
_VERIFIED: dict[tuple[int, int], Probe] = {}


def probe_sqlite(path: str, *, source: str | None = None, check: str = "quick", con=None) -> Probe:
    """:func:`_probe` once per file and process (again for ``check="full"``); transient "disk I/O error"
    or "locked" answers while another process writes are retried."""
    import sqlite3
    import time

    try:
        st = os.stat(path)
        key = (st.st_dev, st.st_ino)
    except OSError:
        key = None
    if key is not None and check != "full" and key in _VERIFIED:
        return _VERIFIED[key]
    for attempt in range(6):
        try:
            wal_before = os.path.exists(path + "-wal")
            try:
                probe = _probe(path, source=source, check=check, con=con, immutable=con is None)
            except LibraryError:
                if con is not None or wal_before or not os.path.exists(path + "-wal"):
                    raise
                # read as immutable (touching nothing) it looked wrong, but a writer started meanwhile:
                # make sure with a normal reader (the -wal exists now anyway)
                probe = _probe(path, source=source, check=check, con=None, immutable=False)
            break
        except _Transient:
            if attempt == 5:
                raise LibraryError(f"house library {source or path}: could not be read (busy); try again") from None
            time.sleep(0.05 * (attempt + 1))
    if key is not None and probe.state == "library" and check != "none":
        _VERIFIED[key] = probe
    return probe


def is_verified(path: str) -> bool:
    """True when this process has already verified the file (no connection needed to probe it again)."""
    try:
        st = os.stat(path)
    except OSError:
        return False
    return (st.st_dev, st.st_ino) in _VERIFIED


class _Transient(Exception):
    pass


def check_file(path: str, where: str) -> bool:
    """The checks that need no connection: False when missing; refuses folders, devices, empty and non-SQLite files."""
    import stat as _stat

    from matcher.io.atomic import SQLITE_MAGIC

    try:
        st = os.stat(path)
    except FileNotFoundError:
        return False
    except OSError as exc:
        raise LibraryError(f"cannot open the house library {where}: {exc.strerror or exc}") from None
    if _stat.S_ISDIR(st.st_mode):
        raise LibraryError(f"{where} is a folder, not a house library file")
    if not _stat.S_ISREG(st.st_mode):
        raise LibraryError(f"{where} is not a regular file, so it is not a house library")
    if st.st_size == 0:
        raise LibraryError(f"{where} is an empty file (0 bytes), not a house library; nothing was changed "
                           f"(delete it, or give another path, to create a library)")
    try:
        with open(path, "rb") as fh:
            head = fh.read(16)
    except OSError as exc:
        raise LibraryError(f"cannot read the house library {where}: {exc.strerror or exc}") from None
    if head != SQLITE_MAGIC:
        raise LibraryError(f"{where} is not a SQLite database, so not a house library; nothing was changed")
    return True


def _probe(path: str, *, source: str | None = None, check: str = "quick", con=None, immutable: bool = False) -> Probe:
    """Check, read-only and before anything else, that ``path`` is a house library we can use.

    Refused with one :class:`LibraryError` that names the problem (and nothing is
    modified: no journal-mode switch, no folder created): not a regular file, an
    empty (0-byte) file, a file that is not SQLite, another application's
    database, one of ours with tables missing, a schema version that is not a
    number or is newer than this program, a missing revision row, and
    (``check="quick"``: ``PRAGMA quick_check``) a damaged file. With
    ``check="full"`` the ``PRAGMA integrity_check`` findings are returned in
    ``integrity`` instead (for ``matcher library check``). A missing file and
    an empty SQLite database are reported, not refused (``init`` creates them).
    """
    import sqlite3
    import stat as _stat

    from matcher.io.atomic import SQLITE_MAGIC

    where = source or path
    if not check_file(path, where):
        return Probe("missing")
    own = con is None
    try:
        if own and immutable and not os.path.exists(path + "-wal"):
            # nothing in a write-ahead log: read the file as immutable, creating no -wal/-shm beside it
            import sqlite3 as _sq

            con = _sq.connect(sqlite_uri(path, immutable=True), uri=True, isolation_level=None, check_same_thread=False)
        elif own:
            con = connect_readonly(path, strict=False)
            con.execute("PRAGMA busy_timeout = 30000")
        tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        if not tables:
            return Probe("blank")
        if "schema_version" not in tables or "library_state" not in tables:
            shown = ", ".join(sorted(tables)[:6]) + (", ..." if len(tables) > 6 else "")
            raise LibraryError(f"{where} is another application's SQLite database (tables: {shown}), not a house "
                               f"library; nothing was changed")
        missing = [t for t in OUR_TABLES if t not in tables]
        if missing:
            raise LibraryError(f"house library {where} is damaged: table(s) {', '.join(missing)} missing; "
                               f"nothing was changed (restore a backup)")
        raw = con.execute("SELECT MAX(version) FROM schema_version").fetchone()[0]
        if isinstance(raw, float) and raw.is_integer():
            raw = int(raw)
        if not isinstance(raw, int) or isinstance(raw, bool):
            raise LibraryError(f"house library {where} is damaged: its schema version {raw!r} is not a whole number; "
                               f"nothing was changed")
        if raw > _known():
            raise LibraryError(f"house library {where} has schema version {raw}, newer than this program knows "
                               f"({_known()}); upgrade matcher; nothing was changed")
        if raw >= 2 and "spectra" not in tables:  # added by schema version 2
            raise LibraryError(f"house library {where} is damaged: table(s) spectra missing; "
                               f"nothing was changed (restore a backup)")
        n_state = con.execute("SELECT COUNT(*) FROM library_state WHERE id = 1").fetchone()[0]
        if n_state != 1:
            raise LibraryError(f"house library {where} is damaged: its revision row (library_state) is missing; "
                               f"nothing was changed (restore a backup, or: matcher library check)")
        integrity: list[str] = []
        if check in ("quick", "full"):
            pragma = "integrity_check" if check == "full" else "quick_check"
            res = [r[0] for r in con.execute(f"PRAGMA {pragma}").fetchmany(20)]
            if res != ["ok"]:
                if check == "quick":
                    raise LibraryError(f"house library {where} is damaged ({res[0]}); nothing was changed; "
                                       f"run: matcher library check, and restore a backup")
                integrity = res
        return Probe("library", raw, integrity)
    except sqlite3.DatabaseError as exc:
        text = str(exc).lower()
        if con is not None and not own:
            pass
        elif "disk i/o error" in text or "locked" in text or "busy" in text:
            raise _Transient() from None
        raise LibraryError(f"house library {where} is damaged or unreadable ({exc}); nothing was changed; "
                           f"restore a backup") from None
    finally:
        if own and con is not None:
            con.close()


