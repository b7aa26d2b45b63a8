"""Self-check of a house library: how far to trust its shortlists.

``matcher evaluate`` resamples the user's own library:

* **leave one out** – for every compound with two or more observations in a
  class, one observation is held out, the compound's entry is summarised again
  from the rest (as :mod:`matcher.store.snapshot` does), and the held-out value
  (plus optional Gaussian noise of ``noise`` units) is queried against the
  library. The rank of the true compound gives the **top-1** and **top-3**
  rates and the **shortlist coverage** (true compound inside the window);
* **removal** – compounds are taken out entirely and their centres queried:
  the **not-in-library detection rate** is how often "not in library" is the
  most probable answer, and the mean top probability shows whether absent
  compounds get high probabilities just because something lies nearby;
* the index scatter of a query beyond the entry's own predictive spread is
  the added noise (a held-out observation comes from the same lab), unless
  ``index_scatter`` says otherwise;
* each query is scored as ``matcher query`` scores it: the presence prior
  and the crowding prior (``crowding``, default ``moderate``) of
  :mod:`matcher.identify.unlisted`;
* :func:`evaluate_crowded` is the harder check: half the library removed and
  everything screened together as one run (``matcher evaluate --crowded``);
* **expected calibration error** (ECE) of the top probability over both kinds
  of query: the mean gap, in ten equal bins, between the stated top
  probability and the observed hit rate;
* **confusable pairs** – entries inside each other's window with the same
  nominal mass: pairs that need a second column or an authentic standard;
* **with spectra** (when the library holds reference spectra): the same
  queries scored with index and spectrum (no molecular ion). A leave-one-out
  query of a compound with two or more reference spectra carries one of them,
  held out of the library for that query (compared only with the compound's
  other spectra and with other compounds'); a compound with a single spectrum
  is queried without one (comparing it with itself would prove nothing). A
  removed compound's query carries its first spectrum. The likelihood-ratio
  model is learned from the whole library's spectra, held-out ones included.

All queries of a class are scored in one vectorised pass.

>>> from matcher.store.snapshot import CompoundTable, build_snapshot
>>> comp = CompoundTable.from_records([{"id": i, "name": f"c{i}"} for i in range(1, 4)])
>>> snap = build_snapshot(comp, np.array([1, 1, 2, 2, 3, 3]), np.array(["polar"] * 6),
...                       np.array([1200.0, 1202, 1400, 1401, 1600, 1603]))
>>> report = evaluate(snap)
>>> report["top1"], report["queries"]["leave_one_out"]
(1.0, 6)
"""

from __future__ import annotations

import numpy as np

from matcher.identify.window_search import Pairs, half_widths, window_pairs
from matcher.classes import DEFAULT_WINDOWS, PHASE_CLASSES, check_class
from matcher.identify.evidence import Model, PeakHints, mass_background, score_pairs, softmax_with_null
from matcher.identify.unlisted import UnlistedField, crowding_density
from matcher.store.snapshot import SPREAD_FLOOR, ClassEntries, LibrarySnapshot, summarise

MAX_QUERIES = 3000  # per class and kind; a seeded sample beyond this
SEED = 20261201


def probability_bins(prob: np.ndarray, correct: np.ndarray, bins: int = 10) -> list[tuple[float, float, int, float, float]]:
    """Per non-empty bin of equal width on 0-1: (lower edge, upper edge, count, mean probability, hit rate).

    >>> probability_bins(np.array([0.05, 0.95, 0.85]), np.array([False, True, False]), bins=2)
    [(0.0, 0.5, 1, 0.05, 0.0), (0.5, 1.0, 2, 0.8999999999999999, 0.5)]
    """
    prob = np.asarray(prob, dtype=float)
    correct = np.asarray(correct, dtype=bool)
    edges = np.linspace(0, 1, bins + 1)
    idx = np.clip(np.digitize(prob, edges[1:-1]), 0, bins - 1)
    out = []
    for b in range(bins):
        s = idx == b
        if s.any():
            out.append((float(edges[b]), float(edges[b + 1]), int(s.sum()), float(prob[s].mean()), float(correct[s].mean())))
    return out


def _ece(prob: np.ndarray, correct: np.ndarray, bins: int = 10) -> float:
    """Expected calibration error: Σ over bins of share × |mean probability − hit rate|."""
    if len(prob) == 0:
        return float("nan")
    return float(sum(n / len(prob) * abs(m - h) for _, _, n, m, h in probability_bins(prob, correct, bins)))


