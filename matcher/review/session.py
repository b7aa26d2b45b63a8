"""One review of one screening output: the result read once, the record read and written beside it.

:func:`open_review` reads the result (:func:`matcher.io.result_files.read_result`) and its
record ``RESULT.review.json`` when there is one. A record made for other content (the
result's SHA-256 differs) is refused with a message, never mixed. :meth:`Review.decide`
re-reads the record from disk, applies the decision (:mod:`matcher.review.record`) and
writes the whole record again through :func:`matcher.io.atomic.atomic_write` (temporary
file, rename), under a lock (in the process, and ``flock`` on the result file between processes), so that each decision is
on disk when the call returns and two writers (two tabs, two reviews of one result) both end up in the history.
"""

from __future__ import annotations

import contextlib
import os
import threading
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from matcher.errors import MatcherError
from matcher.review import record as rec

RECORD_SUFFIX = ".review.json"
#: Other peaks shown per candidate as competing for the same compound (the most probable first).
MAX_COMPETING = 5


def record_path(result_path: str | os.PathLike) -> Path:
    """Where the review record of a result goes: beside it, ``RESULT.review.json``.

    >>> record_path("runs/shortlist.csv").as_posix()
    'runs/shortlist.csv.review.json'
    """
    p = Path(result_path)
    return p.with_name(p.name + RECORD_SUFFIX)


def result_of_record(record_file: str | os.PathLike) -> Path:
    """The result a record belongs to (the record's name without ``.review.json``).

    >>> result_of_record("runs/shortlist.csv.review.json").as_posix()
    'runs/shortlist.csv'
    """
    p = Path(record_file)
    if not p.name.endswith(RECORD_SUFFIX) or p.name == RECORD_SUFFIX:
        raise MatcherError(f"{p}: a review record is named RESULT{RECORD_SUFFIX} (beside the result it reviews)")
    return p.with_name(p.name[: -len(RECORD_SUFFIX)])


def now_utc() -> str:
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def default_reviewer() -> str:
    import getpass

    try:
        return getpass.getuser()
    except (OSError, KeyError):
        return "unknown"


def _ladder_position(ri: Any, standards: list[dict]) -> dict[str, Any] | None:
    if ri is None or not standards:
        return None
    ordered = sorted(standards, key=lambda s: s["index"])
    below = [s for s in ordered if s["index"] <= ri]
    above = [s for s in ordered if s["index"] > ri]
    return {"below": below[-1] if below else None, "above": above[0] if above else None,
            "outside": not below or not above}


