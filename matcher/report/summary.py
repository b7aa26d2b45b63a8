"""What a screened run amounts to: peak counts, review marks and flag counts.

Shared by the JSON output and the HTML report, so both say the same thing.

Rules (our own):

* a **row needs review** when it carries the ``review`` flag (the screening
  engine's own verdict, see :mod:`matcher.identify.flags`). A table in which no row
  carries ``review`` at all (written by an engine that does not set it) is
  judged by a fallback rule: any flag other than the reassuring ones in
  :data:`REASSURING_FLAGS` asks for review, a flag this module does not know
  included;
* a **peak is flagged for review** when any of its rows needs review (a
  peak without candidate normally is);
* a peak has **no candidate** when its only row has an empty rank;
* **not in library** counts peaks whose not-in-library posterior is at least
  as large as every candidate's probability (always true without candidates);
* **flag counts** count peaks carrying the flag on any of their rows.

>>> import pandas as pd
>>> t = pd.DataFrame({"peak": [1, 1, 2, 3], "rank": [1, 2, 1, None],
...                   "probability": [0.7, 0.2, 0.3, None], "not_in_library": [0.1, 0.1, 0.7, 1.0],
...                   "flags": ["in-window;ambiguous", "in-window;ambiguous", "in-window", "no-candidate"]})
>>> s = summarise_table(t)
>>> (s["peaks"], s["with_candidates"], s["review"], s["no_candidate"], s["not_in_library"])
(3, 2, 2, 1, 2)
>>> s["flags"]
{'ambiguous': 1, 'in-window': 2, 'no-candidate': 1}
"""

from __future__ import annotations

from typing import Any, Iterable

import numpy as np
import pandas as pd

#: Flags that on their own give no reason to look again at a row.
REASSURING_FLAGS: frozenset[str] = frozenset({"in-window", "mass-match", "ions-agree", "hit-agrees", "columns-agree"})

#: The flag by which the screening engine marks a row for review.
REVIEW_FLAG = "review"


def split_flags(value: Any) -> list[str]:
    """A flags cell (``"a;b"``, a list, empty or NaN) as a list of flag words.

    >>> split_flags("in-window; ambiguous"), split_flags(None), split_flags(["x", ""])
    (['in-window', 'ambiguous'], [], ['x'])
    """
    if value is None or (isinstance(value, float) and value != value):
        return []
    if isinstance(value, str):
        parts: Iterable[Any] = value.split(";")
    elif isinstance(value, (list, tuple, set, frozenset, np.ndarray)):
        parts = value
    else:
        parts = [value]
    return [str(p).strip() for p in parts if str(p).strip()]


def row_needs_review(flags: Any, *, engine_marks: bool = False) -> bool:
    """True when a row asks for a second look (``engine_marks``: judge by the ``review`` flag alone).

    >>> row_needs_review("in-window;mass-match"), row_needs_review("in-window;ambiguous")
    (False, True)
    >>> row_needs_review("in-window;ambiguous", engine_marks=True), row_needs_review("review", engine_marks=True)
    (False, True)
    """
    words = split_flags(flags)
    if engine_marks:
        return REVIEW_FLAG in words
    return any(f not in REASSURING_FLAGS for f in words)


def engine_marks_review(table: pd.DataFrame) -> bool:
    """True when any row of ``table`` carries the ``review`` flag (the engine sets it)."""
    if table is None or "flags" not in table or len(table) == 0:
        return False
    return any(REVIEW_FLAG in split_flags(u) for u in pd.unique(table["flags"].astype(str)))


def _has_rank(series: pd.Series) -> np.ndarray:
    return pd.to_numeric(series, errors="coerce").notna().to_numpy()


#: A peak whose leading candidate has at least this probability counts as a confident call in summaries.
CONFIDENT = 0.9


