"""Where the compounds that are *not* in the library are: crowding and mass background.

A house library lists some of the compounds a sample holds; the rest elute
between and on top of them. How likely "not in library" is for a peak at
index :math:`x` depends on how crowded the sample is there, not on how many
compounds the lab happened to list: a library of 20 compounds says "one
compound per 20 units" where an essential oil has one every 3 to 5 units.

**Model.** The peaks of a run are taken as a Poisson process along the index
scale: listed compound *j*, present with probability :math:`\\pi_j`, gives one
peak whose index scatters as :math:`\\phi(x-\\mu_j; s_j)`; unlisted compounds give
peaks with intensity :math:`\\lambda_U(x)` (expected unlisted peaks per index
unit). The odds of "peak p is compound j" against "peak p is unlisted" are then

.. math::

   \\frac{\\pi_j}{1-\\pi_j}\\;\\frac{\\phi(x_p-\\mu_j; s_j)}{\\lambda_U(x_p)}\\;\\times\\;\\text{hint ratios}

(see :mod:`matcher.identify.evidence`; one compound explains at most one peak, see
:mod:`matcher.identify.assignment`).

**Crowding prior** :math:`\\lambda_0`: unlisted peaks per 100 index units,
named by sample type (:data:`CROWDING`) or given as a number; the default is
:data:`DEFAULT_CROWDING`. A single query without a run uses it as it is.

**Estimate from the run** (empirical Bayes, a Gamma–Poisson update). With
:math:`P_q(U)` the current probability that peak *q* is unlisted,

.. math::

   \\hat\\lambda_U(x_p) = \\max\\Big(\\lambda_{min},\\;
   \\frac{\\lambda_0 L_0 + \\sum_{q \\ne p} P_q(U)\\, e^{-(x_p-x_q)^2/2h^2}}
        {L_0 + E(x_p)}\\Big)

where :math:`h` = :data:`BANDWIDTH`, :math:`L_0` = :data:`PRIOR_UNITS` (how
many index units of run the prior is worth), :math:`E(x)` is the exposure
:math:`h\\sqrt{2\\pi}\\,[\\Phi((x_{hi}-x)/h)-\\Phi((x_{lo}-x)/h)]` of the kernel
inside the run's index range :math:`[x_{lo}, x_{hi}]` and :math:`\\lambda_{min}`
= :data:`FLOOR`. The peak itself is left out of its own estimate, so a peak
cannot vote itself unlisted. Runs with fewer than :data:`MIN_RUN_PEAKS` peaks
use the prior alone (a short table may be a selection, not a run).

**Mass background.** How common a nominal mass m is among *unlisted*
compounds near x is taken from the class's compounds around x, which are what
the sample type has, plus a prior pseudo-compound spread over the class-wide
distribution:

.. math::

   q(m \\mid x) = \\frac{\\sum_k u_k(x)\\,[M_k = m] + \\kappa\\, \\bar q(m)}{\\sum_k u_k(x) + \\kappa},
   \\qquad u_k(x) = e^{-(x-\\mu_k)^2/2h_m^2},
   \\qquad \\bar q(m) = \\frac{n_m + a}{n + aR}

with :math:`h_m` = :data:`MASS_BANDWIDTH`, :math:`\\kappa` = :data:`MASS_PRIOR_WEIGHT`,
:math:`a` = :data:`MASS_PSEUDOCOUNT`, :math:`R` = :data:`MASS_RANGE`, :math:`n_m` the
class's compounds of nominal mass m and n those with a known mass. In the
monoterpene region of an oil m/z 136 is then common (q near 0.8), so an
agreeing molecular ion is weak evidence against an unlisted isomer, as it
should be; a library of 20 compounds no longer makes m/z 136 look rare.

Assumptions, stated: unlisted peaks are spread like a smooth intensity on the
scale of :data:`BANDWIDTH` units; unlisted compounds resemble the class's
listed neighbours in mass; the run's peak table lists the run's peaks, not a
selection (give ``--crowding`` when it is a selection). The constants are our
own choices, not fitted truths; ``matcher evaluate --crowded`` measures them.

>>> round(crowding_density("crowded"), 3), round(crowding_density(2.5), 3)
(0.1, 0.025)
>>> x = np.r_[np.linspace(1000, 1100, 30), 1500.0]   # 30 unlisted peaks crowd 1000-1100
>>> field = UnlistedField.from_run(x, np.ones(31), prior=0.04)
>>> lam = field.density(np.array([1050.0, 1500.0]), self_weight=np.array([0.0, 1.0]))
>>> round(float(lam[0]), 3), round(float(lam[1]), 3)
(0.175, 0.025)
"""

