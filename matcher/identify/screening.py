"""Screening whole runs: every peak of every run shortlisted against the house library.

The importable form of ``matcher screen``. The library is read once
(:func:`matcher.store.snapshot_loader.load_snapshot`) and prepared once per
class; each run's peaks are converted to indices, scored in chunks of
:data:`CHUNK` peaks on whole arrays, and given run-level flags. With
``adaptive=True`` the run's confident matches drive the correction of
Zenkevich (see :mod:`matcher.identify.adaptive`) and the run's own index scatter is
estimated (see :mod:`matcher.identify.run_model`).
"""

from __future__ import annotations

import datetime as _dt
import os
from dataclasses import dataclass, replace
from typing import Any, Callable, Iterable, Sequence

import numpy as np

from matcher import CAUTION, __version__
from matcher.identify import flags as F
from matcher import rules as R
from matcher.identify.adaptive import ANCHOR_PROBABILITY, apply_correction
from matcher.identify.window_search import half_widths, window_description
from matcher.classes import check_class
from matcher.errors import MatcherError
from matcher.identify.evidence import DEFAULT_MEASUREMENT_SD, Model, PeakHints
from matcher.identify.hints import ion_masks
from matcher.results import DETAIL_COLUMNS, REPORT_PEAKS, SECOND_COLUMNS, SHORTLIST_COLUMNS, RunResult, ScreenResult
from matcher.identify.shortlist import PeakInput, PreparedClass, Shortlist, neighbour_of, prepare, shortlist
from matcher.store.snapshot import LibrarySnapshot

CHUNK = 50_000  # peaks scored at once at most
MAX_PAIRS = 150_000  # peak-candidate pairs per core, on average: bounds a chunk's memory (and is faster than larger chunks)
MAX_FIT_PEAKS = 20_000  # peaks used to fit the run model (a seeded sample beyond this)


@dataclass
class RunInput:
    """One run to screen: its peaks and how to turn times into indices.

    ``peaks`` is a peak-table path, a pandas DataFrame or a
    :class:`~matcher.io.peak_tables.PeakTable`; ``calibration`` a saved calibration's
    path or a :class:`~matcher.retention.calibration.Calibration`; ``ladder`` a ladder
    path, DataFrame or :class:`~matcher.retention.ladder.Ladder` (fitted here).
    """

    peaks: Any
    calibration: Any = None
    ladder: Any = None
    label: str | None = None

    @property
    def peaks_path(self) -> str:  # the name used in messages and outputs
        return _source_name(self.peaks)


def _source_name(item: Any) -> str:
    if isinstance(item, (str, os.PathLike)):
        return os.fspath(item)
    path = getattr(item, "path", None)
    return str(path) if path else "<DataFrame>"


def _as_list(value: Any) -> list:
    """One item or a sequence of them (a path, a DataFrame and a table count as one item)."""
    if value is None:
        return []
    if isinstance(value, (str, os.PathLike)) or hasattr(value, "iloc") or hasattr(value, "convert") or hasattr(value, "peak") \
            or hasattr(value, "rt"):
        return [value]
    return list(value)


def plan_runs(peak_files: Any, calibration: Any = None, ladder: Any = None,
              labels: Sequence[str] | None = None) -> list[RunInput]:
    """Pair runs with calibrations or ladders: one for all runs, or one per run in order."""
    peak_files = _as_list(peak_files)
    cals = _as_list(calibration)
    lads = _as_list(ladder)
    if cals and lads:
        raise MatcherError("give either --calibration or --ladder, not both")
    given = cals or lads
    if len(given) not in (0, 1, len(peak_files)):
        raise MatcherError(
            f"{len(given)} calibration/ladder files for {len(peak_files)} runs: give one for all runs or one per run, in the same order")
    labels = list(labels or [])
    if labels and len(labels) != len(peak_files):
        raise MatcherError(f"{len(labels)} labels for {len(peak_files)} runs: give one label per run")
    runs = []
    for k, p in enumerate(peak_files):
        g = given[0] if len(given) == 1 else (given[k] if given else None)
        runs.append(RunInput(p, g if cals else None, g if lads else None, labels[k] if labels else None))
    return runs


def _label(run: RunInput) -> str:
    if run.label:
        return str(run.label)
    name = _source_name(run.peaks)
    return "run" if name.startswith("<") else os.path.splitext(os.path.basename(name))[0]


def _hints_for_fit(peaks: PeakInput, home: PreparedClass | None = None) -> PeakHints:
    from matcher.identify.shortlist import spectrum_hints

    masks = ion_masks(peaks.ions) if peaks.ions is not None and any(len(i) for i in peaks.ions) else None
    extra = spectrum_hints(peaks, home) if home is not None else {}
    return PeakHints(np.asarray(peaks.mol_ion, float) if peaks.mol_ion is not None else np.full(len(peaks), np.nan),
                     masks, **extra)


def _subset(peaks: PeakInput, idx: np.ndarray) -> PeakInput:
    return PeakInput(
        np.asarray(peaks.ri)[idx],
        None if peaks.mol_ion is None else np.asarray(peaks.mol_ion)[idx],
        None if peaks.ions is None else [peaks.ions[i] for i in idx],
        None if peaks.hit is None else np.asarray(peaks.hit, dtype=object)[idx],
        None if peaks.hit_match is None else np.asarray(peaks.hit_match)[idx],
        None if peaks.extrapolated is None else np.asarray(peaks.extrapolated)[idx],
        None if peaks.unlisted is None else np.asarray(peaks.unlisted)[idx],
        None if peaks.spectra is None else peaks.spectra.take(idx),
        None if peaks.second is None else peaks.second.take(idx),
    )


def fit_run_model(home: PreparedClass, peaks: PeakInput, model: Model, w: np.ndarray, *,
                  crowding=None) -> tuple[Model, dict, np.ndarray]:
    """The run's presence and unlisted intensity from its own peaks (see :mod:`matcher.identify.run_model`).

    Returns (model, info, λ_U per peak with each fitted peak left out of its own estimate)."""
    from matcher.identify.run_model import fit

    x = np.asarray(peaks.ri, float)
    idx = np.flatnonzero(np.isfinite(x))
    if len(idx) > MAX_FIT_PEAKS:
        idx = np.sort(np.random.default_rng(20261201).choice(idx, MAX_FIT_PEAKS, replace=False))
    sub = _subset(peaks, idx)
    model, info = fit(sub.ri, home.entries, home.compounds, home.mass_bg, model, w[idx],
                      hints=_hints_for_fit(sub, home), compound_ion_masks=home.ion_masks, crowding=crowding)
    own = np.zeros(len(x))
    if "own_unlisted" in info:
        own[idx] = info.pop("own_unlisted")
    lam = model.field().density(np.where(np.isfinite(x), x, 0.0), self_weight=own)
    return model, info, lam


