"""The evidence model: how candidates are ranked and what their probabilities mean.

For one peak with measured index :math:`x` the hypotheses are "the peak is
library compound *j*" for every entry *j* of the class, and **not in
library** (*N*). Bayes' rule with

* prior :math:`P(j) = \\pi / M` (M entries, :math:`\\pi` the prior that a
  peak is in the library) and :math:`P(N) = 1 - \\pi`;
* **index likelihood** under *j*: a normal density of the deviation,
  :math:`\\phi(x - \\mu_j;\\ s_j)` with :math:`s_j^2 = sd_j^2 + \\sigma_m^2`
  — the library entry's spread (wider when it rests on few observations,
  see :mod:`matcher.store.snapshot`) combined with the run's own index scatter
  :math:`\\sigma_m`;
* index likelihood under *N*: the intensity :math:`\\lambda_U(x)` of
  unlisted peaks at x, estimated from the run itself (or the crowding prior
  for a single query), see :mod:`matcher.identify.unlisted`;
* prior: each listed compound is present in the sample with probability
  :math:`\\pi` (estimated from the run, :mod:`matcher.identify.run_model`;
  :data:`DEFAULT_PRESENCE` for a single query);

gives the weight of evidence of *j* against *N* (natural-log Bayes factor)

.. math::

   \\text{score}_j = \\ln\\phi(x-\\mu_j; s_j) - \\ln\\lambda_U(x)
   + e^{mol}_j + e^{ions}_j + e^{hit}_j + e^{spec}_j

and the log odds of *j* against *N*,
:math:`\\ln\\frac{\\pi}{1-\\pi} + \\text{score}_j + \\ln r_j`
(:math:`r_j` < 1 for homologue predictions and cross-class entries). For
one peak the posterior over the candidates inside the window and *N* is a
softmax of these odds against 0; over a run the candidates compete for
peaks, one compound explaining at most one peak (:mod:`matcher.identify.assignment`).

Mass-spectral hints are likelihood ratios, each treated the same way under
every hypothesis:

* **molecular ion** m: under *j* with a formula, P(m = M_j) = 1 − ε and a
  different m has probability ε·q(m | x); under *N*, m follows q(m | x), how
  common that nominal mass is among compounds eluting near x
  (:class:`matcher.identify.unlisted.MassBackground`). Hence
  :math:`e^{mol} = \\ln[(1-\\varepsilon)/q(m \\mid x)]` on agreement and
  :math:`\\ln\\varepsilon` on disagreement; 0 for an unknown formula.
* **key ions**: each of the compound's key ions is seen with probability
  p_seen under *j* and p_chance under *N*.
* **spectral-search hit** naming the candidate (name similarity ≥
  :data:`HIT_MATCH`): likelihood ratio 1 + HIT_GAIN · score/100. A hit that
  names a compound the library does not hold at all is evidence for *N*:
  every candidate gets the inverse ratio, 1 / (1 + HIT_GAIN · score/100).

* **mass spectrum**: when the peak has a spectrum and the candidate has
  reference spectra, the best Stein & Scott similarity *s* over them
  (:mod:`matcher.chem.spectra`) gives :math:`e^{spec} = \\ln f_{same}(s) -
  \\ln f_{other}(s)`, the likelihood ratio calibrated on the library's own
  spectra (:mod:`matcher.identify.spectral_evidence`); 0 where either side has
  no spectrum. The molecular ion and key ions are peaks of that spectrum, so
  they are not counted twice: where spectra were compared, the key-ion term
  is 0, and the molecular-ion term is 0 when the peak's spectrum shows a peak
  at the stated molecular ion (a molecular ion known from elsewhere, absent
  from the spectrum, still counts).

The constants are stated assumptions, not fitted truths; ``matcher evaluate``
measures how well they serve a given library.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from matcher.identify.window_search import Pairs
from matcher.chem.spectra import ReferenceSpectra, SpectrumSet, best_similarity
from matcher.classes import DEFAULT_WINDOWS
from matcher.identify.hints import ion_count, ion_overlap
from matcher.store.snapshot import ClassEntries, CompoundTable
from matcher.identify.unlisted import MassBackground, UnlistedField, crowding_density

#: Default index scatter of a measurement (index units), per class: 0.3 × default window.
DEFAULT_MEASUREMENT_SD: dict[str, float] = {k: 0.3 * v for k, v in DEFAULT_WINDOWS.items()}
#: Default probability that a listed compound is present in the sample (single queries, short runs).
DEFAULT_PRESENCE = 0.5
MASS_ERROR = 0.05  # ε: molecular ion read wrong, absent, or a fragment taken for it
ION_SEEN = 0.8
ION_CHANCE = 0.25
HIT_MATCH = 0.9
HIT_GAIN = 4.0
PREDICTED_PRIOR = 0.25  # homologue predictions: a quarter of a measured entry's prior
CROSS_CLASS_PRIOR = 0.5

_LOG_SQRT_2PI = 0.5 * np.log(2.0 * np.pi)


@dataclass(frozen=True)
class Model:
    """Settings of the evidence model for one run (see module doc).

    ``index_scatter`` is the run's index scatter σ_m; ``presence`` the
    probability π that a listed compound is in the sample; ``unlisted`` the
    intensity of unlisted peaks (:class:`matcher.identify.unlisted.UnlistedField`;
    ``None`` means the flat default crowding); ``exclusive``: one compound
    explains at most one peak of the run.
    """

    index_scatter: float
    presence: float = DEFAULT_PRESENCE
    unlisted: UnlistedField | None = None
    exclusive: bool = True

    def with_(self, **kw) -> "Model":
        return replace(self, **kw)

    def field(self) -> UnlistedField:
        return self.unlisted if self.unlisted is not None else UnlistedField.flat(crowding_density(None))


def mass_background(entries: ClassEntries, compounds: CompoundTable) -> MassBackground:
    """q(m | x) of a class from its measured entries (see :mod:`matcher.identify.unlisted`)."""
    ok = ~entries.predicted
    return MassBackground(entries.ri[ok], compounds.nominal_mass[entries.compound[ok]])


@dataclass
class PeakHints:
    """Per-peak hint arrays (NaN / empty where a peak has no such hint)."""

    mol_ion: np.ndarray
    ion_masks: np.ndarray | None = None  # (P, ION_WORDS) uint64
    hit_similarity: np.ndarray | None = None  # per PAIR, filled by the caller
    hit_match: np.ndarray | None = None  # per peak, 0-100
    hit_unlisted: np.ndarray | None = None  # per peak: the hit names no compound of the library
    spectra: SpectrumSet | None = None  # per peak (a row without peaks: no spectrum)
    references: ReferenceSpectra | None = None  # the library's reference spectra
    spectrum_model: object | None = None  # matcher.identify.spectral_evidence.SpectrumModel
    lookup: object | None = None  # reusable lookup table of the references (chem.spectra._lookup)
    spectrum_similarity: np.ndarray | None = None  # per PAIR, when the caller computed it already
    spectrum_reference: np.ndarray | None = None  # per PAIR: reference spectrum row behind it (-1: none)

    def compares_spectra(self) -> bool:
        return self.spectra is not None and self.references is not None and len(self.references) > 0 \
            and bool(self.spectra.present.any())


@dataclass
class Scored:
    """Per-pair evidence and log odds; per-peak unlisted intensity."""

    delta: np.ndarray  # library_ri - x
    sd: np.ndarray  # combined spread s_j
    evidence_index: np.ndarray
    evidence_mol_ion: np.ndarray
    evidence_ions: np.ndarray
    evidence_hit: np.ndarray
    evidence_spectrum: np.ndarray
    spectrum_similarity: np.ndarray  # per pair, NaN where no spectra were compared
    spectrum_reference: np.ndarray  # per pair: row of the reference spectrum that gave it, -1 when none
    score: np.ndarray
    logw: np.ndarray  # log odds against not-in-library (prior included)
    mass_state: np.ndarray  # per pair: 1 agree, -1 disagree, 0 no formula, -2 no mol ion given
    ions_state: np.ndarray  # per pair: fraction of key ions seen, NaN when not compared
    unlisted_density: np.ndarray  # per peak: λ_U used


def _hit_ratio(score: np.ndarray) -> np.ndarray:
    sc = np.where(np.isfinite(score), np.clip(score, 0, 100), 70.0)
    return np.log1p(HIT_GAIN * sc / 100.0)


def score_pairs(
    pairs: Pairs,
    x: np.ndarray,
    entries: ClassEntries,
    compounds: CompoundTable,
    mass_bg: MassBackground,
    model: Model,
    hints: PeakHints | None = None,
    compound_ion_masks: np.ndarray | None = None,
    prior_factor: np.ndarray | None = None,
    extra_sd: np.ndarray | float = 0.0,
    unlisted_density: np.ndarray | None = None,
) -> Scored:
    """Score every (peak, entry) pair at once: evidence terms and log odds against not-in-library.

    ``unlisted_density`` is λ_U per peak (from ``model``'s field when not given).
    """
    p = pairs.peak
    e = pairs.entry
    xall = np.asarray(x, dtype=np.float64)
    lam = model.field().density(xall) if unlisted_density is None else np.asarray(unlisted_density, float)
    xp = xall[p]
    mu = entries.ri[e]
    s = np.sqrt(entries.sd[e] ** 2 + model.index_scatter ** 2 + np.asarray(extra_sd) ** 2)
    delta = mu - xp
    log_phi = -0.5 * (delta / s) ** 2 - np.log(s) - _LOG_SQRT_2PI
    evidence_index = log_phi - np.log(lam[p])

    comp = entries.compound[e]
    ev_mol = np.zeros(len(p))
    mass_state = np.full(len(p), -2, dtype=np.int8)
    evidence_ions = np.zeros(len(p))
    ions_state = np.full(len(p), np.nan)
    evidence_hit = np.zeros(len(p))
    if hints is not None and len(p):
        m = hints.mol_ion[p]
        given = np.isfinite(m)
        cm = compounds.nominal_mass[comp]
        known = given & np.isfinite(cm)
        agree = known & (m == cm)
        disagree = known & ~agree
        mass_state = np.where(given, np.where(agree, 1, np.where(disagree, -1, 0)), -2).astype(np.int8)
        if agree.any():
            ev_mol[agree] = np.log(1.0 - MASS_ERROR) - np.log(mass_bg.probability(m[agree], xp[agree]))
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
                evidence_ions[both] = seen * np.log(ION_SEEN / ION_CHANCE) + (k - seen) * np.log((1 - ION_SEEN) / (1 - ION_CHANCE))
                ions_state[both] = seen / k
        sc = hints.hit_match[p] if hints.hit_match is not None else np.full(len(p), np.nan)
        if hints.hit_similarity is not None:
            match = hints.hit_similarity >= HIT_MATCH
            evidence_hit[match] = _hit_ratio(sc[match])
        if hints.hit_unlisted is not None:
            elsewhere = np.asarray(hints.hit_unlisted, dtype=bool)[p]
            evidence_hit[elsewhere] = -_hit_ratio(sc[elsewhere])
    ev_spec = np.zeros(len(p))
    sim = np.full(len(p), np.nan)
    ref = np.full(len(p), -1, dtype=np.int64)
    if hints is not None and len(p) and hints.compares_spectra():
        if hints.spectrum_similarity is not None:
            sim = np.asarray(hints.spectrum_similarity, dtype=float)
            ref = hints.spectrum_reference if hints.spectrum_reference is not None else ref
        else:
            sim, ref = best_similarity(hints.spectra, hints.references, p, comp, lookup=hints.lookup)
        compared = np.isfinite(sim)
        if compared.any():
            from matcher.identify.spectral_evidence import SpectrumModel

            sm = hints.spectrum_model if hints.spectrum_model is not None else SpectrumModel.default()
            ev_spec = sm.log_ratio(sim)
            evidence_ions[compared] = 0.0  # key ions are peaks of the compared spectrum
            shown = spectrum_shows(hints.spectra, hints.mol_ion)[p]
            ev_mol[compared & shown] = 0.0  # so is a molecular ion the spectrum shows

    score = evidence_index + ev_mol + evidence_ions + evidence_hit + ev_spec
    pi = float(np.clip(model.presence, 1e-6, 1 - 1e-6))
    logw = np.log(pi / (1 - pi)) + score
    if prior_factor is not None:
        logw = logw + np.log(prior_factor)
    return Scored(delta, s, evidence_index, ev_mol, evidence_ions, evidence_hit, ev_spec, sim, ref, score, logw, mass_state, ions_state,
                  lam)


def spectrum_shows(spectra: SpectrumSet, mz: np.ndarray) -> np.ndarray:
    """Per peak: its spectrum has a peak at the nominal m/z ``mz`` (False where mz is NaN or no spectrum)."""
    mz = np.asarray(mz, dtype=float)
    out = np.zeros(len(mz), dtype=bool)
    ok = np.flatnonzero(np.isfinite(mz) & (spectra.counts[: len(mz)] > 0))
    if not len(ok):
        return out
    width = int(max(spectra.mz.max() if len(spectra.mz) else 0, np.nanmax(mz[ok]))) + 2
    rows = np.repeat(np.arange(len(spectra), dtype=np.int64), spectra.counts)
    keys = rows * width + spectra.mz  # ascending
    want = ok * width + np.rint(mz[ok]).astype(np.int64)
    i = np.clip(np.searchsorted(keys, want), 0, max(len(keys) - 1, 0))
    out[ok] = keys[i] == want if len(keys) else False
    return out


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
