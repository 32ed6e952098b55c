"""Returns-based volatility estimators, annualised.

Every estimator returns an annualised volatility as a **fraction** (0.25 means
25 % a year; sheets format it as a percentage), scaled by
``sqrt(per_year)``: 252 for trading days, 365 for round-the-clock markets, the
number of bars per year for intraday bars. Logarithms are natural.

Conventions (``n`` = ``period``)
--------------------------------
* **Close-to-close**: the sample standard deviation (divisor ``n - 1``, mean
  removed) of the last ``n`` log returns ``ln(C_t / C_{t-1})``. It needs
  ``n + 1`` closes, so the first value is on row ``n``.
* **Parkinson** (1980): ``sqrt( mean(ln(H/L)^2) / (4 ln 2) )`` over the last
  ``n`` bars. First value on row ``n - 1``.
* **Garman-Klass** (1980), the practical estimator
  ``mean( 0.5 ln(H/L)^2 - (2 ln 2 - 1) ln(C/O)^2 )`` over ``n`` bars. First
  value on row ``n - 1``.
* **Rogers-Satchell** (1991):
  ``mean( ln(H/C) ln(H/O) + ln(L/C) ln(L/O) )`` over ``n`` bars; unbiased under
  a drift. First value on row ``n - 1``.
* **Yang-Zhang** (2000): ``V_O + k V_C + (1 - k) V_RS`` where, over the last
  ``n`` bars, ``V_O`` is the sample variance (divisor ``n - 1``) of the
  overnight returns ``ln(O_t / C_{t-1})``, ``V_C`` the sample variance of the
  open-to-close returns ``ln(C_t / O_t)``, ``V_RS`` the Rogers-Satchell mean
  (divisor ``n``) and ``k = 0.34 / (1.34 + (n + 1)/(n - 1))``. The overnight
  return of the window's first bar needs the close before it, so the first
  value is on row ``n``.

Log ratios are computed as ``log1p((a - b) / b)`` so that a 0.01 move on a
price near 1e7 keeps its digits.

Prices that cannot be logged: a price of 0 or below is refused with a message
naming the column and the bar (skipping it would make the next return span two
bars without a word), and so are a high below its low and ``per_year`` of 0 or
below. A bar with a blank (non-finite) input is a gap (NaN on that row, the
window continues over the other bars; see :mod:`sheetvol.core._gaps`). Returns
that need a previous close (close-to-close, Yang-Zhang's overnight part) then
run from the last usable close, so the first return after a gap spans it.
The range-based means are never negative for consistent bars (low <= open,
close <= high); a window whose mean comes out negative because some bar has its
open or close outside its high-low range gives NaN.
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

from sheetvol.core import bounds
from sheetvol.core._gaps import as_series, skip_gaps
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_period, window_mean_var, window_sum
from sheetvol.core.bounds import SPREAD_PERIOD

__all__ = ["PER_YEAR", "close_to_close", "garman_klass", "parkinson", "rogers_satchell",
           "yang_zhang"]

#: Bars per year for annualising, the default of every face: trading days a year of a market
#: closed at weekends (common practice, no source).
PER_YEAR = 252

_LN2 = math.log(2.0)


def _positive(per_year: float, **prices: npt.ArrayLike) -> list[FloatArray]:
    """The price columns as arrays, after the checks every estimator shares: bars per
    year above 0, prices above 0 (they are logged) and no high below its low."""
    bounds.check("per_year", per_year, bounds.BARS_PER_YEAR)
    out = {name: as_series(p, name) for name, p in prices.items()}
    bounds.check_positive_prices("a volatility estimator (it takes logarithms of prices)",
                                 **out)
    if "high" in out and "low" in out:
        bounds.check_high_low(out["high"], out["low"], *(v for k, v in out.items()
                                                         if k not in ("high", "low")))
    return list(out.values())


def _logratio(a: FloatArray, b: FloatArray) -> FloatArray:
    """ln(a/b) without losing the digits of small moves on large prices."""
    return np.log1p((a - b) / b)


def _window_mean_nonneg(terms: FloatArray, period: int) -> FloatArray:
    """Rolling mean of terms that are >= 0 for consistent bars.

    Rounding can leave a window of zeros a hair below 0; that is clipped. A
    window holding a genuinely negative term keeps its sign (and later NaN).
    """
    mean = window_sum(terms, period) / period
    if not (terms < 0).any():
        return np.maximum(mean, 0.0)
    has_negative = window_sum((terms < 0).astype(np.float64), period) > 0.5
    return np.where(has_negative, mean, np.maximum(mean, 0.0))


def _annualise(variance: FloatArray, per_year: float) -> FloatArray:
    with np.errstate(invalid="ignore"):
        return np.sqrt(variance * per_year)


def _sample_var(values: FloatArray, period: int) -> FloatArray:
    _, var = window_mean_var(values, period)
    return np.maximum(var, 0.0) * (period / (period - 1))


@skip_gaps(1)
def _close_to_close(close: FloatArray, period: int, per_year: float) -> FloatArray:
    out = np.full(len(close), np.nan)
    if len(close) > period:
        returns = _logratio(close[1:], close[:-1])
        out[1:] = _annualise(_sample_var(returns, period), per_year)
    return out


def close_to_close(
    close: npt.ArrayLike, period: int = 20, per_year: float = PER_YEAR
) -> FloatArray:
    """Close-to-close volatility: sample standard deviation of log returns, annualised.

    Parameters
    ----------
    close : array_like
        Closing prices, oldest first.
    period : int, default 20
        Log returns in the window (the window spans ``period + 1`` closes):
        2 to 5000 (:data:`sheetvol.core.bounds.SPREAD_PERIOD`).
    per_year : float, default 252
        Bars per year, above 0.

    Returns
    -------
    FloatArray
        Annualised volatility as a fraction; NaN on the first ``period`` rows
        and on gap rows.

    Examples
    --------
    Log returns +r, -r, +r, -r have sample standard deviation ``r * sqrt(4/3)``:

    >>> import math
    >>> c = [100.0, 110.0, 100.0, 110.0, 100.0]
    >>> r = math.log(1.1)
    >>> v = close_to_close(c, period=4, per_year=1)
    >>> bool(abs(v[4] - r * math.sqrt(4 / 3)) < 1e-12)
    True
    """
    period = check_period(period, bound=SPREAD_PERIOD)
    (c,) = _positive(per_year, close=close)
    return _close_to_close(c, period, float(per_year))


@skip_gaps(2)
def _parkinson(high: FloatArray, low: FloatArray, period: int, per_year: float) -> FloatArray:
    out = np.full(len(high), np.nan)
    if len(high) >= period:
        hl = _logratio(high, low)
        out[:] = _annualise(_window_mean_nonneg(hl * hl, period) / (4.0 * _LN2), per_year)
    return out


def parkinson(
    high: npt.ArrayLike, low: npt.ArrayLike, period: int = 20, per_year: float = PER_YEAR
) -> FloatArray:
    """Parkinson (1980) volatility from the high-low range, annualised.

    Parameters
    ----------
    high, low : array_like
        Aligned high and low prices, oldest first.
    period : int, default 20
        Bars in the window: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).
    per_year : float, default 252
        Bars per year, above 0.

    Returns
    -------
    FloatArray
        ``sqrt( mean(ln(H/L)^2) / (4 ln 2) * per_year )``; NaN on the first
        ``period - 1`` rows and on gap rows. A price of 0 or below is refused.

    Examples
    --------
    Every bar spans a factor e (ln(H/L) = 1), so the variance is 1/(4 ln 2):

    >>> import math
    >>> v = parkinson([math.e] * 3, [1.0] * 3, period=3, per_year=1)
    >>> bool(abs(v[2] - math.sqrt(1 / (4 * math.log(2)))) < 1e-12)
    True
    """
    period = check_period(period)
    h, lo = _positive(per_year, high=high, low=low)
    return _parkinson(h, lo, period, float(per_year))


@skip_gaps(4)
def _garman_klass(
    open_: FloatArray, high: FloatArray, low: FloatArray, close: FloatArray,
    period: int, per_year: float,
) -> FloatArray:
    out = np.full(len(high), np.nan)
    if len(high) >= period:
        hl = _logratio(high, low)
        co = _logratio(close, open_)
        terms = 0.5 * hl * hl - (2.0 * _LN2 - 1.0) * co * co
        out[:] = _annualise(_window_mean_nonneg(terms, period), per_year)
    return out


def garman_klass(
    open: npt.ArrayLike,
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 20,
    per_year: float = PER_YEAR,
) -> FloatArray:
    """Garman-Klass (1980) volatility from open, high, low and close, annualised.

    Parameters
    ----------
    open, high, low, close : array_like
        Aligned OHLC prices, oldest first.
    period : int, default 20
        Bars in the window: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).
    per_year : float, default 252
        Bars per year, above 0.

    Returns
    -------
    FloatArray
        ``sqrt( mean(0.5 ln(H/L)^2 - (2 ln 2 - 1) ln(C/O)^2) * per_year )``;
        NaN on the first ``period - 1`` rows and on gap rows. A price of 0 or
        below is refused.

    Examples
    --------
    Bars that open at the low and close at the high with ln(H/L) = 1 give a
    variance of ``0.5 - (2 ln 2 - 1)``:

    >>> import math
    >>> e = math.e
    >>> v = garman_klass([1.0] * 2, [e] * 2, [1.0] * 2, [e] * 2, period=2, per_year=1)
    >>> bool(abs(v[1] - math.sqrt(1.5 - 2 * math.log(2))) < 1e-12)
    True
    """
    period = check_period(period)
    o, h, lo, c = _positive(per_year, open=open, high=high, low=low, close=close)
    return _garman_klass(o, h, lo, c, period, float(per_year))


def _rs_terms(
    o: FloatArray, h: FloatArray, lo: FloatArray, co: FloatArray
) -> FloatArray:
    """Rogers-Satchell term of each bar; ``co`` is ln(C/O), shared with Yang-Zhang.

    ln(H/C) = ln(H/O) - ln(C/O): three logs instead of four. The subtraction is
    exact to a few ulps of terms that are themselves small, so no digits of note
    are lost.
    """
    ho, lo_o = _logratio(h, o), _logratio(lo, o)
    return (ho - co) * ho + (lo_o - co) * lo_o


@skip_gaps(4)
def _rogers_satchell(
    open_: FloatArray, high: FloatArray, low: FloatArray, close: FloatArray,
    period: int, per_year: float,
) -> FloatArray:
    out = np.full(len(high), np.nan)
    if len(high) >= period:
        terms = _rs_terms(open_, high, low, _logratio(close, open_))
        out[:] = _annualise(_window_mean_nonneg(terms, period), per_year)
    return out


def rogers_satchell(
    open: npt.ArrayLike,
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 20,
    per_year: float = PER_YEAR,
) -> FloatArray:
    """Rogers-Satchell (1991) volatility, unbiased under drift, annualised.

    Parameters
    ----------
    open, high, low, close : array_like
        Aligned OHLC prices, oldest first.
    period : int, default 20
        Bars in the window: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).
    per_year : float, default 252
        Bars per year, above 0.

    Returns
    -------
    FloatArray
        ``sqrt( mean(ln(H/C) ln(H/O) + ln(L/C) ln(L/O)) * per_year )``; NaN on
        the first ``period - 1`` rows and on gap rows. A price of 0 or below is
        refused.

    Examples
    --------
    A bar that opens at the low and closes at the high contributes 0 (the
    move may be all drift); one that opens and closes at the low after
    touching the high contributes ``ln(H/L)^2``:

    >>> import math
    >>> e = math.e
    >>> rogers_satchell([1.0] * 2, [e] * 2, [1.0] * 2, [e] * 2, period=2, per_year=1).tolist()
    [nan, 0.0]
    >>> v = rogers_satchell([1.0] * 2, [e] * 2, [1.0] * 2, [1.0] * 2, period=2, per_year=1)
    >>> bool(abs(v[1] - 1.0) < 1e-12)
    True
    """
    period = check_period(period)
    o, h, lo, c = _positive(per_year, open=open, high=high, low=low, close=close)
    return _rogers_satchell(o, h, lo, c, period, float(per_year))


@skip_gaps(4)
def _yang_zhang(
    open_: FloatArray, high: FloatArray, low: FloatArray, close: FloatArray,
    period: int, per_year: float,
) -> FloatArray:
    out = np.full(len(high), np.nan)
    if len(high) > period:
        o, h, lo, c = open_[1:], high[1:], low[1:], close[1:]
        overnight = _logratio(o, close[:-1])
        open_close = _logratio(c, o)
        k = 0.34 / (1.34 + (period + 1) / (period - 1))
        variance = (
            _sample_var(overnight, period)
            + k * _sample_var(open_close, period)
            + (1.0 - k) * _window_mean_nonneg(_rs_terms(o, h, lo, open_close), period)
        )
        out[1:] = _annualise(variance, per_year)
    return out


def yang_zhang(
    open: npt.ArrayLike,
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 20,
    per_year: float = PER_YEAR,
) -> FloatArray:
    """Yang-Zhang (2000) volatility: overnight, open-to-close and Rogers-Satchell parts.

    Parameters
    ----------
    open, high, low, close : array_like
        Aligned OHLC prices, oldest first.
    period : int, default 20
        Bars in the window, 2 to 5000
        (:data:`sheetvol.core.bounds.SPREAD_PERIOD`); the window also uses the
        close before its first bar.
    per_year : float, default 252
        Bars per year, above 0.

    Returns
    -------
    FloatArray
        ``sqrt( (V_O + k V_C + (1 - k) V_RS) * per_year )`` with the conventions
        in the module notes; NaN on the first ``period`` rows and on gap rows. A
        price of 0 or below is refused.

    Examples
    --------
    Flat bars that gap alternately by a factor e and back: the overnight
    returns are +1, -1 (sample variance 2 over two bars); the other parts are 0:

    >>> import math
    >>> e = math.e
    >>> o = [1.0, e, 1.0]
    >>> v = yang_zhang(o, o, o, o, period=2, per_year=1)
    >>> bool(abs(v[2] - math.sqrt(2.0)) < 1e-12)
    True
    """
    period = check_period(period, bound=SPREAD_PERIOD)
    o, h, lo, c = _positive(per_year, open=open, high=high, low=low, close=close)
    return _yang_zhang(o, h, lo, c, period, float(per_year))
