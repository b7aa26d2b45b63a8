"""The flag vocabulary: short words that say what to look at, each with an exact rule.

Flags are written semicolon-separated in the ``flags`` column. Candidate
flags describe one candidate; peak flags are repeated on every row of the
peak; *lead* flags go on the peak's leading rows only (the first candidate
and the contenders within :data:`AMBIGUOUS_RATIO` of it, or the row of a peak
without candidates); run flags come from comparing peaks of the same run and
go on the leading row.

=======================  =======  ===================================================================
flag                     level    rule
=======================  =======  ===================================================================
in-window                cand.    the library index lies inside the home-class window, |Δ| ≤ w
window-edge              cand.    0.7·w < |Δ| ≤ w (or beyond w for a cross-class candidate)
single-observation       cand.    the library entry rests on one observation
mass-match               cand.    the molecular ion equals the nominal mass of the candidate's formula
mass-mismatch            cand.    the molecular ion differs from that nominal mass
no-formula               cand.    a molecular ion was given but the candidate has no formula
ions-agree               cand.    at least half of the candidate's key ions are among the peak's ions
ions-disagree            cand.    fewer than half of them are
hit-agrees               cand.    the spectral-search hit names this candidate (similarity ≥ 0.9)
spectrum-alike           cand.    the peak's spectrum and the candidate's reference spectrum agree: their
                                  similarity is at least 10 times likelier for one compound than for two
spectrum-unlike          cand.    they disagree: the similarity is at least 10 times likelier for two
                                  different compounds
cross-class              cand.    found by the fallback in the neighbouring polarity class
predicted                cand.    a homologue prediction, not a measured library value
extrapolated             peak     the peak's index lies outside the ladder (computed from the nearest pair)
ambiguous                lead     the second candidate has at least half the probability of the first; on
                                  the first and on every candidate with at least half its probability
contested                lead     other peaks of the run hold at least 0.2 of this peak's best compound
                                  (one compound explains at most one peak, so they share it)
likely-not-in-library    peak     not_in_library ≥ 0.5
no-candidate             peak     no library entry inside the window
same-compound-twice      run      the same compound ranks first for another peak more than w away
homologues-out-of-order  run      two ranked-first members of one homologous series elute out of order
columns-agree            cand.    two-column screen: the paired peak of the second run lies inside this candidate's
                                  window on the second class too
second-column-disagrees  cand.    two-column screen: the paired peak lies outside the candidate's window on the
                                  second class (on the first candidate: review)
not-on-second-class      cand.    two-column screen: the candidate has no entry on the second class; that column's
                                  evidence comes from the not-in-library model
unpaired                 peak     two-column screen: no peak of the second run was paired with this one (on the
                                  leading row: review)
review                   lead     any of: ambiguous, contested, likely-not-in-library, extrapolated, no-candidate,
                                  top probability < 0.5, or a top candidate that is cross-class,
                                  predicted, mass-mismatch or spectrum-unlike, or a run flag, or
                                  second-column-disagrees / unpaired on the first candidate
=======================  =======  ===================================================================

>>> combine(np.array([[True, False], [True, True], [False, False]]), ["in-window", "ambiguous"]).tolist()
['in-window', 'in-window;ambiguous', '']
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

VOCABULARY: tuple[str, ...] = (
    "in-window", "window-edge", "single-observation", "mass-match", "mass-mismatch", "no-formula",
    "ions-agree", "ions-disagree", "hit-agrees", "spectrum-alike", "spectrum-unlike", "cross-class", "predicted",
    "extrapolated", "ambiguous", "contested", "likely-not-in-library", "no-candidate",
    "same-compound-twice", "homologues-out-of-order",
    "columns-agree", "second-column-disagrees", "not-on-second-class", "unpaired", "review",
)

EDGE_FRACTION = 0.7
AMBIGUOUS_RATIO = 0.5
UNLISTED_AT = 0.5
REVIEW_BELOW = 0.5


def combine(masks: np.ndarray, names: Sequence[str]) -> np.ndarray:
    """Join boolean columns (rows × flags) into 'a;b' strings, fast for many rows."""
    masks = np.asarray(masks, dtype=bool)
    if masks.ndim == 1:
        masks = masks[:, None]
    if masks.shape[0] == 0:
        return np.zeros(0, dtype=object)
    weights = (1 << np.arange(masks.shape[1], dtype=np.int64))
    codes = masks.astype(np.int64) @ weights
    uniq, inv = np.unique(codes, return_inverse=True)
    text = np.array([";".join(n for i, n in enumerate(names) if (c >> i) & 1) for c in uniq], dtype=object)
    return text[inv]


def row_flags(cols: dict, *, window, mass_state, ions_state, hit_agrees, extrapolated, top1, top2,
              not_in_library, has_candidate, contested=None, spectrum_evidence=None) -> np.ndarray:
    """Flags of every shortlist row (see the table in the module doc).

    ``spectrum_evidence``: the spectral log likelihood ratio per row (NaN where no spectra were compared)."""
    from matcher.identify.spectral_evidence import FLAG_LOG_RATIO

    n = len(cols["peak"])
    spec = np.full(n, np.nan) if spectrum_evidence is None else np.asarray(spectrum_evidence, dtype=float)
    with np.errstate(invalid="ignore"):
        alike = (spec >= FLAG_LOG_RATIO)
        unlike = spec <= -FLAG_LOG_RATIO
    cand = np.asarray(has_candidate, dtype=bool)
    dev = np.abs(np.asarray(cols["delta_ri"], dtype=float))
    cross = np.asarray(cols["cross_class"], dtype=bool) & cand
    pred = np.asarray(cols["predicted"], dtype=bool) & cand
    with np.errstate(invalid="ignore"):
        in_window = cand & ~cross & (dev <= window)
        edge = cand & (dev > EDGE_FRACTION * window)
        ions_ok = np.nan_to_num(ions_state, nan=-1.0)
    extrap = np.zeros(n, dtype=bool) if extrapolated is None else np.asarray(extrapolated, dtype=bool)
    prob = np.asarray(cols["probability"], dtype=float)
    rank1 = cand & (np.asarray(cols["rank"]) == 1)
    close_call = cand & (top2 > 0) & (top2 >= AMBIGUOUS_RATIO * top1)
    ambiguous = close_call & (rank1 | (prob >= AMBIGUOUS_RATIO * top1))
    lead = ambiguous | rank1 | ~cand
    contest = np.zeros(n, dtype=bool) if contested is None else (np.asarray(contested, dtype=bool) & rank1)
    unlisted = cand & (not_in_library >= UNLISTED_AT)
    no_cand = ~cand
    mass_mis = cand & (mass_state == -1)
    unlike = cand & unlike

    # peak-level review: needs the top row's attributes, spread to all rows of the peak
    peak = np.asarray(cols["peak"], dtype=np.int64)
    top_row = cand & (np.asarray(cols["rank"]) == 1)
    size = int(peak.max()) + 1 if n else 0
    bad_top = np.zeros(size, dtype=bool)
    bad_top[peak[top_row]] = (cross | pred | mass_mis | unlike)[top_row]
    contested_peak = np.zeros(size, dtype=bool)
    contested_peak[peak[contest]] = True
    review = lead & (close_call | contested_peak[peak] | unlisted | extrap | no_cand | (cand & (top1 < REVIEW_BELOW))
                     | bad_top[peak])

    masks = np.column_stack([
        in_window, edge, cand & ~pred & (np.asarray(cols["library_observations"]) == 1),
        cand & (mass_state == 1), mass_mis, cand & (mass_state == 0),
        cand & (ions_ok >= 0.5), cand & (ions_ok >= 0) & (ions_ok < 0.5), cand & hit_agrees,
        cand & alike, unlike,
        cross, pred, extrap, ambiguous, contest, unlisted, no_cand,
        *[np.zeros(n, bool)] * (len(VOCABULARY) - 1 - VOCABULARY.index("same-compound-twice")),  # set later
        review,
    ])
    return combine(masks, VOCABULARY)


def add_flag(flags: np.ndarray, mask: np.ndarray, name: str, *, review: bool = True) -> np.ndarray:
    """Append ``name`` (and ``review``) to the flags of the rows in ``mask``, keeping vocabulary order.

    Callers pass the leading rows of the peaks concerned (run flags are lead flags)."""
    out = np.asarray(flags, dtype=object).copy()
    idx = np.flatnonzero(mask)
    for i in idx:
        present = set(filter(None, str(out[i]).split(";")))
        present.add(name)
        if review:
            present.add("review")
        out[i] = ";".join(f for f in VOCABULARY if f in present)
    return out


def has_flag(flags: np.ndarray, name: str) -> np.ndarray:
    """Boolean mask of rows carrying ``name``."""
    return np.array([name in str(f).split(";") for f in flags], dtype=bool)
