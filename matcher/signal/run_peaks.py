"""A run file turned into a peak table, a ladder, and the files ``matcher peaks`` writes.

The glue between the run readers (:mod:`matcher.io.run_files`) and the pure
detection room (:mod:`matcher.signal`):

* :func:`detect_run` reads a run and detects its peaks, giving a
  :class:`RunPeakTable`, a :class:`~matcher.io.peak_tables.PeakTable` (so it
  stands wherever a peak table does) that also keeps the detection and a
  decimated chromatogram for the report. Each peak has ``rt`` (minutes),
  ``area``, a molecular-ion hint ``mol_ion``
  (:func:`matcher.signal.mass_spectra.molecular_ion`) and its spectrum in
  ``spectra``.
* :func:`read_peaks_or_run` decides from the file's content whether a path is
  a run file or a peak table; a file named like a run file (``.cdf``, ``.nc``,
  ``.mzML``) whose content is not one is refused as a mislabelled run file.
* :func:`ladder_from_run` finds the n-alkanes of a ladder run
  (:func:`matcher.signal.ladder_search.find_alkanes`) and returns a
  :class:`~matcher.retention.ladder.Ladder` plus what the calibration file
  records about the run.
* :func:`peaks_csv` and :func:`jcamp_text` are the two files of ``matcher peaks``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from matcher.errors import InputError, MatcherError
from matcher.io.peak_tables import PeakTable, content_checksum

#: Columns of ``matcher peaks -o`` (docs/formats.md, "Detected peaks CSV"), in order.
PEAKS_COLUMNS = ("peak", "rt", "area", "height", "sn", "start", "end", "resolved", "model_ion", "mol_ion", "spectrum")
#: Most points of a chromatogram kept for a plot (min/max pairs per bucket).
PLOT_POINTS = 1500


@dataclass
class RunPeakTable(PeakTable):
    """A peak table detected in a run file; ``detection`` and ``chromatogram`` are for reports."""

    run_format: str = ""
    detection: object = None
    chromatogram: dict = field(default_factory=dict)

    def to_csv(self, path) -> str:
        """Write the detected peak table (columns :data:`PEAKS_COLUMNS`) atomically; ``-`` is standard output."""
        _write(path, peaks_csv(self))
        return os.fspath(path)

    def to_jcamp(self, path) -> str:
        """Write the peaks' spectra as one JCAMP-DX file (see :func:`jcamp_text`) atomically."""
        _write(path, jcamp_text(self))
        return os.fspath(path)


def _write(path, text: str) -> None:
    from matcher.io.atomic import atomic_write

    with atomic_write(os.fspath(path), "w", encoding="utf-8", newline="") as fh:
        fh.write(text)


