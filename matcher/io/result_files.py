"""Reading one peak and its run's facts back from a screening output (CSV with sidecar, or JSON).

Used by ``matcher confirm`` to take the peak's index and the run's class,
calibration, date and files as the provenance of a new library observation.
"""

from __future__ import annotations

import csv
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from matcher.classes import check_class
from matcher.errors import InputError, MatcherError


#: A screen CSV's provenance lives in ``OUT.csv`` + this suffix.
SIDECAR_SUFFIX = ".meta.json"


def sidecar_path(csv_path: str | os.PathLike) -> Path:
    """Where the provenance of a CSV goes.

    >>> sidecar_path("runs/shortlist.csv").as_posix()
    'runs/shortlist.csv.meta.json'
    """
    p = Path(csv_path)
    return p.with_name(p.name + SIDECAR_SUFFIX)


@dataclass
class PeakFacts:
    """One peak of a screening output and the facts of its run."""

    results: str
    run: str
    peak: str
    ri: float
    ri_measured: float | None
    phase_class: str
    flags: list[str]
    best: str  # the top candidate's name ("" when none)
    run_source: str = ""
    ladder: str = ""
    mode: str = "programmed"
    calibrated: str = ""
    screened: str = ""
    tool_version: str = ""
    corrected: bool = False
    sidecar: bool = True
    checksum: str = ""  # SHA-256 of the run's peak table content, when the output records it

    def identity(self) -> str:
        """The observation's identity: the run's content checksum (else the results file's name) and the peak.

        With the class, it makes a confirmation idempotent: a copy of the results, or the JSON of
        the same screen, names the same peak of the same run.
        """
        run = f"run sha256:{self.checksum[:16]}" if self.checksum else f"{Path(self.results).name}, run {self.run}"
        return f"[{run} peak {self.peak}]"

    @property
    def date(self) -> str:
        return (self.calibrated or self.screened)[:10]

    def source_text(self) -> str:
        bits = [f"peaks {self.run_source}" if self.run_source else "",
                f"ladder {self.ladder}" if self.ladder else "",
                f"screened {self.screened}" + (f" with matcher {self.tool_version}" if self.tool_version else "")
                if self.screened else "",
                "" if self.sidecar else "no provenance sidecar found"]
        inner = "; ".join(b for b in bits if b)
        return (f"confirmed from {Path(self.results).name}, run {self.run}, peak {self.peak}" + (f" ({inner})" if inner else "")
                + (f" {self.identity()}" if self.checksum else ""))


def _same_id(a: Any, b: Any) -> bool:
    sa, sb = str(a).strip(), str(b).strip()
    if sa == sb:
        return True
    try:
        return float(sa) == float(sb)
    except ValueError:
        return False


def _num(text: Any) -> float | None:
    if text is None or str(text).strip() == "":
        return None
    try:
        v = float(text)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _load_json(path: Path, what: str) -> dict:
    from matcher.io.bounded import load_json

    doc = load_json(path, what=what)
    if not isinstance(doc, dict) or doc.get("format") != "matcher.screen-output":
        raise InputError(f"not a matcher screening output ({what})", file=str(path))
    return doc


def _run_facts(run_doc: dict | None, doc: dict | None) -> dict:
    if not run_doc:
        return {}
    cal = run_doc.get("calibration") or {}
    src = cal.get("source") or {}
    corr = run_doc.get("correction") or {}
    return {
        "run_source": str(run_doc.get("source") or ""),
        "ladder": str(src.get("ladder") or ""),
        "mode": str(cal.get("mode") or "programmed"),
        "calibrated": str(cal.get("created") or ""),
        "screened": str((doc or {}).get("created") or ""),
        "tool_version": str(((doc or {}).get("tool") or {}).get("version") or ""),
        "corrected": bool(corr.get("applied")),
        "class": run_doc.get("class"),
        "checksum": _checksum(run_doc),
    }


def _checksum(run_doc: dict) -> str:
    c = run_doc.get("checksum")
    value = c.get("sha256") if isinstance(c, dict) else None
    if isinstance(value, str) and len(value) == 64 and all(ch in "0123456789abcdef" for ch in value):
        return value
    return ""


def _pick(found: list, results: str, peak: str, run: str | None, runs_seen: list[str]):
    if run is not None:
        found = [f for f in found if f[0] == run]
        if not found:
            raise MatcherError(f"{results}: no peak {peak!r} in run {run!r}; runs: {', '.join(runs_seen) or 'none'}")
    if not found:
        raise MatcherError(f"{results}: no peak {peak!r}")
    labels = sorted({f[0] for f in found})
    if len(labels) > 1:
        raise MatcherError(f"{results}: peak {peak!r} is in several runs ({', '.join(labels)}); say which with --run")
    return found[0]