def candidate_counts(x: np.ndarray, w: np.ndarray, entries_ri: np.ndarray) -> np.ndarray:
    """Library entries inside each peak's window (the peak's share of the pairs to score); 0 without an index.

    >>> candidate_counts(np.array([5.0, np.nan]), np.array([1.0, 1.0]), np.arange(0.0, 10.0, 0.5)).tolist()
    [5, 0]
    """
    ok = np.isfinite(x) & np.isfinite(w)
    out = np.zeros(len(x), dtype=np.int64)
    if ok.any() and len(entries_ri):
        out[ok] = np.searchsorted(entries_ri, x[ok] + w[ok], "right") - np.searchsorted(entries_ri, x[ok] - w[ok], "left")
    return out


def index_chunks(x: np.ndarray, w: np.ndarray, size: int = CHUNK, pairs: np.ndarray | None = None,
                 budget: int | None = None):
    """Windows of the index scale: (core positions, context positions) per chunk.

    A run of at most ``size`` peaks (and, given ``pairs`` per peak, at most
    ``budget`` pairs in all) is one chunk, in file order. A longer run is cut,
    in index order, into cores of at most ``size`` peaks and ``budget`` pairs
    (at least one peak each), so dense parts of the scale get short cores and a
    chunk's memory stays bounded; each core is scored with a *halo* of the peaks
    within two half-widths of its ends as context, so a compound's competition
    between peaks (one compound, one peak) and the run-level flags see every peak
    that can share a candidate with a core peak (two peaks share a candidate only
    when they lie within w₁ + w₂ of each other). Only the core's rows are kept.
    Peaks without an index come last.

    >>> x = np.array([5.0, 1.0, 3.0, 2.0, 4.0]); w = np.full(5, 0.6)
    >>> [(c.tolist(), k.tolist()) for c, k in index_chunks(x, w, size=2)]
    [([1, 3], [1, 3, 2]), ([2, 4], [3, 2, 4, 0]), ([0], [4, 0])]
    >>> [c.tolist() for c, _ in index_chunks(x, w, pairs=np.array([1, 1, 5, 1, 1]), budget=4)]
    [[1, 3], [2], [4, 0]]
    """
    n = len(x)
    budget = MAX_PAIRS if budget is None else budget
    total = int(np.sum(pairs)) if pairs is not None else 0
    if n <= size and total <= budget:
        everything = np.arange(n)
        yield everything, everything
        return
    key = np.where(np.isfinite(x), x, np.inf)
    order = np.argsort(key, kind="stable")
    xs = key[order]
    finite_w = w[np.isfinite(w)]
    halo = 2.0 * float(finite_w.max()) if len(finite_w) else 0.0
    if pairs is None:
        cuts = list(range(0, n, size)) + [n]
    else:  # cut where the cumulative pair count passes each multiple of the budget, and every `size` peaks
        cum = np.cumsum(np.asarray(pairs, dtype=np.int64)[order])
        cuts, start = [0], 0
        while start < n:
            stop = int(np.searchsorted(cum, (cum[start - 1] if start else 0) + budget, "right"))
            stop = min(max(stop, start + 1), start + size, n)
            cuts.append(stop)
            start = stop
    for start, stop in zip(cuts[:-1], cuts[1:]):
        lo, hi = xs[start], xs[stop - 1]
        a = int(np.searchsorted(xs, lo - halo, "left")) if np.isfinite(lo) else start
        b = int(np.searchsorted(xs, hi + halo, "right")) if np.isfinite(hi) else stop
        yield order[start:stop], order[min(a, start):max(b, stop)]


def _core_rows(sl: Shortlist, context: np.ndarray, core: np.ndarray) -> Shortlist:
    """The rows of a context's shortlist that belong to its core, peaks renumbered 0..len(core)-1 in core order."""
    if len(context) == len(core) and np.array_equal(context, core):
        return sl
    local = np.full(len(context), -1, dtype=np.int64)
    pos = np.empty(int(context.max()) + 1 if len(context) else 0, dtype=np.int64)
    pos[context] = np.arange(len(context))
    local[pos[core]] = np.arange(len(core))
    c = sl.columns
    new_peak = local[c["peak"]]
    keep = new_peak >= 0
    order = np.argsort(new_peak[keep], kind="stable")  # rows grouped by the core's peak order, ranks kept
    rows = np.flatnonzero(keep)[order]
    cols = {k: v[rows] for k, v in c.items()}
    cols["peak"] = new_peak[rows]
    at = pos[core]
    return Shortlist(cols, sl.not_in_library[at], sl.top_probability[at], sl.candidate_count[at], sl.window[at],
                     list(sl.notes))


def iter_shortlist(home, peaks: PeakInput, model: Model, *, window, window_percent, top, neighbour,
                   run_level_flags: bool = True, progress: Callable[[int], None] | None = None):
    """:func:`matcher.identify.shortlist.shortlist` over :func:`index_chunks`: yields (core positions, shortlist).

    Each yielded shortlist holds the core's rows only, its ``peak`` column counting
    the core's peaks from 0; with ``run_level_flags`` the rows carry the run-level
    flags (:func:`run_flags`) computed on the chunk with its halo. Memory grows with
    the chunk, not with the run, so the rows can go to a file as they come.
    """
    x = np.asarray(peaks.ri, dtype=float)
    w = half_widths(x, home.phase_class, window, window_percent)
    for core, context in index_chunks(x, w, CHUNK, candidate_counts(x, w, home.entries.ri), MAX_PAIRS):
        whole = len(context) == len(x)
        sub = peaks if whole else _subset(peaks, context)
        halo = None
        if len(context) > len(core):
            halo = np.ones(len(context), dtype=bool)
            halo[np.isin(context, core)] = False
        sl = shortlist(home, sub, model, window=window, window_percent=window_percent, top=top, neighbour=neighbour,
                       lead_only=halo)
        if run_level_flags:
            sl.columns["flags"] = run_flags(sl, x[context], home.compounds)
        if progress:
            progress(len(core))
        part = _core_rows(sl, context, core)
        del sl, sub  # the context's rows are not kept while the caller works on the part
        yield core, part


def join_parts(parts: list[tuple[np.ndarray, Shortlist]], n: int) -> Shortlist:
    """One shortlist of the whole run from :func:`iter_shortlist`'s parts (``peak`` = position in the run)."""
    if len(parts) == 1 and len(parts[0][0]) == n and np.array_equal(parts[0][0], np.arange(n)):
        return parts[0][1]
    cols = {k: np.concatenate([p.columns[k] for _, p in parts]) for k in parts[0][1].columns}
    cols["peak"] = np.concatenate([core[p.columns["peak"]] for core, p in parts])
    order = np.argsort(cols["peak"], kind="stable")
    cols = {k: v[order] for k, v in cols.items()}

    def per_peak(attr):
        out = np.zeros(n, dtype=getattr(parts[0][1], attr).dtype)
        for core, p in parts:
            out[core] = getattr(p, attr)
        return out

    return Shortlist(cols, per_peak("not_in_library"), per_peak("top_probability"), per_peak("candidate_count"),
                     per_peak("window"), sorted({t for _, p in parts for t in p.notes}))


def _anchor_rows(sl: Shortlist) -> np.ndarray:
    c = sl.columns
    ok = (c["rank"] == 1) & (c["probability"] >= ANCHOR_PROBABILITY) & ~c["cross_class"] & ~c["predicted"]
    ok &= ~F.has_flag(c["flags"], "ambiguous") & ~F.has_flag(c["flags"], "mass-mismatch")
    ok &= ~F.has_flag(c["flags"], "contested")
    return np.flatnonzero(ok)


