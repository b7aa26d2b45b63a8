"""Growing the house library with compounds confirmed by an authentic standard.

The library API behind ``matcher library add|history|retire|merge|backup`` and
``matcher confirm``. Every change runs in ONE write transaction through
:func:`matcher.store.database.run_write` (SQLite: WAL, busy timeout,
``BEGIN IMMEDIATE``, retried on lock), goes through
:mod:`matcher.store.writes` (so it is audited and bumps the revision), and a
refused change writes nothing.

**Name resolution** (:func:`add_confirmed`). The name's matching key
(:func:`matcher.names.matching_key`: case, spacing, Greek letters spelled out,
``trans-``/``(E)-`` ...) or a synonym's key finds the existing compound. A name
whose key is not in the library is refused, with the candidates listed, when

* the same CAS number or InChIKey belongs to a compound of another name, or
* a library name or synonym is close to it: the similarity of the matching
  keys (rapidfuzz ``ratio``, also with Greek names shortened to their first
  letter so that ``a-pinene`` meets ``alpha-pinene``) reaches
  :data:`CLOSE_SCORE` (our own choice: one or two letters apart in a name of
  ten, such as ``limonen`` / ``limonene`` or ``1,4-cineole`` / ``1,8-cineole``),

unless ``new=True`` (create it anyway) or ``as_existing=NAME`` (attach it to
that compound; the new spelling becomes a synonym). ``ask`` is called instead
of refusing when given (the command line passes a prompt on a terminal).

**Outlier guard.** An observation is refused (unless ``force``) when it lies
farther from the compound's current centre in that class than

.. math::

   L = \\max(3\\,s,\\; w_{class})

where the centre and the spread :math:`s` are computed exactly as screening
computes them (:func:`matcher.snapshot.summarise`, weighted median and robust
predictive spread with the per-class floor) and :math:`w_{class}` is the
class's default tolerance window (:data:`matcher.classes.DEFAULT_WINDOWS`).
Three standard deviations is the usual control-chart action limit (common
practice, no single source); the window term keeps the limit from shrinking
below what screening itself tolerates.

>>> guard_limit(Summary(centre=1032.0, spread=2.1, count=1), "nonpolar")
10.0
>>> guard_limit(Summary(centre=1032.0, spread=6.0, count=4), "nonpolar")
18.0

Provenance: :func:`confirm_from_results` reads the peak's index and the run's
facts (class, calibration, date, files) from a screening CSV (with its
``.meta.json`` sidecar) or JSON output; the observation's ``source`` names the
results file, run and peak, and an audit entry ``confirm`` keeps the whole
provenance record.
"""

from __future__ import annotations

import csv
import json
import math
import os
import sqlite3
from dataclasses import asdict, dataclass, field
from datetime import date as _date, datetime, timezone
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from .classes import DEFAULT_WINDOWS, check_class
from .errors import InputError, LibraryError, MatcherError, RefusedChange

#: Similarity (0-100) of matching keys at or above which a new name counts as close to a library name.
CLOSE_SCORE = 88.0
#: Spreads from the centre beyond which an observation is refused (with the class window as minimum).
GUARD_SPREADS = 3.0
#: Upper bound of a plausible retention index (as the library CSV reader).
RI_MAX = 10000.0
#: What ``ask`` returns to create a new compound.
NEW = "new"

_GREEK_SHORT = {"alpha": "a", "beta": "b", "gamma": "g", "delta": "d", "epsilon": "e"}


# --------------------------------------------------------------------------- small records


@dataclass(frozen=True)
class Summary:
    """Centre, spread and count of one compound's active observations in one class."""

    centre: float
    spread: float
    count: int

    def as_dict(self) -> dict:
        return {"centre": self.centre, "spread": self.spread, "count": self.count}


@dataclass(frozen=True)
class Match:
    """A library compound that a new name may mean."""

    name: str
    reason: str
    score: float = 100.0


