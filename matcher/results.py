"""Screening results: the in-memory shape every writer and report reads.

A :class:`ScreenResult` holds one :class:`RunResult` per peak file. Each run's
``table`` is a pandas DataFrame with **one row per peak and candidate** (a
peak with no candidate has one row with an empty ``rank`` and the
``no-candidate`` flag). Columns, in order: :data:`SHORTLIST_COLUMNS` (the
contract of DESIGN.md §4), then :data:`DETAIL_COLUMNS`.

Evidence columns hold the natural-log likelihood ratio each hint contributes
(0 where the hint was absent), so a reader can see why a candidate ranks
where it does.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

#: Contract columns of the shortlist (DESIGN.md §4), in output order.
SHORTLIST_COLUMNS: tuple[str, ...] = (
    "peak", "rt", "ri", "class", "rank", "name", "cas", "library_ri",
    "delta_ri", "score", "probability", "flags",
)

#: Further columns, after the contract ones.
DETAIL_COLUMNS: tuple[str, ...] = (
    "run",              # run label (peak file stem)
    "ri_measured",      # index before the adaptive correction (equals ri when none)
    "not_in_library",   # posterior that the peak is none of the listed library compounds
    "formula",
    "nominal_mass",
    "library_sd",       # spread of the library entry used in the index likelihood
    "library_n",        # number of observations behind the entry
    "mol_ion", "hit", "hit_score",
    "ev_index",         # log likelihood ratio of the index deviation (vs not-in-library)
    "ev_mol_ion",       # log LR of the molecular-ion hint
    "ev_ions",          # log LR of the key-ion hint
    "ev_hit",           # log LR of the spectral-search name hint
)


@dataclass
class RunResult:
    """One run (peak file) screened against one class."""

    source: str                      # the peak file as given by the user
    label: str                       # short run label (file stem), also in table['run']
    phase_class: str
    window: dict[str, Any]           # {"mode": "fixed"|"percent", "value": float}
    table: Any                       # pandas.DataFrame, columns SHORTLIST_COLUMNS + DETAIL_COLUMNS
    calibration: dict[str, Any] | None = None   # the calibration document used (None when the table had ri)
    correction: dict[str, Any] | None = None    # adaptive fit, see matcher.adaptive
    measurement_sd: float | None = None          # index scatter assumed for this run
    run_model: dict[str, Any] = field(default_factory=dict)  # fitted in-library share and scatter, see matcher.run_model
    notices: list[str] = field(default_factory=list)
    peak_count: int = 0
    checksum: str = ""               # SHA-256 of the peak table's normalised content (matcher.peaks.content_checksum)


@dataclass
class ScreenResult:
    """A whole screening job: runs plus provenance."""

    runs: list[RunResult]
    library: dict[str, Any]          # {"location": masked URL, "revision": str, "entries": int, "compounds": int}
    created: str                     # ISO 8601 UTC timestamp
    tool_version: str
    caution: str
    settings: dict[str, Any] = field(default_factory=dict)  # top, fallback, homologues, adaptive, ...