def _held_out_similarity(refs, held: np.ndarray, peak: np.ndarray, compound: np.ndarray) -> np.ndarray:
    """Per pair: best similarity of the query's held-out spectrum (``held[peak]``, -1 none) with the
    compound's other reference spectra (NaN where nothing is compared)."""
    from matcher.chem.spectra import pair_similarity

    best = np.full(len(peak), np.nan)
    item, rows = refs.rows_of(compound)
    q = held[peak[item]]
    ok = (q >= 0) & (rows != q)
    if ok.any():
        sim = pair_similarity(refs.spectra, refs.spectra, q[ok], rows[ok])
        np.fmax.at(best, item[ok], sim)
    return best


def _score_queries(entries: ClassEntries, compounds, bg, model, x, own, replace_ri, replace_sd, w, mol_ion=None,
                   spectra=None):
    """Score queries whose own compound's entry is replaced (LOO) or removed (NaN replacement)."""
    m = len(entries)
    base = window_pairs(entries.ri, x, w)
    keep = entries.compound[base.entry] != own[base.peak]
    peak = base.peak[keep]
    entry = base.entry[keep]
    q = np.arange(len(x))
    has_own = np.isfinite(replace_ri) & (np.abs(x - np.nan_to_num(replace_ri, nan=np.inf)) <= w)
    peak = np.concatenate([peak, q[has_own]])
    entry = np.concatenate([entry, m + q[has_own]])
    order = np.argsort(peak, kind="stable")
    peak, entry = peak[order], entry[order]
    pairs = Pairs(peak, entry, np.bincount(peak, minlength=len(x)).astype(np.int64))
    ext = ClassEntries(
        entries.phase_class,
        np.concatenate([entries.ri, np.nan_to_num(replace_ri)]),
        np.concatenate([entries.sd, np.nan_to_num(replace_sd, nan=1.0)]),
        np.concatenate([entries.n, np.ones(len(x), dtype=np.int64)]),
        np.concatenate([entries.compound, own]),
        np.concatenate([entries.predicted, np.zeros(len(x), dtype=bool)]),
    )
    hints = None if mol_ion is None else PeakHints(mol_ion)
    if spectra is not None:  # (references, held-out spectrum row per query, likelihood-ratio model)
        refs, held, smodel = spectra
        hints = PeakHints(np.full(len(x), np.nan), spectra=refs.spectra.take(held), references=refs,
                          spectrum_model=smodel,
                          spectrum_similarity=_held_out_similarity(refs, held, pairs.peak, ext.compound[pairs.entry]))
    sc = score_pairs(pairs, x, ext, compounds, bg, model, hints)
    sc.probability, sc.not_in_library = softmax_with_null(sc.logw, pairs.peak, len(x))
    return pairs, sc, ext


def _ranks(pairs: Pairs, sc, own_pair: np.ndarray, n: int):
    """(rank of own compound or 0, top probability, top is own) per query."""
    prob = sc.probability
    top = np.zeros(n)
    np.maximum.at(top, pairs.peak, prob) if len(prob) else None
    own_prob = np.full(n, -1.0)
    own_prob[pairs.peak[own_pair]] = prob[own_pair]
    better = np.bincount(pairs.peak, weights=(prob > own_prob[pairs.peak]).astype(float), minlength=n)
    rank = np.where(own_prob >= 0, better + 1, 0).astype(int)
    return rank, top, (rank == 1)