@dataclass
class AddResult:
    """What :func:`add_confirmed` did."""

    name: str
    compound_id: int
    observation_id: int
    phase_class: str
    ri: float
    created: bool
    attached_by: str  # name | synonym | as | new
    before: Summary | None
    after: Summary
    forced: bool = False
    notes: list[str] = field(default_factory=list)
    revision: int | None = None

    def as_dict(self) -> dict:
        d = asdict(self)
        d["before"] = None if self.before is None else self.before.as_dict()
        d["after"] = self.after.as_dict()
        return d

    def summary(self) -> str:
        what = "new compound" if self.created else "added to"
        s = (f"{what} {self.name!r}: observation {self.observation_id}, {self.phase_class} index {self.ri:g}; "
             f"centre now {self.after.centre:.1f} (spread {self.after.spread:.1f}, {self.after.count} observations)")
        if self.forced:
            s += "; accepted past the outlier guard (--force)"
        return s


class Unresolved(RefusedChange):
    """A name that may mean an existing compound; nothing was written. ``matches`` lists them."""

    def __init__(self, name: str, matches: Sequence[Match]):
        self.name = name
        self.matches = list(matches)
        listed = "; ".join(f"{m.name} ({m.reason})" for m in self.matches)
        super().__init__(
            f"{name!r} is not in the library but may be: {listed}; nothing written. "
            f"Give --as NAME to add it to one of them, or --new to create a new compound"
        )


# --------------------------------------------------------------------------- pure helpers


def summarise_observations(ri: Sequence[float], n: Sequence[float | None] = (), sd: Sequence[float | None] = (),
                           *, phase_class: str) -> Summary | None:
    """The class summary exactly as screening computes it (None without observations).

    >>> s = summarise_observations([1030.0, 1032.0, 1031.0], phase_class="nonpolar")
    >>> s.centre, s.count
    (1031.0, 3)
    """
    from .snapshot import SPREAD_FLOOR, summarise

    ri = np.asarray(list(ri), dtype=float)
    if not len(ri):
        return None
    n = np.asarray([1.0 if v is None else float(v) for v in n] if len(n) else np.ones(len(ri)), dtype=float)
    sd = np.asarray([np.nan if v is None else float(v) for v in sd] if len(sd) else np.full(len(ri), np.nan), dtype=float)
    centre, spread, count = summarise(ri, np.maximum(n, 1.0), sd, SPREAD_FLOOR[phase_class])
    return Summary(float(centre), float(spread), int(count))


def guard_limit(summary: Summary, phase_class: str) -> float:
    """Largest accepted distance from the centre: max(3 × spread, class window)."""
    return max(GUARD_SPREADS * summary.spread, DEFAULT_WINDOWS[phase_class])


def _short_greek(key: str) -> str:
    for long, short in _GREEK_SHORT.items():
        key = key.replace(long, short)
    return key


def closeness(a: str, b: str) -> float:
    """Similarity 0-100 of two names on their matching keys (also with Greek names shortened).

    >>> closeness("limonen", "limonene") >= CLOSE_SCORE, closeness("decane", "tridecane") >= CLOSE_SCORE
    (True, False)
    >>> closeness("a-pinene", "α-pinene")
    100.0
    """
    from rapidfuzz import fuzz

    from .names import matching_key

    ka, kb = matching_key(a), matching_key(b)
    return float(max(fuzz.ratio(ka, kb), fuzz.ratio(_short_greek(ka), _short_greek(kb))))


def _clean_ri(ri: Any) -> float:
    try:
        v = float(ri)
    except (TypeError, ValueError):
        raise MatcherError(f"the retention index must be a number, got {ri!r}") from None
    if not math.isfinite(v) or not 0.0 <= v <= RI_MAX:
        raise MatcherError(f"the retention index must be between 0 and {RI_MAX:g}, got {ri!r}")
    return v


def _clean(name, phase_class, ri, formula, cas, inchikey, date, mode) -> dict:
    from .cas import normalise_cas
    from .formula import hill_formula
    from .identifiers import normalise_inchikey
    from .names import display_name, matching_key

    out: dict[str, Any] = {"name": display_name(name or "")}
    if not out["name"] or not matching_key(out["name"]):
        raise MatcherError(f"a compound name with letters or digits is required, got {name!r}")
    out["phase_class"] = check_class(phase_class)
    out["ri"] = _clean_ri(ri)
    for key, value, fn in (("formula", formula, hill_formula), ("cas", cas, normalise_cas),
                           ("inchikey", inchikey, normalise_inchikey)):
        if value:
            try:
                out[key] = fn(str(value))
            except ValueError as exc:
                raise MatcherError(f"{key}: {exc}") from None
        else:
            out[key] = None
    if date:
        try:
            out["date"] = _date.fromisoformat(str(date)[:10]).isoformat()
        except ValueError:
            raise MatcherError(f"not an ISO date (YYYY-MM-DD): {date!r}") from None
    else:
        out["date"] = datetime.now(timezone.utc).date().isoformat()
    m = (mode or "programmed").strip().lower()
    if m not in ("programmed", "isothermal"):
        raise MatcherError(f"mode must be programmed or isothermal, got {mode!r}")
    out["mode"] = m
    return out


