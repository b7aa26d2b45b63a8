"""Screening results: the in-memory shape every writer and report reads.

A :class:`ScreenResult` holds one :class:`RunResult` per peak file. Each run's
``table`` is a pandas DataFrame with **one row per peak and candidate** (a
peak with no candidate has one row with an empty ``rank`` and the
``no-candidate`` flag). Columns, in order: :data:`SHORTLIST_COLUMNS` (the
contract, described in ``docs/formats.md``), then :data:`DETAIL_COLUMNS`.

This module owns the output columns and the one conversion of a shortlist
row into a candidate record (:func:`candidate_record`), used alike by the
``matcher query --json`` document, the screen JSON and anything else that
lists candidates. A :class:`ScreenResult` writes itself
(:meth:`ScreenResult.to_csv`, ``to_json``, ``to_xlsx``, ``to_html``) and
shows all runs as one DataFrame (:attr:`ScreenResult.table`).

>>> row = {"rank": 1, "name": "limonene", "cas": "", "formula": "C10H16", "nominal_mass": 136.0,
...        "library_ri": 1030.0, "library_spread": 1.5, "library_observations": 4, "delta_ri": 1.0, "score": 2.5,
...        "probability": 0.8, "evidence_index": 1.2, "evidence_mol_ion": 1.3, "evidence_ions": 0.0, "evidence_hit": 0.0,
...        "evidence_spectrum": 2.1, "spectrum_similarity": 0.93}
>>> rec = candidate_record(row.get, ["in-window"])
>>> rec["cas"], rec["nominal_mass"], rec["spectrum_similarity"], rec["flags"], rec["evidence"]
(None, 136, 0.93, ['in-window'], {'index': 1.2, 'mol_ion': 1.3, 'ions': 0.0, 'hit': 0.0, 'spectrum': 2.1})

Evidence columns hold the natural-log likelihood ratio each hint contributes
(0 where the hint was absent), so a reader can see why a candidate ranks
where it does.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from typing import Any, Callable, Iterable

#: A report lists at most this many peaks per run (review-marked first); a streamed run keeps their rows.
REPORT_PEAKS = 2000

#: Contract columns of the shortlist (docs/formats.md, "Screen output"), in output order.
SHORTLIST_COLUMNS: tuple[str, ...] = (
    "peak", "rt", "ri", "class", "rank", "name", "cas", "library_ri",
    "delta_ri", "score", "probability", "flags",
)

#: Further columns, after the contract ones.
DETAIL_COLUMNS: tuple[str, ...] = (
    "run",              # run label (peak file stem)
    "ri_measured",      # index before the adaptive correction (equals ri when none)
    "not_in_library",   # posterior that the peak is none of the listed library compounds
    "area",             # peak area as given in the peak table
    "area_percent",     # the peak's share of the run's summed area, per cent (given, else computed from area)
    "formula",
    "nominal_mass",
    "library_spread",       # spread of the library entry used in the index likelihood
    "library_observations",        # number of observations behind the entry
    "mol_ion", "hit", "hit_match",
    "evidence_index",         # log likelihood ratio of the index deviation (vs not-in-library)
    "evidence_mol_ion",       # log LR of the molecular-ion hint
    "evidence_ions",          # log LR of the key-ion hint
    "evidence_hit",           # log LR of the spectral-search name hint
    "evidence_spectrum",      # log LR of the mass-spectral similarity (matcher.identify.spectral_evidence)
    "spectrum_similarity",  # Stein & Scott composite similarity 0-1 of the peak's and the candidate's spectra
)

#: Columns of a two-column screen only (matcher.identify.two_columns), after the detail columns: the peak of the
#: second run paired with this one, its index and the probability of that pairing (of no partner, for an
#: unpaired peak), the candidate's library index on the second class, the deviation there (second index −
#: library) and the second column's evidence (log likelihood ratio).
SECOND_COLUMNS: tuple[str, ...] = ("second_peak", "second_ri", "second_pair_probability", "second_library_ri",
                                   "second_delta_ri", "evidence_second")
#: Of these, the ones that belong to the peak (its partner), not to a candidate.
SECOND_PEAK_KEYS: tuple[str, ...] = ("second_peak", "second_ri", "second_pair_probability")

#: The evidence columns (natural-log likelihood ratios against not-in-library); a
#: candidate record's ``evidence`` object holds them without the ``evidence_`` prefix.
EVIDENCE_COLUMNS: tuple[str, ...] = ("evidence_index", "evidence_mol_ion", "evidence_ions", "evidence_hit",
                                     "evidence_spectrum")

#: Prefix of the evidence columns; a candidate record's ``evidence`` object holds them without it.
EVIDENCE_PREFIX = "evidence_"


def evidence_key(column: str) -> str:
    """The key of an evidence column in a candidate's ``evidence`` object.

    >>> evidence_key("evidence_mol_ion")
    'mol_ion'
    """
    return column[len(EVIDENCE_PREFIX):] if column.startswith(EVIDENCE_PREFIX) else column


#: Keys of one candidate record (query and screen JSON), in order; then ``flags`` and ``evidence``.
CANDIDATE_KEYS: tuple[str, ...] = ("rank", "name", "cas", "formula", "nominal_mass", "library_ri", "library_spread",
                                   "library_observations", "delta_ri", "score", "probability", "spectrum_similarity")

#: Keys of one peak in the screen JSON, in order; then ``flags`` and ``candidates``.
PEAK_KEYS: tuple[str, ...] = ("peak", "rt", "ri", "ri_measured", "class", "area", "area_percent", "mol_ion", "hit",
                              "hit_match", "not_in_library")

#: Facts of the sample and its run for the QC record (``matcher screen --sample --analyst --instrument
#: --column``, or the peak table's preamble), in display order, with their labels in reports and sheets.
RECORD_FIELDS: dict[str, str] = {
    "sample": "sample / lot",
    "analyst": "analyst",
    "instrument": "instrument",
    "column": "column",
    "acquired": "acquired",
    "method": "acquisition method",
}

_INTEGER_KEYS = ("rank", "library_observations", "nominal_mass")
_TEXT_OR_NONE = ("cas", "formula")


def plain(value: Any) -> Any:
    """A JSON-ready scalar: NumPy scalars unwrapped, NaN/inf and missing values as ``None``, -0.0 as 0.0.

    >>> plain(float("nan")), plain(-0.0), plain("x")
    (None, 0.0, 'x')
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if type(value).__name__ in ("NAType", "NaTType"):
        return None
    if hasattr(value, "item") and not isinstance(value, (int, float)):
        try:
            value = value.item()  # a NumPy scalar
        except (TypeError, ValueError):
            return str(value)
        if isinstance(value, (bool, str)) or value is None:
            return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        return float(value) + 0.0 if math.isfinite(value) else None
    return str(value)