def evaluate_class(snapshot: LibrarySnapshot, phase_class: str, *, noise: float = 0.0, window: float | None = None,
                   index_scatter: float | None = None, rng=None, crowding=None) -> dict:
    """Self-check of one class (index only, and under ``with_mol_ion`` with the molecular ion); see the module doc."""
    phase_class = check_class(phase_class)
    rng = rng or np.random.default_rng(SEED)
    entries = snapshot.entries(phase_class)
    comps = snapshot.compounds
    obs = snapshot.observations
    out: dict = {"class": phase_class, "entries": int(len(entries))}
    if len(entries) < 2 or obs is None:
        out["notice"] = "fewer than two entries: nothing to evaluate"
        return out
    bg = mass_background(entries, comps)
    floor = SPREAD_FLOOR[phase_class]

    # leave one out
    sel = np.flatnonzero(obs.phase_class == phase_class)
    rows_of: dict[int, list[int]] = {}
    for i in sel:
        rows_of.setdefault(int(obs.compound[i]), []).append(int(i))
    loo = [i for c, rs in rows_of.items() if len(rs) >= 2 for i in rs]
    if len(loo) > MAX_QUERIES:
        loo = sorted(rng.choice(loo, MAX_QUERIES, replace=False).tolist())
    loo = np.array(loo, dtype=np.int64)
    own = obs.compound[loo] if len(loo) else np.zeros(0, np.int64)
    new_ri = np.empty(len(loo))
    new_sd = np.empty(len(loo))
    for k, i in enumerate(loo):
        rest = [j for j in rows_of[int(obs.compound[i])] if j != i]
        new_ri[k], new_sd[k], _ = summarise(obs.ri[rest], obs.n[rest], obs.sd[rest], floor)
    # A held-out observation scatters around its entry by the entry's own (predictive) spread;
    # only the added noise is extra measurement scatter.
    k_rm = min(len(entries), MAX_QUERIES)
    # single queries: the query defaults (presence prior, crowding prior)
    model = Model(max(noise, 0.1) if index_scatter is None else index_scatter,
                  unlisted=UnlistedField.flat(crowding_density(crowding)))
    x = obs.ri[loo] + (rng.normal(0, noise, len(loo)) if noise else 0.0)
    w = half_widths(x, phase_class, window)
    rm = np.sort(rng.choice(len(entries), k_rm, replace=False))
    own_rm = entries.compound[rm]
    x_rm = entries.ri[rm] + (rng.normal(0, noise, k_rm) if noise else 0.0)
    w_rm = half_widths(x_rm, phase_class, window)
    n_loo = len(loo)

    def metrics(mass_loo, mass_rm, spec_loo=None, spec_rm=None) -> dict:
        """Rates for one way of querying (index only, index plus molecular ion, index plus spectrum)."""
        pairs, sc, _ = _score_queries(entries, comps, bg, model, x, own, new_ri, new_sd, w, mass_loo, spec_loo)
        rank, top_loo, hit_loo = _ranks(pairs, sc, pairs.entry >= len(entries), n_loo)
        # removal: each compound's centre queried with the compound gone
        p_rm, s_rm, _ = _score_queries(entries, comps, bg, model, x_rm, own_rm, np.full(k_rm, np.nan),
                                       np.full(k_rm, np.nan), w_rm, mass_rm, spec_rm)
        top_rm = np.zeros(k_rm)
        if len(s_rm.probability):
            np.maximum.at(top_rm, p_rm.peak, s_rm.probability)
        prob_all = np.concatenate([top_loo, top_rm])
        correct_all = np.concatenate([hit_loo, np.zeros(k_rm, dtype=bool)])
        return {
            "top1": float(np.mean(rank == 1)) if n_loo else None,
            "top3": float(np.mean((rank >= 1) & (rank <= 3))) if n_loo else None,
            "coverage": float(np.mean(rank >= 1)) if n_loo else None,
            "ece": _ece(prob_all, correct_all),
            "not_in_library_detection": float(np.mean(s_rm.not_in_library >= top_rm)),
            "mean_top_probability_absent": float(np.mean(top_rm)),
        }

    out["queries"] = {"leave_one_out": int(n_loo), "removed": int(k_rm)}
    out.update(metrics(None, None))
    with_ion = metrics(comps.nominal_mass[own], comps.nominal_mass[own_rm])
    out["with_mol_ion"] = {k: v for k, v in with_ion.items() if k != "coverage"}
    refs = snapshot.spectra
    if refs is not None and len(refs):
        from matcher.identify.spectral_evidence import calibrate_spectra

        smodel = calibrate_spectra(refs, comps.nominal_mass)
        first = np.full(len(comps), -1, dtype=np.int64)
        count = np.bincount(refs.compound, minlength=len(comps))
        starts = np.flatnonzero(np.r_[True, refs.compound[1:] != refs.compound[:-1]])
        first[refs.compound[starts]] = starts
        # leave one out: the k-th query of a compound holds out its k-th spectrum (cycling), when it has two or more
        k_of = np.zeros(len(loo), dtype=np.int64)
        seen: dict[int, int] = {}
        for j, c in enumerate(own):
            k_of[j] = seen.get(int(c), 0)
            seen[int(c)] = k_of[j] + 1
        many = count[own] >= 2
        held_loo = np.where(many, first[own] + k_of % np.maximum(count[own], 1), -1)
        held_rm = first[own_rm]
        with_spec = metrics(None, None, (refs, held_loo, smodel), (refs, held_rm, smodel))
        out["with_spectra"] = {k: v for k, v in with_spec.items() if k != "coverage"}
        out["with_spectra"]["queries_with_spectrum"] = {"leave_one_out": int(many.sum()), "removed": int((held_rm >= 0).sum())}
        out["with_spectra"]["spectrum_model"] = smodel.describe()
    out["confusable_pairs"] = confusable_pairs(entries, comps, window)
    return out