# --------------------------------------------------------------------------- store helpers (ORM, no SQL text)


def _class_summary(compound, phase_class: str) -> Summary | None:
    obs = [o for o in compound.observations if o.active and o.phase_class == phase_class]
    return summarise_observations([o.ri for o in obs], [o.n for o in obs], [o.ri_sd for o in obs],
                                  phase_class=phase_class)


def _lookup(session, idx, text: str):
    """The compound whose name, synonym or CAS number is exactly ``text`` (None when absent)."""
    from .cas import normalise_cas
    from .names import matching_key
    from .store.models import Compound

    cid = idx.by_key.get(matching_key(text))
    if cid is None:
        try:
            cas = normalise_cas(text)
        except ValueError:
            cas = None
        if cas and len(idx.by_cas.get(cas, ())) == 1:
            cid = idx.by_cas[cas][0]
    return None if cid is None else session.get(Compound, cid)


def _close_names(session, text: str, limit: int = 5) -> list[Match]:
    from sqlalchemy import select

    from .store.models import Synonym
    from .store.writes import CompoundIndex

    best: dict[str, Match] = {}
    idx = CompoundIndex.read(session)
    choices = [(cid, nm) for cid, nm in idx.names.items()]
    choices += [(s.compound_id, s.name) for s in session.scalars(select(Synonym))]
    for cid, nm in choices:
        sc = closeness(text, nm)
        if sc >= CLOSE_SCORE:
            owner = idx.names[cid]
            reason = f"close name, {sc:.0f}" if nm == owner else f"close to its synonym {nm!r}, {sc:.0f}"
            if owner not in best or best[owner].score < sc:
                best[owner] = Match(owner, reason, sc)
    return sorted(best.values(), key=lambda m: (-m.score, m.name.lower()))[:limit]


def _not_found(session, text: str) -> LibraryError:
    close = [m.name for m in _close_names(session, text)]
    hint = f"; close names: {', '.join(close)}" if close else ""
    return LibraryError(f"no compound {text!r} in the library{hint}")


def _resolve(session, v: dict, *, new: bool, as_existing: str | None):
    """(compound or None for a new one, how, synonym to add) or raises Unresolved/RefusedChange."""
    from .names import matching_key
    from .store.models import Compound
    from .store.writes import CompoundIndex

    idx = CompoundIndex.read(session)
    name, key = v["name"], matching_key(v["name"])
    owner = idx.by_key.get(key)
    if as_existing:
        target = _lookup(session, idx, as_existing)
        if target is None:
            raise RefusedChange(str(_not_found(session, as_existing)) + "; nothing written")
        if owner is not None and owner != target.id:
            raise RefusedChange(f"{name!r} already names {idx.names[owner]!r}, not {target.name!r}; nothing written")
        return target, "as", (name if owner is None else None)
    if owner is not None:
        c = session.get(Compound, owner)
        if new:
            raise RefusedChange(f"{name!r} is already in the library as {c.name!r}; --new cannot make a second copy; nothing written")
        return c, ("name" if c.key == key else "synonym"), None
    if new:
        return None, "new", None
    matches: list[Match] = []
    for what, value, table in (("CAS", v["cas"], idx.by_cas), ("InChIKey", v["inchikey"], idx.by_inchikey)):
        if value:
            for cid in table.get(value, ()):
                matches.append(Match(idx.names[cid], f"same {what} {value}"))
    seen = {m.name for m in matches}
    matches += [m for m in _close_names(session, name) if m.name not in seen]
    if matches:
        raise Unresolved(name, matches)
    return None, "new", None


