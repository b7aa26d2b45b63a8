"""One compound, one peak: the joint posterior over a run's assignments.

A compound of the library elutes once, so in one run it can explain at most
one peak. Scored peak by peak, two peaks 8 units apart can both be
"α-pinene at 0.99"; scored jointly they share it according to the evidence.

**Model.** An assignment gives every peak either one candidate compound or
"not in library" (U), using each compound at most once. Its weight is the
product over assigned peaks of the odds :math:`w_{pj}` of *j* against U for
peak p (:mod:`matcher.identify.evidence`); unassigned peaks and unused compounds
contribute 1. The posterior marginals

.. math::

   P(a_p = j) = \\frac{1}{Z} \\sum_{\\text{assignments with } a_p = j} \\prod_{(q,k)} w_{qk}

satisfy :math:`\\sum_p P(a_p = j) \\le 1` for every compound j. Z is a permanent
of the weight matrix (bordered by the "unassigned" options), #P-hard in
general, so:

* **exactly** on every connected component of the peak–compound window graph
  that is a tree (belief propagation is exact on trees) or small enough for a
  sum over subsets of its compounds (:data:`EXACT_MAX_COMPOUNDS`), which are
  the usual conflicts (two or three peaks near two or three listed isomers);
* by **belief propagation** (sum-product) on larger components with cycles:
  the Bethe approximation to the permanent, whose fixed points are well
  behaved for bipartite matchings (Vontobel 2013; Huang & Jebara 2009;
  max-product for matchings: Bayati, Shah & Sharma 2008). Messages, per edge
  e = (p, j), with :math:`\\rho` the odds that p takes j as seen by j and
  :math:`\\tau` j's factor for p:

  .. math::

     \\rho_{e} = \\frac{w_e}{1 + \\sum_{e' \\in p, e' \\ne e} w_{e'} \\tau_{e'}},\\qquad
     \\tau_{e} = \\frac{1}{1 + \\sum_{e' \\in j, e' \\ne e} \\rho_{e'}},\\qquad
     P(a_p = j) = \\frac{w_e \\tau_e}{1 + \\sum_{e' \\in p} w_{e'}\\tau_{e'}}

  computed in the log domain with damping; a last step scales any compound
  whose marginals still sum above 1 (an unconverged loop) down to 1 and gives
  the difference to U, so the promise holds whatever the graph.

With ``exclusive=False`` (split or overloaded peaks: one compound may give
several peaks) each peak is scored on its own.

References (bibliographic details from memory):

1. M. Bayati, D. Shah, M. Sharma, "Max-product for maximum weight matching:
   convergence, correctness, and LP duality", IEEE Trans. Inf. Theory 54,
   1241 (2008).
2. B. Huang, T. Jebara, "Approximating the permanent with belief
   propagation", arXiv:0908.1769 (2009).
3. P. O. Vontobel, "The Bethe permanent of a nonnegative matrix", IEEE Trans.
   Inf. Theory 59, 1866 (2013).

Two peaks and one compound, odds 9 each: of the weights 1 (neither), 9 and 9,
each peak is the compound with probability 9/19:

>>> prob, nil = assign(np.log([9.0, 9.0]), np.array([0, 1]), np.array([0, 0]), 2)
>>> prob.round(4).tolist(), nil.round(4).tolist()
([0.4737, 0.4737], [0.5263, 0.5263])
"""

from __future__ import annotations

import numpy as np

EXACT_MAX_COMPOUNDS = 10  # components with cycles and at most this many compounds are summed exactly
EXACT_MAX_PEAKS = 12
BP_ITERATIONS = 200
BP_TOLERANCE = 1e-7
BP_DAMPING = 0.5


def independent(logw: np.ndarray, peak: np.ndarray, n_peaks: int) -> tuple[np.ndarray, np.ndarray]:
    """Each peak on its own: softmax of its pair weights against "not in library" (weight 1)."""
    from matcher.identify.evidence import softmax_with_null

    return softmax_with_null(np.asarray(logw, float), np.asarray(peak, np.int64), n_peaks)


