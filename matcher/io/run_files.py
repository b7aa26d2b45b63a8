"""Reading a GC-MS run file: ASTM E2077 netCDF (netCDF-3 classic or netCDF-4) and mzML.

A run file holds every scan of one injection: the scan times, the total-ion
current and each scan's centroided mass spectrum. Two open formats are read:

* **ASTM E2077** (the analytical data interchange format for mass
  spectrometry, netCDF; ASTM E2077-00, "Standard Specification for Analytical
  Data Interchange Protocol for Mass Spectrometric Data"): dimensions
  ``scan_number`` and ``point_number``; variables ``scan_acquisition_time``
  (seconds), ``total_intensity``, ``scan_index`` (first point of each scan),
  ``point_count`` (points per scan), ``mass_values`` and ``intensity_values``.
  A ``scale_factor`` attribute on the mass or intensity variable is applied; a
  ``units`` attribute on the time variable naming minutes is honoured. The
  classic netCDF-3 file (magic ``CDF\\x01`` or ``CDF\\x02``) is read with
  :class:`scipy.io.netcdf_file`; a netCDF-4 file (an HDF5 container) with the
  ``netCDF4`` package when it is installed (``pip install "matcher[runs]"``).
* **mzML** (HUPO Proteomics Standards Initiative, Martens et al., Mol. Cell.
  Proteomics 10, R110.000133, 2011) through ``pyteomics.mzml`` (Levitsky et al.,
  J. Am. Soc. Mass Spectrom. 30, 1238, 2019), in the same extra. MS1 spectra
  only; ``scan start time`` in its stated unit.

The kind is decided from the file's first bytes, never from its name
(:func:`sniff_run`). A file of another kind, a damaged or truncated file, or a
netCDF file that is not an E2077 mass-spectrometry file is refused with one
:class:`~matcher.errors.InputError` naming the file and what is wrong.

>>> sniff_run_bytes(b"CDF\\x01\\x00\\x00"), sniff_run_bytes(b"\\x89HDF\\r\\n\\x1a\\n")
('netcdf3', 'netcdf4')
>>> sniff_run_bytes(b'<?xml version="1.0"?>\\n<indexedmzML xmlns="http://psi.hupo.org/ms/mzml">'), sniff_run_bytes(b"rt,ri\\n")
('mzml', None)
"""

from __future__ import annotations

import io
import os
import re
from dataclasses import dataclass

import numpy as np

from matcher.errors import InputError
from matcher.limits import MAX_FILE_BYTES, MAX_MZ

#: The variables an ASTM E2077 file must hold for matcher to read it.
E2077_VARIABLES = ("scan_acquisition_time", "scan_index", "point_count", "mass_values", "intensity_values")
#: File name endings that promise a run file (used only to word the refusal of a mislabelled file).
RUN_SUFFIXES = (".cdf", ".nc", ".netcdf", ".mzml", ".nc4")
#: The kinds :func:`sniff_run` tells apart, as named in messages and outputs.
FORMAT_NAMES = {"netcdf3": "ASTM E2077 netCDF-3", "netcdf4": "ASTM E2077 netCDF-4", "mzml": "mzML"}

_HDF5 = b"\x89HDF\r\n\x1a\n"
_MZML = re.compile(rb"<\s*(?:[A-Za-z_][\w.-]*:)?(?:indexedmzML|mzML)\b")


@dataclass
class RunData:
    """Every scan of one run: times in seconds, the TIC, and the centroided spectra as flat arrays.

    Scan ``k`` holds ``mz[scan_index[k] : scan_index[k] + point_count[k]]`` and the
    matching ``intensity`` values.
    """

    path: str
    format: str              # a key of FORMAT_NAMES
    time_s: np.ndarray       # float64, strictly increasing
    tic: np.ndarray          # float64, one per scan
    scan_index: np.ndarray   # int64
    point_count: np.ndarray  # int64
    mz: np.ndarray           # float64
    intensity: np.ndarray    # float64
    time_unit_source: str = "scan_acquisition_time (seconds)"

    def __len__(self) -> int:
        return len(self.time_s)

    @property
    def format_name(self) -> str:
        return FORMAT_NAMES.get(self.format, self.format)


def sniff_run_bytes(head: bytes) -> str | None:
    """``'netcdf3'``, ``'netcdf4'``, ``'mzml'`` or ``None`` from a file's first bytes (about 4 KB)."""
    if head[:4] in (b"CDF\x01", b"CDF\x02", b"CDF\x05"):
        return "netcdf3"
    if head[:8] == _HDF5:
        return "netcdf4"
    text = head[:4096]
    if text.startswith(b"\xef\xbb\xbf"):
        text = text[3:]
    if text.lstrip()[:1] == b"<" and _MZML.search(text):
        return "mzml"
    return None


def sniff_run(path) -> str | None:
    """The run-file kind of ``path`` from its content, or ``None`` when it is not a run file.

    A file that cannot be opened gives ``None`` (the table reader then names the problem).
    """
    try:
        with open(os.fspath(path), "rb") as fh:
            return sniff_run_bytes(fh.read(4096))
    except (OSError, TypeError, ValueError):
        return None


