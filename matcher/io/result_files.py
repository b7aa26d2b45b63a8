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


# --------------------------------------------------------------------------- a whole result, for review


@dataclass
class ResultView:
    """A whole screening output read back: every run with its peaks and their candidates.

    ``runs`` is a list of dicts ``{"label", "source", "class", "checksum", "standards", "peaks"}`` (and, for a
    two-column screen, ``second``: the second column's ``label``, ``source``, ``class`` and ``checksum``);
    each peak holds the peak keys of :data:`matcher.results.PEAK_KEYS` (and a two-column screen's
    ``second_peak``, ``second_ri`` and ``second_pair_probability``, :data:`matcher.results.SECOND_PEAK_KEYS`),
    ``flags`` (common to
    the peak's rows) and ``candidates`` (records of :func:`matcher.results.candidate_record`,
    with ``flags``, ``evidence`` and any further columns the output carries). ``sha256`` is the
    checksum of the result file's bytes (what a review record is tied to).
    """

    path: str
    sha256: str
    caution: str
    created: str
    library: dict
    runs: list
    sidecar: bool = True

    def peak_count(self) -> int:
        return sum(len(r["peaks"]) for r in self.runs)


def _group_rows(rows: list[dict], columns: list[str]) -> list[dict]:
    """Output rows grouped per peak (in file order): the peak's fields once, the ranked candidates nested."""
    import matcher.results as results
    from matcher.results import (DETAIL_COLUMNS, EVIDENCE_COLUMNS, PEAK_KEYS, SECOND_PEAK_KEYS, SHORTLIST_COLUMNS,
                                 candidate_record, group_rows, plain)

    prefix = results.EVIDENCE_PREFIX
    ev_cols = [c for c in EVIDENCE_COLUMNS if c in columns] + [
        c for c in columns if c.startswith(prefix) and c not in EVIDENCE_COLUMNS]
    at_peak = [c for c in SECOND_PEAK_KEYS if c in columns]  # a two-column screen: the peak's partner, once
    known = set(SHORTLIST_COLUMNS) | set(DETAIL_COLUMNS) | set(ev_cols) | set(at_peak)
    extra = [c for c in columns if c not in known]
    peaks = []
    for key, rows_p in group_rows(rows, lambda row: str(plain(row.get("peak")))):
        first = rows_p[0]
        peak = {k: plain(first.get(k)) for k in PEAK_KEYS}
        peak["peak"] = key
        peak.update(_second_fields({c: first.get(c) for c in at_peak}))
        flag_lists = [[f for f in str(r.get("flags") or "").split(";") if f] for r in rows_p]
        candidates = []
        for r, flags in zip(rows_p, flag_lists):
            if plain(r.get("rank")) is None:
                continue
            rec = candidate_record(r.get, flags, evidence_columns=ev_cols, extra=extra)
            candidates.append(rec)
        candidates.sort(key=lambda c: c["rank"])
        common = set(flag_lists[0]).intersection(*flag_lists[1:]) if flag_lists else set()
        peak["flags"] = flag_lists[0] if not candidates else [f for f in flag_lists[0] if f in common]
        peak["candidates"] = candidates
        peaks.append(peak)
    return peaks


def _json_peak(p: dict) -> dict:
    """One peak of the screen JSON as the review reads it: the peak's keys, its flags, its candidates by rank."""
    from matcher.results import PEAK_KEYS, SECOND_PEAK_KEYS, plain

    if not isinstance(p, dict):
        raise TypeError("a peak is not an object")
    peak = {k: plain(p.get(k)) for k in PEAK_KEYS}
    for k, v in p.items():  # any further peak fields the output carries (a spectrum, an area)
        if k not in peak and k not in ("flags", "candidates"):
            peak[k] = v
    peak["peak"] = str(plain(p.get("peak")))
    peak.update(_second_fields({k: p[k] for k in SECOND_PEAK_KEYS if k in p}))
    peak["flags"] = [str(f) for f in p.get("flags") or []]
    cands = [dict(c) for c in p.get("candidates") or []]
    for c in cands:
        c["flags"] = [str(f) for f in c.get("flags") or []]
        if not isinstance(c.get("evidence") or {}, dict):
            raise TypeError("evidence is not an object")
        c["evidence"] = dict(c.get("evidence") or {})
    cands.sort(key=lambda c: (c.get("rank") is None, c.get("rank") or 0))
    peak["candidates"] = cands
    return peak


def _second_fields(values: dict) -> dict:
    """A two-column screen's ``second_peak`` (text, ``None`` when unpaired), ``second_ri`` and
    ``second_pair_probability`` (numbers or ``None``), alike from a CSV row and a JSON peak.

    >>> _second_fields({"second_peak": "", "second_ri": None}), _second_fields({"second_peak": 12, "second_ri": "1480.5"})
    ({'second_peak': None, 'second_ri': None}, {'second_peak': '12', 'second_ri': 1480.5})
    """
    from matcher.results import plain

    out = {}
    for k, v in values.items():
        v = plain(v)
        if k == "second_peak":
            v = None if v is None or str(v).strip() == "" else str(v).strip()
        elif k in ("second_ri", "second_pair_probability"):
            v = _num(v)
        out[k] = v
    return out