def select_anchors(sl: Shortlist | Iterable[tuple[np.ndarray, Shortlist]], x: np.ndarray | None = None
                   ) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Confident calls under the joint model: (peak positions, reference indices, names).

    Ranked first with probability ≥ ANCHOR_PROBABILITY, not ambiguous, contested or mass-mismatched,
    neither predicted nor cross-class; a compound anchors at most once (its most probable peak).
    ``sl`` is a whole run's shortlist or :func:`iter_shortlist`'s parts.
    """
    parts = [(None, sl)] if isinstance(sl, Shortlist) else sl
    peak, comp, prob, ref, name = [], [], [], [], []
    for core, part in parts:
        c = part.columns
        rows = _anchor_rows(part)
        peak.append(c["peak"][rows] if core is None else core[c["peak"][rows]])
        for acc, key in ((comp, "compound"), (prob, "probability"), (ref, "library_ri"), (name, "name")):
            acc.append(c[key][rows])
    if not peak:
        return np.zeros(0, np.int64), np.zeros(0), []
    peak, comp, prob, ref, name = (np.concatenate(a) for a in (peak, comp, prob, ref, name))
    if len(peak):
        order = np.lexsort((-prob, comp))
        first = order[np.r_[True, comp[order][1:] != comp[order][:-1]]]
        keep = first[np.argsort(peak[first], kind="stable")]
        peak, ref, name = peak[keep], ref[keep], name[keep]
    return peak.astype(np.int64), ref.astype(float), [str(v) for v in name]


def _anchors_for_run(rows, label: str, peak_ids: np.ndarray, home: PreparedClass):
    """The anchors of one run from an anchors file's rows (:func:`matcher.io.anchors.read_anchors`): (peak
    positions, reference indices, names); a name the library's class lacks is refused naming file, row and line."""
    from matcher.chem.names import matching_key

    by_key = {}
    e = home.entries
    for k in range(len(e)):
        if not e.predicted[k]:
            by_key[matching_key(str(home.compounds.name[e.compound[k]]))] = (float(e.ri[k]), str(home.compounds.name[e.compound[k]]))
    pos_of = {str(p): i for i, p in enumerate(peak_ids)}
    out_pos, out_ref, out_name = [], [], []
    for r in rows.for_run(label):
        p, nm, rv = rows.peak[r], rows.name[r], float(rows.ri[r])
        if p not in pos_of:
            continue
        if np.isfinite(rv):
            out_pos.append(pos_of[p]); out_ref.append(rv); out_name.append(nm or f"anchor {p}")
            continue
        hitk = by_key.get(matching_key(nm))
        if hitk is None:
            raise rows.error(r, f"{nm!r} is not in the library's {home.phase_class} class; give its 'ri' instead")
        out_pos.append(pos_of[p]); out_ref.append(hitk[0]); out_name.append(hitk[1])
    return np.array(out_pos, dtype=np.int64), np.array(out_ref, dtype=float), out_name


def run_flags(sl: Shortlist, x: np.ndarray, compounds) -> np.ndarray:
    """Run-level consistency flags: same-compound-twice and homologues-out-of-order (see :mod:`matcher.identify.flags`)."""
    c = sl.columns
    flags = c["flags"]
    top = np.flatnonzero((c["rank"] == 1) & (c["compound"] >= 0))
    if len(top) < 2:
        return flags
    peak = c["peak"][top]
    comp = c["compound"][top]
    xi = x[peak]
    w = sl.window[peak]
    order = np.lexsort((xi, comp))
    comp_s, x_s, w_s, p_s = comp[order], xi[order], w[order], peak[order]
    starts = np.flatnonzero(np.r_[True, comp_s[1:] != comp_s[:-1]])
    # within each compound group, two peaks farther apart than the half-width w: flag the group
    spread = np.maximum.reduceat(x_s, starts) - np.minimum.reduceat(x_s, starts)
    bad_group = spread > np.maximum.reduceat(w_s, starts)
    sizes = np.diff(np.r_[starts, len(comp_s)])
    bad_peaks = p_s[np.repeat(bad_group, sizes)]
    repeated = np.isin(c["peak"], bad_peaks) & (c["rank"] == 1)
    flags = F.add_flag(flags, repeated, "same-compound-twice")

    series = compounds.series[comp]
    carb = compounds.carbons[comp]
    broken: set[int] = set()
    for label in {s for s in series if s}:
        sel = np.flatnonzero((series == label) & (carb > 0))
        if len(sel) < 2:
            continue
        o = sel[np.argsort(xi[sel], kind="stable")]
        cs = carb[o]
        inv = np.flatnonzero(cs[1:] < cs[:-1])
        for i in inv:
            broken.update((int(peak[o[i]]), int(peak[o[i + 1]])))
    if broken:
        flags = F.add_flag(flags, np.isin(c["peak"], list(broken)) & (c["rank"] == 1), "homologues-out-of-order")
    return flags


def _table(sl: Shortlist, label: str, phase_class: str, peak_ids, rt, x, x_raw, hints: PeakInput,
           area=None, area_percent=None):
    import pandas as pd

    c = sl.columns
    p = c["peak"]
    rank = pd.array(np.where(c["rank"] > 0, c["rank"], 0), dtype="Int64")
    rank[c["rank"] == 0] = pd.NA
    def opt(a, fill=np.nan):
        return np.full(len(p), fill, dtype=object if isinstance(fill, str) else float) if a is None else np.asarray(a)[p]
    data = {
        "peak": np.asarray(peak_ids, dtype=object)[p],
        "rt": np.asarray(rt, dtype=float)[p],
        "ri": x[p],
        "class": phase_class,
        "rank": rank,
        "name": c["name"],
        "cas": c["cas"],
        "library_ri": c["library_ri"],
        "delta_ri": c["delta_ri"],
        "score": c["score"],
        "probability": c["probability"],
        "flags": c["flags"],
        "run": label,
        "ri_measured": x_raw[p],
        "not_in_library": sl.not_in_library[p],
        "area": opt(area),
        "area_percent": opt(area_percent),
        "formula": c["formula"],
        "nominal_mass": c["nominal_mass"],
        "library_spread": c["library_spread"],
        "library_observations": pd.array(np.where(c["rank"] > 0, c["library_observations"], 0), dtype="Int64"),
        "mol_ion": opt(hints.mol_ion),
        "hit": opt(hints.hit, ""),
        "hit_match": opt(hints.hit_match),
        "evidence_index": c["evidence_index"],
        "evidence_mol_ion": c["evidence_mol_ion"],
        "evidence_ions": c["evidence_ions"],
        "evidence_hit": c["evidence_hit"],
        "evidence_spectrum": c["evidence_spectrum"],
        "spectrum_similarity": c["spectrum_similarity"],
    }
    second = [k for k in SECOND_COLUMNS if k in c]  # a two-column screen (matcher.identify.two_columns)
    data.update({k: c[k] for k in second})
    df = pd.DataFrame(data)
    df.loc[df["rank"].isna(), "library_observations"] = pd.NA
    return df[list(SHORTLIST_COLUMNS) + list(DETAIL_COLUMNS) + second]


