"""Combining two house libraries (two instruments, two labs) with a report of conflicts.

``matcher library merge OTHER``: observations of the other library that are
not yet present are added in one transaction; a compound whose centres in a
class lie farther apart than the outlier guard of :mod:`matcher.curate.library_edits`, a
contradicting identity, or a phase filed under another class is reported as a
conflict and never overwritten. Running the same merge twice adds nothing.

The other library's reference spectra travel with their compounds (see
:mod:`matcher.store.merging`): a spectrum whose peaks our compound already holds
is skipped by the rule of :mod:`matcher.chem.same_peaks` (same m/z to 0.01 u,
relative intensities within 0.1 % of the base peak, whatever the source), and
the spectra of a compound in conflict are held back with its observations. A
library CSV or XLSX carries no spectra; the report says so. ``dry_run`` checks
everything and reports what would change, writing nothing.
"""

from __future__ import annotations

import os
from matcher.chem.same_peaks import same_peaks
from matcher.curate.library_edits import guard_limit
from matcher.store.merging import Conflict, MergeReport, merge_rows, other_spectra  # noqa: F401 - the records are part of this API




def _is_file(other: str) -> bool:
    """True when ``other`` is a library file (CSV, text or XLSX) rather than a library."""
    return str(other).lower().endswith((".csv", ".txt", ".xlsx")) and "://" not in str(other)


def _other_rows(other: str):
    """The other library as validated library rows (a library file, or a library's export)."""
    import tempfile

    from matcher.store.library_io import export_library, read_rows

    if _is_file(other):
        return read_rows(other)[0]
    with tempfile.TemporaryDirectory() as tmp:
        p = os.path.join(tmp, "other-library.csv")
        export_library(other, p)
        return read_rows(p)[0]


def _shown(other: str) -> str:
    from matcher.location import mask_url, resolve

    if _is_file(other):
        return str(other)
    return mask_url(resolve(other))


def merge(db: str | None, other_db: str, *, analyst: str | None = None, dry_run: bool = False) -> MergeReport:
    """Combine ``other_db`` (a library path/URL or a library CSV) into ``db``, in one transaction.

    Compounds are matched by name or synonym key, else by a CAS number that exactly one of
    ours has. Observations already present (same class, index, mode, spread, n, phase,
    source, analyst, date; active or retired) are skipped, so merging twice adds nothing.
    Nothing is overwritten: a compound whose CAS number or formula contradicts ours, a
    phase filed under another class, or a class whose centres lie farther apart than the
    outlier guard (:func:`guard_limit` of our summary) is reported as a conflict and its
    observations are held back.

    The other library's reference spectra follow their compounds (existing or created by
    the merge, also a compound of theirs that has spectra only): one whose peaks our compound
    already holds (:func:`matcher.chem.same_peaks.same_peaks`) is skipped, and those of a
    compound in conflict are held back. ``dry_run``: everything is checked and counted in one
    transaction that is rolled back; the report says what would change (``revision`` None).
    """
    rows = _other_rows(other_db)
    spectra = None if _is_file(other_db) else other_spectra(other_db)
    return merge_rows(db, rows, _shown(other_db), guard_limit=guard_limit, same_spectrum=same_peaks,
                      spectra=spectra, analyst=analyst, dry_run=dry_run)