def assign(logw: np.ndarray, peak: np.ndarray, compound: np.ndarray, n_peaks: int, *,
           exclusive: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Joint posterior: (probability per edge, not-in-library per peak); see the module doc.

    ``logw`` are the log odds of each (peak, compound) edge against "not in
    library"; ``compound`` is any integer key of the compound (the exclusion
    is per key).
    """
    logw = np.asarray(logw, dtype=float)
    peak = np.asarray(peak, dtype=np.int64)
    compound = np.asarray(compound, dtype=np.int64)
    if not exclusive or len(logw) == 0:
        return independent(logw, peak, n_peaks)
    prob = np.zeros(len(logw))
    # only compounds wanted by two or more peaks couple peaks; the rest is independent
    _, cinv, ccount = np.unique(compound, return_inverse=True, return_counts=True)
    shared = ccount[cinv] > 1
    coupled_peaks = np.zeros(n_peaks, dtype=bool)
    coupled_peaks[peak[shared]] = True
    ce = coupled_peaks[peak]  # edges of coupled peaks (all their edges take part)
    p_ind, nil = independent(logw, peak, n_peaks)
    prob[~ce] = p_ind[~ce]
    if ce.any():
        e_idx = np.flatnonzero(ce)
        comp_local = cinv[e_idx]
        labels, n_comp = _components(peak[e_idx], comp_local, n_peaks, int(cinv.max()) + 1)
        exact_edges, bp_edges = _split_components(labels, peak[e_idx], comp_local, n_comp)
        for edges in exact_edges:
            sel = e_idx[edges]
            pr, nl, pk = _exact(logw[sel], peak[sel], cinv[sel])
            prob[sel] = pr
            nil[pk] = nl
        if len(bp_edges):
            sel = e_idx[bp_edges]
            pr, nl, pk = _belief_propagation(logw[sel], peak[sel], cinv[sel])
            prob[sel] = pr
            nil[pk] = nl
    return _cap_compounds(prob, nil, peak, cinv)


def _components(peak: np.ndarray, comp: np.ndarray, n_peaks: int, n_comp: int):
    """Connected components of the bipartite peak–compound graph; label per edge."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = n_peaks + n_comp
    g = coo_matrix((np.ones(len(peak)), (peak, n_peaks + comp)), shape=(n, n))
    k, lab = connected_components(g, directed=False)
    return lab[peak], k


def _split_components(labels, peak, comp, n_comp):
    """Edges grouped into exact components (list of index arrays) and one array for belief propagation."""
    order = np.argsort(labels, kind="stable")
    starts = np.flatnonzero(np.r_[True, labels[order][1:] != labels[order][:-1]])
    ends = np.r_[starts[1:], len(order)]
    exact, bp = [], []
    for s, e in zip(starts, ends):
        edges = order[s:e]
        n_p = len(np.unique(peak[edges]))
        n_c = len(np.unique(comp[edges]))
        tree = len(edges) == n_p + n_c - 1
        if not tree and n_c <= EXACT_MAX_COMPOUNDS and n_p <= EXACT_MAX_PEAKS:
            exact.append(edges)
        else:
            bp.append(edges)  # trees: belief propagation is exact
    return exact, (np.concatenate(bp) if bp else np.zeros(0, dtype=np.int64))


def _exact(logw: np.ndarray, peak: np.ndarray, comp: np.ndarray):
    """Exact marginals of one small component by a sum over subsets of its compounds."""
    peaks, p_loc = np.unique(peak, return_inverse=True)
    _, c_loc = np.unique(comp, return_inverse=True)
    k = len(peaks)
    n_states = 1 << (int(c_loc.max()) + 1)
    states = np.arange(n_states)
    # per peak, scale its options (incl. "not in library" = 1) so the largest is 1
    shift = np.maximum(0.0, np.array([logw[p_loc == i].max() for i in range(k)]))
    w = np.exp(logw - shift[p_loc])
    null = np.exp(-shift)
    opts = [np.flatnonzero(p_loc == i) for i in range(k)]
    fwd = [np.zeros(n_states)]
    fwd[0][0] = 1.0
    for i in range(k):
        f = fwd[-1] * null[i]
        for e in opts[i]:
            bit = 1 << int(c_loc[e])
            free = (states & bit) == 0
            np.add.at(f, states[free] | bit, fwd[-1][free] * w[e])
        fwd.append(f)
    bwd = [None] * (k + 1)
    bwd[k] = np.ones(n_states)
    for i in range(k - 1, -1, -1):
        b = bwd[i + 1] * null[i]
        for e in opts[i]:
            bit = 1 << int(c_loc[e])
            free = (states & bit) == 0
            b[free] += w[e] * bwd[i + 1][states[free] | bit]
        bwd[i] = b
    z = bwd[0][0]
    prob = np.zeros(len(logw))
    nil = np.zeros(k)
    for i in range(k):
        nil[i] = float(np.dot(fwd[i], bwd[i + 1]) * null[i] / z)
        for e in opts[i]:
            bit = 1 << int(c_loc[e])
            free = (states & bit) == 0
            prob[e] = float(np.dot(fwd[i][free], bwd[i + 1][states[free] | bit]) * w[e] / z)
    return prob, nil, peaks


