"""A fitted ladder that turns retention times into retention indices.

:func:`calibrate` fits a :class:`Calibration` from a hard-checked
:class:`~matcher.retention.ladder.Ladder`:

* ``mode="programmed"`` (default) uses the van den Dool & Kratz linear index
  (:mod:`matcher.retention.linear_index`); a hold-up time is not needed (it cancels)
  and, if given, is recorded as unused;
* ``mode="isothermal"`` uses the Kováts index (:mod:`matcher.retention.kovats`) with a
  hold-up time from :func:`matcher.retention.holdup.resolve_holdup`: given, marker,
  Peterson–Hirsch, or (default when nothing is given) least squares.

:meth:`Calibration.convert` is fully vectorised (one ``searchsorted``);
times outside the ladder are computed from the nearest pair of standards and
flagged ``extrapolated``. Files are JSON, validated against
``schema/calibration.schema.json`` on load, written atomically.

>>> import numpy as np
>>> from matcher.retention.ladder import Ladder
>>> lad = Ladder("demo.csv", "alkanes", np.array([4.0, 6.0, 8.0]), np.array([900., 1000, 1100]),
...              ["C9", "C10", "C11"], np.array([9., 10, 11]), np.array([1, 2, 3]))
>>> cal = calibrate(lad)
>>> ri, ext = cal.convert(np.array([3.0, 5.0, 8.0, 9.0]))
>>> ri.tolist(), ext.tolist()
([850.0, 950.0, 1100.0, 1150.0], [True, False, False, True])
>>> Calibration.from_dict(cal.to_dict()).convert(np.array([7.0]))[0].tolist()
[1050.0]
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from datetime import datetime, timezone

import numpy as np

from matcher.errors import InputError, MatcherError
from matcher.retention.holdup import HoldUp, resolve_holdup
from matcher.retention.ladder import Ladder, check_ladder
from matcher.rules import MODES, check_mode
from matcher.retention.series import SERIES

FORMULA = {
    "programmed": "linear index, van den Dool & Kratz, J. Chromatogr. 11, 463 (1963)",
    "isothermal": "Kovats index, Helv. Chim. Acta 41, 1915 (1958)",
}
SCHEMA_FILE = "calibration.schema.json"


@dataclass
class Calibration:
    """Standards (sorted, minutes), mode, hold-up time and QC of a fitted ladder."""

    series: str
    mode: str
    rt: np.ndarray
    index: np.ndarray
    names: list[str]
    holdup: HoldUp | None = None
    holdup_used: bool = False
    carbons: list[int | None] = field(default_factory=list)
    rows: list[int | None] = field(default_factory=list)
    qc: dict = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    source: dict = field(default_factory=dict)
    created: str = ""
    version: str = ""
    #: decimals each standard's time was given with (None where unknown); shown as given
    rt_decimals: list[int | None] = field(default_factory=list)

    # ------------------------------------------------------------------ conversion
    def convert(self, rt_minutes) -> tuple[np.ndarray, np.ndarray]:
        """Indices of retention times in minutes: ``(ri, extrapolated)``, same shape as the input."""
        from matcher.retention.kovats import kovats_index
        from matcher.retention.linear_index import linear_index

        t = np.asarray(rt_minutes, dtype=np.float64)
        if self.mode == "isothermal":
            early = np.isfinite(t) & (t <= self.holdup.value)
            if early.any():
                first = float(t[early].flat[0])
                raise MatcherError(
                    f"retention time {first:g} min is at or before the hold-up time {self.holdup.value:.4g} min "
                    f"({int(early.sum())} time(s) in all): an isothermal (Kováts) index needs t > tM; "
                    "remove the unretained peaks or check the hold-up time")
            return kovats_index(t, self.rt, self.index, self.holdup.value)
        return linear_index(t, self.rt, self.index)

    @property
    def index_range(self) -> tuple[float, float]:
        return float(self.index[0]), float(self.index[-1])

    @property
    def rt_range(self) -> tuple[float, float]:
        return float(self.rt[0]), float(self.rt[-1])

    # ------------------------------------------------------------------ files
    def to_dict(self) -> dict:
        from matcher import __version__

        hold = None
        if self.holdup is not None:
            hold = {"value": float(self.holdup.value), "method": self.holdup.method,
                    "detail": self.holdup.detail, "used": bool(self.holdup_used)}
        standards = []
        for k in range(len(self.rt)):
            s = {"name": self.names[k], "rt": float(self.rt[k]), "index": float(self.index[k])}
            if self.carbons and self.carbons[k] is not None:
                s["carbons"] = int(self.carbons[k])
            if self.rows and self.rows[k] is not None:
                s["row"] = int(self.rows[k])
            if self.rt_decimals and self.rt_decimals[k] is not None:
                s["rt_decimals"] = int(self.rt_decimals[k])
            standards.append(s)
        return {
            "format": "matcher.calibration",
            "format_version": 1,
            "tool": {"name": "matcher", "version": self.version or __version__},
            "created": self.created or _now(),
            "source": {"ladder": "", "rt_unit": "min", "rt_unit_source": "", **self.source},
            "series": self.series,
            "index_scale": SERIES[self.series].scale,
            "mode": self.mode,
            "formula": FORMULA[self.mode],
            "rt_unit": "min",
            "holdup": hold,
            "standards": standards,
            "qc": self.qc,
            "warnings": list(self.warnings),
        }

    @classmethod
    def from_dict(cls, d: dict, *, file: str | None = None) -> "Calibration":
        validate(d, file=file)
        st = d["standards"]
        rt = np.array([s["rt"] for s in st], dtype=np.float64)
        index = np.array([s["index"] for s in st], dtype=np.float64)
        if not (np.all(np.diff(rt) > 0) and np.all(np.diff(index) > 0)):
            raise InputError("calibration standards must rise strictly in both time and index", file=file)
        hold = d["holdup"]
        holdup = HoldUp(hold["value"], hold["method"], hold.get("detail", "")) if hold else None
        if d["mode"] == "isothermal":
            if holdup is None or not hold["used"]:
                raise InputError("an isothermal calibration needs a hold-up time", file=file)
            if holdup.value >= rt[0]:
                raise InputError("the hold-up time is not before the first standard", file=file)
        return cls(
            series=d["series"], mode=d["mode"], rt=rt, index=index, names=[s["name"] for s in st],
            holdup=holdup, holdup_used=bool(hold and hold["used"]),
            carbons=[s.get("carbons") for s in st], rows=[s.get("row") for s in st],
            rt_decimals=[s.get("rt_decimals") for s in st],
            qc=d["qc"], warnings=list(d["warnings"]), source=dict(d["source"]),
            created=d["created"], version=d["tool"]["version"],
        )

    def save(self, path) -> None:
        """Write the calibration as JSON, atomically (temporary file, then rename)."""
        atomic_write_text(str(path), json.dumps(self.to_dict(), indent=2, ensure_ascii=False) + "\n")

    @classmethod
    def load(cls, path) -> "Calibration":
        """Read and validate a calibration file; any problem is one :class:`InputError`."""
        from matcher.io.bounded import load_json

        path = str(path)
        d = load_json(path, what="calibration file")
        return cls.from_dict(d, file=path)


def _now() -> str:
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def calibrate(ladder: Ladder, *, mode: str = "programmed", holdup: str | None = None,
              dead_time: float | None = None, marker: float | None = None) -> Calibration:
    """Fit a calibration from a ladder; hard problems raise :class:`MatcherError`."""
    if dead_time is not None and marker is not None:
        raise MatcherError("give either --dead-time or --marker, not both: each one sets the hold-up time")
    from matcher import __version__

    mode = check_mode(mode)
    if len(ladder) < 2:
        raise InputError(f"a ladder needs at least two standards; this one has {len(ladder)}", file=ladder.path)
    hold: HoldUp | None = None
    used = False
    if mode == "isothermal":
        if holdup in ("fit", "peterson-hirsch", None) and dead_time is None and marker is None and len(ladder) < 3:
            raise InputError("estimating a hold-up time needs at least three standards; give --dead-time or --marker",
                             file=ladder.path)
        hold = resolve_holdup(ladder.rt, ladder.index, method=holdup, dead_time=dead_time, marker=marker)
        used = True
    elif holdup is not None or dead_time is not None or marker is not None:
        if holdup in ("fit", "peterson-hirsch") and len(ladder) < 3:
            raise InputError("estimating a hold-up time needs at least three standards", file=ladder.path)
        hold = resolve_holdup(ladder.rt, ladder.index, method=holdup, dead_time=dead_time, marker=marker)
    qc = check_ladder(ladder.rt, ladder.index, names=ladder.names, series=ladder.series, mode=mode,
                      holdup=hold.value if used else None)
    warnings = [f["message"] for f in qc.findings if f["level"] == "warning"]
    if hold is not None:
        warnings += list(hold.warnings)
        if not used:
            warnings.append("programmed mode: the hold-up time cancels in the linear index and is recorded only")
    carbons = [None if not np.isfinite(c) else int(c) for c in ladder.carbons]
    return Calibration(
        series=ladder.series, mode=mode, rt=np.asarray(ladder.rt, dtype=np.float64).copy(),
        index=np.asarray(ladder.index, dtype=np.float64).copy(), names=list(ladder.names),
        holdup=hold, holdup_used=used, carbons=carbons, rows=[int(r) for r in ladder.rows],
        qc=qc.to_dict(), warnings=warnings, rt_decimals=list(getattr(ladder, "rt_decimals", None) or []),
        source={"ladder": os.path.basename(ladder.path), "rt_unit": ladder.rt_unit, "rt_unit_source": ladder.rt_unit_source},
        created=_now(), version=__version__,
    )


# ---------------------------------------------------------------------- files and schema


def atomic_write_text(path: str, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file and a rename (see :mod:`matcher.io.atomic`)."""
    from matcher.io.atomic import atomic_write

    with atomic_write(path, "w", encoding="utf-8", newline="") as fh:
        fh.write(text)


def load_schema(name: str = SCHEMA_FILE) -> dict:
    """A JSON Schema shipped in ``schema/`` (installed as ``matcher.schemas``)."""
    import importlib.resources

    return json.loads(importlib.resources.files("matcher.schemas").joinpath(name).read_text(encoding="utf-8"))


def validate(d, *, file: str | None = None, schema: dict | None = None) -> None:
    """Check a document against the calibration schema; the first problem is an :class:`InputError`.

    Uses :mod:`jsonschema` (draft 2020-12).
    """
    import jsonschema

    schema = schema or load_schema()
    err = jsonschema.exceptions.best_match(jsonschema.Draft202012Validator(schema).iter_errors(d))
    problem = None if err is None else f"at {'/'.join(str(p) for p in err.absolute_path) or 'top level'}: {err.message}"
    if problem:
        raise InputError(f"not a valid calibration file ({problem[:200]})", file=file)


__all__ = ["Calibration", "calibrate", "atomic_write_text", "load_schema", "validate", "MODES"]