def confusable_pairs(entries: ClassEntries, compounds, window: float | None = None, limit: int = 25) -> list[dict]:
    """Entries inside each other's window with the same nominal mass, closest first."""
    ok = ~entries.predicted
    ri, comp = entries.ri[ok], entries.compound[ok]
    w = DEFAULT_WINDOWS[entries.phase_class] if window is None else float(window)
    pairs = window_pairs(ri, ri, np.full(len(ri), w))
    a, b = pairs.peak, pairs.entry
    keep = b > a
    a, b = a[keep], b[keep]
    ma, mb = compounds.nominal_mass[comp[a]], compounds.nominal_mass[comp[b]]
    same = np.isfinite(ma) & (ma == mb)
    a, b = a[same], b[same]
    gap = np.abs(ri[b] - ri[a])
    order = np.argsort(gap, kind="stable")[:limit]
    return [{"a": str(compounds.name[comp[a[i]]]), "b": str(compounds.name[comp[b[i]]]),
             "ri_a": round(float(ri[a[i]]), 2), "ri_b": round(float(ri[b[i]]), 2),
             "gap": round(float(gap[i]), 2), "nominal_mass": int(compounds.nominal_mass[comp[a[i]]])}
            for i in order]


def evaluate(snapshot: LibrarySnapshot, phase_class: str | None = None, *, noise: float = 0.0,
             window: float | None = None, index_scatter: float | None = None) -> dict:
    """Self-check of one class or of every class that has entries; overall rates weighted by queries."""
    classes = [check_class(phase_class)] if phase_class else [c for c in PHASE_CLASSES if len(snapshot.entries(c)) >= 2]
    per = {}
    for c in classes:
        per[c] = evaluate_class(snapshot, c, noise=noise, window=window, index_scatter=index_scatter)

    def pooled(key, kind="leave_one_out"):
        num = den = 0.0
        for r in per.values():
            v = r.get(key)
            q = r.get("queries", {}).get(kind, 0)
            if v is not None and q and np.isfinite(v):
                num += v * q
                den += q
        return round(num / den, 4) if den else None

    def pooled_in(block: str, key: str, kind: str = "leave_one_out"):
        num = den = 0.0
        for r in per.values():
            v = (r.get(block) or {}).get(key)
            q = r.get("queries", {}).get(kind, 0)
            if v is not None and q and np.isfinite(v):
                num += v * q
                den += q
        return round(num / den, 4) if den else None

    spectra = None
    if any("with_spectra" in r for r in per.values()):
        spectra = {k: pooled_in("with_spectra", k, kind) for k, kind in
                   (("top1", "leave_one_out"), ("top3", "leave_one_out"), ("ece", "leave_one_out"),
                    ("not_in_library_detection", "removed"), ("mean_top_probability_absent", "removed"))}
        spectra["queries_with_spectrum"] = {
            k: int(sum((r.get("with_spectra") or {}).get("queries_with_spectrum", {}).get(k, 0) for r in per.values()))
            for k in ("leave_one_out", "removed")}
    return {
        "top1": pooled("top1"),
        "top3": pooled("top3"),
        "coverage": pooled("coverage"),
        "ece": pooled("ece"),
        "not_in_library_detection": pooled("not_in_library_detection", "removed"),
        "mean_top_probability_absent": pooled("mean_top_probability_absent", "removed"),
        "noise": noise,
        "queries": {k: int(sum(r.get("queries", {}).get(k, 0) for r in per.values())) for k in ("leave_one_out", "removed")},
        "classes": per,
        "library": {"location": snapshot.source, "revision": snapshot.revision},
        "with_spectra": spectra,
    }