class PeakGroups:
    """Segment operations over edges grouped by a key, each group with an extra element 0 (log 1)."""

    def __init__(self, key: np.ndarray, n_groups: int):
        self.n = n_groups
        self.m = len(key)
        k = np.concatenate([key, np.arange(n_groups)])
        self.order = np.argsort(k, kind="stable")
        ks = k[self.order]
        self.starts = np.flatnonzero(np.r_[True, ks[1:] != ks[:-1]])
        self.size = np.diff(np.r_[self.starts, len(ks)])
        self.gid = np.repeat(np.arange(len(self.starts)), self.size)

    def logsumexp(self, a: np.ndarray) -> np.ndarray:
        """log Σ exp over each group (its 0 element included): per group."""
        ext = np.concatenate([a, np.zeros(self.n)])[self.order]
        m1 = np.maximum.reduceat(ext, self.starts)
        s = np.add.reduceat(np.exp(ext - m1[self.gid]), self.starts)
        return m1 + np.log(s)

    def logsumexp_others(self, a: np.ndarray) -> np.ndarray:
        """log Σ exp over the other members of each element's group (the 0 element included): per edge.

        With m1 the group's largest value and S = Σ exp(x − m1), an element below the maximum gets
        m1 + log(S − exp(x − m1)); the (first) maximum itself gets the log-sum of the rest, taken
        around the group's second largest value so that nothing cancels.
        """
        if not hasattr(self, "_pos"):
            self._pos = np.arange(self.m + self.n)
            self._ext = np.zeros(self.m + self.n)
        ext = self._ext
        ext[: self.m] = a
        ext = ext[self.order]
        m1 = np.maximum.reduceat(ext, self.starts)
        m1g = m1[self.gid]
        d = ext - m1g
        e1 = np.exp(d)
        s1 = np.add.reduceat(e1, self.starts)
        pos = self._pos
        first = np.minimum.reduceat(np.where(d == 0.0, pos, len(ext)), self.starts)
        top = pos == first[self.gid]
        with np.errstate(divide="ignore", invalid="ignore"):
            out_sorted = m1g + np.log(np.maximum(s1[self.gid] - e1, 1e-300))
            # the maximum of each group: log(S − 1) + m1 unless the rest is too small beside it to subtract,
            # then the rest summed around the group's second largest value (only those groups)
            tops = np.flatnonzero(top)
            g = self.gid[tops]
            rest_sum = s1[g] - 1.0
            out_sorted[tops] = m1[g] + np.log(np.maximum(rest_sum, 1e-300))
            tiny = rest_sum < 1e-6
            if tiny.any():
                groups = g[tiny]
                members = np.isin(self.gid, groups) & ~top
                sub_gid = self.gid[members]
                m2 = np.full(len(self.starts), -np.inf)
                np.maximum.at(m2, sub_gid, ext[members])
                s2 = np.zeros(len(self.starts))
                np.add.at(s2, sub_gid, np.exp(ext[members] - m2[sub_gid]))
                out_sorted[tops[tiny]] = np.where(np.isfinite(m2[groups]), m2[groups] + np.log(np.maximum(s2[groups], 1e-300)),
                                                  -np.inf)
        out = np.empty(len(ext))
        out[self.order] = out_sorted
        return out[: self.m]


def _belief_propagation(logw: np.ndarray, peak: np.ndarray, comp: np.ndarray):
    """Sum-product messages on the peak–compound graph (see module doc)."""
    peaks, p_loc = np.unique(peak, return_inverse=True)
    comps, c_loc = np.unique(comp, return_inverse=True)
    gp = PeakGroups(p_loc, len(peaks))
    gc = PeakGroups(c_loc, len(comps))
    log_tau = np.zeros(len(logw))
    for _ in range(BP_ITERATIONS):
        log_rho = logw - gp.logsumexp_others(logw + log_tau)
        new = -gc.logsumexp_others(log_rho)
        new = BP_DAMPING * log_tau + (1.0 - BP_DAMPING) * new
        delta = float(np.max(np.abs(new - log_tau))) if len(new) else 0.0
        log_tau = new
        if delta < BP_TOLERANCE:
            break
    a = logw + log_tau
    lse = gp.logsumexp(a)
    prob = np.exp(a - lse[p_loc])
    nil = np.exp(-lse)
    return prob, nil, peaks


def _cap_compounds(prob: np.ndarray, nil: np.ndarray, peak: np.ndarray, comp: np.ndarray):
    """Scale any compound whose marginals sum above 1 down to 1; the difference goes to not-in-library."""
    total = np.bincount(comp, weights=prob)
    over = total > 1.0
    if over.any():
        scale = np.where(over, 1.0 / np.where(over, total, 1.0), 1.0)[comp]
        cut = prob * (1.0 - scale)
        prob = prob * scale
        nil = nil + np.bincount(peak, weights=cut, minlength=len(nil))
    return prob, nil
