"""Trade review: what the bars after entry did to a trade, and the summary of a log.

Conventions (also in ``docs/trade-log.md``)
-------------------------------------------
* **Entries are at the close** of the entry date's bar. The review therefore
  starts on the *next* bar; the entry bar's own high and low happened before
  the trade existed.
* **Fills**: a stop or target is filled at its level, unless the bar opens
  beyond it (a gap), in which case it is filled at the open.

Pure numpy: day numbers, not dates; no text, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from sheetvol.core import bounds
from sheetvol.core._gaps import as_series
from sheetvol.core._types import FloatArray
from sheetvol.core.levels import side_sign

__all__ = [
    "MEASURE",
    "MEASURES",
    "OUTCOME_FIELDS",
    "PERIOD",
    "RESULTS",
    "REVIEW_FLAGS",
    "TradeReview",
    "bar_on_or_before",
    "review_trade",
    "summarise_outcomes",
    "volatility",
]

#: Volatility measure of a trade review and its window: defaults of every face, stated
#: once (common practice, no source).
MEASURE = "atr"
PERIOD = 14

#: Volatility measures the trade review and the worksheet trade functions accept.
MEASURES = ("atr", "deviation")

#: Outcome names from :func:`review_trade`.
RESULTS = ("stop", "target", "trail", "closed", "open", "ambiguous")

#: Codes :func:`review_trade` sets in :attr:`TradeReview.flags` (the words are made by the
#: layers above):
#:
#: * ``"open_missing"``: the exit bar has no open, so a gap could not be seen; the fill is
#:   the level moved into the bar's own range (long stop: ``min(level, high)``; long
#:   target: ``max(level, low)``; mirrored for short), a price that traded;
#: * ``"exit_bar_reached_stop"``, ``"exit_bar_reached_target"``: the bar of the logged
#:   exit also reached the stop in force (or the target) without opening beyond it; which
#:   came first is unknown, so the result is ``"ambiguous"`` and the log's exit is shown.
REVIEW_FLAGS = ("open_missing", "exit_bar_reached_stop", "exit_bar_reached_target")

#: Outputs of the worksheet outcome, in order (the worksheet ``field`` values).
OUTCOME_FIELDS = ("result", "exit_price", "exit_date", "r", "bars", "adverse", "favourable",
                  "trail")


# -- volatility for the worksheet trade functions ----------------------------------------------
def volatility(
    high: npt.ArrayLike, low: npt.ArrayLike, close: npt.ArrayLike, period: int = PERIOD,
    measure: str = MEASURE,
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

        return dispersion(as_series(close, "close"), period)
    raise ValueError(f"measure must be one of {', '.join(MEASURES)}; got {measure!r}")


# -- outcome review --------------------------------------------------------------------------
@dataclass(frozen=True)
class TradeReview:
    """What the bars after entry did to one trade (see :func:`review_trade`).

    Prices are in price units, excursions are non-negative distances from
    entry; ``*_r`` are the same in units of the initial risk. ``flags`` holds
    codes of :data:`REVIEW_FLAGS` for what the reader should know about the exit.
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
    flags: tuple[str, ...] = ()


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
        Initial stop and target, finite numbers. ``target`` may be NaN (no
        target). A bar whose high is below its low is refused.
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
          better open). Every fill is a price that traded: with the bar's open
          missing, the level is moved into the bar's range (long stop
          ``min(level, high)``, long target ``max(level, low)``; mirrored for a
          short) and ``flags`` holds ``"open_missing"``.
        * When one bar reaches both stop and target, the open decides only if it
          is already beyond one of them; otherwise the order within the bar is
          unknown and the result is ``"ambiguous"`` with no exit price or R.
        * When the bar of a logged exit also reaches the stop in force or the
          target (without opening beyond it), the result is ``"ambiguous"``
          too, with the log's exit kept: its price, bar and R, and
          ``"exit_bar_reached_stop"`` (or ``..._target``) in ``flags``.
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
    bounds.check("entry_price", entry_price, bounds.PRICE)
    bounds.check("stop", stop, bounds.PRICE)
    bounds.check("target", target, bounds.PRICE, blank_ok=True)
    bounds.check_high_low(h, lo, c)
    risk = abs(entry_price - stop)
    per_r = risk if risk > 0 else math.nan

    if exit_price is not None and math.isfinite(exit_price) and exit_index is None:
        r = sign * (exit_price - entry_price) / per_r
        return TradeReview("closed", None, float(exit_price), r, None, math.nan, math.nan,
                           math.nan, math.nan, math.nan)
    if not 0 <= entry_index < n:
        return TradeReview("open", None, math.nan, math.nan, None, math.nan, math.nan, math.nan,
                           math.nan, math.nan)
    logged: tuple[int, float] | None = None  # the log's exit bar and price
    if exit_index is not None and exit_price is not None and math.isfinite(exit_price):
        logged = (exit_index, float(exit_price))
    last = min(max(logged[0], entry_index), n - 1) if logged else n - 1

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
    flags: list[str] = []
    if k is not None:
        end = k + 1
        gapped = gap_stop[k] or gap_target[k]
        if logged is not None and rows[k] == logged[0] and not gapped:
            # The log's exit and a level on the same bar: the order within it is unknown.
            result, fill = "ambiguous", sign * logged[1]
            flags.append("exit_bar_reached_stop" if stop_hit[k] else "exit_bar_reached_target")
            ho[k] = min(ho[k], tg)
            lw[k] = max(lw[k], guard[k])
        elif stop_hit[k] and (not target_hit[k] or gap_stop[k]):
            result = "trail" if trailing[k] else "stop"
            # Without an open a gap cannot be seen: fill at a price the bar traded.
            fill = op[k] if gap_stop[k] else min(guard[k], ho[k])
            lw[k] = fill
            if gap_stop[k]:  # out at the open: nothing later in the bar was held
                ho[k] = fill
        elif target_hit[k] and (not stop_hit[k] or gap_target[k]):
            result = "target"
            fill = op[k] if gap_target[k] else max(tg, lw[k])
            ho[k] = fill
            if gap_target[k]:
                lw[k] = fill
        else:
            result = "ambiguous"
            ho[k] = min(ho[k], tg)
            lw[k] = max(lw[k], guard[k])
        if not np.isfinite(op[k]) and result in ("stop", "trail", "target"):
            flags.append("open_missing")
    elif logged is not None:
        result, fill = "closed", sign * logged[1]

    held_high, held_low = ho[:end], lw[:end]
    adverse = max(0.0, e - float(held_low.min())) if end else 0.0
    favourable = max(0.0, float(held_high.max()) - e) if end else 0.0
    exit_row: int | None = None
    if result == "open":
        r = ((float(cl[-1]) if len(cl) else e) - e) / per_r  # a mark at the last close
        bars = last - entry_index
    else:
        exit_bar = last if k is None or result == "closed" else int(rows[k])
        r = math.nan if result == "ambiguous" and not flags else (fill - e) / per_r
        bars = exit_bar - entry_index
        exit_row = exit_bar
    trail_end = math.nan
    if trail is not None:
        t = as_series(trail, "trail")
        trail_end = float(t[last] if exit_row is None else t[max(exit_row - 1, entry_index)])
    return TradeReview(
        result,
        exit_row,
        math.nan if result == "open" or not math.isfinite(fill) else float(sign * fill),
        float(r),
        bars,
        adverse,
        favourable,
        adverse / per_r,
        favourable / per_r,
        trail_end,
        tuple(flags),
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