def _identity_changes(session, c, v: dict) -> dict:
    """Fields to fill on an existing compound; RefusedChange when the given identity contradicts it."""
    from .store.writes import CompoundIndex

    changes = {}
    idx = None
    for f in ("cas", "formula", "inchikey"):
        given = v.get(f)
        if not given:
            continue
        have = getattr(c, f)
        if have and have != given:
            raise RefusedChange(f"{f} {given} contradicts {have} of {c.name!r} in the library; nothing written")
        if not have:
            if f in ("cas", "inchikey"):
                idx = idx or CompoundIndex.read(session)
                others = [idx.names[i] for i in (idx.by_cas if f == "cas" else idx.by_inchikey).get(given, ()) if i != c.id]
                if others:
                    raise RefusedChange(f"{f} {given} belongs to {', '.join(others)}, not {c.name!r}; nothing written")
            changes[f] = given
    return changes


# --------------------------------------------------------------------------- adding


def add_confirmed(db: str | None, name: str, phase_class: str, ri: float, *, formula: str | None = None,
                  cas: str | None = None, phase: str | None = None, source: str | None = None,
                  analyst: str | None = None, force: bool = False, new: bool = False,
                  as_existing: str | None = None, ask: Callable[[str, list[Match]], str | None] | None = None,
                  inchikey: str | None = None, date: str | None = None, mode: str | None = None,
                  provenance: dict | None = None, once: str | None = None) -> AddResult:
    """Add one confirmed observation (see the module doc for name resolution and the outlier guard).

    ``ask(name, matches)`` may return a compound name (attach to it), :data:`NEW` (create a new
    compound) or None (refuse). ``provenance`` is kept in an audit entry ``confirm``; when an
    observation of the compound already has the text ``once`` in its source (the same peak
    confirmed twice) the addition is refused unless ``force``.
    Raises :class:`~matcher.errors.RefusedChange` (nothing written) when refused.
    """
    from .store.database import open_library, record, run_write
    from .store import writes

    if new and as_existing:
        raise MatcherError("give either --new or --as, not both")
    v = _clean(name, phase_class, ri, formula, cas, inchikey, date, mode)
    engine = open_library(db)

    def work(session, new=new, as_existing=as_existing) -> AddResult:
        c, how, synonym = _resolve(session, v, new=new, as_existing=as_existing)
        notes: list[str] = []
        cls = v["phase_class"]
        created = c is None
        before = None if created else _class_summary(c, cls)
        forced = False
        if once and not created and not force:
            twin = next((o for o in c.observations if once in (o.source or "")), None)
            if twin is not None:
                raise RefusedChange(f"already recorded as observation {twin.id} of {c.name!r} ({once}); "
                                    f"nothing written; add --force to record it again")
        if before is not None:
            dev = v["ri"] - before.centre
            limit = guard_limit(before, cls)
            if abs(dev) > limit:
                if not force:
                    raise RefusedChange(
                        f"index {v['ri']:g} is {dev:+.1f} units from the centre of {c.name!r} on {cls} "
                        f"(centre {before.centre:.1f}, spread {before.spread:.1f}, {before.count} observations); "
                        f"the limit is {limit:.1f} (the larger of 3 spreads and the class window); nothing written. "
                        f"Check the value, or add --force if it is right")
                forced = True
        phase_row = None
        if phase:
            try:
                phase_row = writes.get_phase(session, phase, cls, note="added by matcher library add")
            except ValueError as exc:
                raise RefusedChange(f"{exc}; nothing written") from None
        if created:
            c = writes.create_compound(session, {"name": v["name"], "cas": v["cas"], "formula": v["formula"],
                                                 "inchikey": v["inchikey"]})
        else:
            changes = _identity_changes(session, c, v)
            if changes or synonym:
                writes.update_compound(session, c, changes, [synonym] if synonym else [])
                if synonym:
                    notes.append(f"{synonym!r} recorded as a synonym of {c.name!r}")
                if changes:
                    notes.append("filled in " + ", ".join(f"{k} {x}" for k, x in changes.items()))
        o = writes.add_observation(session, c, {
            "phase_class": cls, "ri": v["ri"], "mode": v["mode"], "source": source or None,
            "analyst": analyst or None, "date": v["date"],
        }, phase_row)
        target = f"compound:{c.id}"
        if forced:
            record(session, "force-outlier", target, before.as_dict(),
                   {"observation": o.id, "ri": v["ri"], "deviation": v["ri"] - before.centre,
                    "limit": guard_limit(before, cls)})
            notes.append(f"{v['ri'] - before.centre:+.1f} units from the centre; accepted with --force")
        if provenance:
            record(session, "confirm", target, None, {"observation": o.id, **provenance})
        session.flush()
        session.expire(c, ["observations"])
        after = _class_summary(c, cls)
        return AddResult(name=c.name, compound_id=c.id, observation_id=o.id, phase_class=cls, ri=v["ri"],
                         created=created, attached_by=how, before=before, after=after, forced=forced,
                         notes=notes, revision=session.info.get("revision"))

    try:
        return run_write(engine, work, who=analyst)
    except Unresolved as exc:
        if ask is None:
            raise
        answer = ask(v["name"], exc.matches)
        if not answer:
            raise
        if answer == NEW:
            return run_write(engine, lambda s: work(s, new=True, as_existing=None), who=analyst)
        return run_write(engine, lambda s: work(s, new=False, as_existing=answer), who=analyst)


