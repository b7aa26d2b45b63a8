"""Kováts retention index for isothermal runs.

.. math::

   I_x = 100 \\left[ n + (N - n)
         \\frac{\\log t'_x - \\log t'_n}{\\log t'_N - \\log t'_n} \\right],
   \\qquad t' = t_R - t_M

with :math:`t'` the adjusted retention time (:math:`t_M` the hold-up time)
and :math:`n < N` the carbon numbers of the bracketing n-alkanes; :math:`N`
need not be :math:`n + 1`. Any logarithm base gives the same value. For a
general reference series the bracket term is
:math:`I_n + (I_N - I_n)(\\log t'_x - \\log t'_n)/(\\log t'_N - \\log t'_n)`.

Outside the ladder the nearest pair is used and the value is flagged as
extrapolated. A time at or before the hold-up time has no index (NaN).

Reference: E. Kováts, "Gas-chromatographische Charakterisierung organischer
Verbindungen. Teil 1: Retentionsindices aliphatischer Halogenide, Alkohole,
Aldehyde und Ketone", Helv. Chim. Acta 41, 1915-1932 (1958).

Worked example (invented times, hold-up 1.00 min): octane at 3.00 min,
nonane at 5.00 min, a compound at 4.00 min:

>>> round(kovats(4.0, 3.0, 5.0, 8, 9, 1.0), 2)
858.5
>>> ri, ext = kovats_index([4.0, 6.0], [3.0, 5.0], [800.0, 900.0], 1.0)
>>> ri.round(2).tolist(), ext.tolist()
([858.5, 932.19], [False, True])
"""

from __future__ import annotations

import numpy as np

from .linear_index import interpolate


def kovats(tx: float, tn: float, tN: float, n: float, N: float, tm: float) -> float:
    """The published formula for one compound between n-alkanes of carbon numbers ``n`` and ``N``."""
    import math

    return 100.0 * (n + (N - n) * (math.log(tx - tm) - math.log(tn - tm)) / (math.log(tN - tm) - math.log(tn - tm)))


def log_adjusted(t, tm: float) -> np.ndarray:
    """``log(t - tm)``; NaN where ``t <= tm``."""
    t = np.asarray(t, dtype=np.float64)
    adj = t - tm
    out = np.full(adj.shape, np.nan)
    np.log(adj, out=out, where=adj > 0)
    return out


def kovats_index(t, t_std, i_std, tm: float) -> tuple[np.ndarray, np.ndarray]:
    """Kováts indices of times ``t`` from standards at ``t_std`` (indices ``i_std``) with hold-up time ``tm``.

    Returns ``(ri, extrapolated)``; times at or before ``tm`` give NaN and are flagged extrapolated.
    """
    t_std = np.asarray(t_std, dtype=np.float64)
    if not np.all(t_std > tm):
        raise ValueError("every standard must elute after the hold-up time")
    t = np.asarray(t, dtype=np.float64)
    ri, outside = interpolate(log_adjusted(t, tm), log_adjusted(t_std, tm), i_std)
    outside = outside | (t <= tm)
    return ri, outside


__all__ = ["kovats", "kovats_index", "log_adjusted"]
