"""Trade levels from volatility: sides, ticks, stops, targets, R multiples and trailing stops.

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
* **Entries are at the close** of the entry date's bar, so the trailing stop
  starts on the *next* bar; the entry bar's own high and low happened before
  the trade existed.
* **Trailing stop**: set at each close from the best price since entry and the
  current volatility; it applies to the following bar and never loosens.

Pure numpy: no text, no dates, no I/O.
"""

from __future__ import annotations

from decimal import Decimal
from typing import Any

import numpy as np
import numpy.typing as npt

from sheetvol.core import bounds
from sheetvol.core._gaps import as_series
from sheetvol.core._types import FloatArray

__all__ = [
    "SIDES",
    "STOP_MULTIPLE",
    "TARGET_MULTIPLE",
    "TICK_ULPS",
    "TRAIL_MULTIPLE",
    "r_multiple",
    "side_sign",
    "stop_price",
    "target_price",
    "to_tick",
    "trailing_stop",
]

# Volatility units from entry to the stop and to the target, and from the best price to the
# trailing stop: defaults of every face, stated once (common practice, no source).
STOP_MULTIPLE = 2.0
TARGET_MULTIPLE = 3.0
TRAIL_MULTIPLE = 3.0

#: Trade directions and their signs (the words a side may be given in, in any case).
SIDES = {"long": 1.0, "buy": 1.0, "short": -1.0, "sell": -1.0}

#: Tolerance when rounding a level to its tick, in ulps of the tick count. A price whose
#: count of ticks is within this many float steps of a whole number counts as on the
#: tick, so float noise such as 1.16059 / 0.00001 = 116058.99999999999 keeps 1.16059
#: instead of moving a whole tick. The count comes from the level's few float operations
#: and the tick's own representation, each off by at most half an ulp; a tolerance of a
#: few ulps of the count never reaches a real price distance, at any magnitude.
TICK_ULPS = 4.0


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
        result is the float nearest the decimal price). A level whose tick
        count is within :data:`TICK_ULPS` float steps of a whole number stays on
        that tick.

    Raises
    ------
    ValueError
        When ``tick`` is below 0.

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
    t = np.asarray(bounds.check("tick", tick, bounds.TICK, blank_ok=True), dtype=float)
    p_b, t_b, s_b = np.broadcast_arrays(np.atleast_1d(p), np.atleast_1d(t), np.atleast_1d(sign))
    out = p_b.astype(float)
    ok = np.isfinite(p_b) & np.isfinite(t_b) & (t_b > 0)
    for step in np.unique(t_b[ok]):
        rows = ok & (t_b == step)
        n = p_b[rows] / step
        nearest = np.round(n)
        on_tick = np.abs(n - nearest) <= TICK_ULPS * np.spacing(np.abs(n))
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
        Volatility in price units (ATR or a standard deviation) as of entry,
        0 or more (NaN gives NaN).
    multiple : float or array_like, default 2.0
        Volatility units between entry and stop, above 0 and up to 1000 (2 is
        common practice, no source).
    side : str or sequence of str, default "long"
        Trade direction(s); see :func:`side_sign`.
    tick : float or array_like, default 0.0
        Price increment, 0 or more; the stop is rounded *away from entry* to it
        (see :func:`to_tick`). 0 leaves it unrounded.

    Returns
    -------
    float or FloatArray
        ``entry - multiple * volatility`` for long, ``entry + multiple * volatility``
        for short; a float when every input is a scalar.

    Raises
    ------
    ValueError
        Naming the first argument outside its range (:mod:`sheetvol.core.bounds`).

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
        Volatility in price units as of entry, 0 or more (NaN gives NaN).
    multiple : float or array_like, default 3.0
        Volatility units between entry and target, above 0 and up to 1000
        (common practice, no source).
    side : str or sequence of str, default "long"
        Trade direction(s); see :func:`side_sign`.
    tick : float or array_like, default 0.0
        Price increment, 0 or more; the target is rounded *toward entry* to it
        (see :func:`to_tick`). 0 leaves it unrounded.

    Returns
    -------
    float or FloatArray
        ``entry + multiple * volatility`` for long, ``entry - multiple * volatility``
        for short.

    Raises
    ------
    ValueError
        Naming the first argument outside its range (:mod:`sheetvol.core.bounds`).

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
    bounds.check("entry", entry, bounds.PRICE, blank_ok=True)
    bounds.check("volatility", volatility, bounds.VOLATILITY, blank_ok=True)
    bounds.check("multiple", multiple, bounds.MULTIPLE)
    bounds.check("tick", tick, bounds.TICK, blank_ok=True)
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
        low and close is skipped (its row carries the previous level); a high
        below its low is refused.
    volatility : array_like
        Volatility in price units on each bar, 0 or more (NaN during a warm-up;
        e.g. :func:`sheetvol.core.review.volatility`).
    entry_index : int
        Row of the entry bar. The trade is entered at that bar's close.
    entry_price : float
        Entry price.
    side : str, default "long"
        Trade direction.
    multiple : float, default 3.0
        Volatility units between the best price and the stop, above 0 and up to
        1000. The default is
        common practice (no source): looser than the 2-unit initial stop, so the
        trail takes over once the price has moved about one unit the trade's way.
    tick : float, default 0.0
        Price increment, 0 or more; each level is rounded away from the price (down for a
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

    Raises
    ------
    ValueError
        Naming the first argument outside its range, or the bar whose high is
        below its low.

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
    bounds.check("volatility", vol, bounds.VOLATILITY, blank_ok=True)
    bounds.check("entry_price", entry_price, bounds.PRICE)
    bounds.check("multiple", multiple, bounds.MULTIPLE)
    bounds.check("tick", tick, bounds.TICK)
    bounds.check_high_low(h, lo, c)
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


