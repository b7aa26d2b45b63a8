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
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np

from matcher import CAUTION, __version__
from matcher.identify import flags as F
from matcher import rules as R
from matcher.identify.adaptive import ANCHOR_PROBABILITY, apply_correction
from matcher.identify.window_search import half_widths, window_description
from matcher.classes import check_class
from matcher.errors import InputError, MatcherError
from matcher.identify.evidence import DEFAULT_MEASUREMENT_SD, Model, PeakHints
from matcher.identify.hints import ion_masks
from matcher.results import DETAIL_COLUMNS, SHORTLIST_COLUMNS, RunResult, ScreenResult
from matcher.identify.shortlist import PeakInput, PreparedClass, Shortlist, neighbour_of, prepare, shortlist
from matcher.store.snapshot import LibrarySnapshot

CHUNK = 50_000
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


def _calibrate(run: RunInput, mode: str, dead_time: float | None, rt_unit: str | None):
    from matcher.retention.calibration import Calibration, calibrate
    from matcher.retention.ladder import Ladder, read_ladder

    if run.calibration is not None:
        return run.calibration if isinstance(run.calibration, Calibration) else Calibration.load(run.calibration)
    if run.ladder is not None:
        lad = run.ladder if isinstance(run.ladder, Ladder) else read_ladder(run.ladder, rt_unit=rt_unit)
        return calibrate(lad, mode=mode, dead_time=dead_time)
    return None


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
        None if peaks.hit_score is None else np.asarray(peaks.hit_score)[idx],
        None if peaks.extrapolated is None else np.asarray(peaks.extrapolated)[idx],
        None if peaks.unlisted is None else np.asarray(peaks.unlisted)[idx],
        None if peaks.spectra is None else peaks.spectra.take(idx),
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


def shortlist_chunked(home, peaks: PeakInput, model: Model, *, window, window_percent, top, neighbour,
                      progress: Callable[[int], None] | None = None) -> Shortlist:
    """:func:`matcher.identify.shortlist.shortlist` over chunks of peaks, results joined."""
    n = len(peaks)
    if n <= CHUNK:
        sl = shortlist(home, peaks, model, window=window, window_percent=window_percent, top=top, neighbour=neighbour)
        if progress:
            progress(n)
        return sl
    parts = []
    for start in range(0, n, CHUNK):
        idx = np.arange(start, min(n, start + CHUNK))
        part = shortlist(home, _subset(peaks, idx), model, window=window, window_percent=window_percent, top=top, neighbour=neighbour)
        part.columns["peak"] = part.columns["peak"] + start
        parts.append(part)
        if progress:
            progress(len(idx))
    cols = {k: np.concatenate([p.columns[k] for p in parts]) for k in parts[0].columns}
    return Shortlist(
        cols,
        np.concatenate([p.not_in_library for p in parts]),
        np.concatenate([p.top_probability for p in parts]),
        np.concatenate([p.candidate_count for p in parts]),
        np.concatenate([p.window for p in parts]),
        sorted({n for p in parts for n in p.notes}),
    )