def _with(peaks: PeakInput, x: np.ndarray, lam: np.ndarray) -> PeakInput:
    return PeakInput(x, peaks.mol_ion, peaks.ions, peaks.hit, peaks.hit_match, peaks.extrapolated, lam, peaks.spectra,
                     peaks.second)


def _shift_profile(home: PreparedClass, peaks: PeakInput, model: Model, w: np.ndarray, lam: np.ndarray) -> float:
    """Coarse offset of the run: the shift b maximising the run's mixture likelihood (see :mod:`matcher.identify.adaptive`)."""
    from matcher.identify.adaptive import MIN_ANCHORS, SHIFT_STEP
    from matcher.identify.assignment import PeakGroups
    from matcher.identify.window_search import window_pairs
    from matcher.identify.evidence import score_pairs

    x = np.asarray(peaks.ri, float)
    ok = np.isfinite(x)
    if ok.sum() < MIN_ANCHORS or not len(home.entries):
        return 0.0
    if ok.sum() > MAX_FIT_PEAKS:  # the offset of a long run is clear from a seeded sample of its peaks
        keep = np.random.default_rng(20261203).choice(np.flatnonzero(ok), MAX_FIT_PEAKS, replace=False)
        ok = np.zeros(len(x), bool)
        ok[keep] = True
    xs = x[ok]
    reach = float(np.max(w[ok]))
    pairs = window_pairs(home.entries.ri, xs, w[ok] * 2.0)
    sub = _subset(peaks, np.flatnonzero(ok))
    hints = _hints_for_fit(sub, home)
    if hints.compares_spectra():  # the pairs do not move with the shift: compare the spectra once
        from matcher.chem.spectra import best_similarity

        hints.spectrum_similarity, hints.spectrum_reference = best_similarity(
            hints.spectra, hints.references, pairs.peak, home.entries.compound[pairs.entry], lookup=hints.lookup)
    groups = PeakGroups(pairs.peak, len(xs))  # per peak: log(1 + Σ_j w_pj), the "1" being not-in-library
    best_b, best_ll = 0.0, -np.inf
    for b in np.arange(-reach, reach + SHIFT_STEP / 2, SHIFT_STEP):
        sc = score_pairs(pairs, xs + b, home.entries, home.compounds, home.mass_bg, model, hints, home.ion_masks,
                         unlisted_density=lam[ok])
        inside = np.abs(sc.delta) <= w[ok][pairs.peak]
        ll = float(np.sum(groups.logsumexp(np.where(inside, sc.logw, -np.inf))))
        if ll > best_ll + 1e-9 or (abs(ll - best_ll) <= 1e-9 and abs(b) < abs(best_b)):
            best_b, best_ll = float(b), ll
    return best_b


@dataclass
class PreparedRun:
    """One run made ready for shortlisting: corrected indices, fitted model, unlisted intensity, provenance."""

    peaks: PeakInput      # with the corrected indices and λ_U per peak
    x_raw: np.ndarray     # indices before the correction
    model: Model
    info: dict
    correction: dict | None
    notices: list[str]

    @property
    def x(self) -> np.ndarray:
        return np.asarray(self.peaks.ri, dtype=float)


def screen_run(home: PreparedClass, peaks: PeakInput, base_sd: float, *, window=None, window_percent=None, top=None,
               neighbour: PreparedClass | None = None, adaptive: bool = False, user_anchors=None,
               estimate_scatter: bool = True, peak_ids: np.ndarray | None = None, progress=None,
               crowding=None, exclusive: bool = True):
    """Screen one run's peaks (indices already computed); returns
    (shortlist, corrected indices, model, run-model info, correction or None, notices).

    The whole run's shortlist in memory: :func:`prepare_run`, then every part of
    :func:`iter_shortlist` joined (:func:`join_parts`).
    """
    run = prepare_run(home, peaks, base_sd, window=window, window_percent=window_percent, adaptive=adaptive,
                      user_anchors=user_anchors, estimate_scatter=estimate_scatter, peak_ids=peak_ids,
                      crowding=crowding, exclusive=exclusive)
    parts = list(iter_shortlist(home, run.peaks, run.model, window=window, window_percent=window_percent, top=top,
                                neighbour=neighbour, progress=progress))
    sl = join_parts(parts, len(run.x))
    run.notices.extend(sl.notes)
    return sl, run.x, run.model, run.info, run.correction, run.notices


def prepare_run(home: PreparedClass, peaks: PeakInput, base_sd: float, *, window=None, window_percent=None,
                adaptive: bool = False, user_anchors=None, estimate_scatter: bool = True,
                peak_ids: np.ndarray | None = None, crowding=None, exclusive: bool = True) -> PreparedRun:
    """Everything before the shortlist: the run model, and with ``adaptive`` the correction.

    With ``adaptive`` (or ``user_anchors``) the run is corrected as described in
    :mod:`matcher.identify.adaptive`: a coarse offset from the run's likelihood, anchors
    confident under the joint model (one per compound), an iterated robust
    Theil–Sen fit, a plausibility check (slope, offset) with a fall-back to the
    plain screen, and the run's index scatter from the kept anchors.
    """
    from matcher.identify.adaptive import robust_correction, scatter_from_anchors

    x_raw = np.asarray(peaks.ri, dtype=float)
    ids = np.arange(1, len(x_raw) + 1).astype(str) if peak_ids is None else np.asarray(peak_ids)
    notices: list[str] = []
    w = half_widths(x_raw, home.phase_class, window, window_percent)
    base = Model(base_sd, exclusive=exclusive)
    model, info, lam = fit_run_model(home, peaks, base, w, crowding=crowding)
    correction = None
    x = x_raw
    if adaptive:
        if user_anchors is not None:
            a_pos, a_ref, a_names = user_anchors
            source = "anchors file"
            shift = 0.0
        else:
            shift = _shift_profile(home, peaks, model, w, lam)
            xs = x_raw + shift
            m1, _, lam1 = fit_run_model(home, _with(peaks, xs, None), base, w, crowding=crowding)
            first = iter_shortlist(home, _with(peaks, xs, lam1), m1, window=window, window_percent=window_percent,
                                   top=None, neighbour=None, run_level_flags=False)
            a_pos, a_ref, a_names = select_anchors(first)
            source = "confident matches"
        a_pos = np.asarray(a_pos, dtype=np.int64)
        fit = robust_correction(x_raw[a_pos], np.asarray(a_ref, float), x_raw, w)
        correction = {"applied": False, "method": "theil-sen", "source": source, "a": None, "b": None,
                      "scatter": None, "notice": fit["notice"], "anchors": [], "coarse_shift": shift}
        if fit.get("residuals") is not None:
            kept = fit["kept"]
            correction["anchors"] = [
                {"peak": str(ids[p]), "name": n, "ri_measured": float(x_raw[p]), "ri_reference": float(r),
                 "residual": float(res), "kept": bool(k)}
                for p, n, r, res, k in zip(a_pos, a_names, a_ref, fit["residuals"], kept)
            ]
        if fit["ok"]:
            x = apply_correction(x_raw, fit)
            entry_sd = _anchor_entry_sd(home, a_ref)
            sd, sd_note = scatter_from_anchors(fit["residuals"][fit["kept"]], entry_sd[fit["kept"]], base_sd) \
                if estimate_scatter else (base_sd, "")
            correction.update(applied=True, a=fit["a"], b=fit["b"], scatter=sd,
                              notice=f"corrected with {int(fit['kept'].sum())} of {len(a_pos)} anchors from {source}"
                                     + (f"; {sd_note}" if sd_note else ""))
            base = base.with_(index_scatter=sd)
            w = half_widths(x, home.phase_class, window, window_percent)
            model, info, lam = fit_run_model(home, _with(peaks, x, None), base, w, crowding=crowding)
        notices.append(correction["notice"])
    if info.get("notice"):
        notices.append(info["notice"])
    info["index_scatter"] = float(model.index_scatter)
    return PreparedRun(_with(peaks, x, lam), x_raw, model, info, correction, notices)


