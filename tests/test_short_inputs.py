"""Short-input fast paths give exactly what the general paths give.

Reference: the general code path of the same function, forced by setting the
fast path's threshold to zero (the general paths are themselves checked against
plain loops, TA-Lib and ``statistics`` in the kernel tests).
"""

from __future__ import annotations

import datetime as dt
import re

import numpy as np
import pandas as pd
import pytest

from sheetvol.core import _windows, averages, bounds
from sheetvol.core._windows import check_period, window_mean
from sheetvol.functions import calling, convert, registry
from sheetvol.functions.registry import ArgumentError


def _general_recursion(x, r, scale, shift, monkeypatch):
    with monkeypatch.context() as m:
        m.setattr(averages, "_SHORT_RECURSION", 0)
        out = np.empty_like(x)
        averages._recur_into(x, out, r, scale, shift)
    return out


@pytest.mark.parametrize("n", [0, 1, 15, 16, 31, 32, 33, 47, 300, 301, 511])
@pytest.mark.parametrize(("r", "scale", "shift"), [
    (19 / 21, 2 / 21, 100.0), (13 / 14, 1 / 14, -3.5), (0.5, 1.0, 0.0), (0.0, 1.0, 2.0),
    (1e-3, 0.999, 7.0), (1.0, 0.0, 1.0),
])
def test_short_recursion_is_the_general_one_bit_for_bit(n, r, scale, shift, monkeypatch):
    x = 100 + np.cumsum(np.random.default_rng(n).normal(0, 1, n))
    want = _general_recursion(x, r, scale, shift, monkeypatch)
    got = np.empty_like(x)
    averages._recur_into(x, got, r, scale, shift)
    np.testing.assert_array_equal(got, want)
    same = x.copy()  # in place, as the recursive averages call it
    averages._recur_into(same, same, r, scale, shift)
    np.testing.assert_array_equal(same, want)


@pytest.mark.parametrize("bound", [bounds.PERIOD, bounds.SPREAD_PERIOD, bounds.RISK,
                                   bounds.EQUITY, bounds.TRAIL, bounds.PRICE, bounds.WIDTH])
def test_one_value_is_judged_as_the_array_path_judges_it(bound):
    values = [0, 1, 2, 14, 5000, 5001, -1, 0.0, 0.25, 0.2500001, 1e-300, 2.5, 14.0, 1e308,
              float("nan"), float("inf"), -float("inf"), np.float64(3.0), np.int64(7),
              10**400, -(10**400), True, False]
    for v in values:
        try:
            want = bool(np.all(bound.holds(np.array([v], dtype=object))))  # the array path
        except OverflowError:  # an int too large for a float: raised on both paths
            with pytest.raises(OverflowError):
                bound.holds(v)
            continue
        assert bool(bound.holds(v)) == want, v


def test_period_refusals_keep_their_words():
    # The message is built only on refusal now; its words are the bound's own.
    for bad in (0, 5001, 2.5, True, "14", None):
        with pytest.raises(ValueError, match=r"^period must be a whole number from 1 to 5000, "
                                             rf"got {re.escape(repr(bad))}$"):
            check_period(bad)
    assert check_period(14) == 14 and check_period(14.0) == 14
    assert check_period(np.int64(3)) == 3 and type(check_period(np.int64(3))) is int


class _PywinTime(dt.datetime):
    """Shaped like pywin32's datetime: a subclass of datetime, carrying UTC."""


def _date_columns():
    rng = np.random.default_rng(11)
    start = dt.datetime(2019, 3, 1)
    days = np.cumsum(rng.integers(1, 4, 40)).tolist()
    plain = [start + dt.timedelta(days=d) for d in days]
    utc = [_PywinTime(*v.timetuple()[:6], tzinfo=dt.timezone.utc) for v in plain]
    east = [v.replace(tzinfo=dt.timezone(dt.timedelta(hours=9))) for v in plain]
    only_dates = [v.date() for v in plain]
    stamps = [pd.Timestamp(v) for v in plain]
    intraday = [v + dt.timedelta(hours=9, minutes=30, microseconds=7) for v in plain]
    with_blanks = [None, *plain[1:10], None, *plain[11:]]
    header = ["date", *plain[1:]]
    early = [dt.datetime(1900, 1, 1) + dt.timedelta(days=d) for d in days]  # before 1900-03-01
    mixed = [*only_dates[:5], *plain[5:]]
    with_nat = [plain[0], pd.NaT, *plain[2:]]  # NaT is a datetime too, with no date in it
    return [plain, utc, east, only_dates, stamps, intraday, with_blanks, header, early, mixed,
            [None] * 5, [plain[0]], with_nat]