def select_anchors(sl: Shortlist, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Confident calls under the joint model: (peak positions, reference indices, names).

    Ranked first with probability ≥ ANCHOR_PROBABILITY, not ambiguous, contested or mass-mismatched,
    neither predicted nor cross-class; a compound anchors at most once (its most probable peak).
    """
    c = sl.columns
    flags = c["flags"]
    ok = (c["rank"] == 1) & (c["probability"] >= ANCHOR_PROBABILITY) & ~c["cross_class"] & ~c["predicted"]
    ok &= ~F.has_flag(flags, "ambiguous") & ~F.has_flag(flags, "mass-mismatch") & ~F.has_flag(flags, "contested")
    rows = np.flatnonzero(ok)
    if len(rows):
        order = rows[np.lexsort((-c["probability"][rows], c["compound"][rows]))]
        first = np.r_[True, c["compound"][order][1:] != c["compound"][order][:-1]]
        rows = np.sort(order[first])
    return c["peak"][rows], c["library_ri"][rows], [str(v) for v in c["name"][rows]]


def _anchors_from_file(path: str, label: str, peak_ids: np.ndarray, snapshot: LibrarySnapshot, home: PreparedClass):
    """User-named anchors: CSV with ``peak`` and ``name`` (a library compound) or ``ri`` (reference index)."""
    from matcher.chem.names import matching_key
    from matcher.io.delimited import load_table, map_headers, numbers, texts

    raw = load_table(path, what="anchors file")
    cols = map_headers(raw, {"peak": ["peak id", "peak #", "id"], "name": ["compound"], "ri": ["reference index", "index"],
                             "run": ["file", "sample"]})
    if "peak" not in cols or not ({"name", "ri"} & set(cols)):
        raise InputError("needs a 'peak' column and a 'name' or 'ri' column", file=path)
    pk = texts(raw, cols["peak"], required=True)
    names = texts(raw, cols["name"]) if "name" in cols else [""] * len(pk)
    ref = numbers(raw, cols["ri"], required=False, positive=True) if "ri" in cols else np.full(len(pk), np.nan)
    runs = texts(raw, cols["run"]) if "run" in cols else [""] * len(pk)
    by_key = {}
    e = home.entries
    for k in range(len(e)):
        if not e.predicted[k]:
            by_key[matching_key(str(home.compounds.name[e.compound[k]]))] = (float(e.ri[k]), str(home.compounds.name[e.compound[k]]))
    pos_of = {str(p): i for i, p in enumerate(peak_ids)}
    out_pos, out_ref, out_name = [], [], []
    for r, (p, nm, rv, rn) in enumerate(zip(pk, names, ref, runs), start=1):
        if rn and rn != label:
            continue
        if p not in pos_of:
            continue
        if np.isfinite(rv):
            out_pos.append(pos_of[p]); out_ref.append(float(rv)); out_name.append(nm or f"anchor {p}")
            continue
        hitk = by_key.get(matching_key(nm))
        if hitk is None:
            raise InputError(f"{nm!r} is not in the library's {home.phase_class} class; give its 'ri' instead",
                             file=path, row=r, line=raw.line_of(r), column=cols.get("name"))
        out_pos.append(pos_of[p]); out_ref.append(hitk[0]); out_name.append(hitk[1])
    return np.array(out_pos, dtype=np.int64), np.array(out_ref, dtype=float), out_name


def run_flags(sl: Shortlist, x: np.ndarray, compounds) -> np.ndarray:
    """Run-level consistency flags: repeated-top and order-break (see :mod:`matcher.identify.flags`)."""
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
    flags = F.add_flag(flags, repeated, "repeated-top")

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
        flags = F.add_flag(flags, np.isin(c["peak"], list(broken)) & (c["rank"] == 1), "order-break")
    return flags


def _table(sl: Shortlist, label: str, phase_class: str, peak_ids, rt, x, x_raw, hints: PeakInput):
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
        "formula": c["formula"],
        "nominal_mass": c["nominal_mass"],
        "library_sd": c["library_sd"],
        "library_n": pd.array(np.where(c["rank"] > 0, c["library_n"], 0), dtype="Int64"),
        "mol_ion": opt(hints.mol_ion),
        "hit": opt(hints.hit, ""),
        "hit_score": opt(hints.hit_score),
        "ev_index": c["ev_index"],
        "ev_mol_ion": c["ev_mol_ion"],
        "ev_ions": c["ev_ions"],
        "ev_hit": c["ev_hit"],
        "ev_spectrum": c["ev_spectrum"],
        "spectrum_similarity": c["spectrum_similarity"],
    }
    df = pd.DataFrame(data)
    df.loc[df["rank"].isna(), "library_n"] = pd.NA
    return df[list(SHORTLIST_COLUMNS) + list(DETAIL_COLUMNS)]


def _with(peaks: PeakInput, x: np.ndarray, lam: np.ndarray) -> PeakInput:
    return PeakInput(x, peaks.mol_ion, peaks.ions, peaks.hit, peaks.hit_score, peaks.extrapolated, lam, peaks.spectra)


def _shift_profile(home: PreparedClass, peaks: PeakInput, model: Model, w: np.ndarray, lam: np.ndarray) -> float:
    """Coarse offset of the run: the shift b maximising the run's mixture likelihood (see :mod:`matcher.identify.adaptive`)."""
    from matcher.identify.adaptive import MIN_ANCHORS, SHIFT_STEP
    from matcher.identify.assignment import _Groups
    from matcher.identify.window_search import window_pairs
    from matcher.identify.evidence import score_pairs

    x = np.asarray(peaks.ri, float)
    ok = np.isfinite(x)
    if ok.sum() < MIN_ANCHORS or not len(home.entries):
        return 0.0
    xs = x[ok]
    reach = float(np.max(w[ok]))
    pairs = window_pairs(home.entries.ri, xs, w[ok] * 2.0)
    sub = _subset(peaks, np.flatnonzero(ok))
    hints = _hints_for_fit(sub, home)
    if hints.compares_spectra():  # the pairs do not move with the shift: compare the spectra once
        from matcher.chem.spectra import best_similarity

        hints.spectrum_similarity, hints.spectrum_reference = best_similarity(
            hints.spectra, hints.references, pairs.peak, home.entries.compound[pairs.entry], lookup=hints.lookup)
    groups = _Groups(pairs.peak, len(xs))  # per peak: log(1 + Σ_j w_pj), the "1" being not-in-library
    best_b, best_ll = 0.0, -np.inf
    for b in np.arange(-reach, reach + SHIFT_STEP / 2, SHIFT_STEP):
        sc = score_pairs(pairs, xs + b, home.entries, home.compounds, home.mass_bg, model, hints, home.ion_masks,
                         unlisted_density=lam[ok])
        inside = np.abs(sc.delta) <= w[ok][pairs.peak]
        ll = float(np.sum(groups.logsumexp(np.where(inside, sc.logw, -np.inf))))
        if ll > best_ll + 1e-9 or (abs(ll - best_ll) <= 1e-9 and abs(b) < abs(best_b)):
            best_b, best_ll = float(b), ll
    return best_b


def screen_run(home: PreparedClass, peaks: PeakInput, base_sd: float, *, window=None, window_percent=None, top=None,
               neighbour: PreparedClass | None = None, adaptive: bool = False, user_anchors=None,
               estimate_scatter: bool = True, peak_ids: np.ndarray | None = None, progress=None,
               crowding=None, exclusive: bool = True):
    """Screen one run's peaks (indices already computed); returns
    (shortlist, corrected indices, model, run-model info, correction or None, notices).

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
            first = shortlist_chunked(home, _with(peaks, xs, lam1), m1, window=window, window_percent=window_percent,
                                      top=None, neighbour=None)
            a_pos, a_ref, a_names = select_anchors(first, xs)
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
            base = base.with_(measurement_sd=sd)
            w = half_widths(x, home.phase_class, window, window_percent)
            model, info, lam = fit_run_model(home, _with(peaks, x, None), base, w, crowding=crowding)
        notices.append(correction["notice"])
    if info.get("notice"):
        notices.append(info["notice"])
    sl = shortlist_chunked(home, _with(peaks, x, lam), model, window=window, window_percent=window_percent, top=top,
                           neighbour=neighbour, progress=progress)
    notices.extend(sl.notes)
    sl.columns["flags"] = run_flags(sl, x, home.compounds)
    info["index_scatter"] = float(model.measurement_sd)
    return sl, x, model, info, correction, notices


def peak_spectra(path: Any, peak_ids: np.ndarray) -> list:
    """One spectrum (or None) per peak from a JCAMP-DX file whose blocks are titled by peak id.

    A title may also end in `` peak ID`` (as ``matcher peaks --spectra-out`` writes them); an empty block means
    no spectrum. A block whose title names no peak of the run, or a peak named twice, refuses the file (file,
    block, line).
    """
    from matcher.io.jcamp import read_jcamp

    blocks = read_jcamp(path)
    pos = {str(p).strip(): i for i, p in enumerate(peak_ids)}
    out: list = [None] * len(peak_ids)
    for b in blocks:
        title = b.title.strip()
        i = pos.get(title)
        if i is None and " peak " in title:
            i = pos.get(title.rsplit(" peak ", 1)[1].strip())
        if i is None:
            raise InputError(f"block {b.block} (line {b.line}): title {b.title[:60]!r} is not a peak id of the run "
                             "(each block of a run's spectra file is titled by its peak id)", file=os.fspath(path))
        if out[i] is not None:
            raise InputError(f"block {b.block} (line {b.line}): peak {b.title[:60]!r} has a spectrum already",
                             file=os.fspath(path))
        out[i] = b.spectrum if len(b.mz) else None
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


def screen(
    peak_files: Any,
    phase_class: str,
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
    measurement_sd: float | None = None,
    labels: Sequence[str] | None = None,
    crowding: str | float | None = None,
    split_peaks: bool = False,
    spectra: Any = None,
    progress: Callable[[int], None] | None = None,
) -> ScreenResult:
    """Screen runs against one class of the house library; see the module doc.

    ``peak_files``: one run or a list of runs, each a peak-table path, a
    pandas DataFrame or a :class:`~matcher.io.peak_tables.PeakTable`. ``calibration``
    (paths or :class:`~matcher.retention.calibration.Calibration` objects) or
    ``ladder`` (paths, DataFrames or ladders): one for all runs or one per
    run. ``labels`` names the runs (default: the file stem, ``run`` for a
    table in memory). Settings are checked by :mod:`matcher.rules`.
    """
    from matcher.limits import check_sd
    from matcher.io.peak_tables import PeakTable, read_peaks
    from matcher.identify.unlisted import crowding_density

    phase_class = check_class(phase_class)
    top = R.check_top(top)
    window, window_percent = R.check_window(window, window_percent)
    mode = R.check_mode(mode)
    rt_unit = R.check_rt_unit(rt_unit)
    crowding_density(crowding)  # a bad crowding value fails before any file is read
    if measurement_sd is not None:
        measurement_sd = check_sd(measurement_sd)
    plan = plan_runs(peak_files, calibration, ladder, labels)
    if not plan:
        raise MatcherError("no peak file given")
    spectra_files = [] if spectra is None else ([spectra] if isinstance(spectra, (str, os.PathLike)) else list(spectra))
    if spectra_files and len(spectra_files) != len(plan):
        raise MatcherError(f"{len(spectra_files)} spectra files for {len(plan)} runs: give one per run, in the same order")
    # read and convert every run before any heavy work, so a bad file fails fast
    loaded = []
    for run in plan:
        table = run.peaks if isinstance(run.peaks, PeakTable) else read_peaks(run.peaks, rt_unit=rt_unit, overrides=header_map)
        cal = None
        extrap = np.zeros(len(table.peak), dtype=bool)
        if table.has_ri:
            x = np.asarray(table.ri, dtype=float)
        else:
            cal = _calibrate(run, mode, dead_time, rt_unit)
            if cal is None:
                raise MatcherError(f"{run.peaks_path}: the table has no 'ri' column; give --calibration CAL.json or --ladder LADDER.csv")
            x, extrap = cal.convert(np.asarray(table.rt, dtype=float))
        spec = None
        if spectra_files:
            if getattr(table, "spectra", ()):
                raise MatcherError(f"{run.peaks_path} has a 'spectrum' column and --spectra {spectra_files[len(loaded)]} "
                                   "was given too: give the spectra once")
            spec = peak_spectra(spectra_files[len(loaded)], np.asarray(table.peak))
        elif getattr(table, "spectra", ()):
            spec = list(table.spectra)
        loaded.append((run, table, cal, np.asarray(x, dtype=float), np.asarray(extrap, dtype=bool), spec))

    if snapshot is None:
        from matcher.store.snapshot_loader import load_snapshot

        snapshot = load_snapshot(db)
    home = prepare(snapshot, phase_class, homologues=homologues)
    neighbour = neighbour_of(snapshot, phase_class) if fallback else None
    base_sd = DEFAULT_MEASUREMENT_SD[phase_class] if measurement_sd is None else float(measurement_sd)

    runs: list[RunResult] = []
    labels_seen: dict[str, int] = {}
    from matcher.chem.spectra import SpectrumSet

    for run, table, cal, x_raw, extrap, spec in loaded:
        label = _label(run)
        if label in labels_seen:
            labels_seen[label] += 1
            label = f"{label}-{labels_seen[label]}"
        else:
            labels_seen[label] = 1
        packed = SpectrumSet.from_spectra(spec).with_cache() if spec is not None else None
        peaks = PeakInput(x_raw, table.mol_ion, table.ions, table.hit, table.hit_score, extrap, spectra=packed)
        user_anchors = None
        if anchors:
            user_anchors = _anchors_from_file(anchors, label, np.asarray(table.peak), snapshot, home)
        outcome = screen_run(home, peaks, base_sd, window=window, window_percent=window_percent, top=top,
                             neighbour=neighbour, adaptive=adaptive or bool(anchors), user_anchors=user_anchors,
                             estimate_scatter=measurement_sd is None, peak_ids=np.asarray(table.peak), progress=progress,
                             crowding=crowding, exclusive=not split_peaks)
        sl, x, model, info, correction, notices = outcome
        if packed is not None and home.references is None:
            notices.append(NO_REFERENCE_SPECTRA)
        df = _table(sl, label, phase_class, table.peak, table.rt, x, x_raw, peaks)
        runs.append(RunResult(
            source=run.peaks_path, label=label, phase_class=phase_class,
            window=window_description(phase_class, window, window_percent),
            table=df, calibration=None if cal is None else cal.to_dict(), correction=correction,
            measurement_sd=model.measurement_sd, notices=notices, peak_count=len(table.peak), run_model=info,
            checksum=getattr(table, "checksum", ""),
            spectra=review_spectra(sl, home, table.peak, spec),
        ))

    return ScreenResult(
        runs=runs,
        library={"location": snapshot.source, "revision": snapshot.revision,
                 "entries": len(home.entries), "compounds": len(snapshot.compounds), "predicted": home.predicted},
        created=_dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat(),
        tool_version=__version__,
        caution=CAUTION,
        settings={"class": phase_class, "top": top, "fallback": fallback, "homologues": homologues,
                  "adaptive": adaptive, "anchors": anchors, "window": window, "window_percent": window_percent,
                  "measurement_sd": measurement_sd, "crowding": crowding, "split_peaks": split_peaks,
                  "spectra": [os.fspath(f) for f in spectra_files] or None,
                  "spectrum_model": home.spectrum_model.describe() if home.spectrum_model is not None else None},
    )
