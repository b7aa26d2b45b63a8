"""Spectral similarity turned into evidence: a likelihood ratio calibrated on the library itself.

The composite similarity *s* of Stein & Scott (:mod:`matcher.chem.spectra`,
0–1) between a peak's spectrum and a candidate's reference spectrum is
evidence of "the peak is this compound" against "the peak is another
compound" (another candidate, or one the library does not hold). Its weight
is the log likelihood ratio

.. math::

   e^{spec} = \\ln f_{same}(s) - \\ln f_{other}(s)

with two Beta densities on 0–1:

* :math:`f_{same}`: the similarity of two spectra of **one** compound,
  measured on the library's replicate spectra (compounds with two or more
  reference spectra, every pair of them);
* :math:`f_{other}`: the similarity of spectra of **different** compounds
  of the same nominal mass (the hard cases: isomers), measured on the
  library's spectra (at most :data:`MAX_PAIRS` pairs, a seeded sample).

Each Beta comes from the mean and variance of the measured similarities,
shrunk towards a documented default with the weight of :data:`PRIOR_PAIRS`
pairs, so a small library leans on the defaults and a large one on itself:

* same compound: mean 0.85, sd 0.08 (:data:`DEFAULT_SAME`, our
  assumption: a run's spectrum of a compound usually matches its reference
  above 0.7 on this scale, above 0.8 when clean; common practice, no single
  source), never narrower than :data:`MIN_SAME_SD` (unknowns from real runs
  are noisier than library replicates);
* different compounds of one nominal mass: mean 0.50, sd 0.20 (our
  assumption).

The ratio is tabulated on a grid, made non-decreasing in *s* by a
weighted isotonic fit (pool-adjacent-violators, weights the two densities:
a higher similarity never counts as weaker evidence, and the tails, where
no data inform the Beta shapes, follow their neighbours) and bounded softly to ±:data:`CAP`
nats (:math:`CAP \\cdot \\tanh(e / CAP)`: linear near 0, still rising near the
bounds, so candidates stay ordered by similarity), so that one spectrum
cannot outweigh everything else.

>>> m = SpectrumModel.default()
>>> bool(m.log_ratio(np.array([0.95]))[0] > 0 > m.log_ratio(np.array([0.5]))[0])
True
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matcher.chem.spectra import ReferenceSpectra, pair_similarity

#: default (mean, sd) of the similarity of two spectra of one compound (our assumption)
DEFAULT_SAME = (0.85, 0.08)
#: default (mean, sd) of the similarity of spectra of two compounds of one nominal mass (our assumption)
DEFAULT_OTHER = (0.50, 0.20)
#: the defaults weigh as much as this many measured pairs
PRIOR_PAIRS = 20
#: the same-compound spread is never taken narrower than this
MIN_SAME_SD = 0.06
#: |e_spec| is capped here (nats)
CAP = 10.0
#: at most this many pairs of each kind are compared when calibrating (seeded sample)
MAX_PAIRS = 20_000
SEED = 20261203
#: a likelihood ratio of at least 10 (or at most 1/10) sets the spectrum flags
FLAG_LOG_RATIO = float(np.log(10.0))
_GRID = np.linspace(0.0005, 0.9995, 2000)


def _beta_from(mean: float, sd: float) -> tuple[float, float]:
    mean = float(np.clip(mean, 0.02, 0.98))
    var = min(float(sd) ** 2, 0.95 * mean * (1 - mean))
    common = mean * (1 - mean) / var - 1.0
    return mean * common, (1 - mean) * common


def _log_beta_pdf(s: np.ndarray, a: float, b: float) -> np.ndarray:
    from math import lgamma

    return (a - 1) * np.log(s) + (b - 1) * np.log1p(-s) - (lgamma(a) + lgamma(b) - lgamma(a + b))


def isotonic(y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Weighted least-squares non-decreasing fit (pool-adjacent-violators).

    >>> isotonic(np.array([1.0, 3.0, 2.0, 4.0]), np.ones(4)).tolist()
    [1.0, 2.5, 2.5, 4.0]
    """
    vals: list[float] = []
    wts: list[float] = []
    sizes: list[int] = []
    for v, wt in zip(np.asarray(y, float), np.maximum(np.asarray(w, float), 1e-300)):
        vals.append(float(v)); wts.append(float(wt)); sizes.append(1)
        while len(vals) > 1 and vals[-2] > vals[-1]:
            v2, w2, n2 = vals.pop(), wts.pop(), sizes.pop()
            v1, w1, n1 = vals.pop(), wts.pop(), sizes.pop()
            wsum = w1 + w2
            vals.append((v1 * w1 + v2 * w2) / wsum); wts.append(wsum); sizes.append(n1 + n2)
    return np.repeat(np.array(vals), sizes)


def _shrunk(values: np.ndarray, default: tuple[float, float]) -> tuple[float, float]:
    """Mean and sd of measured similarities shrunk towards (mean, sd) with weight PRIOR_PAIRS."""
    m0, s0 = default
    n = len(values)
    if n == 0:
        return m0, s0
    k = float(PRIOR_PAIRS)
    mean = (k * m0 + values.sum()) / (k + n)
    # pooled second moment around the pooled mean
    second = (k * (s0 ** 2 + (m0 - mean) ** 2) + np.sum((values - mean) ** 2)) / (k + n)
    return float(mean), float(np.sqrt(second))


