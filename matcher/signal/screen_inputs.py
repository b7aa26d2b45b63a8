"""What a screen reads from files, made into objects in memory before any scoring.

A run to screen comes as a peak table (path, DataFrame or
:class:`~matcher.io.peak_tables.PeakTable`) or a GC-MS run file whose peaks are detected here
(:func:`matcher.signal.run_peaks.read_peaks_or_run`); its times become indices through a saved
calibration or a ladder (a ladder table, or the ladder's own run file, whose n-alkanes are found by
:func:`matcher.signal.run_peaks.ladder_from_run`); its spectra come from the table or from a JCAMP-DX
file whose blocks are titled by peak id (:func:`matcher.io.jcamp.spectra_by_peak`). The engine
(:mod:`matcher.identify.screening`) receives a :class:`LoadedRun` and reads no file itself.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from matcher.errors import MatcherError


@dataclass
class LoadedRun:
    """One run ready for scoring: its table, the calibration used (None when the table gave indices), the
    indices, which of them lie outside the ladder, and its spectra (a list per peak, or None)."""

    table: Any
    calibration: Any
    ri: np.ndarray
    extrapolated: np.ndarray
    spectra: list | None
    spectra_checksum: str = ""  # matcher.io.peak_tables.spectra_checksum of the peaks' spectra ("" without)


def calibrate_run(calibration: Any, ladder: Any, *, mode: str, dead_time: float | None, rt_unit: str | None,
                  min_snr: float | None = None):
    """The calibration of a run: a saved one (path or object), or one fitted to a ladder (table, object or the
    ladder's run file); None when neither is given."""
    from matcher.retention.calibration import Calibration, calibrate
    from matcher.retention.ladder import Ladder, read_ladder
    from matcher.signal.run_peaks import is_run_file, ladder_from_run

    if calibration is not None:
        return calibration if isinstance(calibration, Calibration) else Calibration.load(calibration)
    if ladder is not None:
        if not isinstance(ladder, Ladder) and is_run_file(ladder):  # the ladder's own GC-MS run
            lad, record, found_warnings = ladder_from_run(ladder, min_snr=min_snr)
            cal = calibrate(lad, mode=mode, dead_time=dead_time)
            cal.source["run"] = record
            cal.warnings = list(found_warnings) + list(cal.warnings)
            return cal
        lad = ladder if isinstance(ladder, Ladder) else read_ladder(ladder, rt_unit=rt_unit)
        return calibrate(lad, mode=mode, dead_time=dead_time)
    return None


def load_run(peaks: Any, *, calibration: Any = None, ladder: Any = None, spectra: Any = None, name: str = "",
             mode: str = "programmed", dead_time: float | None = None, rt_unit: str | None = None,
             header_map: dict | None = None, min_snr: float | None = None,
             options: tuple[str, str] = ("--calibration", "--ladder")) -> LoadedRun:
    """Read one run and turn its times into indices (see module doc). ``name`` is the run as messages call it.

    A table without ``ri`` needs a calibration or a ladder (``options``: how the caller's user gives them); spectra given twice (a ``spectrum`` column and a
    spectra file) are refused."""
    from matcher.io.peak_tables import PeakTable
    from matcher.signal.run_peaks import read_peaks_or_run

    table = peaks if isinstance(peaks, PeakTable) else read_peaks_or_run(
        peaks, rt_unit=rt_unit, overrides=header_map, min_snr=min_snr)
    cal = None
    extrap = np.zeros(len(table.peak), dtype=bool)
    if table.has_ri:
        x = np.asarray(table.ri, dtype=float)
    else:
        cal = calibrate_run(calibration, ladder, mode=mode, dead_time=dead_time, rt_unit=rt_unit, min_snr=min_snr)
        if cal is None:
            raise MatcherError(f"{name}: the table has no 'ri' column; give {options[0]} CAL.json or {options[1]} LADDER.csv")
        x, extrap = cal.convert(np.asarray(table.rt, dtype=float))
    spec = None
    if spectra is not None:
        from matcher.io.jcamp import spectra_by_peak

        if getattr(table, "spectra", ()):
            raise MatcherError(f"{name} has a 'spectrum' column and --spectra {os.fspath(spectra)} was given too: "
                               "give the spectra once")
        spec = spectra_by_peak(spectra, np.asarray(table.peak))
    elif getattr(table, "spectra", ()):
        spec = list(table.spectra)
    from matcher.io.peak_tables import spectra_checksum

    digest = spectra_checksum(table.peak, spec) if spec is not None else ""
    return LoadedRun(table, cal, np.asarray(x, dtype=float), np.asarray(extrap, dtype=bool), spec, digest)