def looks_like_run_name(path) -> bool:
    """True when the file's name ends like a run file (``.cdf``, ``.nc``, ``.mzML``, ...)."""
    try:
        return os.fspath(path).lower().endswith(RUN_SUFFIXES)
    except TypeError:
        return False


def read_run(path, *, limit: int = MAX_FILE_BYTES) -> RunData:
    """Read and check a run file; the kind comes from its content (see the module docstring)."""
    p = os.fspath(path)
    from matcher.io.bounded import read_bytes

    data = read_bytes(p, what="run file", limit=limit)
    kind = sniff_run_bytes(data[:4096])
    if kind is None:
        what = "text (a table?)" if _is_text(data[:4096]) else "binary data of another kind"
        raise InputError(f"not a GC-MS run file: its content is {what}, not ASTM E2077 netCDF or mzML"
                         + (" (the name says run file, the content does not)" if looks_like_run_name(p) else ""),
                         file=p)
    if kind == "netcdf3":
        if data[:4] == b"CDF\x05":
            raise InputError("a netCDF-3 64-bit-data (CDF-5) file: not read; export as netCDF-3 classic", file=p)
        run = _read_netcdf3(p, data)
    elif kind == "netcdf4":
        run = _read_netcdf4(p, data)
    else:
        run = _read_mzml(p)
    return check_run(run)


def _is_text(head: bytes) -> bool:
    if not head:
        return True
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:  # a multi-byte character cut at the 4 KB edge is still text
        if exc.start < len(head) - 4:
            return False
    return b"\x00" not in head


def _e2077_arrays(p: str, get, has, attr) -> RunData:
    missing = [v for v in E2077_VARIABLES if not has(v)]
    if missing:
        raise InputError(f"a netCDF file without {', '.join(missing)}: not an ASTM E2077 mass-spectrometry run", file=p)
    t = np.asarray(get("scan_acquisition_time"), dtype=np.float64).ravel()
    unit = str(attr("scan_acquisition_time", "units") or "").strip().lower()
    source = "scan_acquisition_time (seconds)"
    if unit.startswith("min"):
        t = t * 60.0
        source = f"scan_acquisition_time (units {unit!r})"
    scan_index = np.asarray(get("scan_index")).ravel()
    point_count = np.asarray(get("point_count")).ravel()
    mz = np.asarray(get("mass_values"), dtype=np.float64).ravel()
    y = np.asarray(get("intensity_values"), dtype=np.float64).ravel()
    for name, arr in (("mass_values", mz), ("intensity_values", y)):
        f = attr(name, "scale_factor")
        if f is not None:
            try:
                arr *= float(np.asarray(f).ravel()[0])
            except (TypeError, ValueError, IndexError):
                raise InputError(f"the scale_factor of {name} is not a number", file=p) from None
    tic = np.asarray(get("total_intensity"), dtype=np.float64).ravel() if has("total_intensity") else None
    return RunData(p, "", t, tic, scan_index, point_count, mz, y, source)


def _read_netcdf3(p: str, data: bytes) -> RunData:
    from scipy.io import netcdf_file

    try:
        with netcdf_file(io.BytesIO(data), "r", mmap=False) as nc:
            v = nc.variables
            run = _e2077_arrays(
                p, lambda k: v[k][:].copy(), lambda k: k in v,
                lambda k, a: (getattr(v[k], a).decode("latin-1") if isinstance(getattr(v[k], a, None), bytes)
                              else getattr(v[k], a, None)))
    except InputError:
        raise
    except Exception as exc:  # scipy raises many kinds on a cut or damaged file
        raise InputError(f"damaged or truncated netCDF file ({_short(exc)})", file=p) from None
    run.format = "netcdf3"
    return run


def _read_netcdf4(p: str, data: bytes) -> RunData:
    try:
        import netCDF4
    except ImportError:
        raise InputError('a netCDF-4 (HDF5) file: reading it needs the netCDF4 package (pip install "matcher[runs]"), '
                         "or export the run as netCDF-3 classic", file=p) from None
    try:
        with netCDF4.Dataset("inmemory.nc", mode="r", memory=data) as nc:
            nc.set_auto_mask(False)
            nc.set_auto_scale(False)
            v = nc.variables
            run = _e2077_arrays(p, lambda k: np.array(v[k][:]), lambda k: k in v,
                                lambda k, a: v[k].getncattr(a) if a in v[k].ncattrs() else None)
    except InputError:
        raise
    except Exception as exc:
        raise InputError(f"damaged or truncated netCDF-4 file, or an HDF5 file that is not netCDF ({_short(exc)})",
                         file=p) from None
    run.format = "netcdf4"
    return run


_MINUTES = ("minute", "min", "UO:0000031")


