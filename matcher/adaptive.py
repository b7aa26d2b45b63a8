"""Adaptive correction of a run's indices (Zenkevich 2025).

From peaks identified reliably in the same run (the *anchors*), fit

.. math::

   \\Delta RI = RI_{ref} - RI_{exp} = a \\cdot RI_{exp} + b

and correct every index of the run, :math:`RI' = RI_{exp} + a\\,RI_{exp} + b`,
before matching again. This removes the run's systematic offset (column
ageing, another lab's conditions) and lets windows stay tight.

The fit is the Theil–Sen estimator (median of pairwise slopes), robust to a
wrong anchor. Anchors are the run's confident matches: ranked first with
probability ≥ :data:`ANCHOR_PROBABILITY` (≥ :data:`LONE_ANCHOR_PROBABILITY` when it
is the only candidate in its window), not ambiguous, not mass-mismatched,
neither predicted nor cross-class; or the peaks the user names in an anchors
file. The correction is applied only with at least :data:`MIN_ANCHORS`
anchors spread over at least :data:`MIN_SPAN` index units (or a third of the
run's index range, whichever is smaller); otherwise it is skipped with a notice.

Reference: I. G. Zenkevich, "Adaptive correction of retention indices ...",
Molecules 30, 4706 (2025).

>>> fit = fit_correction(np.array([1000.0, 1200, 1400, 1600, 1800]),
...                      np.array([1003.0, 1203.4, 1403.8, 1604.2, 1804.6]))
>>> round(fit["a"], 4), round(fit["b"], 2)
(0.002, 1.0)
>>> apply_correction(np.array([1500.0]), fit).round(2).tolist()
[1504.0]
"""

from __future__ import annotations

import numpy as np

from .snapshot import MAD_TO_SD  # the MAD-to-sd constant, declared once

ANCHOR_PROBABILITY = 0.9
LONE_ANCHOR_PROBABILITY = 0.5  # the only candidate in its window needs less
MIN_ANCHORS = 5
MIN_SPAN = 300.0
MAX_SLOPE = 0.1  # |a| above this is not a plausible run drift; the fit is refused


def fit_correction(ri_measured: np.ndarray, ri_reference: np.ndarray) -> dict:
    """Theil–Sen fit of ΔRI = a·RIexp + b with robust residual scatter."""
    from scipy.stats import theilslopes

    x = np.asarray(ri_measured, dtype=float)
    y = np.asarray(ri_reference, dtype=float) - x
    a, b, _, _ = theilslopes(y, x)
    resid = y - (a * x + b)
    scatter = MAD_TO_SD * float(np.median(np.abs(resid - np.median(resid)))) if len(resid) > 2 else float("nan")
    return {"method": "theil-sen", "a": float(a), "b": float(b), "residuals": resid, "scatter": scatter}


def apply_correction(ri: np.ndarray, fit: dict) -> np.ndarray:
    ri = np.asarray(ri, dtype=float)
    return ri + fit["a"] * ri + fit["b"]


def enough_anchors(ri_anchor: np.ndarray, ri_run: np.ndarray) -> tuple[bool, str]:
    """Whether the anchors are enough and spread well enough; with the reason if not."""
    k = len(ri_anchor)
    if k < MIN_ANCHORS:
        return False, f"adaptive correction skipped: {k} anchor(s), at least {MIN_ANCHORS} needed"
    run = ri_run[np.isfinite(ri_run)]
    need = min(MIN_SPAN, (run.max() - run.min()) / 3.0) if len(run) else MIN_SPAN
    span = float(ri_anchor.max() - ri_anchor.min())
    if span < need:
        return False, f"adaptive correction skipped: anchors span {span:.0f} index units, at least {need:.0f} needed"
    return True, ""
