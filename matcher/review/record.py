"""The review record: what was decided for each peak of one screening output, by whom and when.

Pure functions over a plain dict (the JSON document written as ``RESULT.review.json``,
described in ``docs/formats.md``, "Review record"); reading and writing the file is
:mod:`matcher.review.session`. The shape::

    {"format": "matcher.review", "format_version": 1, "caution": "...",
     "result": {"file": "shortlist.csv", "sha256": "...", "library_revision": "2", "library": "..."},
     "created": "...", "updated": "...",
     "decisions": [{"run", "peak", "decision", "name", "note", "standard", "reviewer", "time"}, ...],
     "history":   [every decision ever taken, in order, same keys],
     "added":     [{"run", "peak", "name", "observation", "reviewer", "time", "source"}, ...]}

``decisions`` holds the current decision per peak (the last one taken wins); ``history``
keeps every one, so two browser tabs writing the same peak lose nothing.

>>> rec = new_record(result_file="s.csv", sha256="ab" * 32, library_revision="2", library="lab.sqlite",
...                  caution="tentative", now="2026-01-01T00:00:00Z")
>>> d = check_decision({"run": "run", "peak": "7", "decision": "accept", "name": "myrcene"})
>>> rec = apply_decision(rec, d, reviewer="ana", now="2026-01-01T00:01:00Z")
>>> rec = apply_decision(rec, check_decision({"run": "run", "peak": "7", "decision": "unsure"}),
...                      reviewer="ben", now="2026-01-01T00:02:00Z")
>>> [(x["decision"], x["reviewer"]) for x in rec["decisions"]], len(rec["history"])
([('unsure', 'ben')], 2)
"""

from __future__ import annotations

from typing import Any

from matcher.errors import MatcherError

FORMAT_NAME = "matcher.review"
FORMAT_VERSION = 1
#: The decisions a reviewer can take on a peak.
DECISIONS = ("accept", "reject", "unsure")
#: Keys accepted in one decision (``POST /api/decisions``).
DECISION_KEYS = ("run", "peak", "decision", "name", "note", "standard")
#: A peak's status when nothing was decided yet.
OPEN = "open"
#: What the page and every export say about accepting.
ACCEPT_MEANING = ("Accepting a candidate records a putative annotation (the reviewer agrees with the tentative "
                  "identification); it is not a confirmation. Confirmation needs an authentic reference standard "
                  "run under the lab's own validated method.")
MAX_NOTE = 2000


def _text(value: Any, what: str, limit: int) -> str:
    if value is None:
        return ""
    if not isinstance(value, str):
        raise MatcherError(f"{what} must be text")
    if len(value) > limit:
        raise MatcherError(f"{what} has {len(value)} characters; at most {limit} are kept")
    if any(ord(c) < 32 and c not in "\t\n" for c in value):
        raise MatcherError(f"{what} holds control characters")
    return value.strip()


def check_decision(body: Any) -> dict[str, Any]:
    """One decision as posted, checked: ``run``, ``peak``, ``decision`` required; ``name``, ``note``, ``standard``.

    Raises :class:`MatcherError` with the message the API returns (HTTP 400).

    >>> check_decision({"run": "r", "peak": 3, "decision": "reject"})["peak"]
    '3'
    >>> check_decision({"run": "r", "peak": "3", "decision": "maybe"})
    Traceback (most recent call last):
    ...
    matcher.errors.MatcherError: decision must be one of accept, reject, unsure
    """
    from matcher.limits import MAX_CELL

    if not isinstance(body, dict):
        raise MatcherError("a decision is a JSON object")
    unknown = sorted(set(body) - set(DECISION_KEYS))
    if unknown:
        raise MatcherError(f"unknown field(s) {', '.join(unknown)}; a decision has {', '.join(DECISION_KEYS)}")
    out: dict[str, Any] = {}
    for key in ("run", "peak"):
        v = body.get(key)
        if isinstance(v, bool) or not isinstance(v, (str, int)) or str(v).strip() == "":
            raise MatcherError(f"{key} is required (text)")
        out[key] = _text(str(v), key, MAX_CELL)
    if body.get("decision") not in DECISIONS:
        raise MatcherError("decision must be one of " + ", ".join(DECISIONS))
    out["decision"] = body["decision"]
    out["name"] = _text(body.get("name"), "name", MAX_CELL)
    out["note"] = _text(body.get("note"), "note", MAX_NOTE)
    standard = body.get("standard", False)
    if not isinstance(standard, bool):
        raise MatcherError("standard must be true or false")
    if out["decision"] == "accept" and not out["name"]:
        raise MatcherError("accepting needs the name of the candidate (or of the compound) accepted")
    if out["decision"] != "accept":
        if standard:
            raise MatcherError("only an accepted peak can be marked as confirmed with a standard")
    out["standard"] = standard
    return out


