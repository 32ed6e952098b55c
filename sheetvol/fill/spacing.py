"""Bars per year from the dates of the bars: the figure the fill annualises with.

The returns-based estimators scale a per-bar variance by the number of bars in a
year. The worksheet functions take that number as an argument; the fill knows the
dates, so it derives it (:func:`bars_per_year`) and says which figure it used:

* daily bars: 252 a year when the bars skip weekends (trading days), 365 when
  weekends trade too (round-the-clock markets);
* weekly bars: 52; monthly bars: 12;
* intraday bars: bars per session (the usual number of bars in a day) times
  sessions a year (252, or 365 when weekends trade).

The conventions (252 trading days, 52 weeks, 12 months, 365 calendar days) are
common practice, no source. Spacing that fits none of these is *irregular*:
the caller refuses to annualise it unless the user gives ``per_year``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sheetvol.core.estimators import PER_YEAR

__all__ = ["TRADING_DAYS", "Spacing", "bars_per_year"]

#: Trading days (sessions) a year of a market closed at weekends (stated in the core).
TRADING_DAYS = PER_YEAR
#: Days a year of a market open every day.
CALENDAR_DAYS = 365
_SERIAL_EPOCH = np.datetime64("1899-12-30")  # day 0 of the 1900-system serials used here
# Share of gaps that must fit the spacing found for it to count as regular (the rest:
# holidays, a missing bar or two).
_REGULAR_SHARE = 0.9


@dataclass(frozen=True)
class Spacing:
    """What the dates say: the kind of bars and their bars per year (0 when irregular)."""

    kind: str  # "daily", "weekly", "monthly", "intraday", "irregular" or "too few dates"
    per_year: float
    detail: str  # how the figure was reached, for the notes

    def describe(self) -> str:
        """``"252 bars/yr (daily bars, weekends closed)"``."""
        return f"{self.per_year:g} bars/yr ({self.detail})"


def bars_per_year(days: np.ndarray) -> Spacing:
    """The bar spacing of a series of dates and the bars per year it implies.

    Parameters
    ----------
    days : numpy.ndarray
        Day numbers (1900-system serials; a time of day as the fraction), NaN
        for bars without a date; any order.

    Returns
    -------
    Spacing
        ``per_year`` is 0 for irregular spacing or fewer than three dates.

    Examples
    --------
    Ten weekdays from Monday 6 January 2025 (serial 45663):

    >>> week = np.array([45663, 45664, 45665, 45666, 45667, 45670, 45671, 45672, 45673, 45674.])
    >>> bars_per_year(week).describe()
    '252 bars/yr (daily bars, weekends closed)'
    >>> bars_per_year(45663 + 7.0 * np.arange(10)).describe()
    '52 bars/yr (weekly bars)'
    >>> five_min = 45663 + np.concatenate([d + (9.5 + np.arange(78) / 12) / 24 for d in range(5)])
    >>> bars_per_year(five_min).describe()
    '19656 bars/yr (intraday bars of 5 minutes, 78 a session x 252 sessions)'
    """
    d = np.unique(np.asarray(days, dtype=float)[np.isfinite(days)])
    if len(d) < 3:
        return Spacing("too few dates", 0.0, f"{len(d)} dated bars: too few to tell the spacing")
    gaps = np.diff(d)
    median = float(np.median(gaps))
    day = np.floor(d)
    weekend = (day.astype("int64") + _SERIAL_EPOCH).astype("datetime64[D]")
    on_weekend = np.isin((weekend.astype("int64") + 3) % 7, (5, 6))  # 1970-01-01 was a Thursday
    sessions = CALENDAR_DAYS if on_weekend.mean() > 0.05 else TRADING_DAYS
    closed = "weekends trade" if sessions == CALENDAR_DAYS else "weekends closed"
    if median < 0.75:  # intraday: bars within a day, a session a day
        same_day = np.diff(day) == 0
        inside = gaps[same_day]
        step = float(np.median(inside)) if len(inside) else median
        regular = len(inside) and np.mean(np.abs(inside - step) <= step * 0.01) >= _REGULAR_SHARE
        if not regular:
            return Spacing("irregular", 0.0, f"intraday gaps of varying length (median "
                           f"{_minutes(step)})")
        _, per_day = np.unique(day, return_counts=True)
        per_session = int(np.median(per_day))
        return Spacing("intraday", float(per_session * sessions),
                       f"intraday bars of {_minutes(step)}, {per_session} a session x "
                       f"{sessions} sessions")
    for kind, low, high, fit_low, fit_high, per_year in (
            ("daily", 0.75, 1.5, 0.75, 4.5, sessions),  # weekends and holidays: up to 4 days
            ("weekly", 6.0, 8.0, 5.0, 10.0, 52),
            ("monthly", 27.0, 32.0, 26.0, 36.0, 12)):
        if low <= median <= high:
            fits = np.mean((gaps >= fit_low) & (gaps <= fit_high))
            if fits < _REGULAR_SHARE:
                break
            detail = f"{kind} bars" + (f", {closed}" if kind == "daily" else "")
            return Spacing(kind, float(per_year), detail)
    return Spacing("irregular", 0.0, f"gaps between bars from {gaps.min():g} to "
                   f"{gaps.max():g} days (median {median:g})")


def _minutes(step_days: float) -> str:
    minutes = step_days * 24 * 60
    if minutes >= 60 and abs(minutes / 60 - round(minutes / 60)) < 1e-6:
        hours = round(minutes / 60)
        return f"{hours} hour" + ("s" if hours != 1 else "")
    return f"{minutes:.4g} minute" + ("s" if round(minutes, 4) != 1 else "")