def public_correction(correction: dict | None) -> dict | None:
    """The adaptive fit as every output shows it, in the one sign convention of ΔRI: measured − library.

    Internally the fit follows Zenkevich (Molecules 30, 4706, 2025): RIlib − RImeasured = a·RI + b.
    Outputs give ``slope`` = −a and ``offset`` = −b, so that ``delta_ri = slope·RI + offset`` is the
    expected deviation measured − library at index RI (the corrected index is RI − delta_ri), and per
    anchor ``library_ri``, ``delta_ri`` and ``residual`` (ΔRI minus the fit).

    >>> c = public_correction({"applied": True, "method": "theil-sen", "source": "confident matches", "a": 0.0,
    ...     "b": -4.0, "scatter": 1.2, "notice": "", "coarse_shift": -4.0, "anchors": [{"peak": "3", "name": "x",
    ...     "ri_measured": 1004.0, "ri_reference": 1000.0, "residual": 0.0, "kept": True}]})
    >>> c["slope"], c["offset"], c["coarse_offset"], c["anchors"][0]["delta_ri"]
    (0.0, 4.0, 4.0, 4.0)
    """
    if not correction:
        return None

    def neg(v):
        return None if v is None else -float(v) + 0.0

    out = {k: v for k, v in correction.items() if k not in ("a", "b", "coarse_shift", "anchors")}
    out["slope"], out["offset"] = neg(correction.get("a")), neg(correction.get("b"))
    out["coarse_offset"] = neg(correction.get("coarse_shift"))
    out["anchors"] = [
        {"peak": a.get("peak"), "name": a.get("name"), "ri_measured": a.get("ri_measured"),
         "library_ri": a.get("ri_reference"),
         "delta_ri": None if a.get("ri_reference") is None else float(a["ri_measured"]) - float(a["ri_reference"]),
         "residual": neg(a.get("residual")), "kept": a.get("kept")}
        for a in correction.get("anchors") or []
    ]
    return out


NO_REFERENCE_SPECTRA = ("the library holds no reference spectra, so the peaks' spectra were not compared "
                        "(add some with: matcher library import-spectra)")

#: the report draws the spectra of at most this many peaks per run
REPORT_SPECTRA = 2000


def review_spectra(sl: Shortlist, home: PreparedClass, peak_ids, spectra) -> dict:
    """For each peak to review whose leading candidate was compared by spectrum: both spectra and the similarity."""
    if spectra is None or home.references is None:
        return {}
    c = sl.columns
    rows = np.flatnonzero((c["rank"] == 1) & np.isfinite(c["spectrum_similarity"]) & (c["spectrum_reference"] >= 0)
                          & F.has_flag(c["flags"], "review"))[:REPORT_SPECTRA]
    out = {}
    for i in rows:
        p = int(c["peak"][i])
        out[str(peak_ids[p])] = {
            "unknown": spectra[p],
            "reference": home.references.spectra.relative(int(c["spectrum_reference"][i])),
            "name": str(c["name"][i]),
            "similarity": float(c["spectrum_similarity"][i]),
        }
    return out


def _anchor_entry_sd(home: PreparedClass, ref: np.ndarray) -> np.ndarray:
    """The library spread of the entries the anchors point at (nearest entry by reference index)."""
    e = home.entries
    if not len(e) or not len(ref):
        return np.zeros(len(ref))
    i = np.clip(np.searchsorted(e.ri, ref), 0, len(e) - 1)
    j = np.clip(i - 1, 0, len(e) - 1)
    k = np.where(np.abs(e.ri[j] - ref) < np.abs(e.ri[i] - ref), j, i)
    return np.where(np.abs(e.ri[k] - ref) < 1e-6, e.sd[k], 0.0)


def _given_decimals(table, kept: set[str] | None = None) -> dict[str, int]:
    """Peak id -> decimals its time was given with; a streamed run keeps them only for the peaks it keeps."""
    return {str(p): int(d) for p, d in zip(table.peak, getattr(table, "rt_decimals", ()) or ())
            if d is not None and (kept is None or str(p) in kept)}


def _concat(frames):
    import pandas as pd

    return pd.concat(frames, ignore_index=True)


class _Keeper:
    """What a streamed run keeps in memory: every row of up to ``budget`` peaks marked for review
    and ``budget`` others, the most a report shows (review-marked first)."""

    def __init__(self, budget: int) -> None:
        self.review_left = budget
        self.other_left = budget

    def keep(self, df):
        import pandas as pd

        if not len(df) or (self.review_left <= 0 and self.other_left <= 0):
            return df.iloc[:0]
        peak_codes, _ = pd.factorize(df["peak"].astype(str))
        review_peak = np.zeros(peak_codes.max() + 1, bool)
        np.logical_or.at(review_peak, peak_codes, F.has_flag(df["flags"].to_numpy(), "review"))
        order = np.unique(peak_codes)
        take_review = order[review_peak[order]][: self.review_left]
        take_other = order[~review_peak[order]][: self.other_left]
        self.review_left -= len(take_review)
        self.other_left -= len(take_other)
        return df[np.isin(peak_codes, np.concatenate([take_review, take_other]))].reset_index(drop=True)


def _record(table, given: dict[str, Any] | None) -> dict[str, Any]:
    """The run's QC-record facts: options given win over the peak table's preamble."""
    from matcher.results import RECORD_FIELDS

    found = dict(getattr(table, "metadata", None) or {})
    out: dict[str, Any] = {}
    for key in RECORD_FIELDS:
        value = (given or {}).get(key)
        value = value if value not in (None, "") else found.get(key)
        if value not in (None, ""):
            out[key] = str(value)
    pairs = getattr(table, "preamble", ()) or ()
    if pairs:
        out["preamble"] = [[str(k), str(v)] for k, v in pairs]
    if getattr(table, "area_percent_source", ""):
        out["area_percent"] = table.area_percent_source
    return out