# --------------------------------------------------------------------------- confirming from screening outputs


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
        return f"confirmed from {Path(self.results).name}, run {self.run}, peak {self.peak}" + (f" ({inner})" if inner else "")


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
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {what}: {exc}", file=str(path)) from None
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", file=str(path), line=exc.lineno) from None
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
    }


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
    """The peak's index and its run's facts from a screening CSV (+ sidecar) or JSON output."""
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
        from .writers import sidecar_path

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
    facts.pop("class", None)
    return PeakFacts(results=str(path), run=label, peak=str(peak).strip(), ri=ri, ri_measured=ri_measured,
                     phase_class=check_class(cls), flags=flags, best=best, sidecar=sidecar, **facts)


def confirm_from_results(db: str | None, results_path: str | os.PathLike, peak: Any, name: str, *,
                         run: str | None = None, source: str | None = None, analyst: str | None = None,
                         force: bool = False, new: bool = False, as_existing: str | None = None,
                         measured: bool = False, ask=None) -> AddResult:
    """Add the index of ``peak`` of a screening output as a confirmed observation of ``name``.

    The index is the ``ri`` the peak was screened with (after any adaptive correction of the
    run; ``measured=True`` takes ``ri_measured``, the calibrated index before correction).
    The class, calibration mode and date come from the run; the observation's source names
    the results file, run and peak; the audit entry ``confirm`` keeps the full record. An
    extrapolated index (outside the ladder) is refused unless ``force``.
    """
    facts = read_peak(results_path, peak, run=run)
    if "extrapolated" in facts.flags and not force:
        raise RefusedChange(f"peak {facts.peak} of run {facts.run} has an extrapolated index (outside the ladder); "
                            f"nothing written; add --force to keep it anyway")
    ri = facts.ri
    if measured:
        if facts.ri_measured is None:
            raise MatcherError(f"{facts.results}: peak {facts.peak} has no ri_measured")
        ri = facts.ri_measured
    text = here = facts.source_text()
    if facts.corrected and facts.ri_measured is not None:
        text += f"; index {'as measured' if measured else 'after run correction'}, measured {facts.ri_measured:g}, corrected {facts.ri:g}"
    if source:
        text = f"{source}; {text}"
    prov = {"results": os.path.abspath(facts.results), "run": facts.run, "peak": facts.peak, "ri": facts.ri,
            "ri_measured": facts.ri_measured, "used": ri, "class": facts.phase_class, "run_source": facts.run_source,
            "ladder": facts.ladder, "mode": facts.mode, "calibrated": facts.calibrated, "screened": facts.screened,
            "tool_version": facts.tool_version, "corrected": facts.corrected, "flags": facts.flags,
            "best_candidate": facts.best, "sidecar": facts.sidecar}
    return add_confirmed(db, name, facts.phase_class, ri, source=text, analyst=analyst, force=force, new=new,
                         as_existing=as_existing, ask=ask, date=facts.date or None, mode=facts.mode,
                         provenance=prov, once=here)


# --------------------------------------------------------------------------- history and retiring


