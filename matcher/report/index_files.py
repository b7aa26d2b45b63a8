"""Converting a run's retention times with a saved calibration, and the ``ri`` outputs.

:func:`convert_times` takes times given on the command line or a peak table
(:func:`matcher.io.peak_tables.read_peaks`), converts them in one vectorised call and
returns columns ``peak, rt, ri, extrapolated``. :func:`ri_csv` writes them as
CSV (booleans ``true``/``false``, empty for a missing value, peak ids made safe
for spreadsheets); :func:`ri_document` builds the ``--json`` document
(``schema/ri-output.schema.json``).

>>> import numpy as np
>>> from matcher.retention.calibration import Calibration
>>> cal = Calibration("alkanes", "programmed", np.array([4.0, 8.0]), np.array([900.0, 1000.0]), ["C9", "C10"])
>>> res = convert_times(cal, times=["6", "9"])
>>> print(ri_csv(res), end="")
peak,rt,ri,extrapolated
1,6,950,false
2,9,1025,true
"""

from __future__ import annotations

import csv
import io

import numpy as np

from matcher.errors import InputError


def _parse_time_args(times: list[str], rt_unit: str | None) -> np.ndarray:
    """Times given on the command line: plain decimal numbers (a decimal comma is accepted),
    positive, finite and at most :data:`matcher.io.peak_tables.MAX_RT_MIN` minutes."""
    from matcher.io.peak_tables import MAX_RT_MIN
    from matcher.io.delimited import NUMBER_PATTERN, echo

    limit = MAX_RT_MIN * (60.0 if rt_unit == "s" else 1.0)
    out = np.empty(len(times))
    for k, t in enumerate(times):
        s = str(t).strip().replace("\u2212", "-")
        if "." not in s:
            s = s.replace(",", ".")
        if not s.isascii() or not NUMBER_PATTERN.fullmatch(s):
            raise InputError(f"not a retention time: {echo(str(t))}", column=f"argument {k + 1}") from None
        v = float(s)
        if not np.isfinite(v) or v <= 0 or v > limit:
            raise InputError(f"retention times must be positive finite numbers of at most {limit:g} "
                             f"{'s' if rt_unit == 's' else 'min'}, got {echo(str(t))}", column=f"argument {k + 1}")
        out[k] = v
    return out / 60.0 if rt_unit == "s" else out


def convert_times(cal, *, times=None, peaks=None, rt_unit: str | None = None, overrides=None) -> dict:
    """Indices for ``times`` (strings or numbers) or for the peaks of the table ``peaks`` (path or DataFrame)."""
    from matcher.rules import check_rt_unit

    rt_unit = check_rt_unit(rt_unit)
    if times is not None and peaks is not None and len(times):
        from matcher.errors import MatcherError

        raise MatcherError("give retention times as arguments or --peaks FILE (one of the two)")
    if peaks is not None:
        from matcher.io.peak_tables import read_peaks

        table = read_peaks(peaks, rt_unit=rt_unit, overrides=overrides)
        if not table.has_rt:
            raise InputError("the peak table has no retention-time column to convert (it has indices already)",
                             file=table.path)
        ids, rt = table.peak, table.rt
        source = table.rt_unit_source
    else:
        rt = _parse_time_args([str(t) for t in (times or [])], rt_unit)
        ids = np.array([str(k + 1) for k in range(len(rt))], dtype=object)
        source = f"option (--rt-unit {rt_unit})" if rt_unit else "default (minutes)"
    ri, ext = cal.convert(rt)
    ext = ext & ~np.isnan(rt)
    return {"peak": ids, "rt": rt, "ri": ri, "extrapolated": ext, "rt_unit_source": source}


def _num(v: float, digits: int) -> str:
    if not np.isfinite(v):
        return ""
    s = f"{v:.{digits}f}".rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def ri_csv(result: dict) -> str:
    """CSV text with columns exactly ``peak, rt, ri, extrapolated``."""
    from matcher.safe_text import neutralise

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["peak", "rt", "ri", "extrapolated"])
    rt_txt = [_num(v, 6) for v in result["rt"].tolist()]
    ri_txt = [_num(v, 4) for v in result["ri"].tolist()]
    ext_txt = np.where(result["extrapolated"], "true", "false").tolist()
    w.writerows(zip((neutralise(str(p)) for p in result["peak"]), rt_txt, ri_txt, ext_txt))
    return buf.getvalue()


def _f(v: float) -> float | None:
    return float(v) if np.isfinite(v) else None


def ri_document(cal, calibration_path: str, result: dict) -> dict:
    """The ``matcher ri --json`` document."""
    from matcher import __version__

    hold = None
    if cal.holdup is not None:
        hold = {"value": float(cal.holdup.value), "method": cal.holdup.method, "used": bool(cal.holdup_used)}
    from matcher.retention.series import SERIES

    peaks = [{"peak": str(p), "rt": _f(t), "ri": _f(i), "extrapolated": bool(e)}
             for p, t, i, e in zip(result["peak"], result["rt"].tolist(), result["ri"].tolist(), result["extrapolated"].tolist())]
    return {
        "format": "matcher.ri-output",
        "format_version": 1,
        "tool": {"name": "matcher", "version": __version__},
        "calibration": str(calibration_path),
        "series": cal.series,
        "index_scale": SERIES[cal.series].scale,
        "mode": cal.mode,
        "holdup": hold,
        "ladder_range": {"rt": list(cal.rt_range), "index": list(cal.index_range)},
        "n_extrapolated": int(np.count_nonzero(result["extrapolated"])),
        "peaks": peaks,
    }


__all__ = ["convert_times", "ri_csv", "ri_document"]
