"""Mass spectra held as arrays, and the spectral similarity of Stein & Scott.

**The one in-memory form of a spectrum** (shared by every reader: the
peak-table ``spectrum`` column, JCAMP-DX files, and run files of the
instrument) is a pair of float64 arrays ``(mz, intensity)`` of equal length,
sorted by m/z, each m/z at most once, intensities ≥ 0 in any linear unit;
``None`` means "no spectrum". A run's spectra are a sequence with one such
item per peak (:attr:`matcher.io.peak_tables.PeakTable.spectra`).

For scoring, many spectra are packed once into a :class:`SpectrumSet`:
compressed sparse rows of **nominal** m/z (rounded to the nearest integer,
intensities falling on one integer summed) and the Stein & Scott weighted
intensity ``W = (m/z)^MZ_POWER · I^INTENSITY_POWER`` as float32, each row
scaled to unit length. Comparing any list of (unknown, reference) pairs is
then a handful of NumPy gathers and ``bincount`` calls
(:func:`pair_similarity`), never a Python loop per pair.

**Similarity** (Stein & Scott 1994, the "composite" search): with ``W_U``
and ``W_L`` the weighted unknown and library spectra,

.. math::

   F_D = \\frac{(\\sum W_U W_L)^2}{\\sum W_U^2 \\; \\sum W_L^2}

(the weighted dot product, the square of a cosine), and over the
:math:`N_{UL}` m/z values present in both spectra, taken in m/z order,

.. math::

   F_R = \\frac{1}{N_{UL} - 1} \\sum_{i=2}^{N_{UL}}
         \\left(\\frac{W_{L,i}}{W_{L,i-1}} \\cdot \\frac{W_{U,i-1}}{W_{U,i}}\\right)^{n},
   \\quad n = \\pm 1 \\text{ so that each term is} \\le 1,

the agreement of the intensity ratios of neighbouring common peaks; the
composite is

.. math::

   S = \\frac{N_U F_D + N_{UL} F_R}{N_U + N_{UL}}

with :math:`N_U` the number of peaks of the unknown. Stein & Scott report
it on 0–999; here it is on 0–1. With fewer than two common peaks the ratio
term is undefined and :math:`S = F_D`. We average the ratio terms over the
:math:`N_{UL} - 1` neighbouring pairs, so that a spectrum compared with
itself scores exactly 1 (the published form, as we recall it, divides the
same sum by :math:`N_{UL}`). The weights are those Stein & Scott found
best for the dot product on the large reference collection of their study: m/z to the power 3 and
intensity to the power 0.6 (as we recall the paper; the same constants are
quoted by the open-source R package MsCoreUtils).

References
----------
1. S. E. Stein, D. R. Scott, "Optimization and testing of mass spectral
   library search algorithms for compound identification", J. Am. Soc.
   Mass Spectrom. 5, 859-866 (1994).

>>> a = SpectrumSet.from_spectra([(np.array([41.0, 68.0, 93.0]), np.array([12.0, 100.0, 45.0]))])
>>> float(pair_similarity(a, a, np.array([0]), np.array([0]))[0])
1.0
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

#: Stein & Scott (1994): weight of the m/z in W = (m/z)^3 · I^0.6 (as recalled).
MZ_POWER = 3.0
#: Stein & Scott (1994): weight of the intensity in W = (m/z)^3 · I^0.6 (as recalled).
INTENSITY_POWER = 0.6
#: pairs × unknown peaks compared per block of work (bounds the memory of :func:`pair_similarity`)
BLOCK = 2_000_000
#: a dense lookup table of the references is built up to this many cells (float32); beyond, a sorted key search
DENSE_CELLS = 60_000_000


@dataclass(frozen=True)
class SpectrumSet:
    """Spectra as compressed sparse rows of nominal m/z and weighted, unit-length intensities.

    Row ``i`` holds ``mz[start[i]:start[i+1]]`` (int32, ascending) and ``w`` (float32, Stein & Scott weights
    scaled so that the row has length 1). A row with no peaks stands for "no spectrum".
    """

    start: np.ndarray  # int64, len n + 1
    mz: np.ndarray  # int32
    w: np.ndarray  # float32
    #: row numbers in the set this one was taken from (None: this is the original), for the cache below
    origin: np.ndarray | None = None
    #: similarities already computed for this run (:class:`SimilarityCache`), shared by every subset taken
    cache: "SimilarityCache | None" = None

    def __len__(self) -> int:
        return len(self.start) - 1

    @property
    def counts(self) -> np.ndarray:
        """Peaks per row (0: no spectrum)."""
        return np.diff(self.start)

    @property
    def present(self) -> np.ndarray:
        """Rows that hold a spectrum."""
        return self.counts > 0

    def take(self, rows: np.ndarray) -> "SpectrumSet":
        """The rows ``rows`` as a new set (in that order); a row -1 gives an empty row (no spectrum)."""
        rows = np.asarray(rows, dtype=np.int64)
        cnt = np.where(rows >= 0, self.counts[np.maximum(rows, 0)], 0) if len(self) else np.zeros(len(rows), np.int64)
        start = np.zeros(len(rows) + 1, dtype=np.int64)
        np.cumsum(cnt, out=start[1:])
        idx = np.repeat(self.start[np.maximum(rows, 0)] - start[:-1], cnt) + np.arange(start[-1])
        origin = None
        if self.cache is not None:
            base = self.origin if self.origin is not None else np.arange(len(self), dtype=np.int64)
            origin = np.where(rows >= 0, base[np.maximum(rows, 0)], -1)
        return SpectrumSet(start, self.mz[idx], self.w[idx], origin, self.cache)

    def with_cache(self) -> "SpectrumSet":
        """The same spectra with a fresh :class:`SimilarityCache`: a (row, compound) pair is compared once per run
        however many times the run model, the adaptive correction and the shortlist ask for it."""
        return SpectrumSet(self.start, self.mz, self.w, None, SimilarityCache())

    def relative(self, row: int) -> tuple[np.ndarray, np.ndarray]:
        """Row ``row`` back in the shared form: nominal m/z and intensities relative to its base peak (100).

        The weights are undone (W / (m/z)^3, to the power 1 / 0.6); float32 rounding leaves about 6 digits.
        """
        a, b = int(self.start[row]), int(self.start[row + 1])
        mz = self.mz[a:b].astype(np.float64)
        y = (self.w[a:b].astype(np.float64) / (mz / 100.0) ** MZ_POWER) ** (1.0 / INTENSITY_POWER)
        return mz, (100.0 * y / y.max() if len(y) else y)

    @classmethod
    def empty(cls, n: int = 0) -> "SpectrumSet":
        return cls(np.zeros(n + 1, dtype=np.int64), np.zeros(0, dtype=np.int32), np.zeros(0, dtype=np.float32))

    @classmethod
    def from_spectra(cls, spectra: Sequence) -> "SpectrumSet":
        """Pack spectra in the shared form (``(mz, intensity)`` arrays or None per item)."""
        rows, mzs, ys = [], [], []
        for i, s in enumerate(spectra):
            if s is None:
                continue
            mz, y = np.asarray(s[0], dtype=np.float64), np.asarray(s[1], dtype=np.float64)
            if len(mz):
                rows.append(np.full(len(mz), i, dtype=np.int64))
                mzs.append(mz)
                ys.append(y)
        n = len(spectra)
        if not rows:
            return cls.empty(n)
        return cls.from_arrays(np.concatenate(rows), np.concatenate(mzs), np.concatenate(ys), n)

    @classmethod
    def from_arrays(cls, row: np.ndarray, mz: np.ndarray, intensity: np.ndarray, n: int) -> "SpectrumSet":
        """Pack flat (row, m/z, intensity) triples of ``n`` spectra: nominal m/z, weights, unit rows."""
        row = np.asarray(row, dtype=np.int64)
        nominal = np.rint(np.asarray(mz, dtype=np.float64)).astype(np.int64)
        y = np.asarray(intensity, dtype=np.float64)
        keep = (nominal >= 1) & np.isfinite(y) & (y > 0)
        row, nominal, y = row[keep], nominal[keep], y[keep]
        if not len(row):
            return cls.empty(n)
        # sum intensities that fall on one nominal m/z
        key = row * (int(nominal.max()) + 1) + nominal
        uniq, inv = np.unique(key, return_inverse=True)
        y = np.bincount(inv, weights=y, minlength=len(uniq))
        row = uniq // (int(nominal.max()) + 1)
        nominal = uniq % (int(nominal.max()) + 1)
        # scale each row to a maximum of 1 before the power (keeps W finite and in float32 range)
        top = np.zeros(n)
        np.maximum.at(top, row, y)
        w = (nominal.astype(np.float64) / 100.0) ** MZ_POWER * (y / top[row]) ** INTENSITY_POWER
        norm = np.sqrt(np.bincount(row, weights=w * w, minlength=n))
        w = w / norm[row]
        start = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(np.bincount(row, minlength=n), out=start[1:])
        return cls(start, nominal.astype(np.int32), w.astype(np.float32))


def _lookup(ref: SpectrumSet):
    """A function (rows, mz) -> weight of that nominal m/z in those reference rows (0 where absent)."""
    n = len(ref)
    width = int(ref.mz.max()) + 1 if len(ref.mz) else 1
    row_of = np.repeat(np.arange(n, dtype=np.int64), ref.counts)
    if n * (width + 1) <= DENSE_CELLS:
        # one extra, always empty column: an unknown's m/z beyond the references' range reads 0 there
        flat = np.zeros(max(n, 1) * (width + 1), dtype=np.float32)
        flat[row_of * (width + 1) + ref.mz] = ref.w

        def get(rows, mz):
            return flat.take(rows * (width + 1) + np.minimum(mz, width))
        get.dense = (flat, width)  # lets _block gather without a product per element
        return get
    keys = row_of * width + ref.mz  # ascending: rows in order, m/z ascending within a row

    def get(rows, mz):
        k = rows * width + mz
        i = np.clip(np.searchsorted(keys, k), 0, len(keys) - 1)
        return np.where((keys[i] == k) & (mz < width), ref.w[i], np.float32(0.0))
    return get


def pair_similarity(unknown: SpectrumSet, reference: SpectrumSet, u: np.ndarray, r: np.ndarray,
                    *, lookup=None) -> np.ndarray:
    """Stein & Scott composite similarity (0–1) of unknown row ``u[k]`` with reference row ``r[k]``, for all k.

    NaN where either row holds no spectrum. Vectorised over all pairs in blocks of about :data:`BLOCK`
    peak comparisons; ``lookup`` (from a previous call's ``_lookup(reference)``) may be passed to reuse the
    reference table.
    """
    u = np.asarray(u, dtype=np.int64)
    r = np.asarray(r, dtype=np.int64)
    out = np.full(len(u), np.nan)
    if not len(u):
        return out
    ucnt = unknown.counts[u]
    ok = (ucnt > 0) & (reference.counts[r] > 0)
    if not ok.any():
        return out
    get = lookup or _lookup(reference)
    idx = np.flatnonzero(ok)
    csum = np.cumsum(ucnt[idx])
    bounds = [0]
    while bounds[-1] < len(idx):
        lo = bounds[-1]
        target = (csum[lo - 1] if lo else 0) + BLOCK
        bounds.append(max(lo + 1, int(np.searchsorted(csum, target, side="right"))))
    for a, b in zip(bounds[:-1], bounds[1:]):
        sel = idx[a:b]
        out[sel] = _block(unknown, get, u[sel], r[sel])
    return out


def _segment_sums(values: np.ndarray, offs: np.ndarray) -> np.ndarray:
    """Sums of consecutive segments ``values[offs[k]:offs[k+1]]`` (empty segments give 0)."""
    c = np.zeros(len(values) + 1)
    np.cumsum(values, out=c[1:])
    return c[offs[1:]] - c[offs[:-1]]


def _block(unknown: SpectrumSet, get, u: np.ndarray, r: np.ndarray) -> np.ndarray:
    m = len(u)
    cnt = unknown.counts[u]
    total = int(cnt.sum())
    offs = np.zeros(m + 1, dtype=np.int64)
    np.cumsum(cnt, out=offs[1:])
    pos = np.repeat(unknown.start[u] - offs[:-1], cnt) + np.arange(total)
    wu = unknown.w[pos]
    dense = getattr(get, "dense", None)
    if dense is not None:
        flat, width = dense
        wl = flat.take(np.repeat(r * (width + 1), cnt) + np.minimum(unknown.mz[pos], width))
    else:
        wl = get(np.repeat(r, cnt), unknown.mz[pos].astype(np.int64))
    dot = _segment_sums(wu * wl, offs)  # each pair's elements are one contiguous segment
    fd = np.minimum(dot * dot, 1.0)  # rows are unit length: F_D = (Σ W_U W_L)^2
    common = wl > 0
    n_ul = np.diff(np.r_[0, np.cumsum(common)][offs])
    # ratio term over neighbouring common peaks (in m/z order inside each pair)
    keep = np.flatnonzero(common)
    cu = wu[keep].astype(np.float64)
    cl = wl[keep].astype(np.float64)
    coffs = np.r_[0, np.cumsum(n_ul)]
    q = np.ones(len(keep))
    if len(keep) > 1:
        q[1:] = (cl[1:] / cl[:-1]) * (cu[:-1] / cu[1:])
    term = np.where(q > 1.0, 1.0 / q, q)
    term[coffs[:-1][n_ul > 0]] = 0.0  # the first common peak of a pair has no left neighbour
    fr_sum = _segment_sums(term, coffs)
    n_u = cnt.astype(np.float64)
    n_ul = n_ul.astype(np.float64)
    fr = np.divide(fr_sum, n_ul - 1.0, out=np.zeros(m), where=n_ul >= 2)
    composite = (n_u * fd + n_ul * fr) / (n_u + n_ul)
    # float32 weights: round to 6 decimals so that a spectrum compared with itself reports exactly 1
    return np.round(np.clip(np.where(n_ul >= 2, composite, fd), 0.0, 1.0), 6)


def similarity(a, b) -> float:
    """Composite similarity (0–1) of two spectra in the shared form; NaN when either is missing or empty.

    >>> s = (np.array([41.0, 93.0, 136.0]), np.array([30.0, 100.0, 20.0]))
    >>> similarity(s, (s[0], 7.5 * s[1]))
    1.0
    """
    sa = SpectrumSet.from_spectra([a, b])
    return float(pair_similarity(sa, sa, np.array([0]), np.array([1]))[0])


def similarity_matrix(unknowns: Sequence, references: Sequence) -> np.ndarray:
    """Composite similarity of every unknown with every reference (shared form; NaN where one is missing)."""
    su = SpectrumSet.from_spectra(unknowns)
    sr = SpectrumSet.from_spectra(references)
    uu, rr = np.meshgrid(np.arange(len(su)), np.arange(len(sr)), indexing="ij")
    return pair_similarity(su, sr, uu.ravel(), rr.ravel()).reshape(len(su), len(sr))


@dataclass(frozen=True)
class ReferenceSpectra:
    """The library's reference spectra: packed rows and, per compound row, which rows are its spectra."""

    spectra: SpectrumSet
    compound: np.ndarray  # int64 CompoundTable row of each spectrum
    ids: np.ndarray  # int64 store id of each spectrum (0 when not from a store)

    def __len__(self) -> int:
        return len(self.compound)

    @classmethod
    def build(cls, compound_rows: np.ndarray, spectra: Sequence, ids: np.ndarray | None = None) -> "ReferenceSpectra":
        compound_rows = np.asarray(compound_rows, dtype=np.int64)
        order = np.argsort(compound_rows, kind="stable")
        packed = SpectrumSet.from_spectra([spectra[i] for i in order])
        ids = np.zeros(len(order), dtype=np.int64) if ids is None else np.asarray(ids, dtype=np.int64)[order]
        return cls(packed, compound_rows[order], ids)

    def _table(self) -> tuple[np.ndarray, np.ndarray]:
        """First spectrum row and count per compound row (built once)."""
        got = self.__dict__.get("_by_compound")
        if got is None:
            size = int(self.compound.max()) + 1 if len(self.compound) else 0
            count = np.bincount(self.compound, minlength=size).astype(np.int64)
            first = np.cumsum(count) - count
            got = (first, count)
            object.__setattr__(self, "_by_compound", got)
        return got

    def rows_of(self, compound_rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """For each compound row asked: (index of the asking item, spectrum row), every spectrum of it."""
        compound_rows = np.asarray(compound_rows, dtype=np.int64)
        first, count = self._table()
        inside = (compound_rows >= 0) & (compound_rows < len(count))
        safe = np.where(inside, compound_rows, 0)
        lo = first[safe] if len(count) else np.zeros(len(safe), dtype=np.int64)
        cnt = np.where(inside, count[safe], 0) if len(count) else np.zeros(len(safe), dtype=np.int64)
        item = np.repeat(np.arange(len(compound_rows), dtype=np.int64), cnt)
        offs = np.zeros(len(compound_rows) + 1, dtype=np.int64)
        np.cumsum(cnt, out=offs[1:])
        rows = np.repeat(lo - offs[:-1], cnt) + np.arange(int(offs[-1]))
        return item, rows

    def has_spectrum(self, compound_rows: np.ndarray) -> np.ndarray:
        compound_rows = np.asarray(compound_rows, dtype=np.int64)
        first, count = self._table()
        inside = (compound_rows >= 0) & (compound_rows < len(count))
        return inside & (count[np.where(inside, compound_rows, 0)] > 0 if len(count) else False)


class SimilarityCache:
    """Best similarities already computed, keyed by (original unknown row, compound row).

    Kept as a few sorted blocks (one per batch added), so adding a batch sorts only the batch."""

    def __init__(self) -> None:
        self.blocks: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []  # (sorted keys, sim, which)

    @staticmethod
    def key(row: np.ndarray, compound: np.ndarray) -> np.ndarray:
        return np.asarray(row, dtype=np.int64) * (1 << 31) + np.asarray(compound, dtype=np.int64)

    def get(self, keys: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(found, similarity, spectrum row) of each key (NaN and -1 where not found)."""
        found = np.zeros(len(keys), dtype=bool)
        sim = np.full(len(keys), np.nan)
        which = np.full(len(keys), -1, dtype=np.int64)
        for bk, bs, bw in self.blocks:
            todo = np.flatnonzero(~found)
            if not len(todo):
                break
            i = np.clip(np.searchsorted(bk, keys[todo]), 0, len(bk) - 1)
            hit = bk[i] == keys[todo]
            at = todo[hit]
            found[at] = True
            sim[at] = bs[i[hit]]
            which[at] = bw[i[hit]]
        return found, sim, which

    def add(self, keys: np.ndarray, sim: np.ndarray, which: np.ndarray) -> None:
        if len(keys):
            keys, first = np.unique(keys, return_index=True)
            self.blocks.append((keys, sim[first], which[first]))


def best_similarity(unknown: SpectrumSet, refs: ReferenceSpectra, peak: np.ndarray, compound: np.ndarray,
                    *, lookup=None) -> tuple[np.ndarray, np.ndarray]:
    """Per (peak, compound) pair: the best similarity over the compound's reference spectra, and which spectrum.

    Returns (similarity, spectrum row); NaN and -1 where the peak or the compound has no spectrum. With a
    cache on ``unknown`` (:meth:`SpectrumSet.with_cache`) pairs compared before are not compared again.
    """
    peak = np.asarray(peak, dtype=np.int64)
    compound = np.asarray(compound, dtype=np.int64)
    cache = unknown.cache
    if cache is not None and len(peak):
        rows = unknown.origin[peak] if unknown.origin is not None else peak
        keys = SimilarityCache.key(rows, compound)
        found, sim, which = cache.get(keys)
        todo = np.flatnonzero(~found)
        if len(todo):
            plain = SpectrumSet(unknown.start, unknown.mz, unknown.w)
            s2, w2 = best_similarity(plain, refs, peak[todo], compound[todo], lookup=lookup)
            sim[todo], which[todo] = s2, w2
            cache.add(keys[todo], s2, w2)
        return sim, which.astype(np.int64)
    best = np.full(len(peak), np.nan)
    which = np.full(len(peak), -1, dtype=np.int64)
    if not len(peak) or not len(refs):
        return best, which
    has = unknown.counts[peak] > 0
    sel = np.flatnonzero(has)
    item, rows = refs.rows_of(np.asarray(compound, dtype=np.int64)[sel])
    if not len(item):
        return best, which
    sim = pair_similarity(unknown, refs.spectra, peak[sel][item], rows, lookup=lookup)
    if len(item) == len(sel) and (not len(item) or np.all(item == np.arange(len(sel)))):  # one spectrum each
        got = sel
        best[got] = sim
        which[got] = np.where(np.isnan(sim), -1, rows)
        return best, which
    sim = np.where(np.isnan(sim), -1.0, sim)
    # maximum per asking item (items are grouped and ascending)
    starts = np.flatnonzero(np.r_[True, item[1:] != item[:-1]])
    order = np.lexsort((-sim, item))
    first = order[np.searchsorted(item[order], item[starts])]
    got = sel[item[starts]]
    best[got] = np.where(sim[first] >= 0, sim[first], np.nan)
    which[got] = np.where(sim[first] >= 0, rows[first], -1)
    return best, which


__all__ = ["MZ_POWER", "INTENSITY_POWER", "SpectrumSet", "ReferenceSpectra", "pair_similarity", "similarity",
           "similarity_matrix", "best_similarity"]
