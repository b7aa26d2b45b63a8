"""Mass-spectral hints of a peak, encoded for vectorised scoring.

Three kinds of hint a GC-MS run gives besides the index:

* the **molecular ion** (nominal m/z), compared with the nominal mass of the
  candidate's formula (see :mod:`matcher.chem.formula`);
* **key ions** (m/z values seen in the peak's spectrum), compared with the key
  ions the library holds for a compound. Ions are stored as bit sets of
  :data:`ION_WORDS` × 64 bits so that "how many of the compound's key ions
  does the peak show" is a vectorised ``bitwise_and`` and popcount;
* the **hit** name proposed by the lab's own spectral search with its score
  (0–100), matched to library names and synonyms with rapidfuzz.

>>> m = ion_masks([(93, 136), (), (41, 69, 93)])
>>> ion_overlap(m[[0, 2]], m[[2, 2]]).tolist()
[1, 3]
"""

from __future__ import annotations

from typing import Iterable, Sequence

import numpy as np

ION_WORDS = 16  # m/z 0–1023
MAX_ION = ION_WORDS * 64 - 1


def ion_masks(ion_lists: Sequence[Iterable[int]]) -> np.ndarray:
    """Bit sets (n, ION_WORDS) of uint64 for lists of integer m/z values (others ignored)."""
    masks = np.zeros((len(ion_lists), ION_WORDS), dtype=np.uint64)
    rows, vals = [], []
    for i, ions in enumerate(ion_lists):
        for v in ions:
            v = int(v)
            if 0 <= v <= MAX_ION:
                rows.append(i)
                vals.append(v)
    if rows:
        r = np.asarray(rows, dtype=np.int64)
        v = np.asarray(vals, dtype=np.int64)
        bits = np.left_shift(np.uint64(1), (v % 64).astype(np.uint64))
        np.bitwise_or.at(masks, (r, v // 64), bits)
    return masks


def ion_count(masks: np.ndarray) -> np.ndarray:
    """Number of ions in each bit set."""
    return np.bitwise_count(masks).sum(axis=1).astype(np.int64)


def ion_overlap(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Number of ions shared row by row between two equally long arrays of bit sets."""
    return np.bitwise_count(np.bitwise_and(a, b)).sum(axis=1).astype(np.int64)


def hit_similarity(
    hits: np.ndarray,
    peak_of_pair: np.ndarray,
    compound_of_pair: np.ndarray,
    compound_keys: Sequence[Sequence[str]],
    normalise,
) -> np.ndarray:
    """Similarity in [0, 1] between each pair's peak hit name and the compound's names.

    ``compound_keys[row]`` holds the normalised name and synonyms of a compound
    row; ``normalise`` turns a hit into the same form. The best of the
    rapidfuzz ``ratio`` scores over the compound's names is returned; pairs
    whose peak has no hit get 0. The work is done once per distinct
    (hit, compound) combination, not per pair.
    """
    from rapidfuzz import fuzz

    out = np.zeros(len(peak_of_pair))
    if len(out) == 0:
        return out
    hit_of_pair = hits[peak_of_pair]
    has = np.array([bool(h) for h in hit_of_pair])
    if not has.any():
        return out
    idx = np.flatnonzero(has)
    cache: dict[tuple[str, int], float] = {}
    keyed: dict[str, str] = {}
    for i in idx:
        h = hit_of_pair[i]
        c = int(compound_of_pair[i])
        k = (h, c)
        if k not in cache:
            hk = keyed.get(h)
            if hk is None:
                hk = keyed[h] = normalise(h)
            best = 0.0
            for name in compound_keys[c]:
                if name == hk:
                    best = 100.0
                    break
                best = max(best, fuzz.ratio(hk, name))
            cache[k] = best / 100.0
        out[i] = cache[k]
    return out


def hit_not_in_library(hits: np.ndarray, library_keys: Sequence[str], normalise, threshold: float) -> np.ndarray:
    """Per peak: the hit names a compound that no library name or synonym matches (similarity < threshold).

    Peaks without a hit get False. One rapidfuzz search over the library's keys per distinct hit.
    """
    from rapidfuzz import fuzz, process

    out = np.zeros(len(hits), dtype=bool)
    keys = list(library_keys)
    cache: dict[str, bool] = {}
    for i, h in enumerate(hits):
        if not h:
            continue
        if h not in cache:
            hk = normalise(h)
            best = process.extractOne(hk, keys, scorer=fuzz.ratio, score_cutoff=threshold * 100.0) if keys and hk else None
            cache[h] = bool(hk) and best is None
        out[i] = cache[h]
    return out