def read_peak(results_path: str | os.PathLike, peak: Any, *, run: str | None = None) -> PeakFacts:
    """The peak's index and its run's facts from a screening CSV (+ sidecar) or JSON output.

    A hand-edited output (fields of the wrong type, cells longer than
    :data:`~matcher.limits.MAX_CELL`, deep nesting, huge numbers) is refused with one
    :class:`InputError` naming the file.
    """
    from matcher.limits import MAX_CELL

    try:
        facts = _read_peak(results_path, peak, run=run)
    except MatcherError:
        raise
    except csv.Error as exc:
        raise InputError(f"not a screening CSV ({exc})", file=str(results_path)) from None
    except (AttributeError, TypeError, KeyError, IndexError, ValueError, OverflowError) as exc:
        raise InputError(f"not a matcher screening output as written by matcher screen (a field has an unexpected "
                         f"type or value: {type(exc).__name__}); was it edited by hand?", file=str(results_path)) from None
    for what, value in (("run label", facts.run), ("peak id", facts.peak), ("best candidate", facts.best),
                        ("flags", ";".join(facts.flags)), ("run source", facts.run_source), ("ladder", facts.ladder)):
        if len(str(value)) > MAX_CELL:
            raise InputError(f"the {what} has {len(str(value))} characters (at most {MAX_CELL}); was it edited by hand?",
                             file=str(results_path))
    return facts


def _read_peak(results_path: str | os.PathLike, peak: Any, *, run: str | None = None) -> PeakFacts:
    from matcher.limits import MAX_CELL

    if len(str(peak)) > MAX_CELL:
        raise MatcherError(f"--peak has {len(str(peak))} characters; at most {MAX_CELL} are accepted")
    path = Path(results_path)
    if not path.is_file():
        raise InputError("no such file", file=str(path))
    if path.suffix.lower() == ".json":
        doc = _load_json(path, "JSON output")
        if doc.get("content") != "shortlist":
            raise InputError("this is the provenance sidecar of a CSV; give the CSV itself", file=str(path))
        found = []
        runs_seen = []
        for rd in doc.get("runs") or []:
            runs_seen.append(str(rd.get("label")))
            for p in rd.get("peaks") or []:
                if _same_id(p.get("peak"), peak):
                    found.append((str(rd.get("label")), rd, p))
        label, rd, p = _pick(found, str(path), str(peak), run, runs_seen)
        facts = _run_facts(rd, doc)
        cands = p.get("candidates") or []
        ri = _num(p.get("ri"))
        cls = p.get("class") or facts.get("class")
        flags = list(p.get("flags") or [])
        best = str(cands[0].get("name") or "") if cands else ""
        ri_measured = _num(p.get("ri_measured"))
        sidecar = True
    else:

        side = sidecar_path(path)
        doc = _load_json(side, "provenance sidecar") if side.is_file() else None
        found = []
        runs_seen: list[str] = []
        try:
            with open(path, newline="", encoding="utf-8-sig") as fh:
                reader = csv.DictReader(fh)
                need = {"peak", "ri", "class"} - set(reader.fieldnames or [])
                if need:
                    raise InputError(f"not a screening CSV: missing column(s) {', '.join(sorted(need))}", file=str(path), line=1)
                for k, row in enumerate(reader, start=1):
                    label = str(row.get("run") or "").strip() or "run"
                    if label not in runs_seen:
                        runs_seen.append(label)
                    if _same_id(row.get("peak"), peak):
                        found.append((label, k, row))
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot read the screening CSV: {exc}", file=str(path)) from None
        except csv.Error as exc:
            raise InputError(f"not a screening CSV ({exc}); was it edited by hand?", file=str(path)) from None
        label, k, row = _pick(found, str(path), str(peak), run, runs_seen)
        rows = [f for f in found if f[0] == label]
        first = rows[0][2]
        ranked = [r for _, _, r in rows if _num(r.get("rank")) is not None]
        ranked.sort(key=lambda r: _num(r.get("rank")))
        best = str(ranked[0].get("name") or "") if ranked else ""
        ri = _num(first.get("ri"))
        if ri is None:
            raise InputError(f"peak {peak!r} has no index in column 'ri'", file=str(path), row=rows[0][1], column="ri")
        rd = None
        if doc is not None:
            rd = next((r for r in doc.get("runs") or [] if str(r.get("label")) == label), None)
        facts = _run_facts(rd, doc)
        cls = first.get("class") or facts.get("class")
        flags = [f for f in str(first.get("flags") or "").split(";") if f]
        ri_measured = _num(first.get("ri_measured"))
        sidecar = doc is not None
    if ri is None:
        raise InputError(f"peak {peak!r} has no retention index", file=str(path))
    if not cls:
        raise InputError(f"the run of peak {peak!r} names no phase class", file=str(path))
    if not isinstance(cls, str) or len(cls) > MAX_CELL:
        raise InputError("the phase class of the peak is not a class name; was the file edited by hand?", file=str(path))
    flags = [str(f) for f in flags]
    facts.pop("class", None)
    return PeakFacts(results=str(path), run=label, peak=str(peak).strip(), ri=ri, ri_measured=ri_measured,
                     phase_class=check_class(cls), flags=flags, best=best, sidecar=sidecar, **facts)
