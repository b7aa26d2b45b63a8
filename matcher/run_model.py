"""Fitting a run's own model: in-library share and index scatter.

A screened run is a mixture: each peak is either one of the library's
entries (prior share :math:`\\pi`) or a compound not in the library. With the
evidence model of :mod:`matcher.evidence`, the marginal likelihood of the
run's indices and hints is, up to factors that depend on neither parameter,

.. math::

   \\ell(\\pi, \\sigma_m) = \\sum_p \\ln\\Big[(1-\\pi) + \\pi \\sum_j r_j\\, e^{\\text{score}_{pj}(\\sigma_m)}\\Big]

(:math:`r_j` the prior factors of predicted or cross-class entries). For a
fixed scatter :math:`\\sigma_m` the share is found by the EM update
:math:`\\pi \\leftarrow \\text{mean}_p\\, P(\\text{in library} \\mid p)`;
the scatter, when it is to be estimated (``--adaptive``), by maximising
:math:`\\ell` over a logarithmic grid. This is empirical Bayes: the posterior
probabilities then match the run instead of a fixed assumption, which is
what makes a "0.9" mean nine times in ten when the run is noisier or
cleaner than the default, or holds more unlisted compounds.

Worked example: two peaks, one whose evidence sum is 9 and one with none.
With the Beta(2, 2) prior the objective ln(1 + 8π) + ln(1 − π) + ln π + ln(1 − π)
is largest where 8/(1 + 8π) + 1/π = 2/(1 − π), at π = 0.4724:

>>> s = np.log(np.array([9.0, 1e-12]))
>>> round(in_library_share(s, np.array([0, 1]), 2), 4)
0.4724
"""

from __future__ import annotations

import numpy as np

from .candidates import window_pairs
from .evidence import PREDICTED_PRIOR, Background, Model, score_pairs
from .snapshot import ClassEntries, CompoundTable

MIN_PEAKS = 20  # below this the share stays at its default
SHARE_BOUNDS = (0.05, 0.95)
SCATTER_GRID = np.geomspace(0.3, 25.0, 36)
#: Weak priors keep the fit sensible where the run cannot tell the parameters apart
#: (a dense library with no mass hints): Beta(2, 2) on the share, and a log-normal
#: on the scatter centred on the class default with a factor-of-2.5 spread.
SHARE_PRIOR = 2.0
SCATTER_PRIOR_FACTOR = 2.5


def _peak_sums(score: np.ndarray, peak: np.ndarray, n: int) -> tuple[np.ndarray, float]:
    """log Σ_j exp(score) per peak, computed stably; returns (log-sum, shift)."""
    if len(score) == 0:
        return np.full(n, -np.inf), 0.0
    shift = float(np.max(score))
    s = np.bincount(peak, weights=np.exp(score - shift), minlength=n)
    with np.errstate(divide="ignore"):
        return np.log(s), shift


def in_library_share(score: np.ndarray, peak: np.ndarray, n: int, start: float = 0.5, iterations: int = 200) -> float:
    """EM estimate of the share of peaks that are library compounds."""
    logs, shift = _peak_sums(score, peak, n)
    S = np.exp(np.clip(logs + shift, -700, 700))
    pi = start
    for _ in range(iterations):
        post = pi * S / ((1 - pi) + pi * S)
        a = SHARE_PRIOR - 1.0
        new = float(np.clip((post.sum() + a) / (len(post) + 2 * a), *SHARE_BOUNDS))
        if abs(new - pi) < 1e-6:
            pi = new
            break
        pi = new
    return pi


def log_likelihood(score: np.ndarray, peak: np.ndarray, n: int, pi: float) -> float:
    logs, shift = _peak_sums(score, peak, n)
    S = np.exp(np.clip(logs + shift, -700, 700))
    return float(np.sum(np.log((1 - pi) + pi * S)))


def fit(
    x: np.ndarray,
    entries: ClassEntries,
    compounds: CompoundTable,
    bg: Background,
    model: Model,
    half_width: np.ndarray,
    *,
    hints=None,
    compound_ion_masks=None,
    estimate_scatter: bool = False,
) -> tuple[Model, dict]:
    """The run's model: share (always, for runs of ≥ MIN_PEAKS) and scatter (on request)."""
    x = np.asarray(x, dtype=float)
    n = int(np.isfinite(x).sum())
    info = {"peaks_used": n, "share_estimated": False, "scatter_estimated": False}
    if n < MIN_PEAKS or len(entries) == 0:
        info["notice"] = f"run model left at its defaults (needs at least {MIN_PEAKS} peaks with an index)"
        return model, info
    # pairs in a wide window so that the scatter is not truncated by the user's window
    wide = np.maximum(np.asarray(half_width, float) * 2.0, 3.0 * SCATTER_GRID[-1] if estimate_scatter else 0.0)
    pairs = window_pairs(entries.ri, x, wide)
    factor = np.where(entries.predicted[pairs.entry], PREDICTED_PRIOR, 1.0)

    def scores(sd: float) -> np.ndarray:
        sc = score_pairs(pairs, x, entries, compounds, bg, model.with_(measurement_sd=sd), hints, compound_ion_masks)
        return sc.score + np.log(factor)

    grid = SCATTER_GRID if estimate_scatter else np.array([model.measurement_sd])
    best = None
    for sd in grid:
        s = scores(float(sd))
        pi = in_library_share(s, pairs.peak, len(x), start=model.prior_in_library)
        ll = log_likelihood(s, pairs.peak, len(x), pi)
        ll += (SHARE_PRIOR - 1.0) * (np.log(pi) + np.log(1 - pi))
        ll += -0.5 * (np.log(sd / model.measurement_sd) / np.log(SCATTER_PRIOR_FACTOR)) ** 2
        if best is None or ll > best[0]:
            best = (ll, float(sd), pi)
    _, sd, pi = best
    info.update(share_estimated=True, scatter_estimated=bool(estimate_scatter),
                prior_in_library=round(pi, 4), measurement_sd=round(sd, 3))
    return model.with_(measurement_sd=sd, prior_in_library=pi), info
