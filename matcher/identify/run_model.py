"""Fitting a run's own model: which listed compounds are present, and how crowded the rest is.

A screened run is a mixture along the index scale (see :mod:`matcher.identify.unlisted`):
listed compound *j* is present with probability :math:`\\pi` and then gives one
peak; unlisted compounds give peaks with intensity :math:`\\lambda_U(x)`. Both
are learned from the run by empirical Bayes, an EM iteration over the joint
posterior of :mod:`matcher.identify.assignment`:

1. with the current :math:`\\pi` and :math:`\\lambda_U`, the joint posterior
   :math:`P(a_p = j)` and :math:`P_p(U)` of every peak;
2. :math:`\\pi \\leftarrow (\\sum_{p,j} P(a_p = j) + 1) / (M_{run} + 2)`, the expected
   share of the listed compounds that elute inside the run's index range
   (:math:`M_{run}` of them) that were found, with a Beta(2, 2) prior;
3. :math:`\\lambda_U \\leftarrow` the Gamma–Poisson kernel estimate from the
   :math:`P_p(U)` (:class:`matcher.identify.unlisted.UnlistedField`), shrunk to the
   crowding prior and never below its floor;

until :math:`\\pi` moves by less than 1e-4 (at most :data:`MAX_ITERATIONS`).
Runs with fewer than :data:`matcher.identify.unlisted.MIN_RUN_PEAKS` peaks keep the
defaults: the presence prior :data:`matcher.identify.evidence.DEFAULT_PRESENCE` and the
crowding prior.

The index scatter of the run is *not* fitted here: a mixture cannot tell a
noisy run from a crowded one. It is estimated only from the confirmed anchors
of the adaptive correction (:mod:`matcher.identify.adaptive`), never from peaks that
are probably unlisted.

Worked example: 30 peaks, each exactly on one of 30 listed compounds 40 units
apart, and nothing else: the run says every listed compound is present and
nothing unlisted crowds them.

>>> from matcher.store.snapshot import CompoundTable, build_snapshot
>>> ri = 1000.0 + 40 * np.arange(30)
>>> snap = build_snapshot(CompoundTable.from_records([{"id": i + 1, "name": f"c{i}"} for i in range(30)]),
...                       np.arange(1, 31), np.array(["nonpolar"] * 30), ri)
>>> from matcher.identify.evidence import Model, mass_background
>>> e = snap.entries("nonpolar")
>>> model, info = fit(ri, e, snap.compounds, mass_background(e, snap.compounds), Model(3.0), np.full(30, 10.0))
>>> round(model.presence, 2), info["peaks_used"]
(0.96, 30)
"""

from __future__ import annotations

import numpy as np

from matcher.identify.assignment import assign
from matcher.identify.window_search import window_pairs
from matcher.identify.evidence import PREDICTED_PRIOR, Model, score_pairs
from matcher.store.snapshot import ClassEntries, CompoundTable
from matcher.identify.unlisted import MIN_RUN_PEAKS, MassBackground, UnlistedField, crowding_density

MAX_ITERATIONS = 40
PRESENCE_BOUNDS = (0.02, 0.98)


def fit(
    x: np.ndarray,
    entries: ClassEntries,
    compounds: CompoundTable,
    mass_bg: MassBackground,
    model: Model,
    half_width: np.ndarray,
    *,
    hints=None,
    compound_ion_masks=None,
    crowding: str | float | None = None,
) -> tuple[Model, dict]:
    """The run's presence π and unlisted intensity λ_U (see module doc).

    Returns the model (with ``presence`` and ``unlisted`` set) and a dict:
    ``peaks_used``, ``presence``, ``unlisted_per_100`` (median λ_U over the
    run's peaks, per 100 index units), ``iterations``, ``own_unlisted`` (each
    peak's P(U) at the end, used to leave it out of its own estimate) and a
    ``notice`` when the run is too short to learn from.
    """
    x = np.asarray(x, dtype=float)
    prior = crowding_density(crowding)
    ok = np.isfinite(x)
    n = int(ok.sum())
    info: dict = {"peaks_used": n, "crowding_prior_per_100": round(prior * 100, 3), "estimated": False}
    flat = model.with_(unlisted=UnlistedField.flat(prior))
    if n < MIN_RUN_PEAKS or len(entries) == 0:
        info["notice"] = (f"presence and crowding left at their priors (the run model needs at least "
                          f"{MIN_RUN_PEAKS} peaks with an index)")
        info["presence"] = round(flat.presence, 4)
        info["unlisted_per_100"] = round(prior * 100, 3)
        return flat, info
    xs = np.where(ok, x, -1e9)  # a missing index finds no candidate
    hw = np.asarray(half_width, float)
    pairs = window_pairs(entries.ri, xs, np.where(ok, hw, 0.0))
    factor = np.where(entries.predicted[pairs.entry], PREDICTED_PRIOR, 1.0)
    base = score_pairs(pairs, xs, entries, compounds, mass_bg, model.with_(presence=0.5), hints, compound_ion_masks,
                       unlisted_density=np.ones(len(x)))
    score = base.score + np.log(factor)  # evidence without the λ_U term
    comp = entries.compound[pairs.entry]
    measured = ~entries.predicted[pairs.entry]
    lo, hi = float(x[ok].min() - np.nanmax(hw)), float(x[ok].max() + np.nanmax(hw))
    in_range = int(np.sum(~entries.predicted & (entries.ri >= lo) & (entries.ri <= hi)))
    pi = float(model.presence)
    lam = np.full(len(x), prior)
    nil = np.ones(len(x))
    field = UnlistedField.flat(prior)
    it = 0
    for it in range(1, MAX_ITERATIONS + 1):
        logw = np.log(pi / (1 - pi)) + score - np.log(lam[pairs.peak])
        prob, nil = assign(logw, pairs.peak, comp, len(x), exclusive=model.exclusive)
        nil = np.where(ok, nil, 0.0)
        field = UnlistedField.from_run(x, nil, prior)
        lam = field.density(np.where(ok, x, 0.0), self_weight=nil)
        found = float(prob[measured].sum())
        new = float(np.clip((found + 1.0) / (max(in_range, 1) + 2.0), *PRESENCE_BOUNDS))
        done = abs(new - pi) < 1e-4
        pi = new
        if done and it > 2:
            break
    info.update(estimated=True, presence=round(pi, 4), iterations=it,
                unlisted_per_100=round(float(np.median(lam[ok])) * 100, 3), compounds_in_range=in_range,
                own_unlisted=nil)
    return model.with_(presence=pi, unlisted=field), info
