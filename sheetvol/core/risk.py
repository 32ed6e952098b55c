"""Trade levels from volatility: stops, targets, sizes, trailing stops and outcome review.

Conventions (also in ``docs/trade-log.md``)
-------------------------------------------
* **Sides** are ``"long"``/``"buy"`` and ``"short"``/``"sell"``, in any case.
* **Stop and target** sit a multiple of volatility from entry: a long stop at
  ``entry - k * vol`` and target at ``entry + k * vol``; a short trade mirrors
  both. The defaults, a stop 2 units and a target 3 units away, are common
  practice (no source): most volatility stops are placed 1 to 2 units out.
* **Ticks**: with a tick size, every level is rounded *against the trade*
  (down for a long, up for a short): the stop and the trailing stop move away
  from entry (a level that can be placed, never tighter than computed), the
  target moves toward entry (never more optimistic). See :func:`to_tick`.
* **Size** risks ``equity * risk`` (account currency) between entry and stop.
  One unit loses ``|entry - stop| * point_value`` in the instrument's currency,
  times ``fx_rate`` (account currency per unit of instrument currency) in the
  account's. The size is rounded *down* to the lot step.
* **Entries are at the close** of the entry date's bar. The outcome review and
  the trailing stop therefore start on the *next* bar; the entry bar's own high
  and low happened before the trade existed.
* **Trailing stop**: set at each close from the best price since entry and the
  current volatility; it applies to the following bar and never loosens.
* **Fills**: a stop or target is filled at its level, unless the bar opens
  beyond it (a gap), in which case it is filled at the open.

Everything here is pure numpy and Python: day numbers, not dates; no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal
from typing import Any

import numpy as np
import numpy.typing as npt

from sheetvol.core._gaps import as_series
from sheetvol.core._types import FloatArray

# Defaults of a trade review, stated once (common practice, no source): the volatility
# measure and its window, volatility units from entry to the stop and to the target and
# from the best price to the trailing stop, and the share of equity risked per trade.
MEASURE = "atr"
PERIOD = 14
STOP_MULTIPLE = 2.0
TARGET_MULTIPLE = 3.0
TRAIL_MULTIPLE = 3.0
RISK_SHARE = 0.01

__all__ = [
    "MEASURES",
    "RESULTS",
    "SIZE_EPSILON",
    "TICK_EPSILON",
    "SizeResult",
    "TradeReview",
    "bar_on_or_before",
    "position_size",
    "r_multiple",
    "review_trade",
    "side_sign",
    "size_note",
    "size_with_reason",
    "stop_price",
    "summarise_outcomes",
    "target_price",
    "to_tick",
    "trailing_stop",
    "volatility",
]

SIDES = {"long": 1.0, "buy": 1.0, "short": -1.0, "sell": -1.0}

#: Relative tolerance when rounding a size down to the lot step. A budget that
#: falls short of a whole number of steps by less than one part in 10^9 counts
#: as reaching it, so float noise such as 16.999999999999996 steps (from
#: ``1000 / (1.3 - 1.2)``) gives 17, not 16. One part in 10^9 of a size is far
#: below any lot step a broker offers, so no real shortfall is rounded up.
SIZE_EPSILON = 1e-9

#: Relative tolerance when rounding a level to its tick. A price within one part
#: in 10^9 (of the number of ticks) of a tick level counts as on it, so float
#: noise such as 2157.75 / 0.25 = 8630.999999999998 keeps 2157.75 instead of
#: moving a whole tick. A billionth of the tick count is far below any price
#: distance that matters, so no real level is pulled onto a tick.
TICK_EPSILON = 1e-9

#: Volatility measures the worksheet trade functions accept.
MEASURES = ("atr", "deviation")

#: Outcome names from :func:`review_trade`.
RESULTS = ("stop", "target", "trail", "closed", "open", "ambiguous")

#: Outputs of :func:`trade_outcome`, in order (the worksheet ``field`` values).
OUTCOME_FIELDS = ("result", "exit_price", "exit_date", "r", "bars", "adverse", "favourable")


# -- sides ------------------------------------------------------------------------------------
def side_sign(side: Any) -> Any:
    """+1 for a long trade, -1 for a short one.

    Parameters
    ----------
    side : str or sequence of str
        ``"long"``, ``"buy"``, ``"short"`` or ``"sell"``, in any case, with or
        without surrounding spaces.

    Returns
    -------
    float or FloatArray
        A float for one side, an array for a sequence.

    Raises
    ------
    ValueError
        Naming the first value that is not a side.

    Examples
    --------
    >>> side_sign("Buy"), side_sign("SHORT")
    (1.0, -1.0)
    >>> side_sign(["long", "sell"]).tolist()
    [1.0, -1.0]
    """
    if isinstance(side, str):
        key = side.strip().lower()
        if key not in SIDES:
            raise ValueError(f"side must be long, short, buy or sell, got {side!r}")
        return SIDES[key]
    return np.array([side_sign(s) for s in np.asarray(side, dtype=object).ravel()])


def _scalar_or_array(value: FloatArray, *inputs: Any) -> Any:
    """Give a plain float back when every input was a scalar."""
    if all(np.ndim(x) == 0 for x in inputs):
        return float(np.asarray(value).reshape(-1)[0])
    return value


# -- ticks -----------------------------------------------------------------------------------
def _tick_decimals(tick: float) -> int:
    """Decimals of a tick as written (0.25 -> 2, 1e-05 -> 5, 5 -> 0), at most 12."""
    exponent = Decimal(repr(float(tick))).normalize().as_tuple().exponent
    return min(12, max(0, -int(exponent)))


def to_tick(price: npt.ArrayLike, tick: npt.ArrayLike = 0.0, side: Any = "long") -> Any:
    """Round a level to the tick *against the trade*: down for a long, up for a short.

    For a stop or trailing stop that is away from entry (a level that can be
    placed, never tighter than computed); for a target it is toward entry (a
    level that can be hit, never more optimistic than computed).

    Parameters
    ----------
    price : float or array_like
        Level(s) to round.
    tick : float or array_like, default 0.0
        Price increment; 0 (or blank/NaN) leaves the level as it is.
    side : str or sequence of str, default "long"
        Trade direction(s); see :func:`side_sign`.

    Returns
    -------
    float or FloatArray
        A whole number of ticks, written with the tick's decimals (so the
        result is the float nearest the decimal price). A level within
        :data:`TICK_EPSILON` (relative, in ticks) of a tick level stays on it.

    Examples
    --------
    >>> to_tick(2157.92, 0.25, "long"), to_tick(2157.92, 0.25, "short")
    (2157.75, 2158.0)
    >>> to_tick(2157.75, 0.25, "long"), to_tick(1.160594, 0.00001, "short")
    (2157.75, 1.1606)
    >>> to_tick(101.234, 0, "long")
    101.234
    """
    sign = side_sign(side)
    p = np.asarray(price, dtype=float)
    t = np.asarray(tick, dtype=float)
    p_b, t_b, s_b = np.broadcast_arrays(np.atleast_1d(p), np.atleast_1d(t), np.atleast_1d(sign))
    out = p_b.astype(float)
    ok = np.isfinite(p_b) & np.isfinite(t_b) & (t_b > 0)
    for step in np.unique(t_b[ok]):
        rows = ok & (t_b == step)
        n = p_b[rows] / step
        nearest = np.round(n)
        on_tick = np.abs(n - nearest) <= TICK_EPSILON * np.maximum(1.0, np.abs(nearest))
        steps = np.where(on_tick, nearest, np.where(s_b[rows] > 0, np.floor(n), np.ceil(n)))
        out[rows] = np.round(steps * step, _tick_decimals(step))
    return _scalar_or_array(out, price, tick, side)


# -- levels ----------------------------------------------------------------------------------
def stop_price(
    entry: npt.ArrayLike, volatility: npt.ArrayLike, multiple: npt.ArrayLike = STOP_MULTIPLE,
    side: Any = "long", tick: npt.ArrayLike = 0.0,
) -> Any:
    """Stop a multiple of volatility from entry: below a long entry, above a short one.

    Parameters
    ----------
    entry : float or array_like
        Entry price(s).
    volatility : float or array_like
        Volatility in price units (ATR or a standard deviation) as of entry.
    multiple : float or array_like, default 2.0
        Volatility units between entry and stop (2 is common practice, no source).
    side : str or sequence of str, default "long"
        Trade direction(s); see :func:`side_sign`.
    tick : float or array_like, default 0.0
        Price increment; the stop is rounded *away from entry* to it (see
        :func:`to_tick`). 0 leaves it unrounded.

    Returns
    -------
    float or FloatArray
        ``entry - multiple * volatility`` for long, ``entry + multiple * volatility``
        for short; a float when every input is a scalar.

    Examples
    --------
    >>> stop_price(105.25, 1.75, 2, "long")
    101.75
    >>> stop_price(105.25, 1.75, 2, "sell")
    108.75
    >>> stop_price([100.0, 50.0], [1.0, 2.0], 2, ["buy", "short"]).tolist()
    [98.0, 54.0]

    With quarter-point ticks, 2,170.5 - 2 x 6.29 = 2,157.92 becomes 2,157.75:

    >>> stop_price(2170.5, 6.29, 2, "long", 0.25)
    2157.75
    """
    return _level(entry, volatility, multiple, side, tick, away=-1.0)


def target_price(
    entry: npt.ArrayLike, volatility: npt.ArrayLike, multiple: npt.ArrayLike = TARGET_MULTIPLE,
    side: Any = "long", tick: npt.ArrayLike = 0.0,
) -> Any:
    """Target a multiple of volatility from entry: above a long entry, below a short one.

    Parameters
    ----------
    entry : float or array_like
        Entry price(s).
    volatility : float or array_like
        Volatility in price units as of entry.
    multiple : float or array_like, default 3.0
        Volatility units between entry and target (common practice, no source).
    side : str or sequence of str, default "long"
        Trade direction(s); see :func:`side_sign`.
    tick : float or array_like, default 0.0
        Price increment; the target is rounded *toward entry* to it (see
        :func:`to_tick`). 0 leaves it unrounded.

    Returns
    -------
    float or FloatArray
        ``entry + multiple * volatility`` for long, ``entry - multiple * volatility``
        for short.

    Examples
    --------
    >>> target_price(105.25, 1.75, 3, "long")
    110.5
    >>> target_price(105.25, 1.75, 3, "short")
    100.0
    >>> target_price(2170.5, 6.29, 3, "long", 0.25)  # 2,189.37 toward entry
    2189.25
    """
    return _level(entry, volatility, multiple, side, tick, away=1.0)


def _level(entry: npt.ArrayLike, volatility: npt.ArrayLike, multiple: npt.ArrayLike, side: Any,
           tick: npt.ArrayLike, away: float) -> Any:
    """``entry + away x sign x multiple x volatility``, on the tick (against the trade).

    Rounding against the trade (down for long, up for short) moves a stop away from
    entry and a target toward it, so one rule serves both.
    """
    sign = side_sign(side)
    out = np.asarray(entry, dtype=float) + away * sign * np.asarray(
        multiple, dtype=float) * np.asarray(volatility, dtype=float)
    out = to_tick(out, tick, side) if np.any(np.asarray(tick, dtype=float) > 0) else out
    return _scalar_or_array(np.asarray(out), entry, volatility, multiple, side, tick)


def r_multiple(
    entry: npt.ArrayLike, stop: npt.ArrayLike, price: npt.ArrayLike, side: Any = "long"
) -> Any:
    """A price's distance from entry in units of the initial risk (R).

    Parameters
    ----------
    entry, stop : float or array_like
        Entry price and initial stop; ``|entry - stop|`` is 1 R.
    price : float or array_like
        The price to express in R (a target, an exit, the last close).
    side : str or sequence of str, default "long"
        Trade direction(s).

    Returns
    -------
    float or FloatArray
        ``(price - entry) / |entry - stop|``, sign flipped for short trades, so a
        gain is positive either way; NaN when the stop equals the entry.

    Examples
    --------
    A long at 100 with a stop at 98 risks 2; a target at 106 is 3 R:

    >>> r_multiple(100.0, 98.0, 106.0, "long")
    3.0
    >>> r_multiple(100.0, 102.0, 103.0, "short")
    -1.5
    """
    sign = side_sign(side)
    e = np.asarray(entry, dtype=float)
    risk = np.abs(e - np.asarray(stop, dtype=float))
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(risk > 0, sign * (np.asarray(price, dtype=float) - e) / risk, np.nan)
    return _scalar_or_array(out, entry, stop, price, side)


# -- size ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SizeResult:
    """Position sizes with the reason for any size that is not the plain budget size.

    ``quantity`` is 0 when nothing can be bought (NaN when an input is
    missing); ``note`` is ``""`` when the size is simply the budget rounded
    down, otherwise a short sentence (zero size, below the minimum, capped at
    the maximum, stop equal to entry, missing input). ``raw`` is the unrounded
    budget size in units, for messages and checks.
    """

    quantity: FloatArray
    note: npt.NDArray[np.str_]
    raw: FloatArray


def _fmt(x: float) -> str:
    return f"{x:.10g}"


def _units(x: float) -> str:
    """A budget size in words: whole units from 100 up, else 3 significant figures, never
    rounded up to a lot it cannot buy (822.4 -> '822', 16.88 -> '16.8', 0.5 -> '0.5')."""
    if x >= 100:
        return f"{math.floor(x):,}"
    if x <= 0:
        return "0"
    scale = 10.0 ** (2 - math.floor(math.log10(x)))
    return f"{math.floor(x * scale * (1 + SIZE_EPSILON)) / scale:.3g}"


def size_with_reason(
    equity: npt.ArrayLike,
    risk: npt.ArrayLike,
    entry: npt.ArrayLike,
    stop: npt.ArrayLike,
    point_value: npt.ArrayLike = 1.0,
    lot_step: npt.ArrayLike = 1.0,
    min_qty: npt.ArrayLike = 0.0,
    max_qty: npt.ArrayLike = 0.0,
    fx_rate: npt.ArrayLike = 1.0,
) -> SizeResult:
    """Position size that risks ``equity * risk`` between entry and stop, with reasons.

    Parameters
    ----------
    equity : float or array_like
        Account equity, in account currency.
    risk : float or array_like
        Share of equity to risk (0.01 = 1 %).
    entry, stop : float or array_like
        Entry and stop prices.
    point_value : float or array_like, default 1.0
        Money per 1.0 price move per unit, in the instrument's currency
        (1 for shares; the contract multiplier for futures).
    lot_step : float or array_like, default 1.0
        Smallest tradable increment; the size is a whole number of steps.
    min_qty, max_qty : float or array_like, default 0.0
        Smallest and largest allowed size; 0 means no limit.
    fx_rate : float or array_like, default 1.0
        Account currency per unit of instrument currency.

    Returns
    -------
    SizeResult
        ``quantity = floor(equity * risk / (|entry - stop| * point_value * fx_rate)
        / lot_step) * lot_step``, with a size below ``min_qty`` set to 0 and one
        above ``max_qty`` cut to the largest whole number of steps within it;
        ``note`` says when either happened. The floor forgives a shortfall of
        :data:`SIZE_EPSILON` (relative) so float noise at an exact multiple of
        the lot step does not lose a step.

    Examples
    --------
    1 % of 1,000,000 with a stop 0.0141 away at 42,000 per point buys 16.88
    units, rounded down to 16:

    >>> s = size_with_reason(1_000_000, 0.01, 2.5, 2.5 - 0.0141, 42_000)
    >>> s.quantity.tolist(), round(float(s.raw[0]), 2)
    ([16.0], 16.89)
    >>> size_with_reason(10_000, 0.01, 100.0, 90.0, lot_step=20).note.tolist()
    ['risk budget buys 10 units, less than one lot of 20']
    """
    e, s, eq, rk, pv, step, lo, hi, fx = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=float))
          for x in (entry, stop, equity, risk, point_value, lot_step, min_qty, max_qty, fx_rate))
    )
    budget = eq * rk
    loss_per_unit = np.abs(e - s) * pv * fx
    with np.errstate(divide="ignore", invalid="ignore"):
        raw = budget / loss_per_unit
        steps = np.floor(raw / step * (1.0 + SIZE_EPSILON))
    # Round away the float noise of steps * step (3 * 0.1 = 0.30000000000000004).
    decimals = int(max(10, 6 - math.floor(math.log10(np.nanmin(step))))) if np.any(step > 0) else 10
    qty = np.round(steps * step, decimals)
    note = np.full(qty.shape, "", dtype=object)

    missing = ~np.isfinite(budget) | ~np.isfinite(loss_per_unit) | ~np.isfinite(step)
    flat = ~missing & (loss_per_unit == 0)
    zero = ~missing & ~flat & (qty <= 0)
    below = ~missing & ~flat & ~zero & (lo > 0) & (qty < lo)
    above = ~missing & ~flat & ~zero & ~below & (hi > 0) & (qty > hi)

    for i in np.flatnonzero(zero):
        note[i] = (f"risk budget buys {_units(raw[i])} units, less than one lot of "
                   f"{step[i]:,.10g}")
    for i in np.flatnonzero(below):
        note[i] = f"size {_fmt(qty[i])} is below the minimum {_fmt(lo[i])}"
    capped = np.round(np.floor(hi / step * (1.0 + SIZE_EPSILON)) * step, decimals)
    for i in np.flatnonzero(above):
        note[i] = f"size {_fmt(qty[i])} capped at the maximum {_fmt(capped[i])}"
    note[flat] = "stop equals entry: no distance to size from"
    note[missing] = "missing input"

    qty = np.where(zero | below, 0.0, qty)
    qty = np.where(above, capped, qty)
    qty = np.where(missing | flat, np.nan, qty)
    return SizeResult(qty, note.astype(str), raw)


def position_size(
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
    """Position size for one trade, as a worksheet cell shows it.

    The same arithmetic as :func:`size_with_reason` for one trade. A cell gets
    the quantity when there is one (a size capped at ``max_qty`` is returned
    capped; :func:`size_note` says so), and a short message instead of 0 when
    nothing can be bought, so a zero size is never mistaken for a computed one.

    Parameters
    ----------
    equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate : float
        See :func:`size_with_reason`.

    Returns
    -------
    float or str
        The quantity, or ``"SV_SIZE: <reason>"`` when the size is zero or
        cannot be computed.

    Examples
    --------
    >>> position_size(250_000, 0.01, 105.2, 101.6)
    694.0
    >>> position_size(10_000, 0.01, 100.0, 90.0, lot_step=20)
    'SV_SIZE: risk budget buys 10 units, less than one lot of 20'
    """
    res = size_with_reason(equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty,
                           fx_rate)
    qty, note = float(res.quantity[0]), str(res.note[0])
    if not math.isfinite(qty) or qty == 0:
        return f"SV_SIZE: {note}"
    return qty


def size_note(
    equity: float,
    risk: float,
    entry: float,
    stop: float,
    point_value: float = 1.0,
    lot_step: float = 1.0,
    min_qty: float = 0.0,
    max_qty: float = 0.0,
    fx_rate: float = 1.0,
) -> str:
    """Why a position size is not the plain budget size; empty text when it is.

    Parameters
    ----------
    equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate : float
        See :func:`size_with_reason`.

    Returns
    -------
    str
        ``""``, or a sentence such as ``"size 694 capped at the maximum 500"``.

    Examples
    --------
    >>> size_note(250_000, 0.01, 105.2, 101.6, max_qty=500)
    'size 694 capped at the maximum 500'
    >>> size_note(250_000, 0.01, 105.2, 101.6)
    ''
    """
    res = size_with_reason(equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty,
                           fx_rate)
    return str(res.note[0])


# -- volatility for the worksheet trade functions ----------------------------------------------
def volatility(
    high: npt.ArrayLike, low: npt.ArrayLike, close: npt.ArrayLike, period: int = 14,
    measure: str = "atr",
) -> FloatArray:
    """Volatility in price units on each bar: ATR (Wilder) or the close's standard deviation.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest bar first.
    period : int, default 14
        Bars in the window.
    measure : {"atr", "deviation"}, default "atr"
        ``"atr"``: :func:`sheetvol.core.ranges.average_true_range` with its
        defaults; ``"deviation"``: the population standard deviation of the
        close about its simple average
        (:func:`sheetvol.core.dispersion.dispersion`).

    Returns
    -------
    FloatArray
        Volatility per bar; NaN during the warm-up and on gap rows.

    Examples
    --------
    >>> volatility([11.0, 11.0, 11.0], [9.0, 9.0, 9.0], [10.0, 10.0, 10.0], 2).tolist()
    [nan, 2.0, 2.0]
    """
    if measure == "atr":
        from sheetvol.core.ranges import average_true_range

        return average_true_range(high, low, close, period)
    if measure == "deviation":
        from sheetvol.core.dispersion import dispersion

        return dispersion(close, period)
    raise ValueError(f"measure must be one of {', '.join(MEASURES)}; got {measure!r}")


# -- trailing stop ---------------------------------------------------------------------------
def trailing_stop(
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    volatility: npt.ArrayLike,
    entry_index: int,
    entry_price: float,
    side: str = "long",
    multiple: float = TRAIL_MULTIPLE,
    tick: float = 0.0,
) -> FloatArray:
    """Trailing stop from entry on: best price since entry less a multiple of current volatility.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest bar first. A bar without a finite high,
        low and close is skipped (its row carries the previous level).
    volatility : array_like
        Volatility in price units on each bar (e.g. :func:`volatility`).
    entry_index : int
        Row of the entry bar. The trade is entered at that bar's close.
    entry_price : float
        Entry price.
    side : str, default "long"
        Trade direction.
    multiple : float, default 3.0
        Volatility units between the best price and the stop. The default is
        common practice (no source): looser than the 2-unit initial stop, so the
        trail takes over once the price has moved about one unit the trade's way.
    tick : float, default 0.0
        Price increment; each level is rounded away from the price (down for a
        long, up for a short; see :func:`to_tick`). Rounding is monotone, so
        the rounded trail never loosens either. 0 leaves it unrounded.

    Returns
    -------
    FloatArray
        The level set at each bar's close, which applies to the *next* bar.
        NaN before the entry bar. On the entry bar it is
        ``entry_price -/+ multiple * volatility[entry_index]`` (so with the same
        multiple it equals the initial stop). After it, for a long trade,
        ``max(previous level, best - multiple * volatility)`` where ``best`` is
        the highest of the entry price and the highs of the bars after entry
        (the entry bar's own high came before the entry); a short trade
        mirrors this with lows and a running minimum. The level never loosens;
        a bar with NaN volatility keeps the previous level.

    Examples
    --------
    Long at 100 with volatility 1 and multiple 2: starts at 98, rises to 101
    after a high of 103, and stays there when the price falls back:

    >>> trailing_stop([100, 103, 101], [99, 101, 99], [100, 102, 100],
    ...               [1.0, 1.0, 1.0], 0, 100.0, "long", 2).tolist()
    [98.0, 101.0, 101.0]
    """
    h, lo, c, vol = (as_series(x, name) for x, name in
                     ((high, "high"), (low, "low"), (close, "close"), (volatility, "volatility")))
    n = len(h)
    if not (len(lo) == len(c) == len(vol) == n):
        raise ValueError("trailing_stop: high, low, close and volatility differ in length")
    out = np.full(n, np.nan)
    if not 0 <= entry_index < n:
        return out
    sign = side_sign(side)
    # Work in "long" terms: a short trade is a long trade on negated prices.
    extreme = h if sign > 0 else -lo
    usable = np.isfinite(h) & np.isfinite(lo) & np.isfinite(c)
    after = np.where(usable[entry_index:], extreme[entry_index:], -np.inf)
    after[0] = sign * entry_price  # the entry bar contributes the entry price only
    best = np.maximum.accumulate(after)
    v = np.where(usable[entry_index:], vol[entry_index:], np.nan)
    candidate = best - multiple * v
    # fmax ignores NaN: a bar without volatility keeps the previous level.
    level = np.fmax.accumulate(candidate)
    out[entry_index:] = sign * level
    if tick and tick > 0:
        out[entry_index:] = to_tick(out[entry_index:], tick, side)
    return out


# -- outcome review --------------------------------------------------------------------------
@dataclass(frozen=True)
class TradeReview:
    """What the bars after entry did to one trade (see :func:`review_trade`).

    Prices are in price units, excursions are non-negative distances from
    entry; ``*_r`` are the same in units of the initial risk.
    """

    result: str
    exit_index: int | None
    exit_price: float
    r: float
    bars: int | None
    adverse: float
    favourable: float
    adverse_r: float
    favourable_r: float
    trail: float


def _first(mask: np.ndarray) -> int | None:
    idx = np.flatnonzero(mask)
    return int(idx[0]) if len(idx) else None


def review_trade(
    open: npt.ArrayLike,
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    entry_index: int,
    entry_price: float,
    side: str,
    stop: float,
    target: float,
    trail: npt.ArrayLike | None = None,
    exit_index: int | None = None,
    exit_price: float | None = None,
) -> TradeReview:
    """Replay the bars after entry: which level was hit first, where, when, and for how much.

    Parameters
    ----------
    open, high, low, close : array_like
        Aligned price columns, oldest bar first. Bars without a finite high,
        low and close are skipped; a missing open only disables the gap check.
    entry_index : int
        Row of the entry bar; the trade is entered at its close, so the review
        starts on the next row.
    entry_price : float
        Entry price.
    side : str
        Trade direction.
    stop, target : float
        Initial stop and target. ``target`` may be NaN (no target).
    trail : array_like, optional
        Trailing-stop levels from :func:`trailing_stop`; the level set at a
        bar's close guards the next bar, and the tighter of it and ``stop`` is
        in force. The exit is labelled ``"trail"`` when the trailing level was
        strictly tighter than the initial stop.
    exit_index, exit_price : optional
        An exit recorded in the trade log: the review stops at that row, and
        if no level was hit by then the result is ``"closed"`` at
        ``exit_price``. With ``exit_price`` but no ``exit_index`` the result is
        ``"closed"`` with its R only (no date, bars or excursions).

    Returns
    -------
    TradeReview
        ``result`` is one of ``"stop"``, ``"target"``, ``"trail"``, ``"closed"``,
        ``"open"``, ``"ambiguous"``.

        * A stop (or trailing stop) is hit when a bar's low reaches it (long;
          the high, short); it fills at the level, or at the open when the bar
          opens beyond it (a gap through the stop fills at the open, which is
          worse). A target fills the same way (a gap beyond it fills at the
          better open).
        * When one bar reaches both stop and target, the open decides only if it
          is already beyond one of them; otherwise the order within the bar is
          unknown and the result is ``"ambiguous"`` with no exit price or R.
        * ``r`` is ``(exit - entry) / |entry - stop|``, sign flipped for short.
          For an open trade it is the R at the last close (a mark, not a
          result) and ``exit_price``/``exit_index`` are empty.
        * ``bars`` counts rows from the entry bar to the exit bar (to the last
          bar for an open trade).
        * ``adverse``/``favourable`` are the largest move against/for the trade
          over the reviewed bars, at least 0. On the exit bar, prices beyond the
          fill on the side of the exit are not counted (the trade was out);
          on an ambiguous bar both are cut at the levels.
        * ``trail`` is the trailing level in force at the end of the review
          (NaN without ``trail``).

    Examples
    --------
    Long at 100, stop 98, target 106; the second bar after entry reaches 106:

    >>> r = review_trade([100, 101, 103], [100, 102, 106.5], [99, 100, 102],
    ...                  [100, 101.5, 106], 0, 100.0, "long", 98.0, 106.0)
    >>> r.result, r.exit_price, r.r, r.bars
    ('target', 106.0, 3.0, 2)
    """
    o, h, lo, c = (as_series(x, name) for x, name in
                   ((open, "open"), (high, "high"), (low, "low"), (close, "close")))
    n = len(c)
    sign = side_sign(side)
    risk = abs(entry_price - stop)
    per_r = risk if risk > 0 else math.nan

    if exit_price is not None and math.isfinite(exit_price) and exit_index is None:
        r = sign * (exit_price - entry_price) / per_r
        return TradeReview("closed", None, float(exit_price), r, None, math.nan, math.nan,
                           math.nan, math.nan, math.nan)
    if not 0 <= entry_index < n:
        return TradeReview("open", None, math.nan, math.nan, None, math.nan, math.nan, math.nan,
                           math.nan, math.nan)
    logged_exit = exit_index is not None and exit_price is not None and math.isfinite(exit_price)
    last = min(max(exit_index, entry_index), n - 1) if logged_exit else n - 1

    rows = np.arange(entry_index + 1, last + 1)
    usable = np.isfinite(h[rows]) & np.isfinite(lo[rows]) & np.isfinite(c[rows])
    rows = rows[usable]
    # Long terms: a short trade is a long trade on negated prices (high and low swap).
    if sign > 0:
        ho, lw, op, cl = h[rows], lo[rows], o[rows], c[rows]
    else:
        ho, lw, op, cl = -lo[rows], -h[rows], -o[rows], -c[rows]
    e, st, tg = sign * entry_price, sign * stop, sign * target
    if trail is not None:
        tr = sign * as_series(trail, "trail")
        prev_trail = tr[rows - 1]
        guard = np.fmax(st, prev_trail)
        trailing = np.nan_to_num(prev_trail, nan=-np.inf) > st
    else:
        guard = np.full(len(rows), st)
        trailing = np.zeros(len(rows), dtype=bool)

    stop_hit = lw <= guard
    target_hit = ho >= tg  # False when the target is NaN
    gap_stop = stop_hit & (op <= guard)
    gap_target = target_hit & (op >= tg)
    k = _first(stop_hit | target_hit)

    # ho and lw are fresh arrays (fancy indexing copies): cut the exit bar at the fill below.
    result, fill, end = "open", math.nan, len(rows)
    if k is not None:
        end = k + 1
        if stop_hit[k] and (not target_hit[k] or gap_stop[k]):
            result = "trail" if trailing[k] else "stop"
            fill = op[k] if gap_stop[k] else guard[k]
            lw[k] = fill
            if gap_stop[k]:  # out at the open: nothing later in the bar was held
                ho[k] = fill
        elif target_hit[k] and (not stop_hit[k] or gap_target[k]):
            result = "target"
            fill = op[k] if gap_target[k] else tg
            ho[k] = fill
            if gap_target[k]:
                lw[k] = fill
        else:
            result = "ambiguous"
            ho[k] = min(ho[k], tg)
            lw[k] = max(lw[k], guard[k])
    elif logged_exit:
        result, fill = "closed", sign * float(exit_price)

    held_high, held_low = ho[:end], lw[:end]
    adverse = max(0.0, e - float(held_low.min())) if end else 0.0
    favourable = max(0.0, float(held_high.max()) - e) if end else 0.0
    if result == "open":
        exit_row = None
        r = ((float(cl[-1]) if len(cl) else e) - e) / per_r  # a mark at the last close
        bars = last - entry_index
    else:
        exit_row = last if result == "closed" else int(rows[k])
        r = math.nan if result == "ambiguous" else (fill - e) / per_r
        bars = exit_row - entry_index
    trail_end = math.nan
    if trail is not None:
        t = as_series(trail, "trail")
        trail_end = float(t[last] if exit_row is None else t[max(exit_row - 1, entry_index)])
    return TradeReview(
        result,
        exit_row,
        math.nan if result in ("open", "ambiguous") else float(sign * fill),
        float(r),
        bars,
        adverse,
        favourable,
        adverse / per_r,
        favourable / per_r,
        trail_end,
    )


# -- bars --------------------------------------------------------------------------------------
def bar_on_or_before(days: npt.ArrayLike, day: float) -> int | None:
    """Row of the last bar dated on or before ``day``: the bar a trade on that day uses.

    Parameters
    ----------
    days : array_like
        Day numbers of the bars, oldest first; NaN rows are never chosen.
    day : float
        The trade's day number (a time of day in the fraction is fine).

    Returns
    -------
    int or None
        The row, or None when every bar is later (or ``day`` is NaN).

    Examples
    --------
    >>> bar_on_or_before([10.0, 11.0, 14.0], 13.5), bar_on_or_before([10.0], 9.0)
    (1, None)
    """
    days = as_series(days, "days")
    if not math.isfinite(day):
        return None
    ok = np.flatnonzero(np.isfinite(days) & (days <= day))
    return int(ok[-1]) if len(ok) else None


# -- summary ---------------------------------------------------------------------------------
def summarise_outcomes(
    results: Sequence[str],
    r: npt.ArrayLike,
    open_risk: npt.ArrayLike | None = None,
    equity: float = math.nan,
) -> dict[str, float]:
    """Summary figures of a trade log's outcomes.

    Parameters
    ----------
    results : sequence of str
        One of :data:`RESULTS` per trade, in the order of entry.
    r : array_like
        R multiple per trade (NaN where unknown).
    open_risk : array_like, optional
        Money lost per trade if its current stop were hit from the last close
        (account currency; only open trades count).
    equity : float
        Account equity the open risk is a share of.

    Returns
    -------
    dict
        ``trades``; ``stop``, ``target``, ``trail``, ``closed``, ``open``,
        ``ambiguous`` as shares of all trades; ``finished`` (trades with a
        known exit: stop, target, trail or closed); ``total_r`` over finished
        trades; ``expectancy`` (the average R per finished trade); ``win_rate``
        (share of finished trades with R > 0); ``losing_streak`` (longest run of
        finished trades with R < 0, in entry order, skipping open and ambiguous
        ones); ``open_risk``
        (money) and ``open_risk_share`` (of ``equity``).

    Examples
    --------
    >>> s = summarise_outcomes(["target", "stop", "stop", "open"], [3.0, -1.0, -1.0, 0.5],
    ...                        [0, 0, 0, 500.0], 100_000)
    >>> s["expectancy"], s["win_rate"], s["losing_streak"], s["open_risk_share"]
    (0.3333333333333333, 0.3333333333333333, 2, 0.005)
    """
    res = [str(x) for x in results]
    rr = np.asarray(r, dtype=float)
    n = len(res)
    out: dict[str, float] = {"trades": n}
    for name in RESULTS:
        out[name] = sum(x == name for x in res) / n if n else math.nan
    finished = np.array([x in ("stop", "target", "trail", "closed") for x in res], dtype=bool)
    done = rr[finished] if n else np.array([])
    done = done[np.isfinite(done)]
    out["finished"] = len(done)
    out["total_r"] = float(done.sum())
    out["expectancy"] = float(done.mean()) if len(done) else math.nan
    out["win_rate"] = float((done > 0).mean()) if len(done) else math.nan
    streak = longest = 0
    for x in done:
        streak = streak + 1 if x < 0 else 0
        longest = max(longest, streak)
    out["losing_streak"] = longest
    if open_risk is None:
        risk_money = 0.0
    else:
        risk = np.asarray(open_risk, dtype=float)
        is_open = np.array([x == "open" for x in res], dtype=bool)
        risk_money = float(np.nansum(np.where(is_open, risk, 0.0)))
    out["open_risk"] = risk_money
    out["open_risk_share"] = risk_money / equity if equity and math.isfinite(equity) else math.nan
    return out
