"""Two-column confirmation: one sample run on two columns of different polarity, scored jointly.

Where one column cannot separate candidates, labs run the sample on a second
column whose stationary phase differs in polarity (often one injection split
to both columns) and accept a compound only where both indices agree. This
module does the two steps an analyst does by hand, inside the evidence model
of :mod:`matcher.identify.evidence`.

**Pairing.** Peak *a* of the first run and peak *b* of the second run are one
compound or two. With :math:`w_A(a,j)` the odds of library compound *j*
against not-in-library for *a* (prior and every hint of the first run
included) and :math:`e_B(b,j) = \\ln\\phi(x_b-\\mu^B_j; s^B_j) - \\ln\\lambda^B_U(x_b)`
the index evidence of *b* on the second class (its library spread and the
second run's own scatter in :math:`s^B_j`, its own unlisted intensity
:math:`\\lambda^B_U`), the log likelihood ratio of "one compound" against
"two unrelated peaks" is

.. math::

   g_{ab} = \\ln\\Big(1 + \\sum_j w_A(a,j)\\,e^{e_B(b,j)}\\Big)
          - \\ln\\Big(1 + \\sum_j w_A(a,j)\\Big) - \\ln\\Big(1 + \\sum_j \\rho_B\\,e^{e_B(b,j)}\\Big)
          + t^{area}_{ab} + t^{spec}_{ab}

with :math:`\\rho_B` the second run's presence odds. The "1" in each sum is
not-in-library, one hypothesis on both columns. :math:`t^{area}` compares the
log area ratio :math:`r_{ab} = \\ln(A_b/A_a)` of one injection split to two
columns, :math:`\\mathcal N(r; \\ln k, \\sigma_k)` with the split factor *k*
and its scatter estimated from the pairs of a first pass made on the indices
alone (median and median absolute deviation, robust to the wrong pairs such a
pass makes; the scatter kept between 0.15 and 0.5), mixed with a share of 0.1
of right pairs whose areas disagree anyway (co-elution on one column), so a
disagreeing area lowers a pair's odds at most tenfold, against the spread of
*r* over unrelated peaks; :math:`t^{spec}` is the library-calibrated log
likelihood ratio of the two peaks' spectral similarity
(:mod:`matcher.identify.spectral_evidence`) where both have spectra.

A peak pairs with at most one peak of the other run, and may stay unpaired
(prior probability :data:`UNPAIRED` per peak: its compound co-elutes with
another on the other column, or stays below detection there). The pairing
maximises :math:`\\sum (g_{ab} + \\ln\\frac{1-u}{u^2})` over the pairs made,
the *assignment problem* (H. W. Kuhn, "The Hungarian method for the
assignment problem", Naval Res. Logist. Q. 2, 83-97, 1955), solved as a
minimum-weight full matching of a bipartite graph in which each peak also has
an "unpaired" partner (SciPy's ``min_weight_full_bipartite_matching``, the
shortest-augmenting-path method of R. Jonker and A. Volgenant, Computing 38,
325-340, 1987). Pairs whose peaks share no library candidate are considered
only where their areas or spectra agree (the indices say nothing of them).

**Joint posterior.** For a paired peak, compound *j*'s log odds gain
:math:`e_B(b,j)` (the column ``evidence_second``), averaged over the partners the
pairing leaves open (:func:`open_pairings`) and mixed with a small probability
:data:`PAIRING_DOUBT` that the pair is wrong (then the second column says nothing):
:math:`\\ln[(1-\\delta)\\sum_k p_k e^{e_B(b_k,j)} + \\delta]`; the one-compound-one-peak
model of :mod:`matcher.identify.assignment` then runs on the joint odds. A
compound with no entry on the second class gets the second column's evidence
from the unlisted model (0, flag ``not-on-second-class``); an unpaired peak is
scored on its first column alone (flag ``unpaired``). The area and spectral
terms weigh the same for every candidate of a pair, so they decide the
pairing, not the ranking. The second run's mass hints are not used for the
ranking (the first run's are).

References (bibliographic details from memory): Kuhn 1955 and Jonker &
Volgenant 1987 as above.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

#: u, the prior probability that a peak has no partner on the other column (an assumption, not fitted).
UNPAIRED = 0.1
#: σ of ln(area_B / area_A) − ln k used when the first pass has too few pairs to estimate it, and the most an
#: estimate may reach (assumption: split ratios and detector responses differ by compound by some tens of per cent).
AREA_SCATTER = 0.5
#: share of right pairs whose areas disagree anyway (co-elution on one column, integration): an assumption.
AREA_OUTLIERS = 0.1
#: least σ of the area term (integration error of a few per cent).
MIN_AREA_SCATTER = 0.15
#: fewest pairs of the first pass to estimate the split factor and its scatter.
MIN_AREA_PAIRS = 5
#: pairs whose peaks share no candidate are scored only when both runs together hold at most this many pairs.
DENSE_PAIRS = 4_000_000
#: probability that a pair is wrong however good it looks (an assumption): the second column can lower a
#: candidate's odds at most 1/PAIRING_DOUBT-fold, so one wrong pair cannot bury a right first-column call.
PAIRING_DOUBT = 0.05
#: pairs sharing no candidate are compared by spectrum only when both runs together hold at most this many pairs.
DENSE_SPECTRA = 250_000
#: partners kept open per peak (the chosen one and its strongest rivals, "no partner" included).
OPTIONS = 3
#: rivals less probable than this are dropped from a peak's open partners.
OPTION_FLOOR = 0.01
#: a pair of areas further than this many σ_k from the split factor is not considered "agreeing".
AREA_REACH = 3.0


@dataclass
class SecondColumn:
    """The second column's evidence for every peak of the first run (see module doc).

    Per peak of the first run: ``partner`` (position in the second run, −1 unpaired),
    ``peak_id``, ``ri`` (the partner's index, corrected like the rest of its run),
    ``unlisted`` (λ_U of the second run there), ``window`` (the half-width of the
    second class there); ``options``: up to :data:`OPTIONS` partners the pairing
    left open, (n, K) arrays ``option_ri`` (NaN: no partner), ``option_unlisted`` and
    ``option_probability`` (0 for an unused slot; a row sums to 1), the chosen partner first.
    Per library compound: ``library_ri`` and ``library_spread`` on the second class
    (NaN where the compound has no entry there).
    """

    phase_class: str
    partner: np.ndarray
    peak_id: np.ndarray
    ri: np.ndarray
    unlisted: np.ndarray
    window: np.ndarray
    library_ri: np.ndarray
    library_spread: np.ndarray
    index_scatter: float
    option_ri: np.ndarray | None = None
    option_unlisted: np.ndarray | None = None
    option_probability: np.ndarray | None = None
    doubt: float = 0.0  # probability that the pairing is wrong whatever it says (PAIRING_DOUBT in a screen)

    def take(self, idx: np.ndarray) -> "SecondColumn":
        idx = np.asarray(idx, dtype=np.int64)
        opt = {k: None if getattr(self, k) is None else getattr(self, k)[idx]
               for k in ("option_ri", "option_unlisted", "option_probability")}
        return replace(self, partner=self.partner[idx], peak_id=self.peak_id[idx], ri=self.ri[idx],
                       unlisted=self.unlisted[idx], window=self.window[idx], **opt)

    @property
    def pair_probability(self) -> np.ndarray:
        """Per peak: the probability of the chosen pairing (of staying unpaired, for an unpaired peak)."""
        if self.option_probability is None:
            return np.ones(len(self.partner))
        return self.option_probability[:, 0]

    def _log_ratio(self, x, lam, lib, spread):
        s = np.sqrt(np.where(np.isfinite(spread), spread, 0.0) ** 2 + self.index_scatter ** 2)
        with np.errstate(invalid="ignore", divide="ignore"):
            return -0.5 * ((x - lib) / s) ** 2 - np.log(s) - 0.5 * np.log(2 * np.pi) - np.log(lam)

    def evidence(self, peak: np.ndarray, compound: np.ndarray) -> dict[str, np.ndarray]:
        """Per (peak, compound) pair: ``evidence`` e_B (0 unpaired or not listed; over the open pairings,
        ln Σ_k p_k e^{e_B(b_k, j)}, an unpaired option counting e^0), ``library_ri``, ``delta_ri`` (the chosen
        partner's index − library, NaN where either is missing), ``listed``, ``paired`` and ``inside``
        (|Δ| ≤ the second window)."""
        peak = np.asarray(peak, dtype=np.int64)
        compound = np.asarray(compound, dtype=np.int64)
        known = (compound >= 0) & (compound < len(self.library_ri))
        c = np.where(known, compound, 0)
        lib = np.where(known, self.library_ri[c] if len(self.library_ri) else np.nan, np.nan)
        spread = np.where(known, self.library_spread[c] if len(self.library_spread) else np.nan, np.nan)
        paired = self.partner[peak] >= 0
        listed = np.isfinite(lib)
        delta = np.where(paired & listed, self.ri[peak] - lib, np.nan)
        if self.option_probability is None:
            ev = self._log_ratio(self.ri[peak], self.unlisted[peak], lib, spread)
            ev = np.where(paired & listed & np.isfinite(ev), ev, 0.0)
        else:
            p = self.option_probability[peak]
            x = self.option_ri[peak]
            terms = self._log_ratio(x, self.option_unlisted[peak], lib[:, None], spread[:, None])
            terms = np.where(np.isfinite(x), terms, 0.0)  # no partner: the not-in-library ratio, 1
            with np.errstate(divide="ignore"):
                terms = np.where(p > 0, terms + np.log(np.where(p > 0, p, 1.0)), -np.inf)
            top = np.max(terms, axis=1, keepdims=True)
            top = np.where(np.isfinite(top), top, 0.0)
            ev = top[:, 0] + np.log(np.sum(np.exp(terms - top), axis=1))
            if self.doubt > 0:  # a wrong pairing says nothing of the compound: ratio 1 with probability `doubt`
                ok = np.isfinite(ev)
                ev = np.where(ok, np.logaddexp(np.log1p(-self.doubt) + np.where(ok, ev, 0.0), np.log(self.doubt)), ev)
            ev = np.where(listed & np.isfinite(ev), ev, 0.0)
        return {"evidence": ev, "library_ri": lib, "delta_ri": delta, "listed": listed,
                "paired": paired, "inside": paired & listed & (np.abs(delta) <= self.window[peak])}


def per_compound(entries, n_compounds: int) -> tuple[np.ndarray, np.ndarray]:
    """Library index and spread of each compound on one class (NaN where it has no measured entry).

    A compound with several measured entries on the class takes the one with the smallest spread.

    >>> from types import SimpleNamespace as S
    >>> e = S(ri=np.array([900.0, 950.0, 951.0]), sd=np.array([2.0, 3.0, 1.0]), compound=np.array([2, 0, 0]),
    ...       predicted=np.array([False, False, False]))
    >>> [v.tolist() for v in per_compound(e, 3)]
    [[951.0, nan, 900.0], [1.0, nan, 2.0]]
    """
    ri = np.full(n_compounds, np.nan)
    sd = np.full(n_compounds, np.nan)
    ok = ~np.asarray(entries.predicted, bool) & (entries.compound >= 0) & (entries.compound < n_compounds)
    idx = np.flatnonzero(ok)
    order = idx[np.argsort(-entries.sd[idx], kind="stable")]  # smallest spread written last, so it wins
    ri[entries.compound[order]] = entries.ri[order]
    sd[entries.compound[order]] = entries.sd[order]
    return ri, sd


@dataclass
class Pairing:
    """The pairs of two runs' peaks (see module doc)."""

    partner: np.ndarray  # per peak of the first run: position in the second run, −1 unpaired
    gain: np.ndarray  # per peak of the first run: the pair's log likelihood ratio g_ab (NaN unpaired)
    info: dict = field(default_factory=dict)
    options: np.ndarray | None = None  # (n, OPTIONS): partner positions left open, chosen first; −1 none, −2 unused
    option_probability: np.ndarray | None = None  # (n, OPTIONS), rows sum to 1


def _logsumexp_by(keys: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unique keys and log Σ exp(values) per key."""
    if not len(keys):
        return keys, values
    order = np.argsort(keys, kind="stable")
    k, v = keys[order], values[order]
    starts = np.flatnonzero(np.r_[True, k[1:] != k[:-1]])
    mx = np.maximum.reduceat(v, starts)
    tot = np.add.reduceat(np.exp(v - np.repeat(mx, np.diff(np.r_[starts, len(v)]))), starts)
    return k[starts], mx + np.log(tot)


def shared_candidates(a_peak, a_comp, a_logw, b_peak, b_comp, b_ev, n_b: int):
    """Pairs (a, b) sharing at least one candidate compound and ln Σ_j w_A(a,j) e^{e_B(b,j)} over the shared ones.

    Returns (pair key a·n_b + b, log sum). Every argument is per candidate row of its run.

    >>> k, s = shared_candidates(np.array([0, 0]), np.array([5, 6]), np.log([2.0, 3.0]),
    ...                          np.array([1, 0]), np.array([5, 6]), np.log([4.0, 1.0]), 2)
    >>> k.tolist(), np.exp(s).round(6).tolist()
    ([0, 1], [3.0, 8.0])
    """
    a_peak, a_comp, b_peak, b_comp = (np.asarray(v, dtype=np.int64) for v in (a_peak, a_comp, b_peak, b_comp))
    if not len(a_peak) or not len(b_peak):
        return np.zeros(0, np.int64), np.zeros(0)
    ob = np.argsort(b_comp, kind="stable")
    bc = b_comp[ob]
    lo = np.searchsorted(bc, a_comp, "left")
    hi = np.searchsorted(bc, a_comp, "right")
    cnt = hi - lo
    rows = np.repeat(np.arange(len(a_peak)), cnt)
    starts = np.cumsum(cnt) - cnt
    within = np.arange(int(cnt.sum())) - np.repeat(starts, cnt)
    brow = ob[np.repeat(lo, cnt) + within]
    keys = a_peak[rows] * np.int64(n_b) + b_peak[brow]
    return _logsumexp_by(keys, np.asarray(a_logw, float)[rows] + np.asarray(b_ev, float)[brow])


def log1pexp(v: np.ndarray) -> np.ndarray:
    """ln(1 + e^v), exact for large v.

    >>> log1pexp(np.array([-np.inf, 0.0, 800.0])).round(6).tolist()
    [0.0, 0.693147, 800.0]
    """
    v = np.asarray(v, dtype=float)
    return np.logaddexp(0.0, v)


def best_matching(rows: np.ndarray, cols: np.ndarray, gain: np.ndarray, n_rows: int, n_cols: int) -> np.ndarray:
    """The matching of rows to columns that maximises the summed gain over the pairs it makes.

    Only pairs with a positive gain can be chosen; a row or column may stay single. Returns per row
    the column matched (−1 single). Each (row, col) pair must appear once.

    >>> best_matching(np.array([0, 0, 1]), np.array([0, 1, 0]), np.array([5.0, 4.0, 4.5]), 2, 2).tolist()
    [1, 0]
    >>> best_matching(np.array([0]), np.array([0]), np.array([-1.0]), 1, 1).tolist()
    [-1]
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import min_weight_full_bipartite_matching

    out = np.full(n_rows, -1, dtype=np.int64)
    keep = np.asarray(gain) > 0
    r = np.asarray(rows, dtype=np.int64)[keep]
    c = np.asarray(cols, dtype=np.int64)[keep]
    g = np.asarray(gain, dtype=float)[keep]
    if not len(g):
        return out
    # nodes: rows = the first run's peaks, then one "single" stand-in per column; columns = the second run's peaks,
    # then one "single" stand-in per row. Pair (r, c) costs C − g; every single costs C; the stand-ins of a made
    # pair match each other (mirror edges), so every full matching has n_rows + n_cols edges and the least cost
    # is the greatest summed gain.
    big = float(g.max()) + 1.0
    ar = np.arange(n_rows, dtype=np.int64)
    ac = np.arange(n_cols, dtype=np.int64)
    rr = np.concatenate([r, ar, n_rows + ac, n_rows + c])
    cc = np.concatenate([c, n_cols + ar, ac, n_cols + r])
    ww = np.concatenate([big - g, np.full(n_rows + n_cols + len(g), big)])
    graph = coo_matrix((ww, (rr, cc)), shape=(n_rows + n_cols, n_cols + n_rows)).tocsr()
    row_of, col_of = min_weight_full_bipartite_matching(graph)
    real = (row_of < n_rows) & (col_of < n_cols)
    out[row_of[real]] = col_of[real]
    return out


def _area_stats(la: np.ndarray, lb: np.ndarray, first: np.ndarray) -> dict:
    """Split factor and scatter of ln(area_B/area_A) from first-pass pairs (median and 1.4826 × median absolute
    deviation, the scatter between :data:`MIN_AREA_SCATTER` and :data:`AREA_SCATTER`: a first pass with many
    wrong pairs, as in a dense library, must not make the areas say nothing); the spread over unrelated peaks."""
    ok_a, ok_b = np.isfinite(la), np.isfinite(lb)
    out = {"available": bool(ok_a.any() and ok_b.any())}
    if not out["available"]:
        return out
    paired = np.flatnonzero((first >= 0) & ok_a)
    paired = paired[ok_b[first[paired]]]
    r = lb[first[paired]] - la[paired]
    spread = float(np.sqrt(np.var(la[ok_a]) + np.var(lb[ok_b])))
    background = float(np.median(lb[ok_b]) - np.median(la[ok_a]))
    if len(r) >= MIN_AREA_PAIRS:
        centre = float(np.median(r))
        scatter = min(max(1.4826 * float(np.median(np.abs(r - centre))), MIN_AREA_SCATTER), AREA_SCATTER)
        source = f"{len(r)} pairs of the first pass (indices alone)"
    else:
        centre = float(np.log(np.exp(lb[ok_b]).sum() / np.exp(la[ok_a]).sum()))
        scatter = AREA_SCATTER
        source = "the runs' summed areas (too few pairs in the first pass to estimate it)"
    out.update(log_factor=centre, scatter=scatter, background_centre=background,
               background_spread=max(spread, 2.0 * scatter), pairs=int(len(r)), source=source)
    return out


def area_term(stats: dict, r: np.ndarray) -> np.ndarray:
    """The area term t_area of the module doc for log area ratios ``r``: the split factor's normal density,
    mixed with the share :data:`AREA_OUTLIERS` of pairs whose areas disagree however right the pair (a
    co-elution on one column, a badly integrated peak), against the spread of unrelated peaks; so a
    disagreeing area lowers a pair's odds at most 1/AREA_OUTLIERS-fold.

    >>> st = {"available": True, "log_factor": 0.0, "scatter": 0.1, "background_centre": 0.0, "background_spread": 1.5}
    >>> area_term(st, np.array([0.0, 5.0])).round(2).tolist()
    [2.61, -2.3]
    """
    if not stats.get("available"):
        return np.zeros(len(r))
    s, m = stats["scatter"], stats["background_spread"]
    r = np.asarray(r, dtype=float)
    near = -0.5 * ((r - stats["log_factor"]) / s) ** 2 - np.log(s)
    far = -0.5 * ((r - stats["background_centre"]) / m) ** 2 - np.log(m)
    t = np.logaddexp(np.log1p(-AREA_OUTLIERS) + near, np.log(AREA_OUTLIERS) + far) - far
    return np.where(np.isfinite(t), t, 0.0)


def pair_peaks(*, a_peak, a_comp, a_logw, n_a: int, b_peak, b_comp, b_ev, b_logw, n_b: int,
               area_a=None, area_b=None, spectra_a=None, spectra_b=None, spectrum_model=None,
               unpaired: float = UNPAIRED) -> Pairing:
    """Pair the peaks of two runs (see module doc).

    ``a_*``: the first run's candidate rows (peak, compound, log odds w_A); ``b_*``: the second run's
    (peak, compound, index evidence e_B, log odds with the prior). ``area_*``: per peak (NaN or ≤ 0: unknown);
    ``spectra_*``: :class:`matcher.chem.spectra.SpectrumSet` per peak or None.
    """
    a_peak, b_peak = np.asarray(a_peak, np.int64), np.asarray(b_peak, np.int64)
    u_a = log1pexp(_logsumexp_per(a_peak, np.asarray(a_logw, float), n_a))
    u_b = log1pexp(_logsumexp_per(b_peak, np.asarray(b_logw, float), n_b))
    keys, s = shared_candidates(a_peak, a_comp, a_logw, b_peak, b_comp, b_ev, n_b)
    prior = float(np.log((1.0 - unpaired) / unpaired ** 2))
    ka, kb = keys // max(n_b, 1), keys % max(n_b, 1)
    index_gain = log1pexp(s) - u_a[ka] - u_b[kb]

    first = best_matching(ka, kb, index_gain + prior, n_a, n_b)  # on the indices alone: pairs sharing a candidate

    def logs(area, n):
        v = np.full(n, np.nan) if area is None else np.asarray(area, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(np.isfinite(v) & (v > 0), np.log(np.where(v > 0, v, 1.0)), np.nan)

    la, lb = logs(area_a, n_a), logs(area_b, n_b)
    stats = _area_stats(la, lb, first)
    both_spectra = spectra_a is not None and spectra_b is not None
    notes: list[str] = []
    # candidate pairs: those sharing a candidate, and (for runs small enough) any pair whose areas or spectra agree
    rows_, cols_ = ka, kb
    base = index_gain
    dense_sim = None
    if n_a * n_b <= DENSE_PAIRS and (stats.get("available") or both_spectra) and n_a and n_b:
        grid_a, grid_b = np.divmod(np.arange(n_a * n_b, dtype=np.int64), n_b)
        agree = np.zeros(len(grid_a), dtype=bool)
        if stats.get("available"):
            r = lb[grid_b] - la[grid_a]
            agree |= np.abs(r - stats["log_factor"]) <= AREA_REACH * stats["scatter"]
        if both_spectra and n_a * n_b <= DENSE_SPECTRA:
            from matcher.chem.spectra import pair_similarity
            from matcher.identify.spectral_evidence import SpectrumModel

            model = spectrum_model if spectrum_model is not None else SpectrumModel.default()
            dense_sim = pair_similarity(spectra_a, spectra_b, grid_a, grid_b)  # every pair, kept for the scores
            agree |= model.log_ratio(dense_sim) > 0
        extra = np.flatnonzero(agree)
        extra = extra[~np.isin(extra, keys)]
        rows_ = np.concatenate([ka, grid_a[extra]])
        cols_ = np.concatenate([kb, grid_b[extra]])
        base = np.concatenate([index_gain, -u_a[grid_a[extra]] - u_b[grid_b[extra]]])
        del grid_a, grid_b
    if n_a * n_b > DENSE_PAIRS:
        notes.append(f"{n_a} × {n_b} peaks: only pairs sharing a library candidate were considered")
    total = base + prior
    if stats.get("available"):
        total = total + area_term(stats, lb[cols_] - la[rows_])
    spec_pairs = 0
    if both_spectra and len(rows_):
        from matcher.chem.spectra import pair_similarity
        from matcher.identify.spectral_evidence import SpectrumModel

        sim = dense_sim[rows_ * n_b + cols_] if dense_sim is not None else \
            pair_similarity(spectra_a, spectra_b, rows_, cols_)
        model = spectrum_model if spectrum_model is not None else SpectrumModel.default()
        total = total + model.log_ratio(sim)
        spec_pairs = int(np.isfinite(sim).sum())
    partner = best_matching(rows_, cols_, total, n_a, n_b)
    gain = np.full(n_a, np.nan)
    on = np.flatnonzero(partner[rows_] == cols_)  # the chosen pairs' rows
    gain[rows_[on]] = total[on] - prior
    options, option_p = open_pairings(rows_, cols_, total, partner, n_b)
    info = {
        "method": "assignment of pairs by maximum summed log likelihood ratio (Kuhn 1955; Jonker & Volgenant 1987)",
        "unpaired_prior": unpaired,
        "paired": int((partner >= 0).sum()),
        "unpaired_first": int((partner < 0).sum()),
        "unpaired_second": int(n_b - (partner >= 0).sum()),
        "area": {k: v for k, v in stats.items() if k != "available"} if stats.get("available") else None,
        "spectra_compared": spec_pairs,
        "notes": notes,
    }
    info["uncertain_pairs"] = int(((option_p[:, 0] < 0.9) & (partner >= 0)).sum())
    return Pairing(partner, gain, info, options, option_p)


def open_pairings(rows, cols, score, partner: np.ndarray, n_b: int) -> tuple[np.ndarray, np.ndarray]:
    """The partners each peak could take and their probabilities, next to the chosen matching.

    ``score``: the pair scores, an array aligned with ``rows``/``cols`` (or a dict (row, col) -> score).
    For peak a matched to b (or single), each other partner b' (or none) is scored by the best local change
    of the matching that gives a b': Δ = s(a,b') − s(a,b) − s(a',b') + max(0, s(a',b)) when b' belongs to a'
    (a' takes b or stays single), Δ = s(a,b') − s(a,b) when b' is free, and Δ = −s(a,b) for no partner, with
    Δ = 0 for the chosen one; P(b') ∝ e^Δ over the chosen one and the :data:`OPTIONS` − 1 strongest rivals
    (those under :data:`OPTION_FLOOR` dropped). A local (two-swap) view of the pairing's uncertainty, not an
    exact sum over all matchings.

    >>> s = {(0, 0): 5.0, (0, 1): 4.0, (1, 0): 4.0, (1, 1): 5.0}
    >>> opts, p = open_pairings(np.array([0, 0, 1, 1]), np.array([0, 1, 0, 1]), s, np.array([0, 1]), 2)
    >>> opts.tolist(), p.round(3).tolist()
    ([[0, 1, -2], [1, 0, -2]], [[0.881, 0.119, 0.0], [0.881, 0.119, 0.0]])
    """
    rows = np.asarray(rows, dtype=np.int64)
    cols = np.asarray(cols, dtype=np.int64)
    if isinstance(score, dict):
        score = np.array([score[(int(r), int(c))] for r, c in zip(rows, cols)], dtype=float)
    score = np.asarray(score, dtype=float)
    partner = np.asarray(partner, dtype=np.int64)
    n_a = len(partner)
    n_b = max(int(n_b), 1)
    keys = rows * n_b + cols
    order = np.argsort(keys, kind="stable")
    sorted_keys = keys[order]

    def pair_score(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """s(a, b), −inf where the pair is not an edge (or b < 0)."""
        want = a * n_b + np.maximum(b, 0)
        i = np.clip(np.searchsorted(sorted_keys, want), 0, max(len(sorted_keys) - 1, 0))
        found = (b >= 0) & (len(sorted_keys) > 0) & (sorted_keys[i] == want) if len(sorted_keys) else np.zeros(len(a), bool)
        return np.where(found, score[order[i]] if len(sorted_keys) else 0.0, -np.inf)

    here = np.where(partner >= 0, pair_score(np.arange(n_a), partner), 0.0)  # s(a, b) of the chosen pair
    owner = np.full(n_b, -1, dtype=np.int64)
    owner[partner[partner >= 0]] = np.flatnonzero(partner >= 0)
    rival = cols != partner[rows]
    r, c, sc = rows[rival], cols[rival], score[rival]
    a2 = owner[c]
    taken = a2 >= 0
    a2s = np.where(taken, a2, 0)
    swap_back = np.maximum(0.0, pair_score(a2s, partner[r]))  # a' takes the b that a leaves, or stays single
    d = sc - here[r] - np.where(taken, here[a2s] - np.where(partner[r] >= 0, swap_back, 0.0), 0.0)
    # options per peak: the chosen (Δ 0), no partner (Δ −s(a,b), for a paired peak), the rivals
    paired = np.flatnonzero(partner >= 0)
    opt_a = np.concatenate([np.arange(n_a), paired, r])
    opt_b = np.concatenate([partner, np.full(len(paired), -1), c])
    opt_d = np.concatenate([np.zeros(n_a), -here[paired], d])
    first = np.concatenate([np.ones(n_a, bool), np.zeros(len(paired) + len(r), bool)])
    o = np.lexsort((-opt_d, ~first, opt_a))  # per peak: the chosen one first, then rivals by Δ
    opt_a, opt_b, opt_d = opt_a[o], opt_b[o], opt_d[o]
    starts = np.flatnonzero(np.r_[True, opt_a[1:] != opt_a[:-1]])
    pos = np.arange(len(opt_a)) - np.repeat(starts, np.diff(np.r_[starts, len(opt_a)]))
    keep = pos < OPTIONS
    opt_a, opt_b, opt_d, pos = opt_a[keep], opt_b[keep], opt_d[keep], pos[keep]
    options = np.full((n_a, OPTIONS), -2, dtype=np.int64)
    delta = np.full((n_a, OPTIONS), -np.inf)
    options[opt_a, pos] = opt_b
    delta[opt_a, pos] = opt_d
    probs = np.exp(delta - delta.max(axis=1, keepdims=True))
    probs /= probs.sum(axis=1, keepdims=True)
    drop = (probs < OPTION_FLOOR) & (np.arange(OPTIONS) > 0)
    probs[drop] = 0.0
    options[drop] = -2
    probs /= probs.sum(axis=1, keepdims=True)
    # unused slots last
    o2 = np.argsort(options == -2, axis=1, kind="stable")
    return np.take_along_axis(options, o2, axis=1), np.take_along_axis(probs, o2, axis=1)


def _logsumexp_per(peak: np.ndarray, logw: np.ndarray, n: int) -> np.ndarray:
    """ln Σ exp(logw) per peak (−inf for a peak without rows)."""
    out = np.full(n, -np.inf)
    if len(peak):
        k, v = _logsumexp_by(peak, logw)
        out[k] = v
    return out
