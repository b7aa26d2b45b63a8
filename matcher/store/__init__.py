"""The house-library store: the only layer of matcher that speaks SQL.

Kept light on import: :mod:`matcher.store.snapshot_loader` reads a SQLite
library with the standard ``sqlite3`` module, so ``matcher query`` never
imports SQLAlchemy. The SQLAlchemy layer loads on first use of :func:`ddl`
or when a submodule is imported.
"""


def ddl(dialect: str = "sqlite") -> str:
    """The schema's CREATE statements (see :func:`matcher.store.database.ddl`)."""
    from matcher.store.database import ddl as _ddl

    return _ddl(dialect)