def group_rows(rows: Iterable[dict], key: Callable[[dict], Any]) -> list[tuple[Any, list[dict]]]:
    """Output rows grouped per peak, in the order the peaks first appear: ``[(key, rows), ...]``.

    >>> [(k, len(r)) for k, r in group_rows([{"peak": 2}, {"peak": 1}, {"peak": 2}], lambda r: r["peak"])]
    [(2, 2), (1, 1)]
    """
    groups: dict[Any, list[dict]] = {}
    for row in rows:
        groups.setdefault(key(row), []).append(row)
    return list(groups.items())


def candidate_record(get: Callable[[str], Any], flags: Iterable[str], *,
                     evidence_columns: Iterable[str] = EVIDENCE_COLUMNS, extra: Iterable[str] = ()) -> dict[str, Any]:
    """One candidate as a JSON-ready dict, from a shortlist row.

    ``get(column)`` returns the row's value of an output column (for example
    ``row.get`` of a record, or ``lambda c: columns[c][i]``). Keys:
    :data:`CANDIDATE_KEYS`, ``flags`` (a list), ``evidence`` (the evidence
    columns without ``evidence_``), then any ``extra`` columns. Empty CAS numbers and
    formulas become ``None``; ``rank``, ``library_observations`` and ``nominal_mass`` are
    integers.
    """
    rec: dict[str, Any] = {}
    for key in CANDIDATE_KEYS:
        v = plain(get(key))
        if key in _TEXT_OR_NONE and v == "":
            v = None
        if key in _INTEGER_KEYS and v is not None:
            v = int(v)
        rec[key] = v
    rec["flags"] = list(flags)
    rec["evidence"] = {evidence_key(c): plain(get(c)) for c in evidence_columns}
    for c in extra:
        rec[c] = plain(get(c))
    return rec