def _second_run(run_doc: dict | None) -> dict | None:
    """The second column's run of a two-column screen as the review names it (label, source, class, checksum)."""
    second = (run_doc or {}).get("second")
    if not isinstance(second, dict):
        return None
    return {"label": str(second.get("label") or ""), "source": str(second.get("source") or ""),
            "class": str(second.get("class") or ""), "checksum": _checksum(second)}


def _standards(run_doc: dict | None) -> list[dict]:
    cal = (run_doc or {}).get("calibration") or {}
    out = []
    for s in cal.get("standards") or []:
        if isinstance(s, dict) and _num(s.get("index")) is not None:
            out.append({"name": str(s.get("name") or ""), "index": _num(s.get("index"))})
    return out


def _run_entry(label: str, run_doc: dict | None, peaks: list[dict]) -> dict:
    return {"label": label, "source": str((run_doc or {}).get("source") or ""),
            "class": str((run_doc or {}).get("class") or (peaks[0].get("class") if peaks else "") or ""),
            "checksum": _checksum(run_doc) if run_doc else "", "standards": _standards(run_doc),
            **({"second": _second_run(run_doc)} if _second_run(run_doc) else {}), "peaks": peaks}


def read_result(results_path: str | os.PathLike) -> ResultView:
    """Every run, peak and candidate of a screening CSV (+ sidecar) or JSON output.

    The file is read once through :func:`matcher.io.bounded.read_bytes`; its SHA-256 is
    returned with it. A file that is not a screening output, or was edited into another
    shape, is refused with one :class:`InputError` naming it.
    """
    try:
        return _read_result(results_path)
    except MatcherError:
        raise
    except (AttributeError, TypeError, KeyError, IndexError, ValueError, OverflowError, csv.Error) as exc:
        raise InputError(f"not a matcher screening output as written by matcher screen ({type(exc).__name__}); "
                         f"was it edited by hand?", file=str(results_path)) from None


def _read_result(results_path: str | os.PathLike) -> ResultView:
    import hashlib
    import io

    from matcher.io.bounded import read_bytes
    from matcher.limits import MAX_CELL

    from matcher.io.bounded import loads_json
    from matcher.limits import MAX_JSON_BYTES

    path = Path(results_path)
    is_json = path.suffix.lower() == ".json"
    data = read_bytes(path, what="screening output", **({"limit": MAX_JSON_BYTES} if is_json else {}))
    digest = hashlib.sha256(data).hexdigest()  # of the very bytes read below
    if is_json:
        doc = loads_json(data, path=str(path), what="JSON output")
        if not isinstance(doc, dict) or doc.get("format") != "matcher.screen-output":
            raise InputError("not a matcher screening output (JSON output)", file=str(path))
        if doc.get("content") != "shortlist":
            raise InputError("this is the provenance sidecar of a CSV; give the CSV itself", file=str(path))
        runs = [_run_entry(str(rd.get("label")), rd, [_json_peak(p) for p in rd.get("peaks") or []])
                for rd in doc.get("runs") or []]
        sidecar = True
    else:
        side = sidecar_path(path)
        doc = _load_json(side, "provenance sidecar") if side.is_file() else {}
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise InputError("not a screening CSV (not UTF-8 text)", file=str(path)) from None
        reader = csv.DictReader(io.StringIO(text, newline=""))
        columns = list(reader.fieldnames or [])
        need = {"peak", "ri", "class", "rank", "name"} - set(columns)
        if need:
            raise InputError(f"not a screening CSV: missing column(s) {', '.join(sorted(need))}", file=str(path), line=1)
        per_run: dict[str, list[dict]] = {}
        for k, row in enumerate(reader, start=1):
            if None in row or any(v is None for v in row.values()):
                raise InputError("a row has more or fewer fields than the header", file=str(path), row=k, line=k + 1)
            for c, v in row.items():
                if len(v) > MAX_CELL:
                    raise InputError(f"a cell has {len(v)} characters (at most {MAX_CELL})", file=str(path),
                                     row=k, line=k + 1, column=c)
            label = str(row.get("run") or "").strip() or "run"
            per_run.setdefault(label, []).append({c: _cell(c, v) for c, v in row.items()})
        runs = []
        for label, rows in per_run.items():
            rd = next((r for r in doc.get("runs") or [] if str(r.get("label")) == label), None)
            runs.append(_run_entry(label, rd, _group_rows(rows, columns)))
        sidecar = bool(doc)
    return ResultView(path=str(path), sha256=digest, caution=str(doc.get("caution") or ""),
                      created=str(doc.get("created") or ""), library=dict(doc.get("library") or {}), runs=runs,
                      sidecar=sidecar)


_TEXT_COLUMNS = {"peak", "class", "name", "cas", "flags", "run", "formula", "hit", "second_peak"}


def _cell(column: str, value: str) -> Any:
    """A CSV cell as the value the JSON output would hold: numbers as numbers, empty as None."""
    if column in _TEXT_COLUMNS:
        return value
    v = value.strip()
    if v == "":
        return None
    if v in ("true", "false"):
        return v == "true"
    try:
        n = float(v)
    except ValueError:
        return value
    return n if math.isfinite(n) else None