def _classes(phase_class: Any, n_runs: int) -> list[str]:
    """One polarity class per run: one for all, or one per run in order (as calibrations are given)."""
    given = [phase_class] if isinstance(phase_class, str) else list(phase_class or [])
    if not given:
        raise MatcherError("give the column's polarity class: --class CLASS")
    classes = [check_class(c) for c in given]
    if len(classes) not in (1, n_runs):
        raise MatcherError(f"{len(classes)} --class values for {n_runs} runs: give one for all runs or one per run, "
                           "in the same order")
    return classes * n_runs if len(classes) == 1 else classes


def _load_run(run: RunInput, spectra_file, *, options=("--calibration", "--ladder"), **reading):
    """One run read and converted to indices: (run, :class:`matcher.signal.screen_inputs.LoadedRun`)."""
    from matcher.signal.screen_inputs import load_run

    got = load_run(run.peaks, calibration=run.calibration, ladder=run.ladder, spectra=spectra_file,
                   name=run.peaks_path, options=options, **reading)
    return run, got


def _plan_second(plan: list[RunInput], second, second_class, calibration, ladder, spectra) -> dict:
    """The second column's run of a two-column screen, checked against the first."""
    if len(plan) != 1:
        raise MatcherError(f"a two-column screen pairs one run with one run: {len(plan)} runs were given with --second")
    if second_class is None:
        raise MatcherError("give the second column's polarity class: --second-class CLASS")
    if _as_list(second) and len(_as_list(second)) != 1:
        raise MatcherError("give one run with --second")
    if _as_list(calibration) and _as_list(ladder):
        raise MatcherError("give either --second-calibration or --second-ladder, not both")
    if len(_as_list(calibration)) > 1 or len(_as_list(ladder)) > 1:
        raise MatcherError("give one --second-calibration or one --second-ladder for the second run")
    runs = plan_runs(second, calibration, ladder)
    if len(_as_list(spectra)) > 1:
        raise MatcherError("give one spectra file with --second-spectra")
    return {"run": runs[0], "class": check_class(second_class),
            "spectra": _as_list(spectra)[0] if spectra is not None else None}


def exclusive_odds(logw: np.ndarray, peak: np.ndarray, compound: np.ndarray, n: int, exclusive: bool) -> np.ndarray:
    """Log odds of each (peak, compound) row against not-in-library after the run's joint model
    (:func:`matcher.identify.assignment.assign`): ln P(peak is j) − ln P(peak is none)."""
    from matcher.identify.assignment import assign

    if not len(logw):
        return np.asarray(logw, dtype=float)
    prob, nil = assign(np.asarray(logw, float), peak, compound, n, exclusive=exclusive)
    with np.errstate(divide="ignore"):
        return np.log(np.maximum(prob, 1e-300)) - np.log(np.maximum(nil[peak], 1e-300))


def _pair_with_second(home: PreparedClass, prep: PreparedRun, home_b: PreparedClass, prep_b: PreparedRun, *,
                      window, window_percent, ids_b, area_a, area_b, spectra_b) -> tuple[Any, Any]:
    """Pair the first run's peaks with the second run's (matcher.identify.two_columns): (SecondColumn, Pairing)."""
    from matcher.identify.shortlist import score_class
    from matcher.identify.two_columns import PAIRING_DOUBT, SecondColumn, pair_peaks, per_compound

    for which, p in (("first", prep), ("second", prep_b)):
        if len(p.x) > CHUNK:
            raise MatcherError(f"the {which} run has {len(p.x)} peaks: a two-column screen pairs runs of at most "
                               f"{CHUNK} peaks each")
    x_a, x_b = prep.x, prep_b.x
    w_a = half_widths(x_a, home.phase_class, window, window_percent)
    w_b = half_widths(x_b, home_b.phase_class, None, None)
    lam_a = np.asarray(prep.peaks.unlisted, float)
    lam_b = np.asarray(prep_b.peaks.unlisted, float)
    pa, sa, ga, _ = score_class(home, replace(prep.peaks, second=None), np.arange(len(x_a)), w_a, prep.model,
                                home.mass_bg, 0.0, 1.0, lam_a)
    pb, sb, gb, _ = score_class(home_b, PeakInput(x_b, unlisted=lam_b), np.arange(len(x_b)), w_b, prep_b.model,
                                home_b.mass_bg, 0.0, 1.0, lam_b)
    spectra_a = prep.peaks.spectra
    comp_a, comp_b = home.entries.compound[pa.entry], home_b.entries.compound[pb.entry]
    # each run's odds after its own one-compound-one-peak model: a compound another peak holds pairs nothing
    odds_a = exclusive_odds(sa.logw, ga, comp_a, len(x_a), prep.model.exclusive)
    odds_b = exclusive_odds(sb.logw, gb, comp_b, len(x_b), prep_b.model.exclusive)
    pairing = pair_peaks(a_peak=ga, a_comp=comp_a, a_logw=odds_a, n_a=len(x_a),
                         b_peak=gb, b_comp=comp_b, b_ev=sb.evidence_index + (odds_b - sb.logw),
                         b_logw=odds_b, n_b=len(x_b), area_a=area_a, area_b=area_b, spectra_a=spectra_a,
                         spectra_b=spectra_b, spectrum_model=home.spectrum_model)
    n_comp = len(home.compounds)
    lib_ri, lib_sd = per_compound(home_b.entries, n_comp)  # measured entries name snapshot compounds only
    partner = pairing.partner
    safe = np.where(partner >= 0, partner, 0)
    has = partner >= 0
    second = SecondColumn(
        phase_class=home_b.phase_class, partner=partner,
        peak_id=np.where(has, np.asarray(ids_b, dtype=object)[safe] if len(x_b) else "", "").astype(object),
        ri=np.where(has, x_b[safe] if len(x_b) else np.nan, np.nan),
        unlisted=np.where(has, lam_b[safe] if len(x_b) else 1.0, 1.0),
        window=np.where(has, w_b[safe] if len(x_b) else np.nan, np.nan),
        library_ri=lib_ri, library_spread=lib_sd, index_scatter=float(prep_b.model.index_scatter))
    if pairing.options is not None and len(x_b):
        o = pairing.options
        real = o >= 0
        at = np.where(real, o, 0)
        second.option_ri = np.where(real, x_b[at], np.nan)
        second.option_unlisted = np.where(real, lam_b[at], 1.0)
        second.option_probability = pairing.option_probability
        second.doubt = PAIRING_DOUBT
    return second, pairing


def peaks_area(table) -> np.ndarray | None:
    """The peaks' areas (else their area per cent), for comparing two runs of one injection; None without."""
    for key in ("area", "area_percent"):
        v = getattr(table, key, None)
        if v is not None and np.isfinite(np.asarray(v, dtype=float)).any():
            return np.asarray(v, dtype=float)
    return None


