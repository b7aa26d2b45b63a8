"""Combining two house libraries (two instruments, two labs) with a report of conflicts.

``matcher library merge OTHER``: observations of the other library that are
not yet present are added in one transaction; a compound whose centres in a
class lie farther apart than the outlier guard of :mod:`matcher.curate.library_edits`, a
contradicting identity, or a phase filed under another class is reported as a
conflict and never overwritten. Running the same merge twice adds nothing.
"""

from __future__ import annotations

import os
from matcher.curate.library_edits import guard_limit
from matcher.store.merging import Conflict, MergeReport, merge_rows  # noqa: F401 - the records are part of this API




def _other_rows(other: str):
    """The other library as validated library rows (a library file, or a library's export)."""
    import tempfile

    from matcher.store.library_io import export_library, read_rows

    if str(other).lower().endswith((".csv", ".txt", ".xlsx")) and "://" not in str(other):
        return read_rows(other)[0]
    with tempfile.TemporaryDirectory() as tmp:
        p = os.path.join(tmp, "other-library.csv")
        export_library(other, p)
        return read_rows(p)[0]


def _shown(other: str) -> str:
    from matcher.location import mask_url, resolve

    if "://" not in str(other) and str(other).lower().endswith((".csv", ".txt", ".xlsx")):
        return str(other)
    return mask_url(resolve(other))


def merge(db: str | None, other_db: str, *, analyst: str | None = None) -> MergeReport:
    """Combine ``other_db`` (a library path/URL or a library CSV) into ``db``, in one transaction.

    Compounds are matched by name or synonym key, else by a CAS number that exactly one of
    ours has. Observations already present (same class, index, mode, spread, n, phase,
    source, analyst, date; active or retired) are skipped, so merging twice adds nothing.
    Nothing is overwritten: a compound whose CAS number or formula contradicts ours, a
    phase filed under another class, or a class whose centres lie farther apart than the
    outlier guard (:func:`guard_limit` of our summary) is reported as a conflict and its
    observations are held back.
    """
    rows = _other_rows(other_db)
    return merge_rows(db, rows, _shown(other_db), guard_limit=guard_limit, analyst=analyst)
