"""Growing the house library with compounds confirmed by an authentic standard.

The library API behind ``matcher library add|history|retire`` and ``matcher confirm``
(merging two libraries is :mod:`matcher.curate.merge`, a consistent copy is
:mod:`matcher.store.backup`, reading a screening output is :mod:`matcher.io.result_files`). Every change runs in ONE write transaction through
:func:`matcher.store.database.run_write` (SQLite: WAL, busy timeout,
``BEGIN IMMEDIATE``, retried on lock), goes through
:mod:`matcher.store.writes` (so it is audited and bumps the revision), and a
refused change writes nothing.

**Name resolution** (:func:`add_confirmed`). The name's matching key
(:func:`matcher.chem.names.matching_key`: case, spacing, Greek letters spelled out,
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
computes them (:func:`matcher.store.snapshot.summarise`, weighted median and robust
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

import math
import os
from datetime import date as _date, datetime, timezone
from typing import Any, Callable

from matcher.classes import DEFAULT_WINDOWS, check_class
from matcher.errors import MatcherError, RefusedChange
from matcher.io.result_files import read_peak
from matcher.rules import check_mode
from matcher.chem.names import CLOSE_SCORE, closeness  # noqa: F401 - part of this module's API
from matcher.store.compound_edits import add_checked_observation, compound_history, retire_checked
from matcher.store.compound_edits import (  # noqa: F401 - the records are part of this module's API
    NEW, AddResult, Match, Summary, Unresolved, summarise_observations,
)

#: Spreads from the centre beyond which an observation is refused (with the class window as minimum).
GUARD_SPREADS = 3.0
#: Upper bound of a plausible retention index (as the library CSV reader).
from matcher.limits import MAX_RI as RI_MAX  # noqa: E402  declared once



# --------------------------------------------------------------------------- pure helpers


def guard_limit(summary: Summary, phase_class: str) -> float:
    """Largest accepted distance from the centre: max(3 × spread, class window)."""
    return max(GUARD_SPREADS * summary.spread, DEFAULT_WINDOWS[phase_class])


def _clean_ri(ri: Any) -> float:
    try:
        v = float(ri)
    except (TypeError, ValueError):
        raise MatcherError(f"the retention index must be a number, got {ri!r}") from None
    if not math.isfinite(v) or not 0.0 <= v <= RI_MAX:
        raise MatcherError(f"the retention index must be between 0 and {RI_MAX:g}, got {ri!r}")
    return v


def _clean(name, phase_class, ri, formula, cas, inchikey, date, mode) -> dict:
    from matcher.chem.cas import normalise_cas
    from matcher.chem.formula import hill_formula
    from matcher.chem.identifiers import normalise_inchikey
    from matcher.chem.names import display_name, matching_key

    from matcher.limits import check_name

    out: dict[str, Any] = {"name": display_name(check_name(name or " ", "compound name") if str(name or "").strip() else "")}
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
    out["mode"] = check_mode(mode)
    return out


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
    from matcher.limits import check_name, check_text

    if new and as_existing:
        raise MatcherError("give either --new or --as, not both")
    source, analyst = check_text(source, "source"), check_text(analyst, "analyst name")
    if as_existing is not None:
        as_existing = check_name(as_existing, "name given with --as")
    v = _clean(name, phase_class, ri, formula, cas, inchikey, date, mode)
    return add_checked_observation(db, v, guard_limit=guard_limit, new=new, as_existing=as_existing, force=force,
                                   once=once, phase=phase, source=source, analyst=analyst, provenance=provenance,
                                   ask=ask)


# --------------------------------------------------------------------------- confirming from screening outputs


def confirm_from_results(db: str | None, results_path: str | os.PathLike, peak: Any, name: str, *,
                         run: str | None = None, source: str | None = None, analyst: str | None = None,
                         force: bool = False, new: bool = False, as_existing: str | None = None,
                         measured: bool = False, ask=None, cas: str | None = None, formula: str | None = None,
                         phase: str | None = None) -> AddResult:
    """Add the index of ``peak`` of a screening output as a confirmed observation of ``name``.

    The index is the ``ri`` the peak was screened with (after any adaptive correction of the
    run; ``measured=True`` takes ``ri_measured``, the calibrated index before correction).
    The class, calibration mode and date come from the run; the observation's source names
    the results file, run and peak; the audit entry ``confirm`` keeps the full record. An
    extrapolated index (outside the ladder) is refused unless ``force``. ``cas``, ``formula``
    and ``phase`` (the column's stationary phase, generic composition) are checked and recorded as
    for :func:`add_confirmed`, so that a newly confirmed compound gets its nominal mass.
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
            "best_candidate": facts.best, "sidecar": facts.sidecar, "run_checksum": facts.checksum or None}
    return add_confirmed(db, name, facts.phase_class, ri, source=text, analyst=analyst, force=force, new=new,
                         as_existing=as_existing, ask=ask, date=facts.date or None, mode=facts.mode,
                         cas=cas, formula=formula, phase=phase,
                         provenance=prov, once=facts.identity() if facts.checksum else here)


# --------------------------------------------------------------------------- history and retiring


def history(db: str | None, name: str) -> list[dict]:
    """The audit trail of one compound (name, synonym or CAS): dicts when, who, action, before, after, revision."""
    return compound_history(db, name)


def retire(db: str | None, observation_id: int, why: str, *, analyst: str | None = None) -> dict:
    """Stop using an observation (the row stays, with the reason); returns what changed."""
    from matcher.limits import check_id, check_text

    observation_id = check_id(observation_id, "observation id")
    why = " ".join(str(check_text(why, "reason") or "").split())
    if not why:
        raise MatcherError("say why the observation is retired (--why TEXT)")
    return retire_checked(db, observation_id, why, analyst=analyst)
