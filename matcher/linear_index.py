"""Linear retention index for temperature-programmed runs (van den Dool & Kratz).

.. math::

   I_x = 100 \\left[ n + (N - n) \\frac{t_x - t_n}{t_N - t_n} \\right]

with :math:`t_x` the retention time of the compound and :math:`t_n < t_x < t_N`
those of the bracketing reference standards of carbon numbers :math:`n < N`
(:math:`N` need not be :math:`n + 1`: ladders with gaps use the same form).
The hold-up time cancels. For a general reference series with assigned
indices :math:`I_n, I_N` the bracket term reads
:math:`I_n + (I_N - I_n)(t_x - t_n)/(t_N - t_n)`.

Outside the ladder the nearest pair of standards is used and the value is
flagged as extrapolated.

Reference: H. van den Dool and P. D. Kratz, "A generalization of the
retention index system including linear temperature programmed gas-liquid
partition chromatography", J. Chromatogr. 11, 463-471 (1963).

Worked example (invented times): decane at 10.00 min, dodecane at 14.00 min,
a compound at 12.50 min:

>>> round(van_den_dool_kratz(12.5, 10.0, 14.0, 10, 12), 2)
1125.0
>>> ri, ext = linear_index([9.0, 12.5, 15.0], [10.0, 14.0], [1000.0, 1200.0])
>>> ri.tolist(), ext.tolist()
([950.0, 1125.0, 1250.0], [True, False, True])
"""

from __future__ import annotations

import numpy as np


def van_den_dool_kratz(tx: float, tn: float, tN: float, n: float, N: float) -> float:
    """The published formula for one compound between standards of carbon numbers ``n`` and ``N``."""
    return 100.0 * (n + (N - n) * (tx - tn) / (tN - tn))


def bracket(x: np.ndarray, x_std: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index ``j`` of the lower standard of the pair used for each ``x`` (nearest pair outside), and the outside flag.

    ``x_std`` must be strictly increasing with at least two values. NaN is never flagged.
    """
    x = np.asarray(x, dtype=np.float64)
    j = np.searchsorted(x_std, x, side="right") - 1
    np.clip(j, 0, len(x_std) - 2, out=j)
    outside = (x < x_std[0]) | (x > x_std[-1])
    return j, outside


def interpolate(x: np.ndarray, x_std: np.ndarray, i_std: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Piecewise-linear index in ``x`` through the standards, extended from the end pairs; returns ``(ri, extrapolated)``."""
    x_std = np.asarray(x_std, dtype=np.float64)
    i_std = np.asarray(i_std, dtype=np.float64)
    if x_std.ndim != 1 or len(x_std) < 2 or len(x_std) != len(i_std):
        raise ValueError("need at least two standards with one index each")
    if not np.all(np.diff(x_std) > 0):
        raise ValueError("standards must be strictly increasing")
    x = np.asarray(x, dtype=np.float64)
    j, outside = bracket(x, x_std)
    x0, x1 = x_std[j], x_std[j + 1]
    i0, i1 = i_std[j], i_std[j + 1]
    ri = i0 + (i1 - i0) * (x - x0) / (x1 - x0)
    return ri, outside


def linear_index(t, t_std, i_std) -> tuple[np.ndarray, np.ndarray]:
    """Van den Dool & Kratz indices of times ``t`` (any shape) from standards at ``t_std`` with indices ``i_std``.

    Returns ``(ri, extrapolated)``; ``extrapolated`` is true exactly for times
    before the first or after the last standard.
    """
    return interpolate(np.asarray(t, dtype=np.float64), t_std, i_std)


__all__ = ["van_den_dool_kratz", "linear_index", "interpolate", "bracket"]