@pytest.mark.parametrize("i", range(13))
@pytest.mark.parametrize("date1904", [False, True])
def test_dates_of_daily_bars_read_without_pandas_as_with_it(i, date1904, monkeypatch):
    values = _date_columns()[i]
    cells_ = [[v] for v in values]
    try:
        got = convert.day_numbers(cells_, func="SV_X_ON", param="dates", date1904=date1904)
    except ArgumentError as exc:
        got = str(exc)
    with monkeypatch.context() as m:
        m.setattr(convert, "_midnight_days", lambda flat, kinds: None)
        try:
            want = convert.day_numbers(cells_, func="SV_X_ON", param="dates",
                                       date1904=date1904)
        except ArgumentError as exc:
            want = str(exc)
    if isinstance(want, str):
        assert got == want
    else:
        np.testing.assert_array_equal(got, want)


def test_daily_dates_take_the_path_without_pandas():
    columns = _date_columns()
    for i in (0, 1, 2, 3, 6, 8):  # dates and midnight datetimes, with blanks too
        flat = columns[i]
        assert convert._midnight_days(flat, set(map(type, flat))) is not None, i
    for i in (4, 5, 9, 12):  # pandas' own; a time of day; dates mixed with datetimes; NaT
        flat = columns[i]
        assert convert._midnight_days(flat, set(map(type, flat))) is None, i


def _on_cases():
    rng = np.random.default_rng(5)
    cases = []
    for trial in range(40):
        n = int(rng.integers(1, 60))
        close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, n)))
        high = close * (1 + np.abs(rng.normal(0, 0.004, n)))
        low = close * (1 - np.abs(rng.normal(0, 0.004, n)))
        cols = [[[float(v)] for v in a] for a in (high, low, close)]
        start = dt.datetime(2024, 1, 2)
        dates = [[start + dt.timedelta(days=int(d))]
                 for d in np.cumsum(rng.integers(1, 3, n))]
        for col in cols:  # gaps, text numbers
            for i in rng.integers(0, n, int(rng.integers(0, 3))):
                if col[i][0] is not None:
                    col[i] = [None] if rng.random() < 0.5 else [f"{col[i][0]:.6f}"]
        if trial % 7 == 3:  # a cell that is no number: refused, or outside the window read
            cols[2][int(rng.integers(0, n))] = ["abc"]
        if trial % 11 == 5:  # a high below its low
            i = int(rng.integers(0, n))
            cols[0][i], cols[1][i] = cols[1][i], cols[0][i]
        if trial % 10 == 9:  # a header row in every range
            cols = [[[name], *c[1:]] for name, c in zip(("high", "low", "close"), cols,
                                                         strict=True)]
            dates = [["date"], *dates[1:]]
        pick = int(rng.integers(0, n))
        on = dates[pick][0] if isinstance(dates[pick][0], dt.datetime) else start
        on = on + dt.timedelta(hours=int(rng.integers(0, 30)))  # between bars too
        if trial % 13 == 0:
            on = start - dt.timedelta(days=3)  # before the first bar
        period = int(rng.choice([1, 2, 5, 14, n, n + 1]))
        cases += [
            ("SV_DEVIATION_ON", [on, dates, cols[2], max(period, 2)]),
            ("SV_AVERAGE_ON", [on, dates, cols[2], period, "exponential"]),
            ("SV_AVERAGE_ON", [on, dates, cols[2], period, "linear"]),
            ("SV_ATR_ON", [on, dates, *cols, period]),
            ("SV_ATR_ON", [on, dates, *cols, period, "simple"]),
            ("SV_CLOSEVOL_ON", [on, dates, cols[2], max(period, 2)]),
            ("SV_PARKINSON_ON", [on, dates, cols[0], cols[1], period]),
        ]
    return cases