@dataclass
class RunResult:
    """One run (peak file) screened against one class."""

    source: str                      # the peak file as given by the user
    label: str                       # short run label (file stem), also in table['run']
    phase_class: str
    window: dict[str, Any]           # {"mode": "fixed"|"percent", "value": float}
    table: Any                       # pandas.DataFrame, columns SHORTLIST_COLUMNS + DETAIL_COLUMNS
    calibration: dict[str, Any] | None = None   # the calibration document used (None when the table had ri)
    correction: dict[str, Any] | None = None    # adaptive fit, see matcher.identify.adaptive
    index_scatter: float | None = None          # index scatter assumed for this run
    #: per peak id needing review, the spectra the report draws: {"unknown": (mz, y), "reference": (mz, y),
    #: "name": candidate, "similarity": s}; empty when the run had no spectra
    spectra: dict[str, Any] = field(default_factory=dict)
    run_model: dict[str, Any] = field(default_factory=dict)  # fitted in-library share and scatter, see matcher.identify.run_model
    notices: list[str] = field(default_factory=list)
    peak_count: int = 0
    summary: dict[str, Any] | None = None  # counted part by part when streamed (matcher.report.summary.add_summaries)
    streamed: bool = False           # rows went to a file as they came; ``table`` keeps leading rows and the report's peaks
    checksum: str = ""               # SHA-256 of the peak table's normalised content (matcher.io.peak_tables.content_checksum)
    spectra_checksum: str = ""       # SHA-256 of the peaks' spectra (matcher.io.peak_tables.spectra_checksum), "" without
    #: a run file's decimated TIC and detected peaks, for the report (matcher.signal.run_peaks); None for a peak table
    chromatogram: dict[str, Any] | None = None
    record: dict[str, Any] = field(default_factory=dict)  # RECORD_FIELDS given or read from the preamble, and 'preamble'
    rt_decimals: dict[str, int] = field(default_factory=dict)  # peak id -> decimals its time was given with
    #: a two-column screen: the second run's source, label, class, calibration, correction, scatter, run model,
    #: the pairing's settings and counts, and the pairs with their indices (matcher.identify.two_columns)
    second: dict[str, Any] | None = None

    def time_text(self, peak: Any, minutes: Any) -> str:
        """The peak's retention time as text, as precise as it was given (see matcher.report.wording.format_time)."""
        from matcher.report.wording import format_time

        return format_time(minutes, self.rt_decimals.get(str(peak)))


@dataclass
class ScreenResult:
    """A whole screening job: runs plus provenance."""

    runs: list[RunResult]
    library: dict[str, Any]          # {"location": masked URL, "revision": str, "entries": int, "compounds": int}
    created: str                     # ISO 8601 UTC timestamp
    tool_version: str
    caution: str
    settings: dict[str, Any] = field(default_factory=dict)  # top, fallback, homologues, adaptive, ...

    # ------------------------------------------------------------------ one table, writers
    @property
    def table(self):
        """All runs' shortlists as one pandas DataFrame (output columns in order, ``run`` tells runs apart)."""
        from matcher.report.files import combined_table

        return combined_table(self)

    def top(self):
        """The rank-1 row of every peak that has a candidate (a DataFrame)."""
        t = self.table
        return t[t["rank"] == 1].reset_index(drop=True)

    def to_dict(self) -> dict[str, Any]:
        """The JSON document of the screen output (``"content": "shortlist"``)."""
        from matcher.report.files import results_document

        return results_document(self)

    def write(self, path: str | os.PathLike) -> list:
        """Write the shortlist in the format the suffix names (.csv with its sidecar, .json, .xlsx)."""
        from matcher.rules import check_shortlist_path
        from matcher.report.files import write_results

        check_shortlist_path(path)
        return write_results(self, path)

    def to_csv(self, path: str | os.PathLike) -> list:
        """The shortlist CSV and its provenance sidecar ``path + '.meta.json'``; returns both paths."""
        from matcher.report.files import write_csv

        return write_csv(self, path)

    def to_json(self, path: str | os.PathLike | None = None):
        """The JSON document written to ``path`` (returns the paths), or as text when no path is given."""
        from matcher.report.files import results_text, write_json

        return results_text(self) if path is None else write_json(self, path)

    def to_xlsx(self, path: str | os.PathLike) -> list:
        """The workbook (sheets ``shortlist`` and ``runs``)."""
        from matcher.report.files import write_xlsx

        return write_xlsx(self, path)

    def to_html(self, path: str | os.PathLike, *, max_peaks: int = 2000) -> list:
        """The self-contained HTML report; returns its path."""
        from pathlib import Path

        from matcher.report.html import write_report
        from matcher.rules import check_report_path

        check_report_path(path)
        write_report(self, path, max_peaks=max_peaks)
        return [Path(path)]

    report = to_html