def history(db: str | None, name: str) -> list[dict]:
    """The audit trail of one compound (name, synonym or CAS): dicts when, who, action, before, after, revision."""
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from .store.database import open_library
    from .store.models import AuditEntry
    from .store.writes import CompoundIndex

    engine = open_library(db)
    with Session(engine) as s:
        c = _lookup(s, CompoundIndex.read(s), name)
        if c is None:
            raise _not_found(s, name)
        target = f"compound:{c.id}"
        entries = list(s.scalars(select(AuditEntry).where(AuditEntry.target == target).order_by(AuditEntry.id)))
    # ids can be reused after `import --replace`: start at this compound's own creation
    start = 0
    for k, e in enumerate(entries):
        if e.action == "add-compound" and e.after and json.loads(e.after).get("key") == c.key:
            start = k
    return [
        {"when": e.at, "who": e.who, "action": e.action,
         "before": None if e.before is None else json.loads(e.before),
         "after": None if e.after is None else json.loads(e.after), "revision": e.revision}
        for e in entries[start:]
    ]


def retire(db: str | None, observation_id: int, why: str, *, analyst: str | None = None) -> dict:
    """Stop using an observation (the row stays, with the reason); returns what changed."""
    from .store.database import open_library, run_write
    from .store.models import Observation
    from .store import writes

    why = " ".join(str(why or "").split())
    if not why:
        raise MatcherError("say why the observation is retired (--why TEXT)")
    engine = open_library(db)

    def work(session) -> dict:
        o = session.get(Observation, int(observation_id))
        if o is None:
            raise LibraryError(f"no observation {observation_id} in the library (see: matcher library show NAME)")
        if not o.active:
            raise RefusedChange(f"observation {observation_id} is already retired ({o.retired_reason}); nothing written")
        c = o.compound
        before = _class_summary(c, o.phase_class)
        writes.retire_observation(session, o.id, why)
        session.flush()
        session.expire(c, ["observations"])
        after = _class_summary(c, o.phase_class)
        return {"observation": o.id, "compound": c.name, "phase_class": o.phase_class, "ri": o.ri, "why": why,
                "before": None if before is None else before.as_dict(),
                "after": None if after is None else after.as_dict(), "revision": session.info.get("revision")}

    return run_write(engine, work, who=analyst)


# --------------------------------------------------------------------------- merging two libraries


@dataclass
class Conflict:
    """Something in the other library that was not merged, and why."""

    compound: str
    phase_class: str
    reason: str
    ours: dict | None = None
    theirs: dict | None = None

    def text(self) -> str:
        return f"{self.compound} [{self.phase_class or '-'}]: {self.reason}"


@dataclass
class MergeReport:
    """What :func:`merge` did."""

    other: str
    observations_added: int = 0
    observations_present: int = 0
    observations_held: int = 0  # not added because of a conflict
    compounds_created: int = 0
    compounds_updated: int = 0
    conflicts: list[Conflict] = field(default_factory=list)
    revision: int | None = None

    def summary(self) -> str:
        return (f"merged {self.other}: {self.observations_added} observations added "
                f"({self.observations_present} already present, {self.observations_held} held back by "
                f"{len(self.conflicts)} conflict(s)), {self.compounds_created} new compounds, "
                f"{self.compounds_updated} compounds updated")

    def as_dict(self) -> dict:
        return asdict(self)


def _other_rows(other: str):
    """The other library as validated library rows (a library file, or a library's export)."""
    import tempfile

    from .store.library_io import export_library, read_rows

    if str(other).lower().endswith((".csv", ".txt", ".xlsx")) and "://" not in str(other):
        return read_rows(other)[0]
    with tempfile.TemporaryDirectory() as tmp:
        p = os.path.join(tmp, "other-library.csv")
        export_library(other, p)
        return read_rows(p)[0]


def _sig(phase_class, ri, mode, ri_sd, n, phase, source, analyst, date) -> tuple:
    from .store.writes import phase_key

    return (phase_class, float(ri), mode or "programmed", ri_sd, n, phase_key(phase) if phase else "",
            source or "", analyst or "", date or "")


def _shown(other: str) -> str:
    from .store.location import mask_url, resolve

    if "://" not in str(other) and str(other).lower().endswith((".csv", ".txt", ".xlsx")):
        return str(other)
    return mask_url(resolve(other))