def _prepare_second(two: dict, prepared: dict, home: PreparedClass, prep: PreparedRun, ids_a, area_a,
                    index_scatter, *, window, window_percent, adaptive, anchors, crowding, split_peaks) -> dict:
    """Prepare the second run on its own class, pair it with the first, and put its evidence on ``prep.peaks``.

    Returns the second run's provenance for :attr:`RunResult.second`."""
    from matcher.chem.spectra import SpectrumSet
    from matcher.identify.two_columns import per_compound

    run_b, got_b = two["loaded"]
    table_b, cal_b, x_b_raw, extrap_b, spec_b = got_b.table, got_b.calibration, got_b.ri, got_b.extrapolated, got_b.spectra
    home_b = prepared[two["class"]][0]
    label_b = _label(run_b)
    ids_b = np.asarray(table_b.peak)
    packed_b = SpectrumSet.from_spectra(spec_b).with_cache() if spec_b is not None else None
    peaks_b = PeakInput(x_b_raw, table_b.mol_ion, table_b.ions, table_b.hit, table_b.hit_match, extrap_b,
                        spectra=packed_b)
    sd_b = DEFAULT_MEASUREMENT_SD[home_b.phase_class] if index_scatter is None else float(index_scatter)
    anchors_b = _anchors_for_run(anchors, label_b, ids_b, home_b) if anchors is not None else None
    prep_b = prepare_run(home_b, peaks_b, sd_b, adaptive=adaptive or anchors is not None, user_anchors=anchors_b,
                         estimate_scatter=index_scatter is None, peak_ids=ids_b, crowding=crowding,
                         exclusive=not split_peaks)
    second, pairing = _pair_with_second(home, prep, home_b, prep_b, window=window, window_percent=window_percent,
                                        ids_b=ids_b, area_a=area_a, area_b=peaks_area(table_b), spectra_b=packed_b)
    prep.peaks = replace(prep.peaks, second=second)
    pairs = np.flatnonzero(pairing.partner >= 0)
    unpaired_b = np.setdiff1d(np.arange(len(ids_b)), pairing.partner[pairs])
    info = dict(pairing.info)
    if info.get("unpaired_second"):
        shown = ", ".join(str(ids_b[i]) for i in unpaired_b[:20])
        prep.notices.append(f"{len(unpaired_b)} peak(s) of the second run paired with no peak of the first: {shown}"
                            + (" ..." if len(unpaired_b) > 20 else ""))
    prep.notices.extend(info.pop("notes", []))
    if not len(home_b.entries):
        prep.notices.append(f"the library holds no {home_b.phase_class} entries: the second column pairs the peaks "
                            "but confirms nothing (every candidate is not-on-second-class)")
    prep.notices.extend(f"second run: {n}" for n in prep_b.notices)
    both = np.isfinite(second.library_ri[: len(home.compounds)])
    lib_a, _ = per_compound(home.entries, len(home.compounds))
    shown_lib = np.flatnonzero(both & np.isfinite(lib_a))
    return {
        "source": run_b.peaks_path, "label": label_b, "class": home_b.phase_class,
        "window": window_description(home_b.phase_class, None, None),
        "peak_count": int(len(ids_b)),
        "calibration": None if cal_b is None else cal_b.to_dict(),
        "correction": public_correction(prep_b.correction),
        "index_scatter": float(prep_b.model.index_scatter),
        "run_model": prep_b.info,
        "checksum": getattr(table_b, "checksum", ""),
        "spectra_checksum": got_b.spectra_checksum,
        "pairing": info,
        "pairs": {"peak": [str(ids_a[i]) for i in pairs], "second_peak": [str(ids_b[i]) for i in pairing.partner[pairs]],
                  "ri": prep.x[pairs].tolist(), "second_ri": prep_b.x[pairing.partner[pairs]].tolist(),
                  "gain": pairing.gain[pairs].tolist()},
        "unpaired_second": [str(ids_b[i]) for i in unpaired_b],
        "library_points": {"name": [str(home.compounds.name[i]) for i in shown_lib[:5000]],
                           "ri": lib_a[shown_lib[:5000]].tolist(),
                           "second_ri": second.library_ri[shown_lib[:5000]].tolist()},
    }


