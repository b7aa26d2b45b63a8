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
    r"""Linear (programmed-temperature) retention index of one compound, van den Dool & Kratz [1]_.

    .. math::

        I_x = 100 \left[ n + (N - n) \frac{t_x - t_n}{t_N - t_n} \right]

    Parameters
    ----------
    tx : float
        Retention time of the compound, [min]
    tn, tN : float
        Retention times of the bracketing standards, ``tn < tN``, [min]
    n, N : float
        Carbon numbers of those standards, ``n < N`` (``N`` need not be ``n + 1``), [-]

    Returns
    -------
    I : float
        Retention index of the compound, [-]

    Notes
    -----
    For a linear temperature programme retention time, not its logarithm, is
    nearly linear in carbon number; the hold-up time cancels.

    Examples
    --------
    Invented times, checked by hand: decane 10.00 min, dodecane 14.00 min,
    compound 12.50 min: :math:`100 [10 + 2 \cdot 2.5/4] = 1125`.

    >>> round(van_den_dool_kratz(12.5, 10.0, 14.0, 10, 12), 2)
    1125.0

    References
    ----------
    .. [1] van den Dool, H., and P. D. Kratz. "A Generalization of the
       Retention Index System Including Linear Temperature Programmed
       Gas-Liquid Partition Chromatography." Journal of Chromatography 11
       (1963): 463-71.
    """
    return 100.0 * (n + (N - n) * (tx - tn) / (tN - tn))


def bracket(x: np.ndarray, x_std: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index ``j`` of the lower standard of the pair used for each ``x`` (nearest pair outside), and the outside flag.

    ``x_std`` must be strictly increasing with at least two values. NaN is never flagged.

    >>> j, out = bracket(np.array([0.5, 1.5, 2.5, 9.0]), np.array([1.0, 2.0, 3.0]))
    >>> j.tolist(), out.tolist()
    ([0, 0, 1, 1], [True, False, False, True])
    """
    x = np.asarray(x, dtype=np.float64)
    j = np.searchsorted(x_std, x, side="right") - 1
    np.clip(j, 0, len(x_std) - 2, out=j)
    outside = (x < x_std[0]) | (x > x_std[-1])
    return j, outside


def interpolate(x: np.ndarray, x_std: np.ndarray, i_std: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Piecewise-linear index in ``x`` through the standards, extended from the end pairs; returns ``(ri, extrapolated)``.

    >>> ri, ext = interpolate(np.array([1.5, 4.0]), np.array([1.0, 2.0, 3.0]), np.array([100.0, 200.0, 400.0]))
    >>> ri.tolist(), ext.tolist()
    ([150.0, 600.0], [False, True])
    """
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
    r"""Van den Dool & Kratz indices of many times at once, through a whole ladder [1]_.

    .. math::

        I_x = I_n + (I_N - I_n) \frac{t_x - t_n}{t_N - t_n}

    with :math:`t_n \le t_x \le t_N` the bracketing standards (the nearest
    pair outside the ladder).

    Parameters
    ----------
    t : array-like
        Retention times to convert (any shape), [min]
    t_std : array-like
        Retention times of the standards, strictly increasing, [min]
    i_std : array-like
        Assigned indices of the standards (100 × carbon number for n-alkanes), [-]

    Returns
    -------
    ri : numpy.ndarray
        Retention indices, same shape as ``t``, [-]
    extrapolated : numpy.ndarray of bool
        True exactly for times before the first or after the last standard

    Examples
    --------
    The invented ladder of :func:`van_den_dool_kratz`; 9.00 and 15.00 min lie
    outside it:

    >>> ri, ext = linear_index([9.0, 12.5, 15.0], [10.0, 14.0], [1000.0, 1200.0])
    >>> ri.tolist(), ext.tolist()
    ([950.0, 1125.0, 1250.0], [True, False, True])

    References
    ----------
    .. [1] van den Dool, H., and P. D. Kratz. Journal of Chromatography 11 (1963): 463-71.
    """
    return interpolate(np.asarray(t, dtype=np.float64), t_std, i_std)


__all__ = ["van_den_dool_kratz", "linear_index", "interpolate", "bracket"]