#: Calls at or above this probability count as confident in the crowded self-check.
CONFIDENT_AT = 0.9


def _subset_entries(entries: ClassEntries, keep: np.ndarray) -> ClassEntries:
    return ClassEntries(entries.phase_class, entries.ri[keep], entries.sd[keep], entries.n[keep],
                        entries.compound[keep], entries.predicted[keep])


def crowded_spectra(refs, truth: np.ndarray, removed: np.ndarray):
    """The spectra of a crowded run drawn from the library's own: (library's spectra, one spectrum or None per peak).

    A removed compound's peak takes its first reference spectrum and the library keeps none of its spectra; a
    listed compound with two or more spectra holds its first one out for its peak (the library keeps the rest);
    a listed compound with one spectrum gives its peak none (its own spectrum would match itself exactly).

    >>> from matcher.chem.spectra import ReferenceSpectra
    >>> refs = ReferenceSpectra.build(np.array([0, 0, 1, 2]), [([41.0], [1.0]), ([41.0], [0.9]), ([43.0], [1.0]),
    ...                                                          ([55.0], [1.0])])
    >>> lib, peaks = crowded_spectra(refs, np.array([0, 1, 2]), np.array([False, False, True]))
    >>> lib.compound.tolist(), [p is not None for p in peaks]
    ([0, 1], [True, False, True])
    """
    from matcher.chem.spectra import ReferenceSpectra

    first, count = refs._table()
    keep = np.ones(len(refs), dtype=bool)
    held: list = []
    for c, gone in zip(np.asarray(truth, np.int64), np.asarray(removed, bool)):
        n = int(count[c]) if 0 <= c < len(count) else 0
        if n == 0 or (not gone and n < 2):
            held.append(None)
            continue
        row = int(first[c])
        held.append(refs.spectra.relative(row))
        if gone:
            keep[row:row + n] = False
        else:
            keep[row] = False
    rows = np.flatnonzero(keep)
    return ReferenceSpectra(refs.spectra.take(rows), refs.compound[rows], refs.ids[rows]), held


