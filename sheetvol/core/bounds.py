"""Allowed ranges of arguments, stated once for the Python API and the worksheet functions.

The kernels' public functions check their arguments here at entry, and the
worksheet registry (:mod:`sheetvol.functions.registry`) takes its ranges and
their words from here, so both faces refuse the same values and say the same
thing: the argument's name, the values it allows, and what was given.

A NaN in an array argument means "not known on this row" (a warm-up bar, a
blank cell) and is never refused here; the function gives NaN for that row.

Pure numpy: no I/O, no dates.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

__all__ = [
    "BARS_PER_YEAR",
    "EQUITY",
    "FX_RATE",
    "LOOKBACK",
    "LOT_STEP",
    "MAX_PERIOD",
    "MULTIPLE",
    "PERCENT",
    "PERIOD",
    "POINT_VALUE",
    "PRICE",
    "QUANTITY",
    "RISK",
    "SPREAD_PERIOD",
    "TICK",
    "TRAIL",
    "VOLATILITY",
    "WIDTH",
    "BarError",
    "Bound",
    "check",
    "check_high_low",
    "check_positive_prices",
]


class BarError(ValueError):
    """A refusal about one bar of the arrays given; ``bar`` is its position (from 0).

    The message says ``bar N`` (counted from 1); a caller that passed only part
    of a sheet's range can name the row instead with :meth:`at`.

    Examples
    --------
    >>> err = BarError("close is 0 on {bar}", 2)
    >>> str(err), err.at("row 40 of the ranges")
    ('close is 0 on bar 3', 'close is 0 on row 40 of the ranges')
    """

    def __init__(self, text: str, bar: int) -> None:
        self.text, self.bar = text, bar
        super().__init__(text.format(bar=f"bar {bar + 1}"))

    def at(self, where: str) -> str:
        """The message with ``where`` in place of ``bar N``."""
        return self.text.format(bar=where)


@dataclass(frozen=True)
class Bound:
    """The values one argument allows.

    ``low``/``high`` of None mean no limit on that side; ``low_open`` refuses
    the low itself (``"above 0"``); ``whole`` asks for a whole number.

    Examples
    --------
    >>> RISK.words()
    'a number above 0, up to 0.25'
    >>> Bound(2, 5000, whole=True).words()
    'a whole number from 2 to 5000'
    >>> bool(RISK.holds(0.0)), bool(RISK.holds(0.01))
    (False, True)
    """

    low: float | None = None
    high: float | None = None
    low_open: bool = False
    whole: bool = False

    def holds(self, value: npt.ArrayLike) -> Any:
        """True where ``value`` is a finite number in the range (elementwise for arrays)."""
        if type(value) in _SCALARS:  # one option value: plain Python, no numpy calls
            try:
                return self._holds_one(float(value))  # type: ignore[arg-type]
            except OverflowError:  # an int too large for a float: the array way refuses it
                pass
        x = np.asarray(value, dtype=float)
        ok = np.isfinite(x)
        with np.errstate(invalid="ignore"):
            if self.whole:
                ok &= x == np.round(x)
            if self.low is not None:
                ok &= (x > self.low) if self.low_open else (x >= self.low)
            if self.high is not None:
                ok &= x <= self.high
        return ok

    def _holds_one(self, x: float) -> bool:
        # The same tests as the array path, in the same order, on one float.
        if not math.isfinite(x) or (self.whole and not x.is_integer()):
            return False
        if self.low is not None and (x <= self.low if self.low_open else x < self.low):
            return False
        return self.high is None or x <= self.high

    def words(self) -> str:
        """The range in plain words, as messages and the function reference give it."""
        noun = "a whole number" if self.whole else "a number"
        low, high = self.low, self.high
        if low is not None and high is not None:
            if self.low_open:
                return f"{noun} above {_show(low)}, up to {_show(high)}"
            return f"{noun} from {_show(low)} to {_show(high)}"
        if low is not None:
            return f"{noun} {'above' if self.low_open else 'of at least'} {_show(low)}"
        if high is not None:
            return f"{noun} up to {_show(high)}"
        return noun


# Option values checked without numpy (bool is not here: it goes the array way, as before).
_SCALARS = frozenset({int, float, np.float64, np.int64})


def _show(x: float) -> str:
    x = float(x)
    return str(int(x)) if x.is_integer() else repr(x)


#: The longest window in bars: twenty years of daily bars; longer is taken for a slip
#: (common practice, no source).
MAX_PERIOD = 5000
#: Bars in a window of an average, a true-range average or a range-based estimator. One
#: bar is allowed: the average of one price is that price, ATR over one bar its true range.
PERIOD = Bound(1, MAX_PERIOD, whole=True)
#: Bars in a window of a spread (a standard deviation, bands on it, volatility of
#: returns): one value has no spread, so at least two.
SPREAD_PERIOD = Bound(2, MAX_PERIOD, whole=True)
#: Readings a percentile rank compares against, today's included.
LOOKBACK = Bound(1, 100_000, whole=True)
#: Any finite price (futures spreads and some contracts trade below zero).
PRICE = Bound()
#: Account equity, in account currency.
EQUITY = Bound(0.0, low_open=True)
#: Share of equity risked on one trade. Above a quarter of the account on one trade is
#: refused as a typing slip (1.5 for 1.5 %), not a plan (common practice, no source).
RISK = Bound(0.0, 0.25, low_open=True)
#: Money per 1.0 price move per unit, in the instrument's currency.
POINT_VALUE = Bound(0.0, low_open=True)
#: Smallest tradable increment of a size.
LOT_STEP = Bound(0.0, low_open=True)
#: Smallest and largest allowed size (0 means no limit).
QUANTITY = Bound(0.0)
#: Account currency per unit of instrument currency.
FX_RATE = Bound(0.0, low_open=True)
#: Volatility in price units: a distance, never below 0.
VOLATILITY = Bound(0.0)
#: Volatility units between a price and a level (stop, target, trailing stop).
MULTIPLE = Bound(0.0, 1000.0, low_open=True)
#: Volatility units of a trailing stop: as :data:`MULTIPLE`, and 0 turns the trail off.
TRAIL = Bound(0.0, MULTIPLE.high)
#: Price increment levels are rounded to (0 means no rounding).
TICK = Bound(0.0)
#: Band half-width in deviations or ATRs (beyond 100 the bands say nothing).
WIDTH = Bound(0.0, 100.0, low_open=True)
#: Envelope half-width in percent of the average.
PERCENT = Bound(0.0, 100.0, low_open=True)
#: Bars per year for annualising (252 trading days, 365 for round-the-clock markets, more
#: for intraday bars).
BARS_PER_YEAR = Bound(0.0, low_open=True)


def check(name: str, value: Any, bound: Bound, *, blank_ok: bool = False) -> Any:
    """Return ``value`` when it is in ``bound``; raise ``ValueError`` naming it otherwise.

    Parameters
    ----------
    name : str
        The argument's name, for the message.
    value : float or array_like
        The value(s) given.
    bound : Bound
        The allowed range.
    blank_ok : bool, default False
        Let NaN through (an array whose rows may not be known yet; a missing
        input the caller reports in its own way).

    Returns
    -------
    float or array_like
        ``value`` unchanged.

    Raises
    ------
    ValueError
        ``"<name> must be <range>, got <value>"``, with the item for an array.

    Examples
    --------
    >>> check("risk", 0.01, RISK)
    0.01
    >>> check("risk", 1.5, RISK)
    Traceback (most recent call last):
    ...
    ValueError: risk must be a number above 0, up to 0.25, got 1.5
    """
    x = np.asarray(value, dtype=float) if not isinstance(value, float) else value
    ok = bound.holds(x)
    if ok is True:  # one value in range (np.all of a plain bool costs more than the check)
        return value
    if blank_ok:
        ok = ok | np.isnan(x)
    if np.all(ok):
        return value
    if np.ndim(x) == 0:
        raise ValueError(f"{name} must be {bound.words()}, got {_given(float(x))}")
    flat = np.ravel(x)
    i = int(np.flatnonzero(~np.ravel(ok))[0])
    raise ValueError(
        f"{name} must be {bound.words()}, got {_given(float(flat[i]))} (item {i + 1})"
    )


def _given(x: float) -> str:
    if math.isnan(x):
        return "nothing (a blank or NaN)"
    return f"{x:.10g}"


def check_high_low(high: npt.ArrayLike, low: npt.ArrayLike,
                   *others: npt.ArrayLike) -> None:
    """Refuse a bar whose high is below its low (the columns are likely swapped).

    Rows where the high, the low or any of ``others`` (the function's other
    price columns) is not finite are gaps, skipped by the function, and not
    checked.

    Raises
    ------
    BarError
        Naming the first such bar, counted from 1.

    Examples
    --------
    >>> try:
    ...     check_high_low([10.0, 9.0], [9.0, 9.5])
    ... except ValueError as err:
    ...     print(err)
    high is below low on bar 2 (high 9, low 9.5); are the columns swapped?
    """
    h = np.asarray(high, dtype=float)
    lo = np.asarray(low, dtype=float)
    if h.shape != lo.shape:
        return  # the length check of the kernel itself names the columns
    wrong = h < lo  # False where either is NaN (a comparison with NaN does not warn)
    if not wrong.any():  # the usual case: one comparison of the whole columns
        return
    with np.errstate(invalid="ignore"):
        wrong &= np.isfinite(h) & np.isfinite(lo)
        for other in others:
            o = np.asarray(other, dtype=float)
            if o.shape == h.shape:
                wrong &= np.isfinite(o)
        bad = np.flatnonzero(np.ravel(wrong))
    if bad.size:
        i = int(bad[0])
        raise BarError(
            f"high is below low on {{bar}} (high {np.ravel(h)[i]:.10g}, "
            f"low {np.ravel(lo)[i]:.10g}); are the columns swapped?", i
        )


def check_positive_prices(why: str, **prices: npt.ArrayLike) -> None:
    """Refuse a price of 0 or below on any bar, for a figure that needs positive prices.

    Parameters
    ----------
    why : str
        What needs positive prices, for the message ("logarithms of prices").
    **prices : array_like
        The price columns by name. Rows that are not finite are gaps and not
        checked.

    Raises
    ------
    BarError
        Naming the column, the first such bar (counted from 1) and its value.

    Examples
    --------
    >>> try:
    ...     check_positive_prices("a share of the close", close=[10.0, -1.0])
    ... except ValueError as err:
    ...     print(err)
    close is -1 on bar 2: a share of the close needs prices above 0
    """
    for name, p in prices.items():
        a = np.asarray(p, dtype=float)
        if not a.size or a.min() > 0:  # a NaN makes min() NaN (quietly): look closer then
            continue
        with np.errstate(invalid="ignore"):
            bad = np.flatnonzero(np.ravel((a <= 0) & np.isfinite(a)))
        if bad.size:
            i = int(bad[0])
            raise BarError(
                f"{name} is {np.ravel(a)[i]:.10g} on {{bar}}: {why} needs prices above 0", i
            )