def _read_mzml(p: str) -> RunData:
    try:
        from pyteomics import mzml
    except ImportError:
        raise InputError('an mzML file: reading it needs the pyteomics, psims and lxml packages (pip install "matcher[runs]")',
                         file=p) from None
    times, mzs, ys, counts = [], [], [], []
    try:
        with mzml.MzML(p, use_index=False, decode_binary=True) as reader:
            for spec in reader:
                level = spec.get("ms level", 1)
                if level not in (1, None):
                    continue
                scan = (spec.get("scanList") or {}).get("scan") or [{}]
                st = scan[0].get("scan start time")
                if st is None:
                    raise InputError(f"spectrum {spec.get('id', '?')!r} has no scan start time", file=p)
                unit = getattr(st, "unit_info", None) or "minute"
                t = float(st) * (60.0 if str(unit) in _MINUTES else 1.0)
                mz = np.asarray(spec.get("m/z array", ()), dtype=np.float64)
                y = np.asarray(spec.get("intensity array", ()), dtype=np.float64)
                if len(mz) != len(y):
                    raise InputError(f"spectrum {spec.get('id', '?')!r} has {len(mz)} m/z values but {len(y)} "
                                     "intensities", file=p)
                times.append(t)
                mzs.append(mz)
                ys.append(y)
                counts.append(len(mz))
    except InputError:
        raise
    except Exception as exc:  # lxml and pyteomics errors on a cut or damaged file
        raise InputError(f"damaged or truncated mzML file ({_short(exc)})", file=p) from None
    if not times:
        raise InputError("the mzML file holds no MS1 spectra", file=p)
    counts_a = np.asarray(counts, dtype=np.int64)
    index = np.r_[0, np.cumsum(counts_a)[:-1]].astype(np.int64)
    return RunData(p, "mzml", np.asarray(times), None, index, counts_a,
                   np.concatenate(mzs) if mzs else np.zeros(0), np.concatenate(ys) if ys else np.zeros(0),
                   "scan start time (its unit)")


def _short(exc: Exception) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text[:120]


def check_run(run: RunData) -> RunData:
    """The checks every run passes, whatever its format; returns the run with a TIC (summed when absent)."""
    p = run.path
    n = len(run.time_s)
    if n < 3:
        raise InputError(f"the run has {n} scan(s); at least 3 are needed", file=p)
    if len(run.scan_index) != n or len(run.point_count) != n:
        raise InputError(f"scan_index ({len(run.scan_index)}) and point_count ({len(run.point_count)}) do not match "
                         f"the {n} scan times: damaged file", file=p)
    if not np.all(np.isfinite(run.time_s)) or np.any(run.time_s < 0):
        raise InputError("scan times are not all finite and non-negative: damaged file", file=p)
    if np.any(np.diff(run.time_s) <= 0):
        k = int(np.flatnonzero(np.diff(run.time_s) <= 0)[0])
        raise InputError(f"scan times do not rise: scan {k + 2} at {run.time_s[k + 1]:g} s follows "
                         f"{run.time_s[k]:g} s", file=p)
    from matcher.limits import MAX_RT_MIN

    if run.time_s[-1] > MAX_RT_MIN * 60:
        raise InputError(f"the run lasts {run.time_s[-1] / 60:g} min; at most {MAX_RT_MIN:g} min are accepted", file=p)
    idx = np.asarray(run.scan_index, dtype=np.int64)
    cnt = np.asarray(run.point_count, dtype=np.int64)
    total = len(run.mz)
    if len(run.intensity) != total:
        raise InputError(f"{total} mass values but {len(run.intensity)} intensity values: damaged file", file=p)
    if np.any(cnt < 0) or np.any(idx < 0) or np.any(idx + cnt > total):
        raise InputError(f"scan_index/point_count point past the {total} stored points: damaged or truncated file",
                         file=p)
    if np.any(idx[1:] < idx[:-1] + cnt[:-1]):
        raise InputError("scans overlap in the point arrays (scan_index and point_count disagree): damaged file",
                         file=p)
    if not (np.all(np.isfinite(run.mz)) and np.all(np.isfinite(run.intensity))):
        raise InputError("mass or intensity values that are not finite numbers: damaged file", file=p)
    if total and (run.mz.min() < 0 or run.mz.max() > MAX_MZ + 1):
        raise InputError(f"m/z values outside 0-{MAX_MZ}", file=p)
    if total and run.intensity.min() < 0:
        raise InputError("negative intensities", file=p)
    summed = _summed_tic(idx, cnt, run.intensity, n)
    tic = run.tic
    if tic is None or len(tic) != n or not np.all(np.isfinite(tic)) or not np.any(tic):
        tic = summed
    run.tic = np.asarray(tic, dtype=np.float64)
    run.scan_index, run.point_count = idx, cnt
    return run


def _summed_tic(idx: np.ndarray, cnt: np.ndarray, y: np.ndarray, n: int) -> np.ndarray:
    scan_of = np.repeat(np.arange(n), cnt)
    starts = np.repeat(idx, cnt)
    pos = starts + (np.arange(len(scan_of)) - np.repeat(np.cumsum(cnt) - cnt, cnt))
    return np.bincount(scan_of, weights=y[pos], minlength=n) if len(pos) else np.zeros(n)


__all__ = ["RunData", "read_run", "sniff_run", "sniff_run_bytes", "check_run", "looks_like_run_name",
           "E2077_VARIABLES", "FORMAT_NAMES", "RUN_SUFFIXES"]
