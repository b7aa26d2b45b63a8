"""One unknown against the house library: the importable form of ``matcher query``.

:func:`query` returns a :class:`QueryResult`: the candidates inside the
window as records (:func:`matcher.results.candidate_record`, the same record
the screen JSON uses), their ``not_in_library`` complement, and provenance;
``to_dict()`` is the document ``matcher query --json`` prints (described in
``docs/formats.md``). Every setting is checked by :mod:`matcher.rules`.

>>> from matcher.store.snapshot import CompoundTable, build_snapshot
>>> snap = build_snapshot(
...     CompoundTable.from_records([{"id": 1, "name": "limonene", "formula": "C10H16"},
...                                 {"id": 2, "name": "decane", "formula": "C10H22"}]),
...     np.array([1, 1, 2]), np.array(["slightly-polar"] * 3), np.array([1029.0, 1031.0, 1000.0]))
>>> answer = query(1031, "slightly-polar", mol_ion=136, snapshot=snap)
>>> [c["name"] for c in answer.candidates]
['limonene']
>>> round(sum(c["probability"] for c in answer.candidates) + answer.not_in_library, 9)
1.0
>>> query(1031, "slightly-polar", top=0, snapshot=snap)
Traceback (most recent call last):
...
matcher.errors.MatcherError: --top must be at least 1
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from matcher import CAUTION
from matcher import rules
from matcher.errors import MatcherError
from matcher.identify.window_search import window_description
from matcher.identify.evidence import DEFAULT_MEASUREMENT_SD, DEFAULT_PRESENCE, Model
from matcher.results import candidate_record, plain
from matcher.identify.unlisted import UnlistedField, crowding_density
from matcher.identify.shortlist import PeakInput, Shortlist, neighbour_of, prepare, shortlist
from matcher.store.snapshot import LibrarySnapshot


def candidate_records(sl: Shortlist, rows: np.ndarray) -> list[dict]:
    """Candidate records (see :func:`matcher.results.candidate_record`) for shortlist rows with a rank.

    With a second column (``second_ri``), each record also holds ``second_library_ri`` and ``second_delta_ri``
    and its ``evidence`` the ``second`` term."""
    from matcher.results import EVIDENCE_COLUMNS

    c = sl.columns
    two = "evidence_second" in c
    evidence = list(EVIDENCE_COLUMNS) + (["evidence_second"] if two else [])
    extra = ["second_library_ri", "second_delta_ri"] if two else []
    out = []
    for i in rows:
        if c["rank"][i] == 0:
            continue
        out.append(candidate_record(lambda k, i=i: c[k][i], [f for f in str(c["flags"][i]).split(";") if f],
                                    evidence_columns=evidence, extra=extra))
    return out


@dataclass
class QueryResult:
    """The ranked shortlist for one index.

    ``candidates`` are records in rank order (name, library index, deviation,
    probability, flags, ``evidence`` ...); their probabilities plus
    ``not_in_library`` sum to 1 over the whole window (``top`` only shortens
    the list).
    """

    ri: float
    phase_class: str
    window: dict[str, Any]
    candidates: list[dict[str, Any]]
    not_in_library: float
    candidates_in_window: int
    model: dict[str, Any] = field(default_factory=dict)
    library: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    caution: str = CAUTION

    @property
    def best(self) -> dict[str, Any] | None:
        """The rank-1 candidate, or ``None`` when nothing lies inside the window."""
        return self.candidates[0] if self.candidates else None

    @property
    def table(self):
        """The candidates as a pandas DataFrame, evidence as ``evidence_*`` columns and flags joined by ``;``."""
        import pandas as pd

        from matcher.results import CANDIDATE_KEYS, EVIDENCE_COLUMNS, evidence_key

        rows = [{**{k: c[k] for k in CANDIDATE_KEYS}, "flags": ";".join(c["flags"]),
                 **{e: c["evidence"].get(evidence_key(e)) for e in EVIDENCE_COLUMNS}} for c in self.candidates]
        return pd.DataFrame(rows, columns=list(CANDIDATE_KEYS) + ["flags"] + list(EVIDENCE_COLUMNS))

    def to_dict(self) -> dict[str, Any]:
        """The document ``matcher query --json`` prints."""
        return {
            "ri": self.ri,
            "class": self.phase_class,
            "window": dict(self.window),
            "candidates": [dict(c) for c in self.candidates],
            "not_in_library": self.not_in_library,
            "candidates_in_window": self.candidates_in_window,
            "model": dict(self.model),
            "library": dict(self.library),
            "notes": list(self.notes),
            "caution": self.caution,
        }


def query(
    ri: float,
    phase_class: str,
    *,
    db: str | None = None,
    snapshot: LibrarySnapshot | None = None,
    window: float | None = None,
    window_percent: float | None = None,
    mol_ion: float | None = None,
    ions: Sequence[int] | None = None,
    hit: str | None = None,
    hit_match: float | None = None,
    top: int | None = None,
    fallback: bool = False,
    homologues: bool = False,
    index_scatter: float | None = None,
    presence: float = DEFAULT_PRESENCE,
    crowding: str | float | None = None,
    spectrum: Any = None,
    second_ri: float | None = None,
    second_class: str | None = None,
) -> QueryResult:
    """Ranked shortlist for one index against one class of the library; see :class:`QueryResult`.

    ``spectrum``: the peak's mass spectrum, a JCAMP-DX file with one block (path) or the shared form
    ``(mz, intensity)`` (:mod:`matcher.chem.spectra`); compared with the library's reference spectra.

    ``db`` names the library (path or URL; default ``$MATCHER_DB``, then the
    user data folder); ``snapshot`` gives one already read. Without a run the
    not-in-library alternative uses the crowding prior (``crowding``: a name
    of :data:`matcher.identify.unlisted.CROWDING` or unlisted peaks per 100 index
    units) and each listed compound the presence prior ``presence``.
    Settings are checked by :mod:`matcher.rules` (and :mod:`matcher.limits`);
    a bad one raises :class:`~matcher.errors.MatcherError`.

    Two columns: ``second_ri`` is the unknown's index measured on a second column of class
    ``second_class``; each candidate's odds gain the second column's index evidence
    (:mod:`matcher.identify.two_columns`, the class's default scatter and the crowding prior there), and the
    records carry ``second_library_ri`` and ``second_delta_ri``.
    """
    from matcher.limits import check_mol_ion, check_sd

    phase_class = rules.check_class(phase_class)
    ri = rules.check_ri(ri)
    if (second_ri is None) != (second_class is None):
        raise MatcherError("a second column needs both its index and its class: --second-ri RI --second-class CLASS")
    if second_ri is not None:
        second_ri = rules.check_ri(second_ri)
        second_class = rules.check_class(second_class)
    if index_scatter is not None:
        index_scatter = check_sd(index_scatter)
    if mol_ion is not None:
        mol_ion = check_mol_ion(mol_ion)
    window, window_percent = rules.check_window(window, window_percent)
    top = rules.check_top(top)
    ions = rules.check_ions(ions)
    hit_match = rules.check_hit_match(hit_match)
    packed = None
    if spectrum is not None:
        from matcher.chem.spectra import SpectrumSet

        packed = SpectrumSet.from_spectra([one_spectrum(spectrum)])
    if snapshot is None:
        from matcher.store.snapshot_loader import load_snapshot

        snapshot = load_snapshot(db)
    home = prepare(snapshot, phase_class, homologues=homologues)
    neighbour = neighbour_of(snapshot, phase_class) if fallback else None
    sd = DEFAULT_MEASUREMENT_SD[phase_class] if index_scatter is None else float(index_scatter)
    peaks = PeakInput(
        np.array([ri]),
        mol_ion=None if mol_ion is None else np.array([float(mol_ion)]),
        ions=None if not ions else [ions],
        hit=None if not hit else np.array([hit], dtype=object),
        hit_match=None if hit_match is None else np.array([hit_match]),
        spectra=packed,
    )
    lam0 = crowding_density(crowding)
    model = Model(sd, presence=float(presence), unlisted=UnlistedField.flat(lam0))
    if second_ri is not None:
        peaks.second = one_second_column(snapshot, second_class, second_ri, lam0, homologues=homologues)
    sl = shortlist(home, peaks, model, window=window, window_percent=window_percent,
                   top=top, neighbour=neighbour)
    rows = np.arange(len(sl.columns["peak"]))
    return QueryResult(
        ri=ri,
        phase_class=phase_class,
        window=window_description(phase_class, window, window_percent) | {"half_width": plain(sl.window[0])},
        candidates=candidate_records(sl, rows),
        not_in_library=plain(sl.not_in_library[0]),
        candidates_in_window=int(sl.candidate_count[0]),
        model={"index_scatter": sd, "presence": float(presence), "unlisted_per_100": round(lam0 * 100, 3),
               **({"second": {"ri": second_ri, "class": second_class,
                              "index_scatter": float(peaks.second.index_scatter),
                              "half_width": plain(peaks.second.window[0])}} if second_ri is not None else {})},
        library={"location": snapshot.source, "revision": snapshot.revision, "entries": len(home.entries),
                 "spectra": len(home.references) if home.references is not None else 0},
        notes=list(sl.notes) + ([NO_REFERENCE_SPECTRA] if packed is not None and home.references is None else []),
    )


def one_second_column(snapshot: LibrarySnapshot, phase_class: str, ri: float, unlisted: float, *,
                      homologues: bool = False):
    """The second column of a single unknown: its index on ``phase_class``, paired for sure."""
    from matcher.identify.two_columns import SecondColumn, per_compound
    from matcher.identify.window_search import half_widths

    home = prepare(snapshot, phase_class, homologues=homologues)
    lib, spread = per_compound(home.entries, len(snapshot.compounds))
    x = np.array([float(ri)])
    return SecondColumn(phase_class=phase_class, partner=np.array([0]), peak_id=np.array(["second"], dtype=object),
                        ri=x, unlisted=np.array([float(unlisted)]), window=half_widths(x, phase_class, None, None),
                        library_ri=lib, library_spread=spread, index_scatter=DEFAULT_MEASUREMENT_SD[phase_class])


NO_REFERENCE_SPECTRA = ("the library holds no reference spectra, so the spectrum was not compared "
                        "(add some with: matcher library import-spectra)")


def one_spectrum(spectrum: Any):
    """A query's spectrum in the shared form, from a JCAMP-DX path (exactly one block) or an (mz, intensity) pair."""
    import os

    from matcher.errors import InputError, MatcherError

    if isinstance(spectrum, (str, os.PathLike)):
        from matcher.io.jcamp import read_jcamp

        blocks = read_jcamp(spectrum)
        if len(blocks) != 1:
            raise InputError(f"holds {len(blocks)} spectra; a query takes one", file=os.fspath(spectrum))
        if not len(blocks[0].mz):
            raise InputError("the spectrum's table holds no m/z,intensity pairs", file=os.fspath(spectrum))
        return blocks[0].spectrum
    try:
        mz, y = (np.asarray(v, dtype=float) for v in spectrum)
    except (TypeError, ValueError):
        raise MatcherError("the spectrum must be a JCAMP-DX file or a pair (m/z values, intensities)") from None
    from matcher.limits import MAX_MZ

    if mz.shape != y.shape or mz.ndim != 1 or not len(mz):
        raise MatcherError("the spectrum needs as many intensities as m/z values, at least one")
    if not (np.all(np.isfinite(mz)) and np.all((mz >= 1) & (mz <= MAX_MZ))):
        raise MatcherError(f"the spectrum's m/z values must lie between 1 and {MAX_MZ}")
    if not (np.all(np.isfinite(y)) and np.all(y >= 0)):
        raise MatcherError("the spectrum's intensities must be numbers of at least 0")
    order = np.argsort(mz, kind="stable")
    return mz[order], y[order]
