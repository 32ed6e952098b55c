"""Regime tools: percentile rank of a reading among its own history, deviation-to-ATR ratio.

Conventions
-----------
* **Percentile rank** on a row is the share of the last ``lookback`` readings
  (today's included) that are at or below today's reading: ``count(x <= today)
  / lookback``. It lies in (0, 1]: 1 means today is the highest of the window
  (ties count as at-or-below), ``1/lookback`` that it is strictly the lowest. A
  constant series ranks 1 everywhere. The first ``lookback - 1`` readings are
  NaN. Computed by comparing each reading with its window in blocks of rows
  (O(n * lookback) comparisons in numpy, exact, no pandas).
  Blank readings (such as a volatility column's own warm-up) are skipped like
  any gap: the window is the last ``lookback`` non-blank readings.
* **Deviation to ATR** is the population standard deviation of the last
  ``period`` closes (simple average) divided by the Wilder ATR over the same
  ``period`` bars (first bar's true range = its high - low). It compares how far
  closes wander with how far bars reach; NaN where the ATR is 0.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from sheetvol.core._gaps import skip_gaps
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_period
from sheetvol.core.bounds import LOOKBACK, SPREAD_PERIOD
from sheetvol.core.dispersion import dispersion_of
from sheetvol.core.ranges import average_true_range_of

__all__ = ["deviation_to_atr", "percentile_rank"]


@skip_gaps(1)
def _percentile_rank(values: FloatArray, lookback: int) -> FloatArray:
    if len(values) < lookback:
        return np.full(len(values), np.nan)
    out = np.full(len(values), np.nan)
    windows = np.lib.stride_tricks.sliding_window_view(values, lookback)
    # Rows per block keep the boolean comparison near a few MB, whatever the lookback.
    step = max(1, (1 << 22) // lookback)
    for start in range(0, len(windows), step):
        block = windows[start:start + step]
        counts = np.count_nonzero(block <= block[:, -1:], axis=1)
        out[lookback - 1 + start:lookback - 1 + start + len(block)] = counts / lookback
    return out


def percentile_rank(values: npt.ArrayLike, lookback: int = 252) -> FloatArray:
    """Where each reading stands among its own last ``lookback`` readings.

    Parameters
    ----------
    values : array_like
        A series of readings (typically a volatility column), oldest first.
    lookback : int, default 252
        Readings in the comparison window, today's included: 1 to 100000
        (:data:`sheetvol.core.bounds.LOOKBACK`).

    Returns
    -------
    FloatArray
        Share of the window at or below today's reading, in (0, 1]; NaN for the
        first ``lookback - 1`` readings and on blank rows.

    Examples
    --------
    >>> percentile_rank([3.0, 1.0, 2.0, 5.0, 0.5], lookback=3).tolist()
    [nan, nan, 0.6666666666666666, 1.0, 0.3333333333333333]
    """
    return _percentile_rank(values, check_period(lookback, "lookback", LOOKBACK))


@skip_gaps(3)
def _deviation_to_atr(
    high: FloatArray, low: FloatArray, close: FloatArray, period: int
) -> FloatArray:
    deviation = dispersion_of(close, period, "simple", "population", "average")
    atr = average_true_range_of(high, low, close, period)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(atr > 0, deviation / atr, np.nan)


def deviation_to_atr(
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 14,
) -> FloatArray:
    """Ratio of the close's standard deviation to the ATR over the same period.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest first.
    period : int, default 14
        Bars in both the deviation window and the ATR: 2 to 5000
        (:data:`sheetvol.core.bounds.SPREAD_PERIOD`).

    Returns
    -------
    FloatArray
        ``dispersion(close, period, "simple") / ATR(period, Wilder)``; NaN during
        the warm-up, on gaps and where the ATR is 0.

    Examples
    --------
    Closes 10, 12, 10 (population deviation sqrt(8/9)) with bars 2 wide around
    each close; true ranges 2, 3, 3 (each close gap widens the reach), ATR 8/3:

    >>> import math
    >>> c = [10.0, 12.0, 10.0]
    >>> h = [x + 1 for x in c]
    >>> low = [x - 1 for x in c]
    >>> r = deviation_to_atr(h, low, c, period=3)
    >>> bool(abs(r[2] - math.sqrt(8 / 9) / (8 / 3)) < 1e-12)
    True
    """
    return _deviation_to_atr(high, low, close, check_period(period, bound=SPREAD_PERIOD))
