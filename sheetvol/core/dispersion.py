"""Dispersion: rolling standard deviation about the current value of a moving average.

For the last N prices ``x_i`` and the current value ``m_t`` of the chosen moving
average, the dispersion is ``sqrt(sum((x_i - m_t)^2) / D)`` with ``D = N``
(population, the trade's usual choice) or ``D = N - 1`` (sample). With the
simple average ``m_t`` is the window mean and this is the ordinary rolling
standard deviation; with the other averages ``m_t`` is not the window mean and
the identity ``sum((x_i - m_t)^2) = N var + N (mean - m_t)^2`` adds the squared
distance between the window mean and the average.

The window mean and population variance come from the accurate O(n) block
method in :mod:`sheetvol.core._windows`; ``mean - m_t`` is taken in the
block's local frame so that no digits are lost on large prices.
"""

from __future__ import annotations

import numpy as np

from sheetvol.core._gaps import skip_gaps
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_choice, check_period, window_deviation
from sheetvol.core.averages import KINDS, SEEDS, average_of
from sheetvol.core.bounds import SPREAD_PERIOD

DIVISORS = ("population", "sample")


def dispersion_of(
    prices: FloatArray, period: int, average: str, divisor: str, seed: str
) -> FloatArray:
    """:func:`dispersion` on finite prices with checked options (no gap handling).

    For kernels that already run inside ``skip_gaps`` (bands, ratios).

    Parameters
    ----------
    prices : numpy.ndarray
        Finite float64 prices, oldest first.
    period : int
        N, already validated (at least 2).
    average : str
        One of the moving-average kinds.
    divisor : str
        ``"population"`` or ``"sample"``.
    seed : str
        Seeding of the recursive averages.

    Returns
    -------
    numpy.ndarray
        Dispersion on each bar; NaN on the warm-up rows.

    Examples
    --------
    >>> dispersion_of(np.array([1.0, 3.0, 5.0]), 2, "simple", "population", "average")
    array([nan,  1.,  1.])
    """
    n = len(prices)
    if n < period:
        return np.full(n, np.nan)
    level = None if average == "simple" else average_of(prices, period, average, seed)
    return window_deviation(prices, period, level, sample=divisor == "sample")


_dispersion = skip_gaps(1)(dispersion_of)


def dispersion(
    prices: FloatArray,
    period: int = 14,
    average: str = "simple",
    divisor: str = "population",
    seed: str = "average",
) -> FloatArray:
    """Rolling standard deviation of the last N prices about the current moving average.

    Parameters
    ----------
    prices : array_like
        Prices, oldest first. Non-finite entries are gaps: NaN on that row, the
        windows continue over the other bars.
    period : int, default 14
        N, bars in the window: 2 to 5000 (one value has no spread)
        (:data:`sheetvol.core.bounds.SPREAD_PERIOD`).
    average : {"simple", "linear", "exponential", "wilder"}, default "simple"
        The moving average whose current value the deviations are measured from.
    divisor : {"population", "sample"}, default "population"
        Divide the sum of squares by N or by N - 1.
    seed : {"average", "first"}, default "average"
        Seeding of the exponential and Wilder averages (see
        :func:`sheetvol.core.averages.moving_average`).

    Returns
    -------
    numpy.ndarray
        Dispersion in price units on each bar; NaN until N usable bars were seen.

    Examples
    --------
    Population standard deviation of 2, 4, 4, 4, 5, 5, 7, 9 is 2:

    >>> dispersion([2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0], 8)[-1]
    np.float64(2.0)
    """
    period = check_period(period, bound=SPREAD_PERIOD)
    check_choice(average, "average", KINDS)
    check_choice(divisor, "divisor", DIVISORS)
    check_choice(seed, "seed", SEEDS)
    return _dispersion(prices, period, average, divisor, seed)


__all__ = ["DIVISORS", "dispersion", "dispersion_of"]
