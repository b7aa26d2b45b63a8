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

from matcher.retention.linear_index import interpolate


def kovats(tx: float, tn: float, tN: float, n: float, N: float, tm: float) -> float:
    r"""Kováts retention index of one compound eluting between two n-alkanes, isothermal run [1]_.

    .. math::

        I_x = 100 \left[ n + (N - n)
              \frac{\log (t_x - t_M) - \log (t_n - t_M)}{\log (t_N - t_M) - \log (t_n - t_M)} \right]

    Parameters
    ----------
    tx : float
        Retention time of the compound, [min]
    tn, tN : float
        Retention times of the bracketing n-alkanes, ``tn < tN``, [min]
    n, N : float
        Carbon numbers of those n-alkanes, ``n < N`` (``N`` need not be ``n + 1``), [-]
    tm : float
        Hold-up (dead) time, below every retention time, [min]

    Returns
    -------
    I : float
        Retention index of the compound, [-]

    Notes
    -----
    The logarithm base cancels. The index is defined only for isothermal
    operation, where adjusted times grow geometrically with carbon number;
    programmed runs use :func:`matcher.retention.linear_index.van_den_dool_kratz`.

    Examples
    --------
    Invented times, checked by hand: hold-up 1.00 min, octane 3.00 min,
    nonane 5.00 min, compound 4.00 min; adjusted times 2, 4 and 3 min give
    :math:`800 + 100 \log 1.5 / \log 2 = 858.50`.

    >>> round(kovats(4.0, 3.0, 5.0, 8, 9, 1.0), 2)
    858.5

    References
    ----------
    .. [1] Kováts, E. "Gas-chromatographische Charakterisierung organischer
       Verbindungen. Teil 1: Retentionsindices aliphatischer Halogenide,
       Alkohole, Aldehyde und Ketone." Helvetica Chimica Acta 41, no. 7
       (1958): 1915-32.
    """
    import math

    return 100.0 * (n + (N - n) * (math.log(tx - tm) - math.log(tn - tm)) / (math.log(tN - tm) - math.log(tn - tm)))


def log_adjusted(t, tm: float) -> np.ndarray:
    """``log(t - tm)``, the natural log of the adjusted time; NaN where ``t <= tm``.

    >>> log_adjusted([1.0, 1.0 + np.e], 1.0).tolist()
    [nan, 1.0]
    """
    t = np.asarray(t, dtype=np.float64)
    adj = t - tm
    out = np.full(adj.shape, np.nan)
    np.log(adj, out=out, where=adj > 0)
    return out


def kovats_index(t, t_std, i_std, tm: float) -> tuple[np.ndarray, np.ndarray]:
    r"""Kováts indices of many times at once, through a whole ladder [1]_.

    The Kováts formula (:func:`kovats`) applied between each time's
    bracketing pair of standards, with assigned indices :math:`I_n, I_N` in
    place of :math:`100 n, 100 N`:

    .. math::

        I_x = I_n + (I_N - I_n) \frac{\log t'_x - \log t'_n}{\log t'_N - \log t'_n},
        \qquad t' = t_R - t_M

    Parameters
    ----------
    t : array-like
        Retention times to convert (any shape), [min]
    t_std : array-like
        Retention times of the standards, strictly increasing, all after ``tm``, [min]
    i_std : array-like
        Assigned indices of the standards (100 × carbon number for n-alkanes), [-]
    tm : float
        Hold-up time, [min]

    Returns
    -------
    ri : numpy.ndarray
        Retention indices, same shape as ``t``; NaN for times at or before ``tm``, [-]
    extrapolated : numpy.ndarray of bool
        True for times outside the ladder (computed from the nearest pair of
        standards) and for times at or before ``tm``

    Examples
    --------
    The invented ladder of :func:`kovats`; 6.00 min lies beyond nonane and is
    extrapolated from the octane-nonane pair:

    >>> ri, ext = kovats_index([4.0, 6.0], [3.0, 5.0], [800.0, 900.0], 1.0)
    >>> ri.round(2).tolist(), ext.tolist()
    ([858.5, 932.19], [False, True])

    References
    ----------
    .. [1] Kováts, E. Helvetica Chimica Acta 41 (1958): 1915-32.
    """
    t_std = np.asarray(t_std, dtype=np.float64)
    if not np.all(t_std > tm):
        raise ValueError("every standard must elute after the hold-up time")
    t = np.asarray(t, dtype=np.float64)
    ri, outside = interpolate(log_adjusted(t, tm), log_adjusted(t_std, tm), i_std)
    outside = outside | (t <= tm)
    return ri, outside


__all__ = ["kovats", "kovats_index", "log_adjusted"]
