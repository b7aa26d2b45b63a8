"""The public Python interface: everything a command does, from Python.

Import these from the top-level package (``import matcher``); they load
lazily, so ``import matcher`` stays cheap.

=========================  ============================================  ==========================
function                   does                                          returns
=========================  ============================================  ==========================
``open_library(db)``       the house library (path, URL, ``$MATCHER_DB``  :class:`Library`
                           or the user data folder)
``calibrate(ladder)``      fit and check a ladder (path or DataFrame)    :class:`~matcher.retention.calibration.Calibration`
``read_peaks(path)``       read and check a peak table                   :class:`~matcher.io.peak_tables.PeakTable`
``detect_peaks(run)``      peaks of a GC-MS run file, with spectra       :class:`~matcher.signal.run_peaks.RunPeakTable`
``screen(peaks, ...)``     shortlist every peak of one run or a batch    :class:`~matcher.results.ScreenResult`
``query(ri, cls, ...)``    shortlist one index                           :class:`~matcher.identify.query.QueryResult`
``evaluate(...)``          self-check of the library                     :class:`Evaluation`
=========================  ============================================  ==========================

Settings are keyword-only; ``library=`` takes a :class:`Library`, a path or
URL, or a :class:`~matcher.store.snapshot.LibrarySnapshot` already read (``None``:
``$MATCHER_DB``, else the user data folder). Every problem a user can fix
raises :class:`~matcher.errors.MatcherError` (its subclasses
``InputError`` and ``LibraryError`` say more) with the one-line message the
command line prints.

>>> import matcher, pandas as pd
>>> ladder = pd.DataFrame({"rt": [4.0, 6.0, 8.0], "carbons": [9, 10, 11]})   # invented times
>>> cal = matcher.calibrate(ladder)
>>> cal.convert([5.0])[0].tolist()
[950.0]
>>> matcher.query(1031, "slightly-polar", top=0, library=_tiny_snapshot())
Traceback (most recent call last):
...
matcher.errors.MatcherError: --top must be at least 1
>>> result = matcher.query(1031, "slightly-polar", mol_ion=136, library=_tiny_snapshot())
>>> result.best["name"], result.best["flags"][:1]
('limonene', ['in-window'])

Results are tentative (putative) identifications; confirmation needs an
authentic reference standard under the lab's validated method, and local
regulations and accredited practice prevail.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Sequence

from matcher.errors import MatcherError

if TYPE_CHECKING:  # pragma: no cover
    from matcher.retention.calibration import Calibration
    from matcher.io.peak_tables import PeakTable
    from matcher.signal.run_peaks import RunPeakTable
    from matcher.identify.query import QueryResult
    from matcher.results import ScreenResult
    from matcher.store.snapshot import LibrarySnapshot


# --------------------------------------------------------------------------- the library handle

class Library:
    """The house library: one SQLite file or a database server, with its curation and inspection.

    ``db`` is a file path (SQLite) or an SQLAlchemy URL; ``None`` means
    ``$MATCHER_DB``, else ``library.sqlite`` in the user data folder (see
    :mod:`matcher.location`). Opening does not touch the database; the
    first operation does, and a missing or outdated library raises
    :class:`~matcher.errors.LibraryError`. Methods mirror ``matcher library
    ...`` and return what those commands render.
    """

    def __init__(self, db: str | os.PathLike | None = None) -> None:
        self.db = None if db is None else os.fspath(db)

    # ------------------------------------------------------------------ where
    @property
    def url(self) -> str:
        """The SQLAlchemy URL the library resolves to (may hold a password: do not print it)."""
        from matcher.location import resolve

        return resolve(self.db)

    @property
    def location(self) -> str:
        """The resolved address with any password shown as ``***``."""
        from matcher.location import mask_url

        return mask_url(self.url)

    def __repr__(self) -> str:
        return f"Library({self.location!r})"

    # ------------------------------------------------------------------ create, read
    def init(self) -> int:
        """Create the library (or migrate an older one); returns its revision."""
        from matcher.store.database import init_library, revision

        return revision(init_library(self.db))

    def snapshot(self) -> "LibrarySnapshot":
        """The whole library read once, as screening and queries use it (pass it as ``library=`` to reuse)."""
        from matcher.store.snapshot_loader import load_snapshot

        return load_snapshot(self.db)

    def find(self, text: str, *, limit: int = 10) -> list:
        """Compounds whose names, synonyms, CAS numbers or formulas resemble ``text`` (typo tolerant)."""
        from matcher.store.inspect import find

        return find(self.db, text, limit)

    def show(self, name: str) -> dict:
        """One compound: identity, per-class centre/spread/count and every observation."""
        from matcher.store.inspect import show

        return show(self.db, name)

    def history(self, name: str) -> list[dict]:
        """The audit trail of one compound."""
        from matcher.curate.library_edits import history

        return history(self.db, name)

    def stats(self) -> dict:
        """Entries per class and how densely they cover the index range."""
        from matcher.store.inspect import stats

        return stats(self.db)

    def check(self, *, strict: bool = False) -> list[str]:
        """Integrity problems (an empty list when healthy)."""
        from matcher.store.inspect import check

        return check(self.db, strict=strict)

    def import_spectra(self, path: str | os.PathLike, *, source: str | None = None, new: bool = False,
                       analyst: str | None = None):
        """Import reference mass spectra from a JCAMP-DX file (``matcher library import-spectra``); all or nothing.

        Compounds are found by ``##TITLE``/``##NAMES``, then CAS; ``source`` records where the spectra come from
        (own standards, a licensed collection); ``new=True`` creates compounds whose names are close to existing
        ones instead of refusing. Returns a :class:`~matcher.store.spectra.SpectraImport`.
        """
        from matcher.store.spectra import import_spectra

        return import_spectra(self.db, os.fspath(path), source=source, new=new, who=analyst)

    def export_spectra(self, path: str | os.PathLike | None = None, *, name: str | None = None) -> str:
        """The reference spectra (all, or one compound's) as JCAMP-DX text, also written to ``path`` when given."""
        from matcher.store.spectra import export_spectra

        return export_spectra(self.db, None if path is None else os.fspath(path), name=name)

    def export(self, path: str | os.PathLike | None = None) -> str:
        """The library as library-CSV text, also written to ``path`` (``.csv`` or ``.xlsx``) when given."""
        from matcher.store.library_io import export_library

        return export_library(self.db, None if path is None else os.fspath(path))

    # ------------------------------------------------------------------ change
    def import_file(self, path: str | os.PathLike, *, replace: bool = False, dry_run: bool = False,
                    analyst: str | None = None):
        """Import a library CSV/XLSX: every row checked first, then one transaction (``matcher library import``)."""
        from matcher.store.library_io import import_library

        return import_library(self.db, os.fspath(path), replace=replace, who=analyst, dry_run=dry_run)

    def add(self, name: str, phase_class: str, ri: float, *, formula: str | None = None, cas: str | None = None,
            inchikey: str | None = None, phase: str | None = None, mode: str = "programmed", date: str | None = None,
            source: str | None = None, analyst: str | None = None, force: bool = False, new: bool = False,
            as_existing: str | None = None, ask: Callable | None = None):
        """Add one confirmed retention index (name resolution and outlier guard as ``matcher library add``)."""
        from matcher.curate.library_edits import add_confirmed

        return add_confirmed(self.db, name, phase_class, ri, formula=formula, cas=cas, inchikey=inchikey, phase=phase,
                             mode=mode, date=date, source=source, analyst=analyst, force=force, new=new,
                             as_existing=as_existing, ask=ask)

    def confirm(self, results: str | os.PathLike, peak: Any, name: str, *, run: str | None = None,
                source: str | None = None, analyst: str | None = None, force: bool = False, new: bool = False,
                as_existing: str | None = None, measured: bool = False, ask: Callable | None = None,
                cas: str | None = None, formula: str | None = None, phase: str | None = None):
        """Add a peak of a screening output confirmed with a standard (``matcher confirm``).

        ``cas``, ``formula`` and ``phase`` are recorded with the compound and observation, as for :meth:`add`."""
        from matcher.curate.library_edits import confirm_from_results

        return confirm_from_results(self.db, results, peak, name, run=run, source=source, analyst=analyst,
                                    force=force, new=new, as_existing=as_existing, measured=measured, ask=ask,
                                    cas=cas, formula=formula, phase=phase)

    def confirm_review(self, record: str | os.PathLike, *, source: str | None = None, analyst: str | None = None,
                       peak: Any = None, run: str | None = None, force: bool = False, new: bool = False,
                       as_existing: str | None = None) -> list:
        """Add the peaks a review marked as confirmed with an authentic standard (``matcher confirm --review``).

        Every peak goes through the checks of :meth:`confirm`; returns one outcome per peak
        (``added`` true, or false with the reason it was refused).
        """
        from matcher.review.confirming import confirm_reviewed

        return confirm_reviewed(self.db, record, source=source, analyst=analyst,
                                peak=None if peak is None else str(peak), run=run, force=force, new=new,
                                as_existing=as_existing)

    def retire(self, observation: int, why: str, *, analyst: str | None = None) -> dict:
        """Stop using an observation (the row stays, with the reason)."""
        from matcher.curate.library_edits import retire

        return retire(self.db, observation, why, analyst=analyst)

    def merge(self, other: "Library | str | os.PathLike", *, analyst: str | None = None, dry_run: bool = False):
        """Merge another library (handle, path, URL, or a library CSV/XLSX); conflicts reported, never overwritten.

        Its reference spectra come along with their compounds (a spectrum already held is skipped);
        ``dry_run`` reports what would change and writes nothing."""
        from matcher.curate.merge import merge

        other_db = other.db if isinstance(other, Library) else os.fspath(other)
        if other_db is None:
            raise MatcherError("merge needs the other library's path or URL")
        return merge(self.db, other_db, analyst=analyst, dry_run=dry_run)

    def backup(self, path: str | os.PathLike, *, overwrite: bool = False):
        """A consistent copy of a SQLite library, safe while others write."""
        from matcher.store.backup import backup

        return backup(self.db, path, overwrite=overwrite)

    def copy_to(self, destination: "Library | str | os.PathLike", *, replace: bool = False):
        """Copy the whole library (audit trail included) to another backend."""
        from matcher.store.copying import copy_library

        dst = destination.db if isinstance(destination, Library) else os.fspath(destination)
        return copy_library(self.db, dst, replace=replace)


# ``library.import(...)`` reads like the command; ``import`` is a keyword, so it is reached with getattr.
setattr(Library, "import", Library.import_file)


def open_library(db: str | os.PathLike | None = None, *, create: bool = False) -> Library:
    """The house library at ``db`` (path or URL; default ``$MATCHER_DB``, else the user data folder).

    With ``create=True`` an absent library is created (and an older one migrated).
    """
    lib = Library(db)
    if create:
        lib.init()
    return lib


def _source(library: Any) -> dict[str, Any]:
    """``library=`` as the engine's arguments: ``{"snapshot": ...}`` or ``{"db": ...}`` (read after the checks)."""
    from matcher.store.snapshot import LibrarySnapshot

    if isinstance(library, LibrarySnapshot):
        return {"snapshot": library}
    if isinstance(library, Library):
        return {"db": library.db}
    if library is None or isinstance(library, (str, os.PathLike)):
        return {"db": None if library is None else os.fspath(library)}
    raise MatcherError(f"library= takes a Library, a path or URL, or a snapshot, not {type(library).__name__}")


def _snapshot(library: Any) -> "LibrarySnapshot":
    """A snapshot from a :class:`Library`, a path or URL, a snapshot, or ``None`` (the default library)."""
    from matcher.store.snapshot import LibrarySnapshot

    if isinstance(library, LibrarySnapshot):
        return library
    if isinstance(library, Library):
        return library.snapshot()
    if library is None or isinstance(library, (str, os.PathLike)):
        return Library(library).snapshot()
    raise MatcherError(f"library= takes a Library, a path or URL, or a snapshot, not {type(library).__name__}")


# --------------------------------------------------------------------------- the job

def calibrate(ladder: Any, *, mode: str = "programmed", holdup: str | None = None, dead_time: float | None = None,
              marker: float | None = None, series: str | None = None, rt_unit: str | None = None,
              header_map: dict[str, str] | None = None, carbons: Any = None,
              min_snr: float | None = None) -> "Calibration":
    """Fit and check a reference ladder; returns the :class:`~matcher.retention.calibration.Calibration`.

    ``ladder`` is a ladder file (CSV, TSV, XLSX), a pandas DataFrame with the
    same columns (``rt`` in minutes, ``carbons`` or ``index``, optional
    ``name``), a :class:`~matcher.retention.ladder.Ladder`, or a GC-MS **run
    file** of the ladder (ASTM E2077 netCDF or mzML, told by its content): its
    n-alkanes are found (m/z 57/71/85 series, regular spacing) and numbered
    from their molecular ions, or from ``carbons=(first, last)`` / ``"8-20"``;
    ``min_snr`` is the detection threshold (see :mod:`matcher.signal.chromatogram`),
    and the calibration's ``source["run"]`` records the run and the peaks taken. ``mode`` is
    ``programmed`` (van den Dool & Kratz) or ``isothermal`` (Kováts, with a
    hold-up time: ``dead_time``, ``marker`` or ``holdup`` method). Save it with
    ``.save(path)``; convert times with ``.convert(rt_minutes)``.
    """
    from matcher.retention.calibration import calibrate as _calibrate
    from matcher.retention.holdup import METHODS
    from matcher.retention.ladder import Ladder, read_ladder
    from matcher.rules import choice
    from matcher.retention.series import SERIES

    from matcher.signal.run_peaks import is_run_file, ladder_from_run
    from matcher.rules import check_carbons, check_min_snr

    holdup = choice(holdup, METHODS, "--holdup")
    series = choice(series, tuple(SERIES), "--series")
    carbons = check_carbons(carbons)
    min_snr = None if min_snr is None else check_min_snr(min_snr)
    if not isinstance(ladder, Ladder) and is_run_file(ladder):
        if series not in (None, "alkanes"):
            raise MatcherError(f"--series {series}: a ladder found in a run file is an n-alkane ladder")
        lad, record, found_warnings = ladder_from_run(ladder, carbons=carbons, min_snr=min_snr)
        cal = _calibrate(lad, mode=mode, holdup=holdup, dead_time=dead_time, marker=marker)
        cal.source["run"] = record
        cal.warnings = list(found_warnings) + list(cal.warnings)
        return cal
    if carbons is not None or min_snr is not None:
        raise MatcherError("--carbons and --min-snr apply to a ladder run file (ASTM E2077 netCDF or mzML), "
                           "not to a ladder table")
    lad = ladder if isinstance(ladder, Ladder) else read_ladder(ladder, series=series, rt_unit=rt_unit,
                                                                  overrides=header_map)
    return _calibrate(lad, mode=mode, holdup=holdup, dead_time=dead_time, marker=marker)


def detect_peaks(run: Any, *, min_snr: float | None = None, deconvolve: bool = True) -> "RunPeakTable":
    """Detect the peaks of a GC-MS run file (ASTM E2077 netCDF or mzML, told by its content).

    Returns a :class:`~matcher.signal.run_peaks.RunPeakTable`: a peak table (apex
    ``rt`` in minutes, ``area``, molecular-ion hints, ``spectra``) that
    :func:`screen` accepts, with ``.detection`` (heights, S/N, edges, the
    chromatogram) and ``.to_csv(path)`` / ``.to_jcamp(path)`` (``matcher peaks``).
    ``min_snr`` is the prominence threshold in units of the run's noise (default
    5); ``deconvolve=False`` keeps co-eluting compounds as one TIC peak. See
    :mod:`matcher.signal.chromatogram` for the method.
    """
    from matcher.signal.run_peaks import detect_run

    return detect_run(run, min_snr=min_snr, deconvolve=deconvolve)


def read_peaks(path: Any, *, rt_unit: str | None = None, header_map: dict[str, str] | None = None) -> "PeakTable":
    """Read and check a peak table (file or DataFrame); see :mod:`matcher.io.peak_tables` for the columns."""
    from matcher.io.peak_tables import read_peaks as _read_peaks

    return _read_peaks(path, rt_unit=rt_unit, overrides=header_map)


def screen(peaks: Any, *, phase_class: str | Sequence[str], calibration: Any = None, ladder: Any = None, library: Any = None,
           mode: str = "programmed", dead_time: float | None = None, rt_unit: str | None = None,
           header_map: dict[str, str] | None = None, window: float | None = None,
           window_percent: float | None = None, top: int | None = None, fallback: bool = False,
           homologues: bool = False, adaptive: bool = False, anchors: str | os.PathLike | None = None,
           index_scatter: float | None = None, crowding: str | float | None = None, split_peaks: bool = False,
           labels: Sequence[str] | None = None, spectra: Any = None, sample: str | None = None, analyst: str | None = None,
           instrument: str | None = None, column: str | None = None,
           progress: Callable[[int], None] | None = None, min_snr: float | None = None,
           output: str | os.PathLike | None = None, report: str | os.PathLike | None = None,
           second: Any = None, second_class: str | None = None, second_calibration: Any = None,
           second_ladder: Any = None, second_spectra: Any = None) -> "ScreenResult":
    """Shortlist every peak of one run, or of a batch, against the library.

    ``peaks``: a peak table (path, DataFrame or :class:`~matcher.io.peak_tables.PeakTable`)
    or a list of them. Times become indices through ``calibration`` (a
    :class:`~matcher.retention.calibration.Calibration` or a saved file) or ``ladder``
    (a ladder file or DataFrame, fitted with ``mode``): one for all runs or
    one per run; a table with an ``ri`` column needs neither. The library is
    read once. Returns a :class:`~matcher.results.ScreenResult`: ``.table``
    is one DataFrame of all runs (one row per peak and candidate),
    ``.to_csv/.to_json/.to_xlsx/.to_html`` write the files ``matcher
    screen`` writes. ``crowding`` is the prior on compounds not in the library
    (``sparse``, ``moderate``, ``crowded``, ``dense`` or unlisted peaks per 100
    index units; the run refines it); ``split_peaks=True`` lets one compound
    explain several peaks. ``phase_class`` is one polarity class for all runs or a list with one
    per run, in order. ``sample``, ``analyst``, ``instrument`` and ``column`` go into every
    output's provenance and the report header (a peak table's preamble fills what is not given).
    A path whose content is a GC-MS run file (ASTM
    E2077 netCDF or mzML) stands for a peak table: its peaks are detected
    (``min_snr``, see :func:`detect_peaks`) and their spectra and molecular-ion
    hints go into the screen; ``ladder`` may be the ladder's run file.
    ``spectra``: one JCAMP-DX file per run whose blocks are titled by peak id (a
    table's ``spectrum`` column is read without it); compared with the library's
    reference spectra, they add ``spectrum_similarity`` and the
    ``evidence_spectrum`` evidence.

    Two columns: ``second`` is the same sample run on a column of another polarity
    class ``second_class`` (a peak table or run file, with ``second_calibration`` or
    ``second_ladder`` and ``second_spectra`` as for the first run). Its peaks are
    paired with the first run's and every peak is scored with the evidence of both
    columns (:mod:`matcher.identify.two_columns`); the table gains the columns
    ``second_peak``, ``second_ri``, ``second_library_ri``, ``second_delta_ri`` and
    ``evidence_second``.

    >>> import matcher  # doctest: +SKIP
    >>> res = matcher.screen("run_5ms.csv", phase_class="slightly-polar", ladder="alkanes_5ms.csv",
    ...                      second="run_wax.csv", second_class="polar", second_ladder="alkanes_wax.csv")  # doctest: +SKIP

    ``output`` writes the shortlist (``.csv`` with its provenance sidecar, ``.json``
    or ``.xlsx``) and ``report`` the HTML report, both checked before any work
    and guarded against overwriting an input or the library. A CSV is written
    while the runs are screened, part by part, so memory does not grow with the
    run; the returned result's ``table`` then keeps each peak's leading row and
    the rows the report shows (``RunResult.streamed``). Without ``output`` the
    whole table stays in memory.
    """
    from matcher.identify.screening import screen as _screen

    def run(sink=None):
        return _screen(peaks, phase_class, **_source(library), calibration=calibration, ladder=ladder, mode=mode,
                       dead_time=dead_time, rt_unit=rt_unit, header_map=header_map, window=window,
                       window_percent=window_percent, top=top, fallback=fallback, homologues=homologues,
                       adaptive=adaptive, anchors=None if anchors is None else os.fspath(anchors),
                       index_scatter=index_scatter, crowding=crowding, split_peaks=split_peaks, labels=labels,
                       record={"sample": sample, "analyst": analyst, "instrument": instrument, "column": column},
                       spectra=spectra, progress=progress, min_snr=min_snr, sink=sink, second=second,
                       second_class=second_class, second_calibration=second_calibration, second_ladder=second_ladder,
                       second_spectra=second_spectra)

    if output is None and report is None:
        return run()
    from matcher.io.atomic import guard_outputs
    from matcher.io.result_files import sidecar_path
    from matcher.report.files import CsvStream, write_results
    from matcher.rules import check_report_path, check_shortlist_path

    if output is not None:
        check_shortlist_path(output)
    if report is not None:
        check_report_path(report)
    csv_out = output is not None and os.fspath(output).lower().endswith(".csv")
    outs = [("-o/--output", output)] + ([("-o/--output (its provenance sidecar)", str(sidecar_path(output)))] if csv_out else [])
    listed = peaks if isinstance(peaks, (list, tuple)) else [peaks]
    extra = lambda what, v: [(what, x) for x in (v if isinstance(v, (list, tuple)) else [v])  # noqa: E731
                             if isinstance(x, (str, os.PathLike))]
    src = _source(library)
    guard_outputs(outs + [("--report", report)], db=src["db"] if "db" in src else False,
                  inputs=extra("the peak table", listed) + extra("the calibration", calibration)
                  + extra("the ladder", ladder) + extra("the anchors file", anchors)
                  + extra("the spectra file", spectra) + extra("the second run", second)
                  + extra("the second run's calibration", second_calibration)
                  + extra("the second run's ladder", second_ladder)
                  + extra("the second run's spectra file", second_spectra))
    if csv_out:
        from matcher.report.summary import add_summaries, summarise_table

        counted: dict[str, dict] = {}

        def sink(part) -> None:
            stream.write(part)
            label = str(part["run"].iat[0]) if len(part) else ""
            counted[label] = add_summaries(counted.get(label), summarise_table(part))

        with CsvStream(output) as stream:
            result = run(sink)
            for r in result.runs:
                r.summary = counted.get(r.label, summarise_table(r.table.iloc[:0]))
            stream.finish(result)
    else:
        result = run()
        if output is not None:
            write_results(result, output)
    if report is not None:
        from matcher.report.html import write_report

        write_report(result, report)
    return result


def query(ri: float, phase_class: str, *, library: Any = None, window: float | None = None,
          window_percent: float | None = None, mol_ion: float | None = None, ions: Any = None,
          hit: str | None = None, hit_match: float | None = None, top: int | None = None,
          fallback: bool = False, homologues: bool = False, index_scatter: float | None = None,
          crowding: str | float | None = None, spectrum: Any = None, second_ri: float | None = None,
          second_class: str | None = None) -> "QueryResult":
    """Ranked candidates for one retention index; returns a :class:`~matcher.identify.query.QueryResult`.

    ``ions`` are key ions (whole m/z: a list or text such as ``"93 136"``);
    ``hit`` and ``hit_match`` (0-100) are your spectral search's proposal.
    ``spectrum`` is the peak's mass spectrum: a JCAMP-DX file with one block,
    or ``(mz, intensity)`` arrays.
    ``second_ri`` and ``second_class``: the unknown's index on a second column of another polarity;
    both indices are scored jointly (:mod:`matcher.identify.two_columns`).
    ``result.candidates`` lists records in rank order, ``result.table`` the
    same as a DataFrame, ``result.to_dict()`` is the ``matcher query --json``
    document.
    """
    from matcher.identify.query import query as _query

    return _query(ri, phase_class, **_source(library), window=window, window_percent=window_percent,
                  mol_ion=mol_ion, ions=ions, hit=hit, hit_match=hit_match, top=top, fallback=fallback,
                  homologues=homologues, index_scatter=index_scatter, crowding=crowding, spectrum=spectrum,
                  second_ri=second_ri, second_class=second_class)


@dataclass
class Evaluation:
    """How far the library's shortlists can be trusted (``matcher evaluate``); rates are fractions 0-1."""

    top1: float | None
    top3: float | None
    coverage: float | None
    ece: float | None
    not_in_library_detection: float | None
    mean_top_probability_absent: float | None
    noise: float
    queries: dict[str, int]
    classes: dict[str, dict] = field(default_factory=dict)
    library: dict[str, Any] = field(default_factory=dict)
    #: the same rates with index and spectrum (None when the library holds no spectra), see matcher.identify.evaluation
    with_spectra: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """The document ``matcher evaluate --json`` prints."""
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def evaluate(library: Any = None, *, phase_class: str | None = None, noise: float = 0.0,
             window: float | None = None, second_class: str | None = None, runs: int | None = None,
             seed: int | None = None) -> Any:
    """Self-check of the library by resampling it: leave-one-out and removal queries, confusable pairs.

    With ``second_class`` (and ``phase_class``): the two-column self-check of
    :mod:`matcher.identify.evaluation_two_columns` on the compounds listed on both classes, ``runs``
    simulated runs from ``seed``, ``noise`` the run scatter on both columns (0: each class's default);
    returns a :class:`~matcher.identify.evaluation_two_columns.TwoColumnEvaluation`.
    """
    from matcher.identify.evaluation import evaluate as _evaluate
    from matcher.rules import check_class, check_noise, check_window

    if phase_class is not None:
        phase_class = check_class(phase_class)
    window, _ = check_window(window, None)
    noise = check_noise(noise)
    if second_class is None and (runs is not None or seed is not None):
        raise MatcherError("--runs and --seed belong to the two-column check: give --second-class too")
    if second_class is not None:  # the two-column self-check
        from matcher.identify.evaluation_two_columns import TwoColumnEvaluation, evaluate_two_columns
        from matcher.rules import check_class_pair, check_runs, check_seed

        phase_class, second_class = check_class_pair(phase_class, second_class)
        runs, seed = check_runs(runs), check_seed(seed)
        return TwoColumnEvaluation.from_dict(evaluate_two_columns(
            _snapshot(library), phase_class, second_class, runs=runs, seed=seed, noise=noise or None, window=window))
    report = _evaluate(_snapshot(library), phase_class, noise=noise, window=window)
    return Evaluation(**report)


def open_review(result: str | os.PathLike, *, reviewer: str | None = None):
    """The review of a screening output (CSV or JSON), with its record ``RESULT.review.json``.

    ``review.peaks()`` lists every peak with its candidates and current decision,
    ``review.decide({"run", "peak", "decision", "name"?, "note"?})`` records one decision at once,
    ``review.export("review.csv")`` writes the reviewed list. A record made for other content of
    the result is refused. Accepting a candidate is a putative annotation, not a confirmation.
    """
    from matcher.review.session import open_review as _open

    return _open(result, reviewer=reviewer)


def serve_review(result: str | os.PathLike, *, library: Any = None, port: int | None = None,
                 reviewer: str | None = None, open_browser: bool = False, announce: Callable | None = None) -> None:
    """``matcher review``: serve the review page on 127.0.0.1 until interrupted.

    ``announce(url)`` is called once with the page address (it holds the session token);
    ``library`` (a path or URL) lets the page add peaks confirmed with a standard.
    """
    from matcher.review.server import serve

    review = open_review(result, reviewer=reviewer)
    db = None if library is None else (library.db if isinstance(library, Library) else os.fspath(library))
    serve(review, port=port, db=db, open_browser=open_browser, announce=announce or print)


def _tiny_snapshot():
    """A two-compound library for the examples above (invented indices)."""
    import numpy as np

    from matcher.store.snapshot import CompoundTable, build_snapshot

    return build_snapshot(
        CompoundTable.from_records([{"id": 1, "name": "limonene", "formula": "C10H16"},
                                    {"id": 2, "name": "decane", "formula": "C10H22"}]),
        np.array([1, 1, 2]), np.array(["slightly-polar"] * 3), np.array([1029.0, 1031.0, 1000.0]))


__all__ = ["Library", "open_library", "calibrate", "read_peaks", "detect_peaks", "screen", "query", "evaluate",
           "Evaluation", "open_review", "serve_review", "spectrum_similarity", "spectrum_similarity_matrix"]


def spectrum_similarity(a: Any, b: Any) -> float:
    """Stein & Scott composite similarity (0-1, 1 = identical) of two mass spectra in the shared form.

    Each spectrum is ``(mz, intensity)`` arrays (as in ``PeakTable.spectra``; see :mod:`matcher.chem.spectra`);
    NaN when either is missing. For many pairs at once use :func:`spectrum_similarity_matrix`.
    """
    from matcher.chem.spectra import similarity

    return similarity(a, b)


def spectrum_similarity_matrix(unknowns: Sequence, references: Sequence):
    """Similarity of every unknown spectrum with every reference spectrum (a NumPy array, vectorised)."""
    from matcher.chem.spectra import similarity_matrix

    return similarity_matrix(unknowns, references)
