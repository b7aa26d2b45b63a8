"""Peaks marked in review as confirmed with an authentic standard, added to the house library.

Each goes through :func:`matcher.curate.library_edits.confirm_from_results`, exactly the
path and checks of ``matcher confirm`` (name resolution, outlier guard, extrapolated index,
one observation per peak), and each addition is listed in the review record's ``added``.
Only a peak whose current decision is ``accept`` with ``standard: true`` qualifies: accepting
alone is a putative annotation, not a confirmation.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

from matcher.errors import MatcherError
from matcher.review import record as rec


@dataclass
class Outcome:
    """What happened to one peak: ``added`` (with the observation) or ``refused`` (with the reason)."""

    run: str
    peak: str
    name: str
    added: bool
    message: str
    observation: int | None = None

    def as_dict(self) -> dict[str, Any]:
        return {"run": self.run, "peak": self.peak, "name": self.name, "added": self.added,
                "message": self.message, "observation": self.observation}


def _confirm_one(review, db: str | None, decision: dict, *, source: str | None, analyst: str | None,
                 force: bool, new: bool, as_existing: str | None) -> Outcome:
    from matcher.curate.library_edits import confirm_from_results
    from matcher.errors import RefusedChange

    name = decision["name"]
    text = source or decision.get("note") or None
    try:
        done = confirm_from_results(db, review.result_path, decision["peak"], name, run=decision["run"],
                                    source=text, analyst=analyst or decision.get("reviewer"), force=force,
                                    new=new, as_existing=as_existing)
    except RefusedChange as exc:
        return Outcome(decision["run"], decision["peak"], name, False, str(exc))
    review.note_added({"run": decision["run"], "peak": decision["peak"], "name": done.name,
                       "observation": done.observation_id, "reviewer": analyst or review.reviewer,
                       "source": text or "", "summary": done.summary()})
    return Outcome(decision["run"], decision["peak"], done.name, True, done.summary(), done.observation_id)


def confirm_peak(review, db: str | None, run: str, peak: str, *, source: str | None = None,
                 analyst: str | None = None, force: bool = False) -> Outcome:
    """Add one reviewed peak (accepted and marked as confirmed with a standard) to the library."""
    key = rec.peak_key(run, peak)
    decision = rec.current(review.record).get(key)
    if decision is None or decision["decision"] != "accept" or not decision.get("standard"):
        raise MatcherError(f"peak {peak} of run {run} is not accepted and marked as confirmed with an authentic "
                           f"standard; nothing written")
    if key in rec.added(review.record):
        raise MatcherError(f"peak {peak} of run {run} was already added to the library from this review")
    review.check_unchanged()
    return _confirm_one(review, db, decision, source=source, analyst=analyst, force=force, new=False,
                        as_existing=None)


def confirm_reviewed(db: str | None, record_file: str | os.PathLike, *, source: str | None = None,
                     analyst: str | None = None, peak: str | None = None, run: str | None = None,
                     force: bool = False, new: bool = False, as_existing: str | None = None) -> list[Outcome]:
    """``matcher confirm --review RESULT.review.json``: every peak accepted with ``standard: true``
    and not yet added (or only ``peak``/``run``) goes into the library; returns one outcome each.

    The record must belong to the result beside it (same checksum), else nothing is written.
    """
    from matcher.limits import check_text
    from matcher.review.session import open_review, result_of_record

    source, analyst = check_text(source, "source"), check_text(analyst, "analyst name")
    result = result_of_record(record_file)
    if not os.path.isfile(record_file):
        raise MatcherError(f"{record_file}: no such review record")
    review = open_review(result, reviewer=analyst)
    done = rec.added(review.record)
    chosen = [d for d in review.record["decisions"]
              if d["decision"] == "accept" and d.get("standard") and rec.peak_key(d["run"], d["peak"]) not in done
              and (peak is None or d["peak"] == str(peak)) and (run is None or d["run"] == str(run))]
    if not chosen:
        what = f"peak {peak}" if peak is not None else "no peak"
        raise MatcherError(f"{record_file}: {what} is accepted and marked as confirmed with an authentic standard "
                           f"and not yet added; nothing to add (mark it on the review page first)")
    if (new or as_existing) and len(chosen) != 1:
        raise MatcherError("--new and --as apply to one peak; say which with --peak")
    return [_confirm_one(review, db, d, source=source, analyst=analyst, force=force, new=new,
                         as_existing=as_existing) for d in chosen]