from __future__ import annotations

import math

import numpy as np

#: Named crowding priors: unlisted peaks per 100 index units, by sample type (our own choice).
CROWDING: dict[str, float] = {
    "sparse": 1.0,      # a standards mix, a simple product, a clean headspace
    "moderate": 4.0,    # a typical extract or natural product run (the default)
    "crowded": 10.0,    # an essential oil, a flavour concentrate
    "dense": 25.0,      # petroleum fractions, smoke, whole-plant extracts
}
DEFAULT_CROWDING = "moderate"
FLOOR = 0.002            # λ_min: unlisted peaks per index unit (one per 500 units)
BANDWIDTH = 25.0         # h, index units
PRIOR_UNITS = 50.0       # L0, index units of run the prior is worth
MIN_RUN_PEAKS = 20       # below this the prior is used alone
GRID_STEP = 1.0          # index units between the points the kernel sums are kept at
MASS_BANDWIDTH = 50.0    # h_m, index units
MASS_PRIOR_WEIGHT = 1.0  # κ, in compounds
MASS_PSEUDOCOUNT = 0.5   # a
MASS_RANGE = 600         # R, nominal masses the pseudocount spreads over

_SQRT_2PI = math.sqrt(2.0 * math.pi)


def crowding_density(crowding: str | float | None = None) -> float:
    """The crowding prior λ0 in unlisted peaks per index unit, from a name or a number per 100 units."""
    from matcher.errors import MatcherError

    if crowding is None:
        crowding = DEFAULT_CROWDING
    if isinstance(crowding, str):
        key = crowding.strip().lower()
        if key in CROWDING:
            return CROWDING[key] / 100.0
        try:
            crowding = float(key)
        except ValueError:
            raise MatcherError(
                f"crowding must be one of {', '.join(CROWDING)} or a number of unlisted peaks per 100 index units, "
                f"got {crowding!r}") from None
    value = float(crowding)
    if not math.isfinite(value) or value <= 0 or value > 1000:
        raise MatcherError(f"crowding must be a number above 0 and at most 1000 unlisted peaks per 100 index units, got {crowding!r}")
    return max(value / 100.0, FLOOR)