@dataclass(frozen=True)
class SpectrumModel:
    """The calibrated likelihood ratio of a similarity (see module doc)."""

    same: tuple[float, float]  # (mean, sd) used
    other: tuple[float, float]
    same_pairs: int = 0  # measured pairs behind each
    other_pairs: int = 0
    table: np.ndarray | None = None  # log ratio on _GRID

    @classmethod
    def from_moments(cls, same: tuple[float, float], other: tuple[float, float], same_pairs: int = 0,
                     other_pairs: int = 0) -> "SpectrumModel":
        same = (same[0], max(same[1], MIN_SAME_SD))
        a1, b1 = _beta_from(*same)
        a2, b2 = _beta_from(*other)
        l1, l2 = _log_beta_pdf(_GRID, a1, b1), _log_beta_pdf(_GRID, a2, b2)
        # made non-decreasing by a weighted isotonic fit: where neither density has mass (the tails, where the
        # Beta shapes are not informed by any data) the ratio follows its well-supported neighbours
        top = np.maximum(l1, l2)
        weight = np.exp(top - top.max()) * (1.0 + np.exp(-np.abs(l1 - l2)))
        lr = CAP * np.tanh(isotonic(l1 - l2, weight) / CAP)
        return cls(same, other, int(same_pairs), int(other_pairs), lr)

    @classmethod
    def default(cls) -> "SpectrumModel":
        return cls.from_moments(DEFAULT_SAME, DEFAULT_OTHER)

    def log_ratio(self, s: np.ndarray) -> np.ndarray:
        """e_spec for similarities ``s`` (0 where s is NaN: nothing compared)."""
        s = np.asarray(s, dtype=float)
        out = np.interp(np.where(np.isfinite(s), s, 0.5), _GRID, self.table)
        return np.where(np.isfinite(s), out, 0.0)

    def describe(self) -> dict:
        """JSON-ready summary (the run's provenance)."""
        return {"same_mean": round(self.same[0], 4), "same_sd": round(self.same[1], 4), "same_pairs": self.same_pairs,
                "other_mean": round(self.other[0], 4), "other_sd": round(self.other[1], 4),
                "other_pairs": self.other_pairs}


def library_pairs(refs: ReferenceSpectra, nominal_mass: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Similarities of replicate pairs (one compound) and of pairs of different compounds of one nominal mass."""
    rng = np.random.default_rng(SEED)
    comp = refs.compound
    n = len(comp)
    if n < 2:
        return np.zeros(0), np.zeros(0)
    i, j = np.triu_indices(n, k=1) if n <= 400 else _sample_pairs(rng, n)
    same = comp[i] == comp[j]
    mass = np.asarray(nominal_mass, dtype=float)[comp]
    other = ~same & np.isfinite(mass[i]) & (mass[i] == mass[j])
    si, sj = i[same], j[same]
    oi, oj = i[other], j[other]
    if n > 400:  # the random sample rarely hits replicates or isomers: add them group by group
        si, sj = _within_groups(comp, rng)
        key = np.where(np.isfinite(mass), mass, -1.0)
        gi, gj = _within_groups(key.astype(np.int64), rng)
        keep = (key[gi] >= 0) & (comp[gi] != comp[gj])
        oi, oj = gi[keep], gj[keep]
    sim_same = pair_similarity(refs.spectra, refs.spectra, si, sj) if len(si) else np.zeros(0)
    sim_other = pair_similarity(refs.spectra, refs.spectra, oi, oj) if len(oi) else np.zeros(0)
    return sim_same[np.isfinite(sim_same)], sim_other[np.isfinite(sim_other)]


def _sample_pairs(rng, n: int):
    k = min(MAX_PAIRS, n * (n - 1) // 2)
    i = rng.integers(0, n, k)
    j = rng.integers(0, n, k)
    ok = i != j
    return np.minimum(i, j)[ok], np.maximum(i, j)[ok]


def _within_groups(group: np.ndarray, rng) -> tuple[np.ndarray, np.ndarray]:
    """Pairs of items sharing a group label (all pairs of small groups; a seeded sample, MAX_PAIRS at most)."""
    order = np.argsort(group, kind="stable")
    g = group[order]
    starts = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])
    sizes = np.diff(np.r_[starts, len(g)])
    pi, pj = [], []
    for s, z in zip(starts, sizes):
        if z < 2:
            continue
        a, b = np.triu_indices(int(min(z, 60)), k=1)
        pi.append(order[s + a])
        pj.append(order[s + b])
    if not pi:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    i, j = np.concatenate(pi), np.concatenate(pj)
    if len(i) > MAX_PAIRS:
        pick = rng.choice(len(i), MAX_PAIRS, replace=False)
        i, j = i[pick], j[pick]
    return i, j


def calibrate_spectra(refs: ReferenceSpectra | None, nominal_mass: np.ndarray) -> SpectrumModel:
    """The likelihood-ratio model learned from a library's reference spectra (defaults where it has too few)."""
    if refs is None or len(refs) < 2:
        return SpectrumModel.default()
    same, other = library_pairs(refs, nominal_mass)
    return SpectrumModel.from_moments(_shrunk(same, DEFAULT_SAME), _shrunk(other, DEFAULT_OTHER), len(same), len(other))


__all__ = ["SpectrumModel", "calibrate_spectra", "library_pairs", "DEFAULT_SAME", "DEFAULT_OTHER", "CAP",
           "FLAG_LOG_RATIO"]