@dataclass
class Review:
    """A result file under review and its record (see the module doc)."""

    result: Any                      # matcher.io.result_files.ResultView
    path: Path                       # the record file
    reviewer: str
    record: dict[str, Any]
    _lock: threading.Lock = field(default_factory=threading.Lock, repr=False)
    _stat: tuple = field(default=(), repr=False)
    _static: list | None = field(default=None, repr=False)

    # ---------------------------------------------------------------- reading
    @property
    def result_path(self) -> Path:
        return Path(self.result.path)

    def _known(self) -> dict[tuple[str, str], dict]:
        return {(r["label"], p["peak"]): p for r in self.result.runs for p in r["peaks"]}

    def _static_peaks(self) -> list[dict[str, Any]]:
        """Every peak with what does not change during a review (computed once)."""
        if self._static is not None:
            return self._static
        out = []
        for run in self.result.runs:
            holders: dict[str, list[tuple[float, str]]] = {}
            for p in run["peaks"]:
                for c in p["candidates"]:
                    prob = c.get("probability")
                    holders.setdefault(str(c.get("name")), []).append((prob if prob is not None else 0.0, p["peak"]))
            for plist in holders.values():
                plist.sort(key=lambda x: -x[0])
            for p in run["peaks"]:
                competing = []
                for c in p["candidates"]:
                    name = str(c.get("name"))
                    others = [(prob, other) for prob, other in holders.get(name, []) if other != p["peak"]]
                    competing += [{"peak": other, "name": name, "probability": prob}
                                  for prob, other in others[:MAX_COMPETING]]
                top = p["candidates"][:1]
                out.append({"run": run["label"], **p,
                            "needs_review": "review" in p["flags"] or any("review" in c.get("flags", []) for c in top),
                            "ladder": _ladder_position(p.get("ri"), run["standards"]), "competing": competing})
        self._static = out
        return out

    def peaks(self) -> list[dict[str, Any]]:
        """Every peak of every run with its candidates, ladder position, competing peaks and current decision."""
        decided = rec.current(self.record)
        added = rec.added(self.record)
        return [{**p, "decision": decided.get(rec.peak_key(p["run"], p["peak"])),
                 "added": added.get(rec.peak_key(p["run"], p["peak"]))} for p in self._static_peaks()]

    def summary(self) -> dict[str, Any]:
        """The run's facts for the top of the page and the exports."""
        total = self.result.peak_count()
        return {"result": self.result_path.name, "sha256": self.result.sha256, "record": self.path.name,
                "caution": self.result.caution or _caution(), "accepting_means": rec.ACCEPT_MEANING,
                "created": self.result.created, "library": self.result.library,
                "runs": [{"label": r["label"], "class": r["class"], "source": r["source"], "peaks": len(r["peaks"])}
                         for r in self.result.runs],
                "peaks": total, "counts": rec.counts(self.record, total), "reviewer": self.reviewer,
                "flagged": sum(1 for r in self.result.runs for p in r["peaks"] if "review" in p["flags"]),
                "added": len(self.record["added"])}

    # ---------------------------------------------------------------- writing
    def check_unchanged(self) -> None:
        """Refuse to go on when the result file changed since it was read (content checksum)."""
        import hashlib

        try:
            st = os.stat(self.result_path)
        except OSError:
            raise MatcherError(f"{self.result_path}: the result file is gone; decisions are not recorded") from None
        stamp = (st.st_size, st.st_mtime_ns, st.st_ino)
        if stamp == self._stat:
            return
        from matcher.io.bounded import read_bytes

        digest = hashlib.sha256(read_bytes(self.result_path, what="screening output")).hexdigest()
        if digest != self.result.sha256:
            raise MatcherError(f"{self.result_path}: the result file changed since this review started "
                               f"(checksum {digest[:12]}…, review made for {self.result.sha256[:12]}…); "
                               f"nothing recorded; start the review again")
        self._stat = stamp

    def _reload(self) -> dict[str, Any]:
        if self.path.is_file():
            return _load_record(self.path, self.result.sha256)
        return self.record

    def _write(self, record: dict[str, Any]) -> None:
        import json

        from matcher.io.atomic import atomic_write, guard_output

        guard_output(self.path, inputs=[("result", self.result_path)], option="review record")
        text = json.dumps(record, indent=1, ensure_ascii=False, allow_nan=False) + "\n"
        with atomic_write(self.path) as fh:
            fh.write(text)
        self.record = record

    def decide(self, body: Any, *, reviewer: str | None = None) -> dict[str, Any]:
        """Check and record one decision (``{"run", "peak", "decision", "name"?, "note"?, "standard"?}``).

        Written at once (atomically) to the record; returns the decision as stored.
        """
        d = rec.check_decision(body)
        if rec.peak_key(d["run"], d["peak"]) not in self._known():
            raise MatcherError(f"no peak {d['peak']!r} in run {d['run']!r} of {self.result_path.name}")
        who = _reviewer(reviewer or self.reviewer)
        with self._lock, _file_lock(self.result_path):
            self.check_unchanged()
            record = rec.apply_decision(self._reload(), d, reviewer=who, now=now_utc())
            self._write(record)
        return record["decisions"][-1]

    def export(self, path: str | os.PathLike) -> Path:
        """The reviewed list as ``.csv`` or ``.html`` (:mod:`matcher.review.exporting`)."""
        from matcher.review.exporting import export_review

        return export_review(self, path)

    def note_added(self, entry: dict[str, Any]) -> None:
        """List one library addition in the record (written at once)."""
        with self._lock, _file_lock(self.result_path):
            self._write(rec.apply_added(self._reload(), entry, now=now_utc()))


@contextlib.contextmanager
def _file_lock(path: Path):
    """An exclusive advisory lock (``flock``) on the result file while the record is re-read and written, so
    that two reviews of one result in different processes queue up instead of overwriting each other.
    The result is opened read-only and never changed; where ``flock`` does not exist the in-process lock alone
    serialises writers."""
    try:
        import fcntl
    except ImportError:  # not POSIX
        yield
        return
    try:
        fh = open(path, "rb")
    except OSError:
        raise MatcherError(f"{path}: the result file cannot be opened; decisions are not recorded") from None
    with fh:
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(fh.fileno(), fcntl.LOCK_UN)


def _caution() -> str:
    from matcher import CAUTION

    return CAUTION


def _reviewer(name: str) -> str:
    from matcher.limits import check_name

    return check_name(name, "reviewer name")


def _load_record(path: Path, sha256: str) -> dict[str, Any]:
    from matcher.io.bounded import load_json

    doc = rec.check_record(load_json(path, what="review record"), str(path))
    if doc["result"]["sha256"] != sha256:
        raise MatcherError(f"{path}: this review record was made for other content of {result_of_record(path).name} "
                           f"(checksum {doc['result']['sha256'][:12]}…, the file now {sha256[:12]}…); the result "
                           f"changed since the review; nothing mixed. Review the original file, or move the record "
                           f"away to start a new review")
    return doc


def open_review(result: str | os.PathLike, *, reviewer: str | None = None) -> Review:
    """Open the review of a screening output (CSV with its sidecar, or JSON).

    Reads the record ``RESULT.review.json`` when it exists (a record made for other content
    is refused); otherwise starts an empty one, written with the first decision.
    """
    from matcher.io.result_files import read_result

    path = Path(result)
    if path.name.endswith(RECORD_SUFFIX):
        raise MatcherError(f"{path}: this is a review record; give the screening output it belongs to "
                           f"({result_of_record(path).name})")
    view = read_result(path)
    who = _reviewer(reviewer or default_reviewer())
    rpath = record_path(path)
    if rpath.exists():
        record = _load_record(rpath, view.sha256)
    else:
        lib = view.library or {}
        record = rec.new_record(result_file=path.name, sha256=view.sha256,
                                library_revision=str(lib.get("revision") or ""),
                                library=str(lib.get("location") or ""), caution=view.caution or _caution(),
                                now=now_utc())
    review = Review(result=view, path=rpath, reviewer=who, record=record)
    return review