class UnlistedField:
    """λ_U along the index scale for one run (see module doc); ``flat`` when there is no run to learn from.

    The kernel sums are kept on a grid of :data:`GRID_STEP` units, so any peak
    (also one outside the sample the field was fitted on) is looked up by
    interpolation; ``self_weight`` is the peak's own unlisted probability when
    it took part in the fit, removed from its own estimate.
    """

    def __init__(self, prior: float, start: float = 0.0, sums: np.ndarray | None = None,
                 lo: float = 0.0, hi: float = 0.0, peaks: int = 0):
        self.prior = max(float(prior), FLOOR)
        self.start = start
        self.sums = sums
        self.lo, self.hi = lo, hi
        self.peaks = peaks

    @classmethod
    def flat(cls, prior: float) -> "UnlistedField":
        return cls(prior)

    @property
    def estimated(self) -> bool:
        return self.sums is not None

    @classmethod
    def from_run(cls, x: np.ndarray, p_unlisted: np.ndarray, prior: float) -> "UnlistedField":
        x = np.asarray(x, dtype=float)
        ok = np.isfinite(x)
        if int(ok.sum()) < MIN_RUN_PEAKS:
            return cls(prior)
        xs, ws = x[ok], np.asarray(p_unlisted, dtype=float)[ok]
        h = BANDWIDTH
        start = float(np.floor(xs.min() - 6 * h))
        n = int(np.ceil((xs.max() + 6 * h - start) / GRID_STEP)) + 1
        pos = (xs - start) / GRID_STEP
        i0 = np.floor(pos).astype(np.int64)
        frac = pos - i0
        hist = np.bincount(i0, weights=ws * (1 - frac), minlength=n + 1)[: n + 1]
        hist += np.bincount(i0 + 1, weights=ws * frac, minlength=n + 1)[: n + 1]
        k = np.arange(-int(6 * h / GRID_STEP), int(6 * h / GRID_STEP) + 1) * GRID_STEP
        kernel = np.exp(-0.5 * (k / h) ** 2)
        sums = np.convolve(hist, kernel, mode="same")
        return cls(prior, start, sums, float(xs.min()), float(xs.max()), int(ok.sum()))

    def density(self, x: np.ndarray, self_weight: np.ndarray | None = None) -> np.ndarray:
        """λ_U(x) in unlisted peaks per index unit."""
        x = np.asarray(x, dtype=float)
        if self.sums is None:
            return np.full(x.shape, self.prior)
        from scipy.special import ndtr

        h = BANDWIDTH
        pos = (x - self.start) / GRID_STEP
        s = np.interp(pos, np.arange(len(self.sums)), self.sums, left=0.0, right=0.0)
        if self_weight is not None:
            s = np.maximum(s - np.asarray(self_weight, dtype=float), 0.0)
        exposure = h * _SQRT_2PI * (ndtr((self.hi - x) / h) - ndtr((self.lo - x) / h))
        with np.errstate(invalid="ignore"):
            lam = (self.prior * PRIOR_UNITS + s) / (PRIOR_UNITS + np.maximum(exposure, 0.0))
        return np.where(np.isfinite(lam), np.maximum(lam, FLOOR), self.prior)


class MassBackground:
    """q(m | x): how common a nominal mass is among unlisted compounds near x (see module doc)."""

    def __init__(self, ri: np.ndarray, mass: np.ndarray):
        ok = np.isfinite(ri) & np.isfinite(mass)
        self.ri = np.asarray(ri, float)[ok]
        self.mass = np.asarray(mass, float)[ok]
        n = len(self.mass)
        vals, counts = np.unique(self.mass, return_counts=True)
        total = n + MASS_PSEUDOCOUNT * MASS_RANGE
        self.global_q = {float(v): (c + MASS_PSEUDOCOUNT) / total for v, c in zip(vals, counts)}
        self.global_floor = MASS_PSEUDOCOUNT / total
        order = np.argsort(self.ri, kind="stable")
        self.ri, self.mass = self.ri[order], self.mass[order]

    def _global(self, m: np.ndarray) -> np.ndarray:
        out = np.full(m.shape, self.global_floor)
        for mass, q in self.global_q.items():
            out[m == mass] = q
        return out

    def probability(self, m: np.ndarray, x: np.ndarray) -> np.ndarray:
        """q(m | x) for paired arrays of masses and indices."""
        m = np.asarray(m, dtype=float)
        x = np.asarray(x, dtype=float)
        num = MASS_PRIOR_WEIGHT * self._global(m)
        den = np.full(m.shape, MASS_PRIOR_WEIGHT)
        if len(self.ri) and len(m):
            h = MASS_BANDWIDTH
            lo = np.searchsorted(self.ri, x - 5 * h, side="left")
            hi = np.searchsorted(self.ri, x + 5 * h, side="right")
            width = hi - lo
            rep = np.repeat(np.arange(len(m)), width)
            offs = np.arange(int(width.sum())) - np.repeat(np.cumsum(width) - width, width)
            k = lo[rep] + offs
            u = np.exp(-0.5 * ((x[rep] - self.ri[k]) / h) ** 2)
            den += np.bincount(rep, weights=u, minlength=len(m))
            num += np.bincount(rep, weights=u * (self.mass[k] == m[rep]), minlength=len(m))
        return num / den