def add_summaries(a: dict[str, Any] | None, b: dict[str, Any]) -> dict[str, Any]:
    """Two summaries of disjoint sets of peaks added (a streamed run is summarised part by part).

    >>> add_summaries({"peaks": 2, "rows": 3, "flags": {"review": 1}}, {"peaks": 1, "rows": 1, "flags": {"review": 1, "x": 1}})
    {'peaks': 3, 'rows': 4, 'flags': {'review': 2, 'x': 1}}
    """
    if a is None:
        return {k: (dict(v) if isinstance(v, dict) else v) for k, v in b.items()}
    out = {k: (a.get(k, 0) + v if not isinstance(v, dict) else v) for k, v in b.items()}
    flags = dict(a.get("flags", {}))
    for k, v in b.get("flags", {}).items():
        flags[k] = flags.get(k, 0) + v
    out["flags"] = flags
    return out


def summary_of(run) -> dict[str, Any]:
    """A run's summary: the one counted while it was streamed, else :func:`summarise_table` of its table."""
    return run.summary if getattr(run, "summary", None) is not None else summarise_table(run.table)


def summarise_table(table: pd.DataFrame) -> dict[str, Any]:
    """Counts for one run's shortlist table (see the module rules)."""
    if table is None or len(table) == 0:
        return {"peaks": 0, "rows": 0, "with_candidates": 0, "confident": 0, "review": 0,
                "no_candidate": 0, "not_in_library": 0, "flags": {}}
    peaks = table["peak"].astype(str).to_numpy() if "peak" in table else np.arange(len(table)).astype(str)
    codes, uniques = pd.factorize(peaks)
    n_peaks = len(uniques)
    ranked = _has_rank(table["rank"]) if "rank" in table else np.zeros(len(table), bool)
    flags = table["flags"] if "flags" in table else pd.Series([""] * len(table))
    try:
        raw_codes, raw_uniques = pd.factorize(flags, use_na_sentinel=False)
    except TypeError:  # flags given as lists
        raw_codes, raw_uniques = pd.factorize(flags.map(lambda v: ";".join(split_flags(v))), use_na_sentinel=False)
    norm = [";".join(split_flags(u)) for u in raw_uniques]
    norm_codes, f_uniques = pd.factorize(pd.Series(norm, dtype=object), use_na_sentinel=False)
    f_codes = np.asarray(norm_codes)[raw_codes] if len(norm) else np.zeros(len(table), dtype=np.int64)
    marks = any(REVIEW_FLAG in split_flags(u) for u in f_uniques)
    review_u = np.array([row_needs_review(u, engine_marks=marks) for u in f_uniques], bool)
    row_review = review_u[f_codes] if len(f_uniques) else np.zeros(len(table), bool)

    with_cand = np.zeros(n_peaks, bool)
    np.logical_or.at(with_cand, codes, ranked)
    review = np.zeros(n_peaks, bool)
    np.logical_or.at(review, codes, row_review)

    prob = pd.to_numeric(table.get("probability", pd.Series(np.nan, index=table.index)), errors="coerce").to_numpy(float)
    nil = pd.to_numeric(table.get("not_in_library", pd.Series(np.nan, index=table.index)), errors="coerce").to_numpy(float)
    best = np.full(n_peaks, -np.inf)
    np.maximum.at(best, codes, np.where(ranked & np.isfinite(prob), prob, -np.inf))
    peak_nil = np.full(n_peaks, np.nan)
    peak_nil[codes] = nil
    not_in_lib = ~with_cand | (np.isfinite(peak_nil) & (peak_nil >= best))

    counts: dict[str, int] = {}
    flag_sets = [set(split_flags(u)) for u in f_uniques]
    for flag in sorted(set().union(*flag_sets)) if flag_sets else []:
        has = np.array([flag in s for s in flag_sets], bool)[f_codes]
        per_peak = np.zeros(n_peaks, bool)
        np.logical_or.at(per_peak, codes, has)
        counts[flag] = int(per_peak.sum())
    return {
        "peaks": int(n_peaks),
        "rows": int(len(table)),
        "with_candidates": int(with_cand.sum()),
        "confident": int((best >= CONFIDENT).sum()),
        "review": int(review.sum()),
        "no_candidate": int((~with_cand).sum()),
        "not_in_library": int(not_in_lib.sum()),
        "flags": counts,
    }