def new_record(*, result_file: str, sha256: str, library_revision: str, library: str, caution: str,
               now: str) -> dict[str, Any]:
    """An empty record for one result file."""
    return {"format": FORMAT_NAME, "format_version": FORMAT_VERSION, "caution": caution,
            "accepting_means": ACCEPT_MEANING,
            "result": {"file": result_file, "sha256": sha256, "library_revision": library_revision,
                       "library": library},
            "created": now, "updated": now, "decisions": [], "history": [], "added": []}


def check_record(doc: Any, where: str) -> dict[str, Any]:
    """A record read from a file, checked for shape (one :class:`MatcherError` naming ``where``)."""
    if not isinstance(doc, dict) or doc.get("format") != FORMAT_NAME:
        raise MatcherError(f"{where}: not a matcher review record")
    if doc.get("format_version") != FORMAT_VERSION:
        raise MatcherError(f"{where}: review record version {doc.get('format_version')!r} is not one this "
                           f"matcher reads ({FORMAT_VERSION})")
    res = doc.get("result")
    if not isinstance(res, dict) or not isinstance(res.get("sha256"), str):
        raise MatcherError(f"{where}: the review record names no result checksum; was it edited by hand?")
    for key in ("decisions", "history", "added"):
        items = doc.get(key)
        if not isinstance(items, list) or not all(isinstance(x, dict) for x in items):
            raise MatcherError(f"{where}: '{key}' is not a list of objects; was it edited by hand?")
    for d in doc["decisions"] + doc["history"]:
        if d.get("decision") not in DECISIONS or not isinstance(d.get("run"), str) or not isinstance(d.get("peak"), str):
            raise MatcherError(f"{where}: a decision is not one matcher wrote; was it edited by hand?")
    return doc


def peak_key(run: str, peak: str) -> tuple[str, str]:
    return (str(run), str(peak))


def current(record: dict[str, Any]) -> dict[tuple[str, str], dict[str, Any]]:
    """The current decision per (run, peak)."""
    return {peak_key(d["run"], d["peak"]): d for d in record["decisions"]}


def added(record: dict[str, Any]) -> dict[tuple[str, str], dict[str, Any]]:
    """The library additions per (run, peak)."""
    return {peak_key(d["run"], d["peak"]): d for d in record["added"]}


def apply_decision(record: dict[str, Any], decision: dict[str, Any], *, reviewer: str, now: str) -> dict[str, Any]:
    """A new record with ``decision`` (from :func:`check_decision`) as the peak's current one, kept in history.

    The last decision taken for a peak wins; every decision stays in ``history``.
    """
    entry = {**decision, "reviewer": reviewer, "time": now}
    key = peak_key(decision["run"], decision["peak"])
    decisions = [d for d in record["decisions"] if peak_key(d["run"], d["peak"]) != key] + [entry]
    return {**record, "updated": now, "decisions": decisions, "history": record["history"] + [entry]}


def apply_added(record: dict[str, Any], entry: dict[str, Any], *, now: str) -> dict[str, Any]:
    """A new record with one library addition listed."""
    return {**record, "updated": now, "added": record["added"] + [{**entry, "time": now}]}


def status(record: dict[str, Any], run: str, peak: str) -> str:
    d = current(record).get(peak_key(run, peak))
    return d["decision"] if d else OPEN


def counts(record: dict[str, Any], total: int) -> dict[str, int]:
    """Peaks per status (``open`` = not decided yet)."""
    out = {k: 0 for k in DECISIONS}
    for d in record["decisions"]:
        out[d["decision"]] += 1
    out[OPEN] = max(0, total - sum(out.values()))
    return out
