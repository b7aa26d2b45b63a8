"""Ranked shortlists for any number of peaks at once: the engine behind query and screen.

Data flow: measured indices → window search on the class's sorted entries
(:mod:`matcher.identify.window_search`) → evidence and posteriors (:mod:`matcher.identify.evidence`)
→ optional cross-class fallback → ranks, top-K and flags (:mod:`matcher.identify.flags`).
Everything is done on whole arrays; the library is read once, before.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from matcher.identify import flags as F
from matcher.identify.window_search import half_widths, window_pairs
from matcher.classes import NEIGHBOUR_CLASS, check_class
from matcher.identify.assignment import assign
from matcher.identify.evidence import (
    CROSS_CLASS_PRIOR,
    HIT_MATCH,
    PREDICTED_PRIOR,
    Model,
    PeakHints,
    mass_background,
    score_pairs,
)
from matcher.identify.hints import hit_not_in_library, hit_similarity, ion_masks
from matcher.identify.unlisted import MassBackground
from matcher.store.snapshot import ClassEntries, CompoundTable, LibrarySnapshot, with_entries

#: The fallback looks in the neighbouring class when no candidate reaches this probability.
FALLBACK_BELOW = 0.2
#: The fallback window is this many times the home window.
FALLBACK_WIDEN = 2.0
#: A peak's best compound is "contested" when other peaks of the run hold at least this much of it.
CONTESTED_AT = 0.2


@dataclass(frozen=True)
class PreparedClass:
    """One class of the snapshot made ready for scoring (built once per screen)."""

    phase_class: str
    entries: ClassEntries
    compounds: CompoundTable
    mass_bg: MassBackground
    ion_masks: np.ndarray
    name_keys: tuple[tuple[str, ...], ...]
    predicted: int = 0

    library_keys: tuple[str, ...] = ()  # every name and synonym key of the measured library's compounds
    references: object | None = None  # matcher.chem.spectra.ReferenceSpectra (None: the library holds no spectra)
    spectrum_model: object | None = None  # matcher.identify.spectral_evidence.SpectrumModel, learned from them
    lookup: object | None = None  # the references' lookup table, built once


def prepare(snapshot: LibrarySnapshot, phase_class: str, *, homologues: bool = False) -> PreparedClass:
    """Entries, background and hint encodings of a class; homologue proposals merged on request."""
    from matcher.chem.names import matching_key

    phase_class = check_class(phase_class)
    entries = snapshot.entries(phase_class)
    compounds = snapshot.compounds
    n_measured = len(compounds)
    n_pred = 0
    if homologues and len(entries):
        from matcher.identify.homologues import predict

        extra, compounds = predict(entries, compounds)
        if len(extra):
            entries = with_entries(LibrarySnapshot(compounds, {phase_class: entries}), phase_class, extra).entries(phase_class)
            n_pred = len(extra)
    bg = mass_background(entries, compounds)
    masks = ion_masks(compounds.key_ions)
    from matcher.chem.names import short_greek_key

    # each name and synonym in full and with Greek letter names shortened (a-pinene meets alpha-pinene)
    keys = tuple(
        tuple(dict.fromkeys(v for k in [matching_key(n)] + [matching_key(s) for s in syn] if k
                            for v in (k, short_greek_key(k))))
        for n, syn in zip(compounds.name, compounds.synonyms)
    )
    library = tuple(dict.fromkeys(k for row in keys[:n_measured] for k in row))
    refs = model = lookup = None
    if snapshot.spectra is not None and len(snapshot.spectra):
        from matcher.chem.spectra import _lookup
        from matcher.identify.spectral_evidence import calibrate_spectra

        refs = snapshot.spectra
        model = calibrate_spectra(refs, snapshot.compounds.nominal_mass)
        lookup = _lookup(refs.spectra)
    return PreparedClass(phase_class, entries, compounds, bg, masks, keys, n_pred, library, refs, model, lookup)


@dataclass
class PeakInput:
    """Indices and optional hints of the peaks to shortlist (arrays of equal length)."""

    ri: np.ndarray
    mol_ion: np.ndarray | None = None
    ions: Sequence[Sequence[int]] | None = None
    hit: np.ndarray | None = None
    hit_match: np.ndarray | None = None
    extrapolated: np.ndarray | None = None
    unlisted: np.ndarray | None = None  # λ_U per peak (unlisted peaks per index unit); None: the model's field
    spectra: object | None = None  # matcher.chem.spectra.SpectrumSet, one row per peak (None: no spectra)
    second: object | None = None  # matcher.identify.two_columns.SecondColumn (a two-column screen), else None

    def __len__(self) -> int:
        return len(self.ri)


@dataclass
class Shortlist:
    """Rows sorted by peak then rank; a peak without candidates has one row with rank 0."""

    columns: dict[str, np.ndarray]
    not_in_library: np.ndarray  # per peak
    top_probability: np.ndarray  # per peak (0 when no candidate)
    candidate_count: np.ndarray  # per peak, before top-K
    window: np.ndarray  # per peak half-width
    notes: list[str] = field(default_factory=list)

    def rows_of(self, peak: int) -> np.ndarray:
        return np.flatnonzero(self.columns["peak"] == peak)


def _hints(peaks: PeakInput, pairs_peak: np.ndarray, pairs_compound: np.ndarray, prep: PreparedClass) -> PeakHints:
    from matcher.chem.names import matching_key

    n = len(peaks)
    mol = np.full(n, np.nan) if peaks.mol_ion is None else np.asarray(peaks.mol_ion, dtype=float)
    masks = None
    if peaks.ions is not None and any(len(i) for i in peaks.ions):
        masks = ion_masks(peaks.ions)
    sim = None
    if peaks.hit is not None:
        hits = np.asarray(peaks.hit, dtype=object)
        if any(hits.tolist()):
            sim = hit_similarity(hits, pairs_peak, pairs_compound, prep.name_keys, matching_key)
    score = None if peaks.hit_match is None else np.asarray(peaks.hit_match, dtype=float)
    elsewhere = None
    if sim is not None:
        elsewhere = hit_not_in_library(np.asarray(peaks.hit, dtype=object), prep.library_keys, matching_key, HIT_MATCH)
    return PeakHints(mol, masks, sim, score, elsewhere, **spectrum_hints(peaks, prep))


def spectrum_hints(peaks: PeakInput, prep: PreparedClass) -> dict:
    """The spectral part of :class:`PeakHints` (empty when the peaks or the library have no spectra)."""
    if peaks.spectra is None or prep.references is None:
        return {}
    return {"spectra": peaks.spectra, "references": prep.references, "spectrum_model": prep.spectrum_model,
            "lookup": prep.lookup}


def score_class(prep: PreparedClass, peaks: PeakInput, sel: np.ndarray, w: np.ndarray, model: Model,
                bg: MassBackground, extra_sd: float | np.ndarray, prior: float, lam: np.ndarray):
    """Window search and evidence of the peaks ``sel`` in one class: (pairs, scored, peak of each pair, hit agrees)."""
    x = np.asarray(peaks.ri, dtype=float)[sel]
    pairs = window_pairs(prep.entries.ri, x, w[sel])
    sub = PeakInput(
        x,
        None if peaks.mol_ion is None else np.asarray(peaks.mol_ion, dtype=float)[sel],
        None if peaks.ions is None else [peaks.ions[i] for i in sel],
        None if peaks.hit is None else np.asarray(peaks.hit, dtype=object)[sel],
        None if peaks.hit_match is None else np.asarray(peaks.hit_match, dtype=float)[sel],
        spectra=None if peaks.spectra is None else peaks.spectra.take(sel),
    )
    comp = prep.entries.compound[pairs.entry]
    hints = _hints(sub, pairs.peak, comp, prep)
    factor = np.where(prep.entries.predicted[pairs.entry], PREDICTED_PRIOR, 1.0) * prior
    esd = extra_sd if np.isscalar(extra_sd) else np.asarray(extra_sd)[sel][pairs.peak]
    scored = score_pairs(pairs, x, prep.entries, prep.compounds, bg, model, hints, prep.ion_masks, factor, esd,
                         unlisted_density=lam[sel])
    agrees = np.zeros(len(pairs), dtype=bool) if hints.hit_similarity is None else hints.hit_similarity >= HIT_MATCH
    return pairs, scored, sel[pairs.peak], agrees


def shortlist(
    home: PreparedClass,
    peaks: PeakInput,
    model: Model,
    *,
    window: float | None = None,
    window_percent: float | None = None,
    top: int | None = None,
    neighbour: PreparedClass | None = None,
    lead_only: np.ndarray | None = None,
) -> Shortlist:
    """Shortlist every peak against the home class (and the neighbour class as fallback).

    ``lead_only`` (a boolean per peak) keeps only the leading row of those peaks
    (a chunk's halo, see :func:`matcher.identify.screening.index_chunks`): they
    take full part in the joint posterior and the run flags, but their other
    rows are never built.

    ``neighbour`` enables the cross-class fallback: peaks whose best home
    candidate stays below :data:`FALLBACK_BELOW` are also searched in the
    neighbouring class with a window :data:`FALLBACK_WIDEN` times wider; those
    candidates carry an extra spread of one home window (the unknown offset
    between the classes) and half the prior, and are flagged ``cross-class``.
    """
    n = len(peaks)
    x = np.asarray(peaks.ri, dtype=float)
    w = half_widths(x, home.phase_class, window, window_percent)
    all_peaks = np.arange(n)
    lam = model.field().density(x) if peaks.unlisted is None else np.asarray(peaks.unlisted, dtype=float)
    pairs, sc, gpeak, hitsim = score_class(home, peaks, all_peaks, w, model, home.mass_bg, 0.0, 1.0, lam)
    ent = pairs.entry
    cls_arr = np.zeros(len(ent), dtype=np.int8)  # 0 home, 1 neighbour
    logw, delta, sd = sc.logw, sc.delta, sc.sd
    evs = [sc.evidence_index, sc.evidence_mol_ion, sc.evidence_ions, sc.evidence_hit, sc.score, sc.evidence_spectrum,
           sc.spectrum_similarity, sc.spectrum_reference]
    mstate, istate = sc.mass_state, sc.ions_state
    comp_key = home.entries.compound[ent]
    second = peaks.second
    if second is not None:  # the second column's index evidence joins the odds (matcher.identify.two_columns)
        e2 = second.evidence(gpeak, comp_key)["evidence"]
        logw = logw + e2
        evs[4] = evs[4] + e2
    prob, nil = assign(logw, gpeak, comp_key, n, exclusive=model.exclusive)
    notes: list[str] = []
    if neighbour is not None and n:
        best = np.zeros(n)
        np.maximum.at(best, gpeak, prob) if len(prob) else None
        need = np.flatnonzero(best < FALLBACK_BELOW)
        if len(need) and len(neighbour.entries):
            p2, s2, g2, h2 = score_class(neighbour, peaks, need, w * FALLBACK_WIDEN, model, home.mass_bg, w,
                                          CROSS_CLASS_PRIOR, lam)
            if len(p2):
                gpeak = np.concatenate([gpeak, g2])
                ent = np.concatenate([ent, p2.entry])
                cls_arr = np.concatenate([cls_arr, np.ones(len(p2), dtype=np.int8)])
                e2 = 0.0 if second is None else second.evidence(g2, neighbour.entries.compound[p2.entry])["evidence"]
                logw = np.concatenate([logw, s2.logw + e2])
                delta = np.concatenate([delta, s2.delta])
                sd = np.concatenate([sd, s2.sd])
                evs = [np.concatenate([a, b]) for a, b in zip(evs, [s2.evidence_index, s2.evidence_mol_ion, s2.evidence_ions,
                                                                    s2.evidence_hit, s2.score + e2, s2.evidence_spectrum,
                                                                    s2.spectrum_similarity, s2.spectrum_reference])]
                mstate = np.concatenate([mstate, s2.mass_state])
                istate = np.concatenate([istate, s2.ions_state])
                hitsim = np.concatenate([hitsim, h2])
                comp_key = np.concatenate([comp_key, neighbour.entries.compound[p2.entry]])
                prob, nil = assign(logw, gpeak, comp_key, n, exclusive=model.exclusive)
                notes.append(f"cross-class fallback: {len(np.unique(g2))} peak(s) also searched in {neighbour.phase_class}")

    # rank within each peak by probability: one float sort key (peak, then descending probability)
    count = np.bincount(gpeak, minlength=n).astype(np.int64)
    starts = np.cumsum(count) - count
    order = np.argsort(gpeak + 0.5 * (1.0 - prob), kind="stable")
    rank_sorted = np.arange(len(gpeak)) - starts[gpeak[order]] + 1
    top1 = np.zeros(n)
    top2 = np.zeros(n)
    if len(gpeak):
        r1, r2 = order[rank_sorted == 1], order[rank_sorted == 2]
        top1[gpeak[r1]] = prob[r1]
        top2[gpeak[r2]] = prob[r2]
    # how much of each peak's best compound the other peaks of the run hold
    held = np.bincount(comp_key, weights=prob, minlength=int(comp_key.max()) + 1 if len(comp_key) else 0)
    elsewhere = np.zeros(n)
    if len(gpeak):
        elsewhere[gpeak[r1]] = held[comp_key[r1]] - prob[r1]
    kept = rank_sorted <= top if top else np.ones(len(order), dtype=bool)
    if lead_only is not None and len(order):
        kept &= (rank_sorted <= 1) | ~np.asarray(lead_only, dtype=bool)[gpeak[order]]
    keep = order[kept]  # rows kept, already grouped by peak and ranked
    rank = np.zeros(len(gpeak), dtype=np.int64)
    rank[order] = rank_sorted
    # rows for candidates, plus one row per peak without any
    empty = np.flatnonzero(count == 0)
    kp = np.concatenate([gpeak[keep], empty])
    o2 = np.argsort(kp, kind="stable")

    def cat(values, fill):
        v = np.asarray(values)[keep]
        filler = np.full(len(empty), fill, dtype=v.dtype if v.dtype != object else object)
        return np.concatenate([v, filler])[o2]

    ent_k = cat(ent, -1)
    cls_k = cat(cls_arr, -1)

    def entry_attr(attr: str, fill):
        """An entry attribute per row, from the home or the neighbour class; ``fill`` for peaks without one."""
        return np.where(ent_k < 0, fill, np.where(cls_k == 1, _take(neighbour, attr, ent_k), _take(home, attr, ent_k)))

    comp_row = entry_attr("compound", -1).astype(np.int64)
    lib_ri = entry_attr("ri", np.nan)
    lib_sd = entry_attr("sd", np.nan)
    lib_n = entry_attr("n", 0).astype(np.int64)
    predicted = entry_attr("predicted", False).astype(bool) & (cls_k != 1)
    peak_col = kp[o2]
    comps = home.compounds
    safe_row = np.clip(comp_row, 0, len(comps) - 1) if len(comps) else comp_row
    def comp_attr(attr, fill):
        if not len(comps):
            return np.full(len(comp_row), fill, dtype=object)
        return np.where(comp_row < 0, fill, getattr(comps, attr)[safe_row])

    cols = {
        "peak": peak_col,
        "rank": cat(rank, 0).astype(np.int64),
        "compound": comp_row,
        "name": comp_attr("name", ""),
        "cas": comp_attr("cas", ""),
        "formula": comp_attr("formula", ""),
        "nominal_mass": np.where(comp_row < 0, np.nan, comps.nominal_mass[safe_row] if len(comps) else np.nan).astype(float),
        "library_ri": lib_ri,
        "library_spread": lib_sd,
        "library_observations": lib_n,
        "delta_ri": -cat(delta, np.nan),  # measured − library
        "sd": cat(sd, np.nan),
        "evidence_index": cat(evs[0], 0.0),
        "evidence_mol_ion": cat(evs[1], 0.0),
        "evidence_ions": cat(evs[2], 0.0),
        "evidence_hit": cat(evs[3], 0.0),
        "evidence_spectrum": cat(evs[5], 0.0),
        "spectrum_similarity": cat(evs[6], np.nan),
        "spectrum_reference": cat(evs[7], -1),
        "score": cat(evs[4], np.nan),
        "probability": cat(prob, 0.0),
        "cross_class": cls_k == 1,
        "predicted": predicted,
    }
    cols["flags"] = F.row_flags(
        cols,
        window=w[peak_col],
        mass_state=cat(mstate, -2),
        ions_state=cat(istate, np.nan),
        hit_agrees=cat(hitsim, False).astype(bool),
        extrapolated=None if peaks.extrapolated is None else np.asarray(peaks.extrapolated, dtype=bool)[peak_col],
        top1=top1[peak_col],
        top2=top2[peak_col],
        not_in_library=nil[peak_col],
        has_candidate=count[peak_col] > 0,
        contested=elsewhere[peak_col] >= CONTESTED_AT,
        spectrum_evidence=np.where(np.isfinite(cols["spectrum_similarity"]), cols["evidence_spectrum"], np.nan),
    )
    cols["held_elsewhere"] = elsewhere[peak_col]
    if second is not None:
        second_columns(cols, second)
    return Shortlist(cols, nil, top1, count, w, notes)


def second_columns(cols: dict, second) -> None:
    """The second column's outputs and flags on a shortlist's rows (see :mod:`matcher.identify.two_columns`)."""
    peak, rank = cols["peak"], cols["rank"]
    ev = second.evidence(peak, cols["compound"])
    cand = rank > 0
    partner = second.partner[peak]
    cols["second_peak"] = np.where(partner >= 0, second.peak_id[peak], "").astype(object)
    cols["second_ri"] = np.where(partner >= 0, second.ri[peak], np.nan)
    cols["second_pair_probability"] = second.pair_probability[peak]
    cols["second_library_ri"] = np.where(cand, ev["library_ri"], np.nan)
    cols["second_delta_ri"] = np.where(cand, ev["delta_ri"], np.nan)
    cols["evidence_second"] = np.where(cand, ev["evidence"], 0.0)
    lead = rank <= 1
    flags = cols["flags"]
    flags = F.add_flag(flags, cand & ev["inside"], "columns-agree", review=False)
    disagree = cand & ev["paired"] & ev["listed"] & ~ev["inside"]
    flags = F.add_flag(flags, disagree & ~lead, "second-column-disagrees", review=False)
    flags = F.add_flag(flags, disagree & lead, "second-column-disagrees")
    flags = F.add_flag(flags, cand & ev["paired"] & ~ev["listed"], "not-on-second-class", review=False)
    flags = F.add_flag(flags, (partner < 0) & ~lead, "unpaired", review=False)
    flags = F.add_flag(flags, (partner < 0) & lead, "unpaired")
    cols["flags"] = flags


def _take(prep: PreparedClass | None, attr: str, idx: np.ndarray) -> np.ndarray:
    if prep is None or not len(prep.entries):
        return np.zeros(len(idx))
    arr = getattr(prep.entries, attr)
    return arr[np.clip(idx, 0, len(arr) - 1)]


def neighbour_of(snapshot: LibrarySnapshot, phase_class: str) -> PreparedClass:
    """The prepared neighbouring class used by the cross-class fallback."""
    return prepare(snapshot, NEIGHBOUR_CLASS[check_class(phase_class)])