def evaluate_crowded(snapshot: LibrarySnapshot, phase_class: str, *, offset: float = 0.0, noise: float | None = None,
                     adaptive: bool = False, with_mol_ion: bool = True, crowding=None, seed: int = SEED,
                     with_spectra: bool = False) -> dict:
    """Crowded-sample self-check: every other compound along the index scale is removed from the library,
    and all of them (kept and removed) are screened together as one run.

    Removed compounds then sit between listed ones, often with the same nominal mass, as unlisted
    isomers do in a real oil. Each compound gives one peak at its centre plus Gaussian scatter of its
    entry's own spread (or ``noise`` units) plus ``offset``. Reported: ``confident_precision`` (share of
    calls at p ≥ :data:`CONFIDENT_AT` that are right), ``confident_calls``, ``listed_first`` (listed
    compounds ranked first), ``mean_top_probability_removed``, ``max_compound_sum`` (largest sum of one
    compound's probabilities over the run, at most 1) and ``ece`` (expected calibration error of the top
    probability, ten bins). With ``with_spectra`` (a library holding reference spectra) the peaks also carry
    spectra drawn from the library's own (:func:`crowded_spectra`), and the molecular ion is left out, as a
    spectrum shows it.

    >>> from matcher.store.snapshot import CompoundTable, build_snapshot
    >>> comp = CompoundTable.from_records([{"id": i + 1, "name": f"c{i}", "nominal_mass": 136.0} for i in range(60)])
    >>> snap = build_snapshot(comp, np.arange(1, 61), np.array(["nonpolar"] * 60), 900.0 + 11.0 * np.arange(60))
    >>> r = evaluate_crowded(snap, "nonpolar")
    >>> r["peaks"], r["removed"], r["max_compound_sum"] <= 1.0
    (60, 30, True)
    """
    from matcher.identify.evidence import DEFAULT_MEASUREMENT_SD
    from matcher.identify.screening import public_correction, screen_run
    from matcher.identify.shortlist import PeakInput, prepare

    phase_class = check_class(phase_class)
    entries = snapshot.entries(phase_class)
    measured = np.flatnonzero(~entries.predicted)
    out: dict = {"class": phase_class, "offset": offset, "adaptive": adaptive}
    if len(measured) < 4:
        out["notice"] = "fewer than four entries: nothing to evaluate"
        return out
    rng = np.random.default_rng(seed)
    order = measured[np.argsort(entries.ri[measured], kind="stable")]
    removed_mask = np.zeros(len(entries), dtype=bool)
    removed_mask[order[1::2]] = True
    kept = np.zeros(len(entries), dtype=bool)
    kept[order[0::2]] = True
    truth = entries.compound[order]
    is_removed = removed_mask[order]
    peak_spectra = None
    lib_refs = None
    if with_spectra and snapshot.spectra is not None and len(snapshot.spectra):
        from matcher.chem.spectra import SpectrumSet

        lib_refs, held = crowded_spectra(snapshot.spectra, truth, is_removed)
        peak_spectra = SpectrumSet.from_spectra(held).with_cache()
        with_mol_ion = False
        out["peaks_with_spectrum"] = int(sum(h is not None for h in held))
    lib = LibrarySnapshot(snapshot.compounds, {phase_class: _subset_entries(entries, kept)}, spectra=lib_refs)
    home = prepare(lib, phase_class)
    sd = entries.sd[order] if noise is None else np.full(len(order), float(noise))
    x = entries.ri[order] + rng.normal(0.0, 1.0, len(order)) * sd + offset
    mass = snapshot.compounds.nominal_mass[truth] if with_mol_ion else None
    sl, _, model, info, corr, _ = screen_run(home, PeakInput(x, mol_ion=mass, spectra=peak_spectra),
                                             DEFAULT_MEASUREMENT_SD[phase_class], adaptive=adaptive, crowding=crowding)
    c = sl.columns
    top = c["rank"] == 1
    n = len(x)
    top_comp = np.full(n, -1)
    top_p = np.zeros(n)
    top_comp[c["peak"][top]] = c["compound"][top]
    top_p[c["peak"][top]] = c["probability"][top]
    right = (top_comp == truth) & ~is_removed
    conf = top_p >= CONFIDENT_AT
    sums = np.bincount(c["compound"][c["compound"] >= 0], weights=c["probability"][c["compound"] >= 0])
    out.update({
        "peaks": int(n),
        "removed": int(is_removed.sum()),
        "confident_calls": int(conf.sum()),
        "confident_precision": round(float(right[conf].mean()), 4) if conf.any() else None,
        "listed_first": round(float(right[~is_removed].mean()), 4),
        "mean_top_probability_removed": round(float(top_p[is_removed].mean()), 4),
        "max_compound_sum": round(float(sums.max()), 6) if len(sums) else 0.0,
        "ece": round(_ece(top_p, right), 4),
        "index_scatter": round(float(model.index_scatter), 3),
        "presence": info.get("presence"),
        "unlisted_per_100": info.get("unlisted_per_100"),
        "correction": None if not corr else {k: v for k, v in public_correction(corr).items()
                                             if k in ("applied", "slope", "offset", "notice")},
    })
    return out


def evaluate_crowded_all(snapshot: LibrarySnapshot, phase_class: str | None = None, *, offset: float = 4.0,
                         noise: float | None = None, crowding=None) -> dict:
    """:func:`evaluate_crowded` for one class or every class with at least four entries, plain and adaptive, and
    with spectra when the library holds reference spectra."""
    classes = [check_class(phase_class)] if phase_class else [c for c in PHASE_CLASSES if len(snapshot.entries(c)) >= 4]
    spectra = snapshot.spectra is not None and len(snapshot.spectra) > 0
    per = {}
    for c in classes:
        per[c] = {"plain": evaluate_crowded(snapshot, c, offset=offset, noise=noise, crowding=crowding),
                  "adaptive": evaluate_crowded(snapshot, c, offset=offset, noise=noise, crowding=crowding, adaptive=True)}
        if spectra:  # the library's spectra: the same runs with a spectrum per peak instead of the molecular ion
            per[c]["spectra"] = evaluate_crowded(snapshot, c, offset=offset, noise=noise, crowding=crowding,
                                                 with_spectra=True)
    return {"mode": "crowded", "offset": offset, "classes": per,
            "library": {"location": snapshot.source, "revision": snapshot.revision}}
