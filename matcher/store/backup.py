"""A consistent copy of a SQLite house library while others may be writing (SQLite's online backup API)."""

from __future__ import annotations

import os
import sqlite3
from dataclasses import dataclass
from pathlib import Path

from matcher.errors import LibraryError, MatcherError


@dataclass
class BackupReport:
    path: str
    revision: int
    compounds: int
    entries: int  # (compound, class) entries screening would use
    bytes: int

    def summary(self) -> str:
        return (f"backed up to {self.path}: revision {self.revision}, {self.compounds} compounds, "
                f"{self.entries} class entries ({self.bytes} bytes)")


def backup(db: str | None, path: str | os.PathLike, *, overwrite: bool = False) -> BackupReport:
    """A consistent copy of a SQLite library, made with SQLite's online backup API.

    The copy is taken in one step inside one read transaction, so it shows the library at one
    revision even while other processes write (WAL: they are not blocked). It is written to a
    temporary file beside ``path``, checked (``PRAGMA integrity_check``), switched to a single
    self-contained file (rollback journal) and renamed into place. Other backends are refused:
    use their own dump tool, or ``matcher library export``.
    """
    from matcher.io.atomic import atomic_path
    from matcher.store.database import open_library

    engine = open_library(db)
    if engine.dialect.name != "sqlite":
        raise LibraryError(f"backup copies SQLite libraries only; this one is {engine.dialect.name}: use the "
                           f"server's dump tool, or: matcher library export -o copy.csv")
    src_path = engine.url.database
    if not src_path or src_path == ":memory:":
        raise LibraryError("an in-memory library cannot be backed up")
    from matcher.io.atomic import guard_output

    dest = Path(path)
    guard_output(dest, db=db, option="backup", allow_sqlite=True)
    if dest.exists():
        if os.path.samefile(dest, src_path):
            raise MatcherError(f"{dest} is the library itself; choose another file")
        if not overwrite:
            raise MatcherError(f"{dest} exists; choose another file or use --overwrite")
    from matcher.store.snapshot_loader import load_snapshot_sqlite

    with atomic_path(dest, allow_sqlite=True) as tmp:
        src = sqlite3.connect(f"file:{src_path}?mode=ro", uri=True, timeout=30.0)
        out = sqlite3.connect(str(tmp))
        try:
            src.backup(out)  # all pages in one step: one consistent snapshot of the library
            out.execute("PRAGMA journal_mode = DELETE")  # the copy is one self-contained file
            ok = out.execute("PRAGMA integrity_check").fetchone()[0]
        except sqlite3.DatabaseError as exc:
            raise LibraryError(f"cannot back up {src_path}: {exc}") from None
        finally:
            out.close()
            src.close()
        if ok != "ok":
            raise LibraryError(f"the copy failed its integrity check: {ok}")
        snap = load_snapshot_sqlite(str(tmp), source=str(dest))
    return BackupReport(str(dest), int(snap.revision), len(snap.compounds), snap.size, dest.stat().st_size)


__all__ = ["BackupReport", "backup"]