def screen(
    peak_files: Any,
    phase_class: str | Sequence[str],
    *,
    db: str | None = None,
    snapshot: LibrarySnapshot | None = None,
    calibration: Any = None,
    ladder: Any = None,
    mode: str = "programmed",
    dead_time: float | None = None,
    rt_unit: str | None = None,
    header_map: dict[str, str] | None = None,
    window: float | None = None,
    window_percent: float | None = None,
    top: int | None = None,
    fallback: bool = False,
    homologues: bool = False,
    adaptive: bool = False,
    anchors: str | None = None,
    index_scatter: float | None = None,
    labels: Sequence[str] | None = None,
    crowding: str | float | None = None,
    split_peaks: bool = False,
    record: dict[str, Any] | None = None,
    spectra: Any = None,
    progress: Callable[[int], None] | None = None,
    min_snr: float | None = None,
    sink: Callable[[Any], None] | None = None,
    second: Any = None,
    second_class: str | None = None,
    second_calibration: Any = None,
    second_ladder: Any = None,
    second_spectra: Any = None,
) -> ScreenResult:
    """Screen runs against the house library; see the module doc.

    ``sink``: called with each part of the output table (a DataFrame in output
    order) as soon as it is ready, so a writer can stream a run of any size; the
    runs' ``table`` then keeps only the rows of the peaks a report shows
    (:class:`_Keeper`), and ``RunResult.streamed`` is true.

    ``peak_files``: one run or a list of runs, each a peak-table path, a
    pandas DataFrame or a :class:`~matcher.io.peak_tables.PeakTable`. ``phase_class``:
    one polarity class for all runs or a list with one per run, in order. ``calibration``
    (paths or :class:`~matcher.retention.calibration.Calibration` objects) or
    ``ladder`` (paths, DataFrames or ladders): one for all runs or one per
    run. ``labels`` names the runs (default: the file stem, ``run`` for a
    table in memory). ``record`` holds the QC-record facts (``sample``,
    ``analyst``, ``instrument``, ``column``); a peak table's preamble fills
    what is not given. A path whose content is a GC-MS run file (ASTM E2077
    netCDF or mzML) has its peaks detected (:mod:`matcher.signal.chromatogram`,
    threshold ``min_snr``): apex times, areas, molecular-ion hints and spectra
    (``PeakTable.spectra``) go into the screen; a ladder may be a run file too.
    Settings are checked by :mod:`matcher.rules`.

    Two columns: ``second`` (one run, in any form ``peak_files`` takes) is the same
    sample on a column of class ``second_class``, converted with ``second_calibration``
    or ``second_ladder`` and its spectra in ``second_spectra`` as for the first run.
    The second run is prepared on its own (its own correction and scatter), its peaks
    are paired with the first run's, and every peak of the first run is scored with the
    evidence of both columns (:mod:`matcher.identify.two_columns`); the table gains
    :data:`~matcher.results.SECOND_COLUMNS` and the run its ``second`` provenance.
    """
    from matcher.limits import check_sd
    from matcher.identify.unlisted import crowding_density

    if isinstance(phase_class, str):
        check_class(phase_class)
    top = R.check_top(top)
    window, window_percent = R.check_window(window, window_percent)
    mode = R.check_mode(mode)
    rt_unit = R.check_rt_unit(rt_unit)
    crowding_density(crowding)  # a bad crowding value fails before any file is read
    if min_snr is not None:
        min_snr = R.check_min_snr(min_snr)
    if index_scatter is not None:
        index_scatter = check_sd(index_scatter)
    record = R.check_record(record)
    plan = plan_runs(peak_files, calibration, ladder, labels)
    if not plan:
        raise MatcherError("no peak file given")
    spectra_files = [] if spectra is None else ([spectra] if isinstance(spectra, (str, os.PathLike)) else list(spectra))
    if spectra_files and len(spectra_files) != len(plan):
        raise MatcherError(f"{len(spectra_files)} spectra files for {len(plan)} runs: give one per run, in the same order")
    classes = _classes(phase_class, len(plan))
    # read and convert every run before any heavy work, so a bad file fails fast
    reading = dict(rt_unit=rt_unit, header_map=header_map, min_snr=min_snr, mode=mode, dead_time=dead_time)
    loaded = [_load_run(run, spectra_files[k] if spectra_files else None, **reading) for k, run in enumerate(plan)]
    two = None
    if second is not None:
        two = _plan_second(plan, second, second_class, second_calibration, second_ladder, second_spectra)
        two["loaded"] = _load_run(two["run"], two["spectra"], options=("--second-calibration", "--second-ladder"),
                                  **reading)
    anchor_rows = None
    if anchors:
        from matcher.io.anchors import read_anchors

        anchor_rows = read_anchors(anchors)

    if snapshot is None:
        from matcher.store.snapshot_loader import load_snapshot

        snapshot = load_snapshot(db)
    prepared: dict[str, tuple[PreparedClass, PreparedClass | None]] = {}
    for cls in dict.fromkeys(classes + ([two["class"]] if two else [])):  # each class prepared once, from the one snapshot
        prepared[cls] = (prepare(snapshot, cls, homologues=homologues),
                         neighbour_of(snapshot, cls) if fallback else None)

    runs: list[RunResult] = []
    labels_seen: dict[str, int] = {}
    from matcher.chem.spectra import SpectrumSet

    for (run, got), run_class in zip(loaded, classes):
        table, cal, x_raw, extrap, spec = got.table, got.calibration, got.ri, got.extrapolated, got.spectra
        home, neighbour = prepared[run_class]
        base_sd = DEFAULT_MEASUREMENT_SD[run_class] if index_scatter is None else float(index_scatter)
        label = _label(run)
        if label in labels_seen:
            labels_seen[label] += 1
            label = f"{label}-{labels_seen[label]}"
        else:
            labels_seen[label] = 1
        packed = SpectrumSet.from_spectra(spec).with_cache() if spec is not None else None
        peaks = PeakInput(x_raw, table.mol_ion, table.ions, table.hit, table.hit_match, extrap, spectra=packed)
        user_anchors = None
        if anchors:
            user_anchors = _anchors_for_run(anchor_rows, label, np.asarray(table.peak), home)
        ids = np.asarray(table.peak)
        prep = prepare_run(home, peaks, base_sd, window=window, window_percent=window_percent,
                           adaptive=adaptive or bool(anchors), user_anchors=user_anchors,
                           estimate_scatter=index_scatter is None, peak_ids=ids, crowding=crowding,
                           exclusive=not split_peaks)
        rt = np.asarray(table.rt, dtype=float)
        area = getattr(table, "area", None)
        area_percent = getattr(table, "area_percent", None)
        second_doc = None
        if two is not None:  # a two-column screen: the second run prepared on its own, then paired
            second_doc = _prepare_second(two, prepared, home, prep, ids, peaks_area(table), index_scatter,
                                         window=window, window_percent=window_percent, adaptive=adaptive,
                                         anchors=anchor_rows, crowding=crowding, split_peaks=split_peaks)
        keeper = _Keeper(REPORT_PEAKS) if sink is not None else None
        given = getattr(table, "rt_decimals", None)
        decimals = np.asarray(list(given), dtype=object) if given is not None and len(given) == len(ids) else None
        frames, notes, shown_spectra = [], set(), {}
        for core, part in iter_shortlist(home, prep.peaks, prep.model, window=window, window_percent=window_percent,
                                         top=top, neighbour=neighbour, progress=progress):
            notes.update(part.notes)
            whole = len(core) == len(x_raw)
            pick = (lambda a: a) if whole else (lambda a: None if a is None else np.asarray(a)[core])
            if spec is not None and len(shown_spectra) < REPORT_SPECTRA:
                part_spectra = review_spectra(part, home, pick(ids), spec if whole else [spec[i] for i in core])
                shown_spectra.update(list(part_spectra.items())[: REPORT_SPECTRA - len(shown_spectra)])
            df = _table(part, label, run_class, pick(ids), pick(rt), pick(prep.x), pick(x_raw),
                        peaks if whole else _subset(peaks, core), area=pick(area), area_percent=pick(area_percent))
            if sink is not None:
                if decimals is not None:  # the peaks' time decimals travel with the part (report.files.CsvStream)
                    df.attrs["rt_decimals"] = {str(p): int(d) for p, d in zip(pick(ids), pick(decimals))
                                               if d is not None}
                sink(df)
                df = keeper.keep(df)
            frames.append(df)
        df = frames[0] if len(frames) == 1 else _concat(frames)
        if packed is not None and home.references is None:
            prep.notices.append(NO_REFERENCE_SPECTRA)
        runs.append(RunResult(
            source=run.peaks_path, label=label, phase_class=run_class,
            window=window_description(run_class, window, window_percent),
            table=df, calibration=None if cal is None else cal.to_dict(), correction=public_correction(prep.correction),
            index_scatter=prep.model.index_scatter, notices=prep.notices + sorted(notes), peak_count=len(table.peak),
            run_model=prep.info, checksum=getattr(table, "checksum", ""), record=_record(table, record),
            spectra_checksum=got.spectra_checksum,
            rt_decimals=_given_decimals(table, kept=set(df["peak"].astype(str)) if sink is not None else None),
            streamed=sink is not None, chromatogram=getattr(table, "chromatogram", None) or None,
            spectra=shown_spectra, second=second_doc,
        ))

    homes = [prepared[c][0] for c in dict.fromkeys(classes)]
    models = [h.spectrum_model.describe() if h.spectrum_model is not None else None for h, _ in prepared.values()]
    return ScreenResult(
        runs=runs,
        library={"location": snapshot.source, "revision": snapshot.revision,
                 "entries": sum(len(h.entries) for h in homes), "compounds": len(snapshot.compounds),
                 "predicted": sum(h.predicted for h in homes)},
        created=_dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat(),
        tool_version=__version__,
        caution=CAUTION,
        settings={"class": classes[0] if len(set(classes)) == 1 else classes, "top": top, "fallback": fallback,
                  "homologues": homologues, "adaptive": adaptive, "anchors": anchors, "window": window,
                  "window_percent": window_percent, "index_scatter": index_scatter, "crowding": crowding,
                  "split_peaks": split_peaks, **({"min_snr": min_snr} if min_snr is not None else {}),
                  "spectra": [os.fspath(f) for f in spectra_files] or None,
                  **({"second_class": two["class"]} if two else {}),
                  "spectrum_model": models[0] if len(set(map(str, models))) == 1 else models},
    )