def merge(db: str | None, other_db: str, *, analyst: str | None = None) -> MergeReport:
    """Combine ``other_db`` (a library path/URL or a library CSV) into ``db``, in one transaction.

    Compounds are matched by name or synonym key, else by a CAS number that exactly one of
    ours has. Observations already present (same class, index, mode, spread, n, phase,
    source, analyst, date; active or retired) are skipped, so merging twice adds nothing.
    Nothing is overwritten: a compound whose CAS number or formula contradicts ours, a
    phase filed under another class, or a class whose centres lie farther apart than the
    outlier guard (:func:`guard_limit` of our summary) is reported as a conflict and its
    observations are held back.
    """
    from .names import matching_key
    from .store.database import open_library, record, run_write
    from .store import writes
    from .store.models import Compound
    from .store.writes import CompoundIndex

    rows = _other_rows(other_db)
    engine = open_library(db)
    shown = _shown(other_db)
    report = MergeReport(other=shown)

    groups: dict[str, list] = {}
    for r in rows:
        groups.setdefault(matching_key(r.name), []).append(r)

    def work(session) -> MergeReport:
        rep = MergeReport(other=shown)
        idx = CompoundIndex.read(session)
        for key, grp in groups.items():
            first = grp[0]
            names = [first.name] + list(first.synonyms)
            cid = next((idx.by_key[matching_key(nm)] for nm in names if matching_key(nm) in idx.by_key), None)
            if cid is None and first.cas and len(idx.by_cas.get(first.cas, ())) == 1:
                cid = idx.by_cas[first.cas][0]
            c = session.get(Compound, cid) if cid is not None else None
            fields = {f: next((getattr(r, f) for r in grp if getattr(r, f)), "") for f in ("cas", "formula", "inchikey", "smiles", "notes", "series", "key_ions")}
            if c is not None:
                bad = [f"{f} {fields[f]} (ours {getattr(c, f)})" for f in ("cas", "formula", "inchikey")
                       if fields[f] and getattr(c, f) and getattr(c, f) != fields[f]]
                owners = {idx.by_key[matching_key(nm)] for nm in names if matching_key(nm) in idx.by_key}
                if len(owners) > 1:
                    bad.append("its names belong to different compounds here: " + ", ".join(sorted(idx.names[i] for i in owners)))
                if bad:
                    rep.conflicts.append(Conflict(c.name, "", "identity differs: " + "; ".join(bad)))
                    rep.observations_held += len(grp)
                    continue
                have = {_sig(o.phase_class, o.ri, o.mode, o.ri_sd, o.n, o.phase.name if o.phase else "", o.source,
                             o.analyst, o.date) for o in c.observations}
            else:
                have = set()
            fresh = []
            for r in grp:
                if _sig(r.phase_class, r.ri, r.mode, r.ri_sd, r.n, r.phase, r.source, r.analyst, r.date) in have:
                    rep.observations_present += 1
                else:
                    fresh.append(r)
            if not fresh:
                continue
            held_classes = set()
            if c is not None:
                for cls in sorted({r.phase_class for r in fresh}):
                    ours = _class_summary(c, cls)
                    act = [r for r in grp if r.phase_class == cls and not r.retired]
                    theirs = summarise_observations([r.ri for r in act], [r.n for r in act], [r.ri_sd for r in act],
                                                    phase_class=cls) if act else None
                    if ours is not None and theirs is not None:
                        limit = guard_limit(ours, cls)
                        if abs(theirs.centre - ours.centre) > limit:
                            held_classes.add(cls)
                            rep.conflicts.append(Conflict(
                                c.name, cls,
                                f"centres {ours.centre:.1f} (ours, n={ours.count}) and {theirs.centre:.1f} "
                                f"(theirs, n={theirs.count}) are {theirs.centre - ours.centre:+.1f} apart, "
                                f"beyond the guard {limit:.1f}", ours.as_dict(), theirs.as_dict()))
            todo = []
            for r in fresh:
                if r.phase_class in held_classes:
                    rep.observations_held += 1
                    continue
                phase_row = None
                if r.phase:
                    try:
                        phase_row = writes.get_phase(session, r.phase, r.phase_class, note=f"added by merge of {shown}")
                    except ValueError as exc:
                        rep.conflicts.append(Conflict(c.name if c is not None else first.name, r.phase_class, str(exc)))
                        rep.observations_held += 1
                        continue
                todo.append((r, phase_row))
            if not todo:
                continue
            if c is None:
                syns = []
                for nm in first.synonyms:
                    if matching_key(nm) not in idx.by_key and matching_key(nm) != key:
                        syns.append(nm)
                c = writes.create_compound(session, {"name": first.name, **fields}, syns)
                rep.compounds_created += 1
                for nm in [first.name] + syns:
                    idx.by_key[matching_key(nm)] = c.id
                idx.names[c.id] = c.name
                if c.cas:
                    idx.by_cas.setdefault(c.cas, []).append(c.id)
            else:
                changes = {f: v for f, v in fields.items() if v and not getattr(c, f)}
                syns = [nm for nm in names if matching_key(nm) not in idx.by_key]
                if changes or syns:
                    writes.update_compound(session, c, changes, syns)
                    rep.compounds_updated += 1
                    for nm in syns:
                        idx.by_key[matching_key(nm)] = c.id
            for r, phase_row in todo:
                writes.add_observation(session, c, {
                    "phase_class": r.phase_class, "ri": r.ri, "mode": r.mode, "ri_sd": r.ri_sd, "n": r.n,
                    "source": r.source, "analyst": r.analyst, "date": r.date, "retired_reason": r.retired or None,
                }, phase_row)
                rep.observations_added += 1
        if rep.observations_added or rep.compounds_updated:
            record(session, "merge", f"library:{shown}", None,
                   {"added": rep.observations_added, "present": rep.observations_present,
                    "held": rep.observations_held, "conflicts": [x.text() for x in rep.conflicts]})
            rep.revision = session.info.get("revision")
        return rep

    report = run_write(engine, work, who=analyst)
    return report


