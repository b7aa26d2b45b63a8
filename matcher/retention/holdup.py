"""Hold-up (dead) time: given, from a marker, by Peterson & Hirsch, or by least squares.

In isothermal GC the adjusted retention time of a homologous series grows
geometrically with carbon number, :math:`t_R - t_M = a\\,b^{n}`, so
:math:`\\log(t_R - t_M)` is linear in :math:`n` (or in the assigned index).

* **given** – the analyst's value (``--dead-time``).
* **marker** – the time of an unretained peak (methane on a flame-ionisation
  detector is the usual choice; common practice, no single source).
* **Peterson–Hirsch** – from three standards with equally spaced carbon
  numbers :math:`t_1 < t_2 < t_3`:

  .. math:: t_M = \\frac{t_1 t_3 - t_2^2}{t_1 + t_3 - 2 t_2}

  M. L. Peterson and J. Hirsch, "A calculation for locating the carrier gas
  front of a gas-liquid chromatogram", J. Lipid Res. 1, 132-134 (1959).
* **fit** – least squares over the whole ladder: the :math:`t_M` in
  :math:`[0, t_{min})` that makes :math:`\\log(t_R - t_M)` most nearly linear
  in the assigned index (smallest residual sum of squares of the straight
  line). A coarse scan followed by bounded Brent refinement
  (:func:`scipy.optimize.minimize_scalar`) finds the minimum robustly.

Worked example (exact data :math:`t_R = 0.8 + 0.5 \\cdot 1.6^{n-8}`, invented):

>>> t = [0.8 + 0.5 * 1.6 ** k for k in range(5)]
>>> round(peterson_hirsch(t[0], t[1], t[2]), 6)
0.8
>>> round(fit_holdup(t, [800, 900, 1000, 1100, 1200]).value, 6)
0.8
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from matcher.errors import MatcherError

METHODS = ("given", "marker", "peterson-hirsch", "fit")


@dataclass(frozen=True)
class HoldUp:
    """A hold-up time in minutes and how it was found."""

    value: float
    method: str
    detail: str = ""
    warnings: tuple[str, ...] = field(default=())


def peterson_hirsch(t1: float, t2: float, t3: float) -> float:
    r"""Hold-up time from three homologues with equally spaced carbon numbers, Peterson & Hirsch [1]_.

    Adjusted times of a homologous series grow geometrically in isothermal
    GC, so :math:`(t_2 - t_M)^2 = (t_1 - t_M)(t_3 - t_M)`, which solves to

    .. math::

        t_M = \frac{t_1 t_3 - t_2^2}{t_1 + t_3 - 2 t_2}

    Parameters
    ----------
    t1, t2, t3 : float
        Retention times of homologues with carbon numbers n, n + k, n + 2k,
        ``t1 < t2 < t3``, [min]

    Returns
    -------
    tM : float
        Hold-up time, ``0 <= tM < t1``, [min]

    Raises
    ------
    MatcherError
        When the spacing does not grow (``t1 + t3 <= 2 t2``: not isothermal-like)
        or the result falls outside ``0 .. t1``.

    Examples
    --------
    Invented exact data :math:`t_R = 0.8 + 0.5 \cdot 1.6^{k}`: 1.30, 1.60 and
    2.08 min give :math:`(2.704 - 2.56)/0.18 = 0.8` min (by hand).

    >>> round(peterson_hirsch(1.3, 1.6, 2.08), 6)
    0.8

    References
    ----------
    .. [1] Peterson, M. L., and J. Hirsch. "A Calculation for Locating the
       Carrier Gas Front of a Gas-Liquid Chromatogram." Journal of Lipid
       Research 1, no. 2 (1959): 132-34.
    """
    den = t1 + t3 - 2.0 * t2
    if not (t1 < t2 < t3) or den <= 0:
        raise MatcherError(
            "Peterson-Hirsch needs three standards whose spacing grows with carbon number "
            f"(isothermal behaviour); got {t1:g}, {t2:g}, {t3:g} min"
        )
    tm = (t1 * t3 - t2 * t2) / den
    if not (0 <= tm < t1):
        raise MatcherError(f"Peterson-Hirsch gives a hold-up time of {tm:.4g} min, outside 0..{t1:g} min; the ladder is not isothermal-like")
    return tm


def equally_spaced_triple(index) -> tuple[int, int, int]:
    """Positions ``(i, j, k)`` of three standards with equally spaced index, widest span first.

    >>> equally_spaced_triple([800, 900, 1000, 1200, 1400])
    (0, 2, 3)
    """
    idx = np.asarray(index, dtype=np.float64)
    n = len(idx)
    best, span = None, -1.0
    pos = {round(v, 6): p for p, v in enumerate(idx)}
    for i in range(n):
        for k in range(n - 1, i + 1, -1):
            mid = round((idx[i] + idx[k]) / 2.0, 6)
            if mid in pos and idx[k] - idx[i] > span:
                best, span = (i, pos[mid], k), idx[k] - idx[i]
                break
    if best is None:
        raise MatcherError("Peterson-Hirsch needs three standards with equally spaced carbon numbers; the ladder has none")
    return best


def from_ladder_peterson_hirsch(t, index) -> HoldUp:
    """Peterson–Hirsch on the widest equally spaced triple of the ladder.

    >>> h = from_ladder_peterson_hirsch([0.8 + 0.5 * 1.6 ** k for k in range(3)], [800, 900, 1000])
    >>> round(h.value, 6), h.method
    (0.8, 'peterson-hirsch')
    """
    t = np.asarray(t, dtype=np.float64)
    i, j, k = equally_spaced_triple(index)
    tm = peterson_hirsch(t[i], t[j], t[k])
    return HoldUp(float(tm), "peterson-hirsch", f"from standards at index {index[i]:g}, {index[j]:g}, {index[k]:g}")


def _rss(tm: float, t: np.ndarray, x: np.ndarray) -> float:
    y = np.log(t - tm)
    xc = x - x.mean()
    yc = y - y.mean()
    sxx = float(xc @ xc)
    sxy = float(xc @ yc)
    return float(yc @ yc) - sxy * sxy / sxx


def fit_holdup(t, index) -> HoldUp:
    r"""Least-squares hold-up time over the whole ladder (three or more standards).

    The :math:`t_M \in [0, t_{min})` that makes :math:`\log(t_R - t_M)` most
    nearly a straight line in the assigned index :math:`I`:

    .. math::

        t_M = \arg\min_{t} \; \min_{a, b} \sum_k \left[\log(t_k - t) - a - b I_k\right]^2

    the least-squares generalisation of the three-point rule of Peterson &
    Hirsch [1]_ to every standard (our formulation; a coarse scan, then
    bounded Brent refinement).

    Parameters
    ----------
    t : array-like
        Retention times of the standards, [min]
    index : array-like
        Their assigned indices, [-]

    Returns
    -------
    holdup : HoldUp
        ``value`` the hold-up time [min], ``method`` ``'fit'``, ``detail`` the
        residual sum of squares, ``warnings`` when the minimum sits at an end
        of the range (the ladder does not behave isothermally)

    Examples
    --------
    Invented exact data :math:`t_R = 0.8 + 0.5 \cdot 1.6^{k}` recover 0.8 min:

    >>> round(fit_holdup([0.8 + 0.5 * 1.6 ** k for k in range(5)], [800, 900, 1000, 1100, 1200]).value, 6)
    0.8

    References
    ----------
    .. [1] Peterson, M. L., and J. Hirsch. Journal of Lipid Research 1 (1959): 132-34.
    """
    from scipy.optimize import minimize_scalar

    t = np.asarray(t, dtype=np.float64)
    x = np.asarray(index, dtype=np.float64)
    if len(t) < 3:
        raise MatcherError("estimating a hold-up time needs at least three standards")
    tmin = float(t.min())
    upper = tmin * (1.0 - 1e-9)
    # coarse scan, dense towards t_min where log(t - tM) changes fastest
    u = np.linspace(0.0, 1.0, 401)
    grid = upper * (1.0 - (1.0 - u) ** 3)[:-1]
    grid = np.concatenate([grid, [upper * (1 - 1e-6)]])
    scores = np.array([_rss(g, t, x) for g in grid])
    k = int(np.nanargmin(scores))
    lo = grid[max(k - 1, 0)]
    hi = grid[min(k + 1, len(grid) - 1)]
    res = minimize_scalar(_rss, bounds=(lo, hi), args=(t, x), method="bounded",
                          options={"xatol": max(1e-12, 1e-10 * tmin)})
    tm = float(res.x) if res.fun <= scores[k] else float(grid[k])
    warnings = []
    if tm > 0.999 * tmin:
        warnings.append("the least-squares hold-up time runs into the first standard; the ladder does not behave isothermally")
    if tm < 1e-6 * tmin:
        warnings.append("the least-squares hold-up time is zero; check that the run really is isothermal")
    rss = _rss(tm, t, x)
    return HoldUp(tm, "fit", f"least squares over {len(t)} standards (residual SS of log time {rss:.3g})", tuple(warnings))


def resolve_holdup(t, index, *, method: str | None, dead_time: float | None = None,
                   marker: float | None = None) -> HoldUp:
    """Choose and compute the hold-up time; ``method`` None picks given, else marker, else fit.

    >>> resolve_holdup([2.0, 3.0, 5.0], [800, 900, 1000], method=None, dead_time=1.1).method
    'given'
    >>> resolve_holdup([2.0, 3.0, 5.0], [800, 900, 1000], method=None, dead_time=2.5)
    Traceback (most recent call last):
    ...
    matcher.errors.MatcherError: --dead-time 2.5 min is not before the first standard (2 min)
    """
    t = np.asarray(t, dtype=np.float64)
    if method is None:
        method = "given" if dead_time is not None else "marker" if marker is not None else "fit"
    if method not in METHODS:
        raise MatcherError(f"unknown hold-up method {method!r}; use one of {', '.join(METHODS)}")
    tmin = float(t.min())
    if method in ("given", "marker"):
        value = dead_time if method == "given" else marker
        opt = "--dead-time" if method == "given" else "--marker"
        if value is None:
            raise MatcherError(f"hold-up method {method!r} needs {opt} MIN")
        if not np.isfinite(value) or value < 0:
            raise MatcherError(f"{opt} must be a non-negative number of minutes, got {value:g}")
        if value >= tmin:
            raise MatcherError(f"{opt} {value:g} min is not before the first standard ({tmin:g} min)")
        return HoldUp(float(value), method, "given by the analyst" if method == "given" else "unretained marker peak")
    if method == "peterson-hirsch":
        return from_ladder_peterson_hirsch(t, index)
    return fit_holdup(t, index)


__all__ = ["HoldUp", "METHODS", "peterson_hirsch", "equally_spaced_triple", "from_ladder_peterson_hirsch", "fit_holdup", "resolve_holdup"]
