"""Price bands: Bollinger Bands, %b, bandwidth, ATR bands and a percentage envelope.

Conventions
-----------
* **Bollinger Bands**: the middle line is the chosen moving average of the last
  ``period`` prices; the upper and lower bands sit ``width`` deviations above
  and below it, the deviation being :func:`sheetvol.core.dispersion.dispersion`
  about that same average (population divisor by default, as Bollinger uses).
  With ``average="simple"`` these are the classic bands.
* **%b** is ``(price - lower) / (upper - lower)``: 0 on the lower band, 1 on the
  upper band, outside [0, 1] beyond them. When the bands collapse (a window of
  identical prices, deviation exactly 0) it is undefined and NaN.
* **Bandwidth** is ``(upper - lower) / middle``, a fraction; NaN where the
  middle line is 0.
* **ATR bands** (Keltner-type): the middle is the exponential average of the
  close (alpha = 2/(period+1), seeded with the simple mean of the first
  ``period`` closes); the bands are ``width`` times the Wilder ATR over
  ``atr_period`` bars away (see :mod:`sheetvol.core.ranges`).
* **Envelope**: the moving average plus and minus ``percent/100`` of itself.
* Every line is NaN until its window is full and on gap rows (a bar whose
  inputs are not all finite is skipped; see :mod:`sheetvol.core._gaps`).
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from sheetvol.core import bounds
from sheetvol.core._gaps import as_series, skip_gaps
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_choice, check_period, window_mean_var
from sheetvol.core.averages import KINDS, average_of
from sheetvol.core.bounds import SPREAD_PERIOD
from sheetvol.core.dispersion import DIVISORS, dispersion_of
from sheetvol.core.ranges import average_true_range_of

__all__ = ["atr_bands", "bandwidth", "deviation_bands", "envelope", "percent_b"]

Bands = tuple[FloatArray, FloatArray, FloatArray]


@skip_gaps(1)
def _deviation_bands(
    prices: FloatArray, period: int, width: float, average: str, divisor: str
) -> Bands:
    if average == "simple" and len(prices) >= period:
        # One accurate window pass gives both lines (the same numbers as
        # moving_average and dispersion, computed once).
        middle, variance = window_mean_var(prices, period)
        if divisor == "sample":
            variance *= period / (period - 1.0)
        deviation = np.sqrt(variance, out=variance)
    else:
        middle = average_of(prices, period, average, "average")
        deviation = dispersion_of(prices, period, average, divisor, "average")
    return _around(middle, width, deviation)


def _around(middle: FloatArray, width: float, distance: FloatArray) -> Bands:
    """``middle`` and ``middle +/- width * distance``, reusing ``distance`` for the lower.

    The same roundings as the plain expressions, with no full-length temporaries
    (each is paged in afresh on long columns).
    """
    upper = np.multiply(distance, width)
    upper += middle
    lower = np.multiply(distance, -width, out=distance)
    lower += middle
    return middle, upper, lower


def deviation_bands(
    prices: npt.ArrayLike,
    period: int = 20,
    width: float = 2.0,
    average: str = "simple",
    divisor: str = "population",
) -> Bands:
    """Bollinger Bands: a moving average plus and minus ``width`` deviations.

    Parameters
    ----------
    prices : array_like
        Prices, oldest first.
    period : int, default 20
        Bars in the window: 2 to 5000 (one value has no spread)
        (:data:`sheetvol.core.bounds.SPREAD_PERIOD`).
    width : float, default 2.0
        Band half-width in deviations, above 0 and up to 100.
    average : {"simple", "linear", "exponential", "wilder"}, default "simple"
        Moving average for the middle line; the deviation is measured about it.
    divisor : {"population", "sample"}, default "population"
        Divide the squared deviations by N or N-1.

    Returns
    -------
    middle, upper, lower : FloatArray
        The three lines in price units; NaN until a full window and on gaps.

    Examples
    --------
    Prices 1, 2, 3 have mean 2 and population deviation sqrt(2/3):

    >>> import math
    >>> mid, up, low = deviation_bands([1.0, 2.0, 3.0], period=3, width=1.5)
    >>> float(mid[2]), bool(abs(up[2] - (2 + 1.5 * math.sqrt(2 / 3))) < 1e-12)
    (2.0, True)
    """
    period = check_period(period, bound=SPREAD_PERIOD)
    check_choice(average, "average", KINDS)
    check_choice(divisor, "divisor", DIVISORS)
    bounds.check("width", width, bounds.WIDTH)
    return _deviation_bands(prices, period, float(width), average, divisor)


def percent_b(
    prices: npt.ArrayLike,
    period: int = 20,
    width: float = 2.0,
    average: str = "simple",
    divisor: str = "population",
) -> FloatArray:
    """%b: where the price sits between its Bollinger Bands.

    Parameters
    ----------
    prices, period, width, average, divisor
        As for :func:`deviation_bands`.

    Returns
    -------
    FloatArray
        ``(price - lower) / (upper - lower)``: 0 at the lower band, 1 at the
        upper band. NaN during the warm-up, on gaps and where the bands collapse
        (all prices in the window equal).

    Examples
    --------
    The last price of 1, 2, 3 sits sqrt(3/2) deviations above the mean, so with
    width 1.5 it is at ``0.5 + sqrt(3/2)/3``:

    >>> import math
    >>> b = percent_b([1.0, 2.0, 3.0], period=3, width=1.5)
    >>> bool(abs(b[2] - (0.5 + math.sqrt(1.5) / 3)) < 1e-12)
    True
    >>> percent_b([5.0, 5.0, 5.0], period=3).tolist()
    [nan, nan, nan]
    """
    x = as_series(prices)
    _, upper, lower = deviation_bands(x, period, width, average, divisor)
    spread = upper - lower
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(spread > 0, (x - lower) / spread, np.nan)


def bandwidth(
    prices: npt.ArrayLike,
    period: int = 20,
    width: float = 2.0,
    average: str = "simple",
    divisor: str = "population",
) -> FloatArray:
    """Bandwidth: the distance between the bands as a fraction of the middle line.

    Parameters
    ----------
    prices, period, width, average, divisor
        As for :func:`deviation_bands`.

    Returns
    -------
    FloatArray
        ``(upper - lower) / middle``; NaN during the warm-up and on gaps. A
        price of 0 or below is refused (naming the bar): the middle line would
        reach 0 or turn negative and the fraction flip sign.

    Examples
    --------
    >>> import math
    >>> w = bandwidth([1.0, 2.0, 3.0], period=3, width=1.5)
    >>> bool(abs(w[2] - 3 * math.sqrt(2 / 3) / 2) < 1e-12)
    True
    """
    bounds.check_positive_prices("bandwidth (a share of the middle line)", prices=prices)
    middle, upper, lower = deviation_bands(prices, period, width, average, divisor)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(middle != 0, (upper - lower) / middle, np.nan)


@skip_gaps(3)
def _atr_bands(
    high: FloatArray, low: FloatArray, close: FloatArray,
    period: int, width: float, atr_period: int,
) -> Bands:
    middle = average_of(close, period, "exponential", "average")
    atr = average_true_range_of(high, low, close, atr_period)
    return _around(middle, width, atr)


def atr_bands(
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 20,
    width: float = 2.0,
    atr_period: int = 10,
) -> Bands:
    """Keltner-type bands: an exponential average of the close plus and minus ``width`` ATRs.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest first.
    period : int, default 20
        Bars in the exponential middle line: 1 to 5000
        (:data:`sheetvol.core.bounds.PERIOD`).
    width : float, default 2.0
        Band half-width in ATRs, above 0 and up to 100.
    atr_period : int, default 10
        Bars in the Wilder ATR: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).

    Returns
    -------
    middle, upper, lower : FloatArray
        The three lines in price units; NaN until both windows are full and on
        gaps.

    Examples
    --------
    Constant closes of 10 with a true range of 2 on every bar:

    >>> mid, up, low = atr_bands([11.0] * 3, [9.0] * 3, [10.0] * 3, period=2, width=1.5,
    ...                          atr_period=2)
    >>> mid.tolist(), up.tolist(), low.tolist()
    ([nan, 10.0, 10.0], [nan, 13.0, 13.0], [nan, 7.0, 7.0])
    """
    period = check_period(period)
    atr_period = check_period(atr_period, "atr_period")
    bounds.check_high_low(high, low, close)
    bounds.check("width", width, bounds.WIDTH)
    return _atr_bands(high, low, close, period, float(width), atr_period)


@skip_gaps(1)
def _envelope(prices: FloatArray, period: int, percent: float, average: str) -> Bands:
    middle = average_of(prices, period, average, "average")
    offset = middle * percent / 100.0
    return middle, middle + offset, middle - offset


def envelope(
    prices: npt.ArrayLike,
    period: int = 20,
    percent: float = 2.5,
    average: str = "simple",
) -> Bands:
    """Percentage envelope: a moving average plus and minus a fixed percentage of it.

    Parameters
    ----------
    prices : array_like
        Prices, oldest first.
    period : int, default 20
        Bars in the moving average: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).
    percent : float, default 2.5
        Half-width in percent of the average (2.5 means 2.5 %), above 0 and up
        to 100.
    average : {"simple", "linear", "exponential", "wilder"}, default "simple"
        Moving average for the middle line.

    Returns
    -------
    middle, upper, lower : FloatArray
        The three lines in price units; NaN until a full window and on gaps.
        A price of 0 or below is refused (naming the bar): a percentage of a
        negative average would put the upper band below the lower one.

    Examples
    --------
    >>> mid, up, low = envelope([100.0, 100.0], period=2, percent=2.5)
    >>> up.tolist(), low.tolist()
    ([nan, 102.5], [nan, 97.5])
    """
    check_choice(average, "average", KINDS)
    bounds.check_positive_prices("an envelope (a percentage of the average)", prices=prices)
    bounds.check("percent", percent, bounds.PERCENT)
    return _envelope(prices, check_period(period), float(percent), average)
