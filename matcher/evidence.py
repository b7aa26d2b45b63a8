"""The evidence model: how candidates are ranked and what their probabilities mean.

For one peak with measured index :math:`x` the hypotheses are "the peak is
library compound *j*" for every entry *j* of the class, and **not in
library** (*N*). Bayes' rule with

* prior :math:`P(j) = \\pi / M` (M entries, :math:`\\pi` the prior that a
  peak is in the library) and :math:`P(N) = 1 - \\pi`;
* **index likelihood** under *j*: a normal density of the deviation,
  :math:`\\phi(x - \\mu_j;\\ s_j)` with :math:`s_j^2 = sd_j^2 + \\sigma_m^2`
  — the library entry's spread (wider when it rests on few observations,
  see :mod:`matcher.snapshot`) combined with the run's own index scatter
  :math:`\\sigma_m`;
* index likelihood under *N*: the density of *unlisted* compounds at
  :math:`x`, taken as the library's own index density smoothed with a
  Gaussian kernel of :data:`DENSITY_BANDWIDTH` units, mixed with a uniform
  part (:data:`UNIFORM_SHARE` over :data:`INDEX_SPAN`). Where the library is
  dense an unlisted compound is also likely, so a lone nearby entry does not
  win by default;

gives the weight of evidence of *j* against *N* (natural-log Bayes factor)

.. math::

   \\text{score}_j = \\ln\\phi(x-\\mu_j; s_j) - \\ln\\big[(1-\\beta)\\,g(x) + \\beta M/R\\big]
   + e^{mol}_j + e^{ions}_j + e^{hit}_j

where :math:`g(x)=\\sum_k K_h(x-\\mu_k)`. The posterior over the candidates
inside the window and *N* is then a softmax of
:math:`\\ln\\frac{\\pi}{1-\\pi} + \\text{score}_j + \\ln r_j` against 0
(:math:`r_j` < 1 for homologue predictions and cross-class entries).

Mass-spectral hints are likelihood ratios, each treated the same way under
every hypothesis:

* **molecular ion** m: under *j* with a formula, P(m = M_j) = 1 − ε and a
  different m has probability ε·q(m); under *N*, m follows q, the smoothed
  distribution of nominal masses in the class. Hence
  :math:`e^{mol} = \\ln[(1-\\varepsilon)/q(m)]` on agreement and
  :math:`\\ln\\varepsilon` on disagreement; 0 for an unknown formula.
* **key ions**: each of the compound's key ions is seen with probability
  p_seen under *j* and p_chance under *N*.
* **spectral-search hit** naming the candidate (name similarity ≥
  :data:`HIT_MATCH`): likelihood ratio 1 + HIT_GAIN · score/100.

The constants are stated assumptions, not fitted truths; ``matcher evaluate``
measures how well they serve a given library.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .candidates import Pairs
from .classes import DEFAULT_WINDOWS
from .hints import ion_count, ion_overlap
from .snapshot import ClassEntries, CompoundTable

#: Default index scatter of a measurement (index units), per class: 0.3 × default window.
DEFAULT_MEASUREMENT_SD: dict[str, float] = {k: 0.3 * v for k, v in DEFAULT_WINDOWS.items()}
#: Default prior probability that a peak is a compound of the library (single queries).
DEFAULT_PRIOR_IN_LIBRARY = 0.5
DENSITY_BANDWIDTH = 25.0  # index units
UNIFORM_SHARE = 0.2
INDEX_SPAN = 4000.0  # index units over which the uniform part spreads
MASS_ERROR = 0.05  # ε: molecular ion read wrong, absent, or a fragment taken for it
MASS_PSEUDOCOUNT = 0.5
MASS_RANGE = 600  # number of nominal masses the pseudocount spreads over
ION_SEEN = 0.8
ION_CHANCE = 0.25
HIT_MATCH = 0.9
HIT_GAIN = 4.0
PREDICTED_PRIOR = 0.25  # homologue predictions: a quarter of a measured entry's prior
CROSS_CLASS_PRIOR = 0.5

_LOG_SQRT_2PI = 0.5 * np.log(2.0 * np.pi)


@dataclass(frozen=True)
class Model:
    """Settings of the evidence model for one run (see module doc)."""

    measurement_sd: float
    prior_in_library: float = DEFAULT_PRIOR_IN_LIBRARY

    def with_(self, **kw) -> "Model":
        return replace(self, **kw)


@dataclass(frozen=True)
class Background:
    """What "not in library" looks like in one class: index density and mass distribution."""

    grid_start: float
    grid_step: float
    density: np.ndarray  # g(x) on the grid: sum of kernels, integrates to M
    entries: int
    mass_prob: dict = field(default_factory=dict)  # nominal mass -> q(m)
    mass_floor: float = 1.0 / MASS_RANGE

    def index_density(self, x: np.ndarray) -> np.ndarray:
        """(1-β) g(x) + β M / R, the not-in-library index term (in 'entries per unit')."""
        x = np.asarray(x, dtype=np.float64)
        pos = (x - self.grid_start) / self.grid_step
        g = np.interp(pos, np.arange(len(self.density)), self.density, left=0.0, right=0.0)
        return (1.0 - UNIFORM_SHARE) * g + UNIFORM_SHARE * max(self.entries, 1) / INDEX_SPAN

    def mass_probability(self, m: np.ndarray) -> np.ndarray:
        m = np.asarray(m, dtype=np.float64)
        out = np.full(m.shape, self.mass_floor)
        for mass, q in self.mass_prob.items():
            out[m == mass] = q
        return out


def background(entries: ClassEntries, compounds: CompoundTable) -> Background:
    """Build the not-in-library background of a class from its entries."""
    mu = entries.ri[~entries.predicted] if len(entries) else entries.ri
    m_count = len(mu)
    step = 1.0
    if m_count == 0:
        return Background(0.0, step, np.zeros(1), 0)
    h = DENSITY_BANDWIDTH
    start = float(np.floor(mu.min() - 6 * h))
    stop = float(np.ceil(mu.max() + 6 * h))
    n = int((stop - start) / step) + 1
    hist = np.bincount(np.clip(np.round((mu - start) / step).astype(np.int64), 0, n - 1), minlength=n).astype(float)
    k = np.arange(-int(6 * h / step), int(6 * h / step) + 1) * step
    kernel = np.exp(-0.5 * (k / h) ** 2) / (h * np.sqrt(2 * np.pi)) * step
    density = np.convolve(hist, kernel, mode="same") / step
    masses = compounds.nominal_mass[entries.compound[~entries.predicted]]
    masses = masses[np.isfinite(masses)]
    total = len(masses) + MASS_PSEUDOCOUNT * MASS_RANGE
    vals, counts = np.unique(masses, return_counts=True)
    mass_prob = {float(v): (c + MASS_PSEUDOCOUNT) / total for v, c in zip(vals, counts)}
    return Background(start, step, density, m_count, mass_prob, MASS_PSEUDOCOUNT / total)


@dataclass
class PeakHints:
    """Per-peak hint arrays (NaN / empty where a peak has no such hint)."""

    mol_ion: np.ndarray
    ion_masks: np.ndarray | None = None  # (P, ION_WORDS) uint64
    hit_similarity: np.ndarray | None = None  # per PAIR, filled by the caller
    hit_score: np.ndarray | None = None  # per peak, 0-100


@dataclass
class Scored:
    """Per-pair evidence and posterior; per-peak not-in-library."""

    delta: np.ndarray  # library_ri - x
    sd: np.ndarray  # combined spread s_j
    ev_index: np.ndarray
    ev_mol_ion: np.ndarray
    ev_ions: np.ndarray
    ev_hit: np.ndarray
    score: np.ndarray
    logw: np.ndarray  # log posterior weight against not-in-library (prior included)
    probability: np.ndarray
    not_in_library: np.ndarray  # per peak
    mass_state: np.ndarray  # per pair: 1 agree, -1 disagree, 0 no formula, -2 no mol ion given
    ions_state: np.ndarray  # per pair: fraction of key ions seen, NaN when not compared


def score_pairs(
    pairs: Pairs,
    x: np.ndarray,
    entries: ClassEntries,
    compounds: CompoundTable,
    bg: Background,
    model: Model,
    hints: PeakHints | None = None,
    compound_ion_masks: np.ndarray | None = None,
    prior_factor: np.ndarray | None = None,
    extra_sd: np.ndarray | float = 0.0,
) -> Scored:
    """Score every (peak, entry) pair at once and turn scores into posteriors per peak."""
    p = pairs.peak
    e = pairs.entry
    xp = np.asarray(x, dtype=np.float64)[p]
    mu = entries.ri[e]
    s = np.sqrt(entries.sd[e] ** 2 + model.measurement_sd ** 2 + np.asarray(extra_sd) ** 2)
    delta = mu - xp
    log_phi = -0.5 * (delta / s) ** 2 - np.log(s) - _LOG_SQRT_2PI
    ev_index = log_phi - np.log(bg.index_density(xp))

    comp = entries.compound[e]
    ev_mol = np.zeros(len(p))
    mass_state = np.full(len(p), -2, dtype=np.int8)
    ev_ions = np.zeros(len(p))
    ions_state = np.full(len(p), np.nan)
    ev_hit = np.zeros(len(p))
    if hints is not None and len(p):
        m = hints.mol_ion[p]
        given = np.isfinite(m)
        cm = compounds.nominal_mass[comp]
        known = given & np.isfinite(cm)
        agree = known & (m == cm)
        disagree = known & ~agree
        mass_state = np.where(given, np.where(agree, 1, np.where(disagree, -1, 0)), -2).astype(np.int8)
        if agree.any():
            ev_mol[agree] = np.log(1.0 - MASS_ERROR) - np.log(bg.mass_probability(m[agree]))
        ev_mol[disagree] = np.log(MASS_ERROR)
        if hints.ion_masks is not None and compound_ion_masks is not None:
            pm = hints.ion_masks[p]
            cmask = compound_ion_masks[comp]
            n_key = ion_count(cmask)
            n_obs = ion_count(pm)
            both = (n_key > 0) & (n_obs > 0)
            if both.any():
                seen = ion_overlap(pm[both], cmask[both])
                k = n_key[both]
                ev_ions[both] = seen * np.log(ION_SEEN / ION_CHANCE) + (k - seen) * np.log((1 - ION_SEEN) / (1 - ION_CHANCE))
                ions_state[both] = seen / k
        if hints.hit_similarity is not None:
            sc = hints.hit_score[p] if hints.hit_score is not None else np.full(len(p), np.nan)
            sc = np.where(np.isfinite(sc), np.clip(sc, 0, 100), 70.0)
            match = hints.hit_similarity >= HIT_MATCH
            ev_hit[match] = np.log1p(HIT_GAIN * sc[match] / 100.0)

    score = ev_index + ev_mol + ev_ions + ev_hit
    pi = float(np.clip(model.prior_in_library, 1e-6, 1 - 1e-6))
    logw = np.log(pi / (1 - pi)) + score
    if prior_factor is not None:
        logw = logw + np.log(prior_factor)
    prob, nil = softmax_with_null(logw, p, len(pairs.count))
    return Scored(delta, s, ev_index, ev_mol, ev_ions, ev_hit, score, logw, prob, nil, mass_state, ions_state)


def softmax_with_null(logw: np.ndarray, peak: np.ndarray, n_peaks: int):
    """Per-peak softmax of pair weights against a null weight of 0 (not in library).

    Returns (probability per pair, not_in_library per peak); per peak they sum to 1.

    >>> prob, nil = softmax_with_null(np.array([0.0, 0.0, np.log(3.0)]), np.array([0, 0, 1]), 3)
    >>> prob.round(4).tolist(), nil.round(4).tolist()
    ([0.3333, 0.3333, 0.75], [0.3333, 0.25, 1.0])
    """
    nil = np.ones(n_peaks)
    if len(logw) == 0:
        return np.zeros(0), nil
    mx = np.zeros(n_peaks)
    if np.all(peak[1:] >= peak[:-1]):  # grouped by peak (the usual case): a segmented maximum
        starts = np.flatnonzero(np.r_[True, peak[1:] != peak[:-1]])
        mx[peak[starts]] = np.maximum(np.maximum.reduceat(logw, starts), 0.0)
    else:
        np.maximum.at(mx, peak, logw)
    w = np.exp(logw - mx[peak])
    denom = np.bincount(peak, weights=w, minlength=n_peaks) + np.exp(-mx)
    prob = w / denom[peak]
    nil = np.exp(-mx) / denom
    return prob, nil