# --------------------------------------------------------------------------- backup


@dataclass
class BackupReport:
    path: str
    revision: int
    compounds: int
    entries: int  # (compound, class) entries screening would use
    bytes: int

    def summary(self) -> str:
        return (f"backed up to {self.path}: revision {self.revision}, {self.compounds} compounds, "
                f"{self.entries} class entries ({self.bytes} bytes)")


def backup(db: str | None, path: str | os.PathLike, *, overwrite: bool = False) -> BackupReport:
    """A consistent copy of a SQLite library, made with SQLite's online backup API.

    The copy is taken in one step inside one read transaction, so it shows the library at one
    revision even while other processes write (WAL: they are not blocked). It is written to a
    temporary file beside ``path``, checked (``PRAGMA integrity_check``), switched to a single
    self-contained file (rollback journal) and renamed into place. Other backends are refused:
    use their own dump tool, or ``matcher library export``.
    """
    from .atomic import atomic_path
    from .store.database import open_library

    engine = open_library(db)
    if engine.dialect.name != "sqlite":
        raise LibraryError(f"backup copies SQLite libraries only; this one is {engine.dialect.name}: use the "
                           f"server's dump tool, or: matcher library export -o copy.csv")
    src_path = engine.url.database
    if not src_path or src_path == ":memory:":
        raise LibraryError("an in-memory library cannot be backed up")
    dest = Path(path)
    if dest.exists():
        if os.path.samefile(dest, src_path):
            raise MatcherError(f"{dest} is the library itself; choose another file")
        if not overwrite:
            raise MatcherError(f"{dest} exists; choose another file or use --overwrite")
    from .store.snapshot_loader import load_snapshot_sqlite

    with atomic_path(dest) as tmp:
        src = sqlite3.connect(f"file:{src_path}?mode=ro", uri=True, timeout=30.0)
        out = sqlite3.connect(str(tmp))
        try:
            src.backup(out)  # all pages in one step: one consistent snapshot of the library
            out.execute("PRAGMA journal_mode = DELETE")  # the copy is one self-contained file
            ok = out.execute("PRAGMA integrity_check").fetchone()[0]
        except sqlite3.DatabaseError as exc:
            raise LibraryError(f"cannot back up {src_path}: {exc}") from None
        finally:
            out.close()
            src.close()
        if ok != "ok":
            raise LibraryError(f"the copy failed its integrity check: {ok}")
        snap = load_snapshot_sqlite(str(tmp), source=str(dest))
    return BackupReport(str(dest), int(snap.revision), len(snap.compounds), snap.size, dest.stat().st_size)


__all__ = [
    "CLOSE_SCORE", "GUARD_SPREADS", "NEW", "Summary", "Match", "AddResult", "Unresolved", "PeakFacts",
    "Conflict", "MergeReport", "BackupReport", "summarise_observations", "guard_limit", "closeness",
    "add_confirmed", "read_peak", "confirm_from_results", "history", "retire", "merge", "backup",
]
