"""Worksheet-only forms of the trade arithmetic: dates and words as a cell holds them.

The kernels in :mod:`sheetvol.core.levels` and :mod:`sheetvol.core.review` take day
numbers and arrays; the forms here take what a worksheet formula holds (a date cell, a
date typed as text, a blank) and return one value for one cell. They back SV_SIZE,
SV_TRAIL and SV_OUTCOME. The sizing kernel gives reason codes; the sentences a cell or a
note shows are made here.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from sheetvol.core._gaps import as_series
from sheetvol.core.levels import TRAIL_MULTIPLE, trailing_stop
from sheetvol.core.review import MEASURE, PERIOD, bar_on_or_before, review_trade, volatility
from sheetvol.core.sizing import SizeResult, size_with_reason
from sheetvol.functions.cells import to_day_numbers

__all__ = ["REVIEW_FLAG_WORDS", "current_trail", "size_or_reason", "size_words",
           "trade_outcome"]

#: What a trade's row note says for each review flag (:data:`sheetvol.core.review.REVIEW_FLAGS`).
REVIEW_FLAG_WORDS = {
    "open_missing": "open missing: filled at no better than the bar's range",
    "exit_bar_reached_stop": "the logged exit's bar also reached the stop: which came first "
                             "is unknown (ambiguous); the log's exit is shown",
    "exit_bar_reached_target": "the logged exit's bar also reached the target: which came "
                               "first is unknown (ambiguous); the log's exit is shown",
}


# -- size in words ----------------------------------------------------------------------------
def _units(x: float) -> str:
    """A budget size in words: whole units from 100 up, else 3 significant figures, never
    rounded up to a lot it cannot buy (822.4 -> '822', 16.88 -> '16.8', 0.5 -> '0.5')."""
    if x >= 100:
        return f"{math.floor(x):,}"
    if x <= 0:
        return "0"
    scale = 10.0 ** (2 - math.floor(math.log10(x)))
    # A hair of slack so 0.3 (0.29999999999999999 in floats) is not shown as 0.299.
    return f"{math.floor(x * scale * (1 + 1e-12)) / scale:.3g}"


def size_words(result: SizeResult) -> list[str]:
    """Why each size is what it is, in words: ``""`` for the plain budget size.

    Parameters
    ----------
    result : SizeResult
        From :func:`sheetvol.core.sizing.size_with_reason`.

    Returns
    -------
    list of str
        One sentence per trade (see :data:`sheetvol.core.sizing.SIZE_REASONS`).

    Examples
    --------
    >>> size_words(size_with_reason([10_000, 250_000], 0.01, 100.0, [90.0, 96.4],
    ...                             max_qty=[0, 500], lot_step=[20, 1]))
    ['risk budget buys 10 units, less than one lot of 20', 'size 694 capped at the maximum 500']
    """
    return [_why(result, i, code) for i, code in enumerate(result.reason.tolist())]


_FIXED_WORDS = {
    "budget": "",
    "stop_at_entry": "stop equals entry: no distance to size from",
    "missing_input": "missing input",
    "too_large": "size too large to be a number: the risk budget over the loss per unit "
                 "overflows (check equity, entry, stop and point value)",
}


def _why(result: SizeResult, i: int, code: str) -> str:
    if code in _FIXED_WORDS:
        return _FIXED_WORDS[code]
    rounded = float(result.rounded[i])
    if code == "under_one_lot":
        return (f"risk budget buys {_units(float(result.raw[i]))} units, less than one lot of "
                f"{float(result.lot_step[i]):,.10g}")
    if code == "under_minimum":
        return f"size {rounded:.10g} is below the minimum {float(result.min_qty[i]):.10g}"
    return f"size {rounded:.10g} capped at the maximum {float(result.quantity[i]):.10g}"


def size_or_reason(
    equity: float,
    risk: float,
    entry: float,
    stop: float,
    point_value: float = 1.0,
    lot_step: float = 1.0,
    min_qty: float = 0.0,
    max_qty: float = 0.0,
    fx_rate: float = 1.0,
) -> float | str:
    """Position size for one trade as a cell shows it: the quantity, or why there is none.

    A zero size is shown as its reason, so it is never mistaken for a computed
    one; a size capped at ``max_qty`` is shown capped.

    Parameters
    ----------
    equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate : float
        See :func:`sheetvol.core.sizing.size_with_reason` (ranges included).

    Returns
    -------
    float or str
        The quantity, or ``"SV_SIZE: <reason>"`` when the size is zero or cannot
        be a number.

    Examples
    --------
    >>> size_or_reason(250_000, 0.01, 105.2, 101.6)
    694.0
    >>> size_or_reason(10_000, 0.01, 100.0, 90.0, lot_step=20)
    'SV_SIZE: risk budget buys 10 units, less than one lot of 20'
    >>> size_or_reason(1e308, 0.25, 100, 99.999999)[:43]
    'SV_SIZE: size too large to be a number: the'
    """
    res = size_with_reason(equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty,
                           fx_rate)
    qty = float(res.quantity[0])
    if not math.isfinite(qty) or qty == 0:
        return f"SV_SIZE: {size_words(res)[0]}"
    return qty


# -- dates ------------------------------------------------------------------------------------


def _day(value: Any) -> float:
    """A date argument as a day number; blank gives NaN."""
    if value is None:
        return math.nan
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        return float(value)
    if isinstance(value, str) and value.strip() == "":
        return math.nan
    return float(to_day_numbers([value])[0])



def current_trail(
    dates: npt.ArrayLike,
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    entry_date: Any,
    entry_price: float,
    side: str = "long",
    multiple: float = TRAIL_MULTIPLE,
    period: int = PERIOD,
    measure: str = MEASURE,
    tick: float = 0.0,
) -> float:
    """Trailing stop in force after the last given bar, for a trade entered on a date.

    Parameters
    ----------
    dates : array_like
        Day numbers of the bars (see :func:`sheetvol.functions.cells.to_day_numbers`), oldest first.
    high, low, close : array_like
        Aligned price columns.
    entry_date : float or date
        Entry date; the entry bar is the last bar on or before it.
    entry_price : float
        Entry price.
    side : str, default "long"
        Trade direction.
    multiple : float, default 3.0
        Volatility units between the best price since entry and the stop (see
        :func:`trailing_stop`).
    period : int, default 14
        Bars in the volatility window.
    measure : {"atr", "deviation"}, default "atr"
        Volatility measure (see :func:`volatility`).
    tick : float, default 0.0
        Price increment; the level is rounded away from the price (see
        :func:`trailing_stop`). 0 leaves it unrounded.

    Returns
    -------
    float
        The trailing level after the last bar (NaN when no bar is on or before
        the entry date or the volatility is still warming up).

    Examples
    --------
    True ranges 2, 2, 3 give a 2-bar Wilder ATR of 2 on day 2 and 2.5 on day 3.
    Long at 10 on day 2: the stop starts at 10 - 2 x 2 = 6 and moves to
    13 - 2 x 2.5 = 8 after the day-3 high of 13:

    >>> current_trail([1, 2, 3], [11, 11, 13], [9, 9, 11], [10, 10, 12], 2, 10.0,
    ...               "long", 2, 2)
    8.0
    """
    days = as_series(dates, "dates")
    i = bar_on_or_before(days, _day(entry_date))
    if i is None:
        return math.nan
    vol = volatility(high, low, close, period, measure)
    return float(trailing_stop(high, low, close, vol, i, entry_price, side, multiple,
                               tick)[-1])


def trade_outcome(
    dates: npt.ArrayLike,
    open: npt.ArrayLike,
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    entry_date: Any,
    entry_price: float,
    side: str,
    stop: float,
    target: float,
    trail_multiple: float = TRAIL_MULTIPLE,
    period: int = PERIOD,
    measure: str = MEASURE,
    exit_date: Any = "",
    exit_price: float = 0.0,
    tick: float = 0.0,
) -> tuple[str, float, float, float, float, float, float, float]:
    """Outcome of one trade from dated bars, as the worksheet fields.

    Parameters
    ----------
    dates : array_like
        Day numbers of the bars, oldest first.
    open, high, low, close : array_like
        Aligned price columns.
    entry_date : float or date
        Entry date; the entry bar is the last bar on or before it.
    entry_price, stop, target : float
        Entry, initial stop and target prices.
    side : str
        Trade direction.
    trail_multiple : float, default 3.0
        Trailing-stop multiple of volatility, from 0 to 1000; 0 means no trailing
        stop. The default is the fill's review default.
    period : int, default 14
        Bars in the volatility window (used only with a trailing stop).
    measure : {"atr", "deviation"}, default "atr"
        Volatility measure for the trailing stop.
    exit_date : float or date, optional
        Exit date from the log; the review ends on the last bar on or before it.
    exit_price : float, default 0.0
        Exit price from the log; 0 means no recorded exit.
    tick : float, default 0.0
        Price increment the trailing stop is rounded to, away from entry (0: none),
        as the fill does with an instruments sheet's tick.

    Returns
    -------
    tuple
        ``(result, exit_price, exit_date, r, bars, adverse, favourable, trail)``
        in the order of :data:`sheetvol.core.review.OUTCOME_FIELDS`;
        ``exit_date`` is a day number, ``trail`` the trailing stop in force at
        the end of the review (at the exit, as the fill's Trail column), missing
        values are NaN. See :func:`sheetvol.core.review.review_trade`.

    Examples
    --------
    >>> trade_outcome([1, 2, 3], [100, 101, 97], [100, 102, 98], [99, 100, 95],
    ...               [100, 101, 96], 1, 100.0, "long", 98.0, 106.0)
    ('stop', 97.0, 3.0, -1.5, 2.0, 3.0, 2.0, nan)
    """
    days = as_series(dates, "dates")
    nan_result = ("open", *(math.nan,) * 7)
    i = bar_on_or_before(days, _day(entry_date))
    if i is None:
        return nan_result
    trail = None
    if trail_multiple and trail_multiple > 0:
        vol = volatility(high, low, close, period, measure)
        trail = trailing_stop(high, low, close, vol, i, entry_price, side, trail_multiple,
                              tick)
    exit_day = _day(exit_date)
    exit_index = bar_on_or_before(days, exit_day) if math.isfinite(exit_day) else None
    px = float(exit_price) if exit_price else None
    rev = review_trade(open, high, low, close, i, entry_price, side, stop, target, trail,
                       exit_index if px is not None else None, px)
    exit_day_out = float(days[rev.exit_index]) if rev.exit_index is not None else math.nan
    return (
        rev.result,
        rev.exit_price,
        exit_day_out,
        rev.r,
        math.nan if rev.bars is None else float(rev.bars),
        rev.adverse,
        rev.favourable,
        rev.trail,
    )