def decimate(x: np.ndarray, y: np.ndarray, max_points: int = PLOT_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """At most about ``max_points`` points of a long trace: the minimum and maximum of each bucket, in order.

    A peak narrower than a bucket keeps its top.

    >>> x = np.arange(10000.0); y = np.zeros(10000); y[5003] = 7.0
    >>> xs, ys = decimate(x, y, 100)
    >>> len(xs) <= 102, float(ys.max()), float(xs[np.argmax(ys)])
    (True, 7.0, 5003.0)
    """
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    n = len(x)
    if n <= max_points:
        return x.copy(), y.copy()
    buckets = max(1, max_points // 2)
    edges = np.linspace(0, n, buckets + 1).astype(np.int64)
    starts = edges[:-1]
    lo = np.minimum.reduceat(y, starts)
    hi = np.maximum.reduceat(y, starts)
    # positions of the min and max inside each bucket
    seg = np.repeat(np.arange(buckets), np.diff(edges))
    imin = np.full(buckets, -1)
    imax = np.full(buckets, -1)
    order = np.arange(n)
    is_min = y == lo[seg]
    is_max = y == hi[seg]
    np.maximum.at(imin, seg[is_min], order[is_min])
    np.maximum.at(imax, seg[is_max], order[is_max])
    idx = np.unique(np.concatenate([imin, imax]))
    return x[idx], y[idx]


def _chromatogram(run, det) -> dict:
    t, tic = decimate(run.time_s / 60.0, run.tic)
    apex_tic = np.interp(det.rt_s, run.time_s, run.tic) if len(det) else np.zeros(0)
    return {"rt": [round(float(v), 5) for v in t], "tic": [float(f"{v:.5g}") for v in tic],
            "peaks": [{"peak": str(k + 1), "rt": round(float(r) / 60.0, 5), "tic": float(f"{h:.5g}")}
                      for k, (r, h) in enumerate(zip(det.rt_s, apex_tic))]}


def detect_run(path, *, min_snr: float | None = None, deconvolve: bool = True, run=None) -> RunPeakTable:
    """Read a run file (or take ``run``, a :class:`~matcher.io.run_files.RunData`) and detect its peaks."""
    from matcher.io.run_files import read_run
    from matcher.rules import check_min_snr
    from matcher.signal.chromatogram import MIN_SNR, detect_peaks
    from matcher.signal.mass_spectra import molecular_ion

    min_snr = MIN_SNR if min_snr is None else check_min_snr(min_snr)
    run = run if run is not None else read_run(path)
    det = detect_peaks(run.time_s, run.tic, run.scan_index, run.point_count, run.mz, run.intensity,
                       min_snr=min_snr, deconvolve=deconvolve)
    n = len(det)
    ids = [str(k + 1) for k in range(n)]
    rt = det.rt_s / 60.0
    mol = np.array([np.nan if (m := molecular_ion(*sp)) is None else float(m) for sp in det.spectra])
    mol = mol if n else np.zeros(0)
    nan = np.full(n, np.nan)
    ions = [()] * n
    hit = [""] * n
    spectra = tuple((sp[0], sp[1]) if len(sp[0]) else None for sp in det.spectra)
    return RunPeakTable(
        path=run.path, peak=np.array(ids, dtype=object), rt=rt, ri=nan.copy(), mol_ion=mol, ions=tuple(ions),
        hit=np.array(hit, dtype=object), hit_match=nan.copy(), area=det.area.copy(), has_rt=True, has_ri=False,
        rt_unit_source=f"run file ({run.format_name}): {run.time_unit_source}", columns={},
        lines=np.arange(1, n + 1, dtype=np.int64),
        checksum=content_checksum(ids, rt, nan, mol, ions, hit, nan, det.area), spectra=spectra,
        run_format=run.format, detection=det, chromatogram=_chromatogram(run, det),
        area_percent=100.0 * det.area / det.area.sum() if n and det.area.sum() > 0 else None,
        area_percent_source="computed from area" if n and det.area.sum() > 0 else "",
        metadata={"acquired": run.acquired} if getattr(run, "acquired", None) else None,
    )


def read_peaks_or_run(path, *, rt_unit: str | None = None, overrides: dict | None = None,
                      min_snr: float | None = None) -> PeakTable:
    """A run file (decided by content) through :func:`detect_run`, anything else through the peak-table reader."""
    from matcher.io.peak_tables import read_peaks
    from matcher.io.run_files import looks_like_run_name, sniff_run

    if isinstance(path, (str, os.PathLike)) and (sniff_run(path) or looks_like_run_name(path)):
        # a name ending like a run file whose content is not one is refused by the run reader, by name
        return detect_run(path, min_snr=min_snr)
    return read_peaks(path, rt_unit=rt_unit, overrides=overrides)


def is_run_file(path) -> bool:
    """True when ``path`` is a file whose content is a run file (ASTM E2077 netCDF or mzML)."""
    from matcher.io.run_files import sniff_run

    return isinstance(path, (str, os.PathLike)) and sniff_run(path) is not None


def ladder_from_run(path, *, carbons=None, min_snr: float | None = None):
    """The n-alkane ladder of a run file: ``(Ladder, record)``; ``record`` goes into the calibration's source."""
    from matcher.retention.ladder import Ladder
    from matcher.rules import check_carbons
    from matcher.signal.ladder_search import find_alkanes

    carbons = check_carbons(carbons)
    table = detect_run(path, min_snr=min_snr)
    det = table.detection
    try:
        found = find_alkanes(det.rt_s, det.height, det.spectra, carbons=carbons)
    except MatcherError as exc:
        raise InputError(str(exc), file=os.fspath(path)) from None
    rt = found.rt_s / 60.0
    index = 100.0 * found.carbons
    if np.any(np.diff(index) <= 0):
        raise InputError("the alkanes found do not rise in carbon number with time; give --carbons FIRST-LAST",
                         file=os.fspath(path))
    names = [f"C{n}" for n in found.carbons]
    lad = Ladder(path=os.fspath(path), series="alkanes", rt=rt, index=index, names=names,
                 carbons=found.carbons.astype(np.float64), rows=found.peaks + 1, rt_unit="s",
                 rt_unit_source=table.rt_unit_source)
    record = {
        "format": table.run_format,
        "scans": int(len(det.time_s)),
        "peaks_detected": int(len(det)),
        "alkane_like": int(found.candidates),
        "carbons_option": None if carbons is None else f"{carbons[0]}-{carbons[1]}",
        "noise": float(det.noise),
        "taken": [{"peak": str(int(p) + 1), "rt": float(r), "carbons": int(c), "carbons_from": src,
                   "mol_ion": None if m is None else int(14 * m + 2), "area": float(det.area[p]),
                   "height": float(det.height[p])}
                  for p, r, c, src, m in zip(found.peaks, rt, found.carbons, found.carbons_from,
                                             found.mol_ion_carbons)],
        "chromatogram": {"rt": table.chromatogram["rt"], "tic": table.chromatogram["tic"]},
    }
    return lad, record, found.warnings


# ---------------------------------------------------------------------- the files of `matcher peaks`

def peaks_csv(table: RunPeakTable) -> str:
    """The detected peak table as CSV text (columns :data:`PEAKS_COLUMNS`; ``spectrum`` as m/z:intensity pairs)."""
    import csv
    import io

    from matcher.io.spectrum_text import format_spectrum_text

    det = table.detection
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(PEAKS_COLUMNS)
    for k in range(len(table)):
        sp = table.spectra[k] if table.spectra else None
        mz, y = (sp if sp is not None else (np.zeros(0), np.zeros(0)))
        w.writerow([
            table.peak[k], f"{table.rt[k]:.4f}", f"{det.area[k]:.6g}", f"{det.height[k]:.6g}", f"{det.snr[k]:.1f}",
            f"{det.start_s[k] / 60:.4f}", f"{det.end_s[k] / 60:.4f}", "ions" if det.split[k] else "tic",
            "" if not np.isfinite(det.model_ion[k]) else str(int(det.model_ion[k])),
            "" if not np.isfinite(table.mol_ion[k]) else str(int(table.mol_ion[k])),
            format_spectrum_text(mz, np.round(y, 1)),
        ])
    return buf.getvalue()


def _jcamp_value(v: float) -> str:
    return str(int(v)) if float(v).is_integer() else f"{v:.6g}"


def jcamp_text(table: RunPeakTable, *, title: str | None = None) -> str:
    """The peaks' spectra as one JCAMP-DX 5.01 file: a LINK block holding one MASS SPECTRUM block per peak.

    Labels after McDonald and Wilks, Appl. Spectrosc. 42, 151 (1988) and, for mass spectra, Lampen et al.,
    Appl. Spectrosc. 48, 1545 (1994): ``##DATA TYPE=MASS SPECTRUM``, ``##DATA CLASS=PEAK TABLE``,
    ``##PEAK TABLE=(XY..XY)`` with one ``m/z,intensity`` pair per line (background-subtracted intensities as
    detected, ``##YUNITS=ABUNDANCE``), ``##RETENTION TIME=`` in seconds.
    """
    from matcher.safe_text import xml_text

    det = table.detection
    name = title or os.path.basename(str(table.path))
    safe = " ".join(xml_text(name).split())[:200]
    lines = [f"##TITLE={safe}", "##JCAMP-DX=5.01", "##DATA TYPE=LINK", f"##BLOCKS={len(table)}",
             "##ORIGIN=matcher (detected peaks)", "##OWNER=public"]
    for k in range(len(table)):
        sp = table.spectra[k] if table.spectra else None
        mz, y = (sp if sp is not None else (np.zeros(0), np.zeros(0)))
        lines += [f"##TITLE={safe} peak {table.peak[k]}", "##JCAMP-DX=5.01", f"##BLOCK_ID={k + 1}",
                  "##DATA TYPE=MASS SPECTRUM", "##DATA CLASS=PEAK TABLE", "##SPECTROMETER/DATA SYSTEM=matcher",
                  f"##RETENTION TIME={det.rt_s[k]:.3f}", "##XUNITS=M/Z", "##YUNITS=ABUNDANCE",
                  f"##NPOINTS={len(mz)}", "##PEAK TABLE=(XY..XY)"]
        lines += [f"{_jcamp_value(m)},{_jcamp_value(round(v, 1))}" for m, v in zip(mz, y)]
        lines.append("##END=")
    lines.append("##END=")
    return "\n".join(lines) + "\n"


__all__ = ["RunPeakTable", "detect_run", "read_peaks_or_run", "is_run_file", "ladder_from_run", "peaks_csv",
           "jcamp_text", "decimate", "PEAKS_COLUMNS", "PLOT_POINTS"]
