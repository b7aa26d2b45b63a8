"""Adaptive correction of a run's indices (Zenkevich 2025).

From peaks identified reliably in the same run (the *anchors*), fit

.. math::

   \\Delta RI = RI_{ref} - RI_{exp} = a \\cdot RI_{exp} + b

and correct every index of the run, :math:`RI' = RI_{exp} + a\\,RI_{exp} + b`,
before matching again. This removes the run's systematic offset (column
ageing, another lab's conditions) and lets windows stay tight.

How the run's own data are used, in order (our procedure):

1. **Coarse offset.** The shift b (steps of :data:`SHIFT_STEP`, within ± the
   window) that maximises the run's mixture likelihood
   :math:`\\sum_p \\ln(1 + \\sum_j w_{pj}(x_p + b))`: unlisted peaks add about
   nothing whatever b, so they cannot pull it;
2. **Anchors** are the calls confident under the joint model of the shifted
   run (:func:`matcher.identify.screening.select_anchors`: first, p ≥
   :data:`ANCHOR_PROBABILITY`, not ambiguous, contested, mass-mismatched,
   predicted or cross-class), one peak per compound; or the user's anchors file;
3. **Robust fit.** Theil–Sen (median of pairwise slopes) on all anchors, then
   repeatedly: drop anchors whose residual exceeds :data:`CUT` robust
   standard deviations (1.4826 × MAD, at least :data:`MIN_SCALE`), refit on
   the rest, until the kept set no longer changes;
4. **Plausibility.** A slope beyond ± :data:`MAX_SLOPE` (1 % per index unit)
   or a correction larger than the class window at the anchors' median index
   is not a run drift: the correction is refused and the plain screen is used, with a
   notice. Fewer than :data:`MIN_ANCHORS` kept anchors, or anchors spanning
   less than :data:`MIN_SPAN` units (or a third of the run), also skip it;
5. **Scatter.** The run's index scatter σ_m is estimated from the kept
   anchors' residuals only, :math:`\\hat\\sigma_m^2 = \\max(s_r^2 - \\tilde s_j^2, \\sigma_{min}^2)`
   with :math:`s_r` the root-mean-square deviation of the kept (already trimmed) residuals and :math:`\\tilde s_j` the
   median library spread of their entries, shrunk on the log scale towards
   the class default with the weight of :data:`SCATTER_PRIOR_ANCHORS` anchors.

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

from matcher.store.snapshot import MAD_TO_SD  # the MAD-to-sd constant, declared once

ANCHOR_PROBABILITY = 0.9
MIN_ANCHORS = 5
MIN_SPAN = 300.0
MAX_SLOPE = 0.01  # |a| above 1 % per index unit is not a plausible run drift; the fit is refused
CUT = 3.0
MIN_SCALE = 0.5  # index units
MAX_ROUNDS = 20
SHIFT_STEP = 0.5
SCATTER_FLOOR = 0.3
SCATTER_PRIOR_ANCHORS = 5.0


def fit_correction(ri_measured: np.ndarray, ri_reference: np.ndarray) -> dict:
    """Theil–Sen fit of ΔRI = a·RIexp + b with robust residual scatter."""
    from scipy.stats import theilslopes

    x = np.asarray(ri_measured, dtype=float)
    y = np.asarray(ri_reference, dtype=float) - x
    a, b, _, _ = theilslopes(y, x)
    resid = y - (a * x + b)
    scatter = robust_sd(resid) if len(resid) > 2 else float("nan")
    return {"method": "theil-sen", "a": float(a), "b": float(b), "residuals": resid, "scatter": scatter}


def robust_sd(values: np.ndarray) -> float:
    """1.4826 × the median absolute deviation: the standard deviation of a normal sample, robustly.

    >>> robust_sd(np.array([-1.0, 0.0, 1.0, 50.0]))
    1.4826
    """
    v = np.asarray(values, dtype=float)
    return float(MAD_TO_SD * np.median(np.abs(v - np.median(v)))) if len(v) else float("nan")


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


def robust_correction(ri_anchor: np.ndarray, ri_reference: np.ndarray, ri_run: np.ndarray, window: np.ndarray) -> dict:
    """Steps 3 and 4 of the module doc: iterated trimmed Theil–Sen and the plausibility check.

    Returns the fit (``a``, ``b``, ``residuals`` of every anchor, ``kept`` mask) with ``ok`` and a ``notice``.
    """
    x = np.asarray(ri_anchor, float)
    ref = np.asarray(ri_reference, float)
    ok, why = enough_anchors(x, ri_run)
    out = {"ok": False, "notice": why, "residuals": None, "kept": np.zeros(len(x), bool), "a": None, "b": None}
    if not ok:
        return out
    kept = np.ones(len(x), dtype=bool)
    fit = None
    for _ in range(MAX_ROUNDS):
        fit = fit_correction(x[kept], ref[kept])
        resid = (ref - x) - (fit["a"] * x + fit["b"])
        scale = max(robust_sd(resid[kept]), MIN_SCALE)
        new = np.abs(resid) <= CUT * scale
        if new.sum() < MIN_ANCHORS or np.array_equal(new, kept):
            break
        kept = new
    resid = (ref - x) - (fit["a"] * x + fit["b"])
    out.update(a=fit["a"], b=fit["b"], residuals=resid, kept=kept)
    ok, why = enough_anchors(x[kept], ri_run)
    if not ok:
        out["notice"] = why
        return out
    run = np.asarray(ri_run, float)
    fin = np.isfinite(run)
    centre = float(np.median(x[kept]))
    wc = float(np.interp(centre, np.sort(run[fin]), np.asarray(window, float)[fin][np.argsort(run[fin])])) if fin.any() else 0.0
    worst = abs(fit["a"] * centre + fit["b"]) - wc
    if abs(fit["a"]) > MAX_SLOPE:
        out["notice"] = (f"adaptive correction refused: fitted slope {fit['a'] * 100:+.2f} % per index unit is beyond "
                         f"±{MAX_SLOPE * 100:.0f} %, not a plausible run drift; the plain screen is used")
        return out
    if worst > 0:
        out["notice"] = (f"adaptive correction refused: an offset of {fit['a'] * centre + fit['b']:+.1f} units at the "
                         f"anchors' centre is beyond the ±{wc:.0f} window; the plain screen is used (check the ladder)")
        return out
    out.update(ok=True, notice="")
    return out


def scatter_from_anchors(residuals: np.ndarray, entry_sd: np.ndarray, default: float) -> tuple[float, str]:
    """Step 5 of the module doc: the run's index scatter from the kept anchors' residuals."""
    r = np.asarray(residuals, float)
    if len(r) < 3:
        return float(default), ""
    s_r = float(np.sqrt(np.mean((r - np.median(r)) ** 2)))  # already trimmed at CUT robust SDs: plain RMS
    lib = float(np.median(np.asarray(entry_sd, float))) if len(entry_sd) else 0.0
    raw = float(np.sqrt(max(s_r ** 2 - lib ** 2, SCATTER_FLOOR ** 2)))
    k = len(r)
    sd = float(np.exp((k * np.log(raw) + SCATTER_PRIOR_ANCHORS * np.log(default)) / (k + SCATTER_PRIOR_ANCHORS)))
    return sd, f"index scatter of the run {sd:.2f} units, from {k} anchors"