def _outcome(name, args):
    try:
        return calling.call_worksheet(name, args)
    except ArgumentError as exc:
        return str(exc)


def test_on_forms_over_dated_rows_in_order_agree_with_the_general_path(monkeypatch):
    taken = 0
    for name, args in _on_cases():
        got = _outcome(name, args)
        try:
            taken += calling._in_order(convert.day_numbers(args[1], func="x", param="dates"))
        except ArgumentError:  # a range of nothing but its header
            pass
        with monkeypatch.context() as m:
            m.setattr(calling, "_in_order", lambda days: False)
            want = _outcome(name, args)
        assert got == want or (isinstance(got, float) and np.isnan(got) and np.isnan(want)), (
            name, got, want)
    assert taken > 200  # most cases took the shortcut


@pytest.mark.parametrize("period", [1, 2, 3, 7, 8, 9, 14, 16, 17, 20, 127, 128, 129, 300,
                                    1000, 5000])
def test_seed_of_the_recursive_averages_is_the_window_mean(period):
    rng = np.random.default_rng(period)
    for level in (100.0, 1e7, -50.0):
        x = level + np.cumsum(rng.normal(0, 1, period + 5))
        want = float(window_mean(x[:period], period)[-1])
        assert averages._first_mean(x, period) == want


@pytest.mark.parametrize("period", [2, 3, 8, 9, 14, 20, 129, 300])
@pytest.mark.parametrize("sample", [False, True])
@pytest.mark.parametrize("about", ["mean", "level"])
def test_one_window_is_the_first_window_of_two(period, sample, about):
    # The one-window deviation (a _LAST call's) against the window-by-window path,
    # which handles a second window the same way it handles the first.
    rng = np.random.default_rng(period)
    for start in (100.0, 1e7, -3.0):
        x = start + np.cumsum(rng.normal(0, 1, period + 1))
        level = None if about == "mean" else x + rng.normal(0, 0.5, period + 1)
        two = _windows._small(x, period, "deviation", level, sample)[0]
        one = _windows._small(x[:period], period, "deviation",
                              None if level is None else level[:period], sample)[0]
        assert len(one) == period and np.isnan(one[:-1]).all()
        assert one[-1] == two[period - 1]


@pytest.mark.parametrize("kind", ["whole", "number", "choice", "text", "series"])
def test_plain_option_values_pass_as_the_general_steps_pass_them(kind):
    p = registry.Param("x", kind, "help")
    for value in (None, 1.5, 14.0, "", "exponential", " 14 ", "2024-01-02", -0.0, 14, 0,
                  -2146828288 + 1999, -2146828288 + 2100, True):
        assert calling._option(p, value, "SV_X", False) == convert.single(
            value, func="SV_X", param="x")
    with pytest.raises(ArgumentError, match="error cell"):  # an error cell, as COM passes it
        calling._option(p, convert.COM_NA, "SV_X", False)
    date = registry.Param("d", "date", "help")
    assert calling._option(date, None, "SV_X", False) is None
    assert calling._option(date, "2025-01-02", "SV_X", False) == 45659.0


def test_names_as_typed_are_remembered_without_changing_what_they_mean():
    prices = [[100.0 + i % 7] for i in range(30)]
    want = calling.call_worksheet("SV_DEVIATION_LAST", [prices, 14])
    for name in ("SV_DEVIATION_LAST", " sv_deviation_last ", "Sv_Deviation_Last"):
        for _ in range(2):  # the second call takes the remembered entry
            assert calling.call_worksheet(name, [prices, 14]) == want
    assert calling.call_worksheet("SV_DEVIATION", [prices, 14])[-1] == want
    for _ in range(2):  # an unknown name is refused every time, never remembered
        with pytest.raises(ArgumentError, match=r"^SV_NOPE_LAST: no sheetvol function"):
            calling.call_worksheet(" sv_nope_last", [prices, 14])
