"""Cell values to numbers and dates, checked against openpyxl's date conversion and hand cases."""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
from openpyxl.utils.datetime import CALENDAR_MAC_1904, CALENDAR_WINDOWS_1900, from_excel, to_excel

from sheetvol.functions import cells
from sheetvol.functions.cells import CellValueError


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("1,234.5", 1234.5),
        ("  42 ", 42.0),
        ("-0.75", -0.75),
        ("(12.5)", -12.5),  # accounting-style negative
        ("1\u00a0234.5", 1234.5),  # non-breaking space as thousands separator
        ("1e3", 1000.0),
        (7, 7.0),
        (np.float32(0.5), 0.5),
    ],
)
def test_numbers_in_the_usual_spellings(text, expected):
    assert cells.to_number(text) == expected


def test_decimal_comma_swaps_separators():
    assert cells.to_number("1.234,5", decimal_comma=True) == 1234.5
    assert cells.to_number("0,25", decimal_comma=True) == 0.25
    assert cells.to_number("1.234.567", decimal_comma=True) == 1234567.0


def test_the_other_decimal_mark_is_refused_not_misread():
    # "101,5" is 101.5 written with a decimal comma; reading it as 1015 would be wrong.
    with pytest.raises(CellValueError, match="is it a decimal comma"):
        cells.to_number("101,5")
    with pytest.raises(CellValueError, match="is it a decimal point"):
        cells.to_number("101.25", decimal_comma=True)


@pytest.mark.parametrize("blank", [None, "", "   ", "#N/A", "#DIV/0!", "n/a", "-", float("nan")])
def test_blanks_and_error_cells_become_nan(blank):
    assert math.isnan(cells.to_number(blank))


@pytest.mark.parametrize("bad", ["abc", "12%", "$12", True, "101,5", "1,23,456"])
def test_text_that_is_not_a_number_is_refused(bad):
    with pytest.raises(CellValueError):
        cells.to_number(bad)


def test_series_error_names_the_position():
    with pytest.raises(CellValueError, match="close: item 3: 'x1' is not a number"):
        cells.to_series([1, "2", "x1"], name="close")


@pytest.mark.parametrize("serial", [1, 59, 61, 367, 25569, 44927, 45000.5, 60000.25])
def test_1900_serials_agree_with_openpyxl(serial):
    # Reference: openpyxl.utils.datetime.from_excel (1900 system, 1900-02-29 fiction).
    assert cells.serial_to_datetime(serial) == from_excel(serial, CALENDAR_WINDOWS_1900)


@pytest.mark.parametrize("serial", [1, 2, 1462, 43000.75])
def test_1904_serials_agree_with_openpyxl(serial):
    assert cells.serial_to_datetime(serial, date1904=True) == from_excel(serial, CALENDAR_MAC_1904)


@pytest.mark.parametrize(
    "when", [dt.datetime(2023, 3, 15), dt.datetime(1999, 12, 31, 18), dt.date(2026, 1, 2)]
)
def test_datetime_to_serial_agrees_with_openpyxl(when):
    assert cells.datetime_to_serial(when) == pytest.approx(to_excel(when), abs=1e-9)


@pytest.mark.parametrize(
    ("value", "kwargs", "expected"),
    [
        ("2025-03-14", {}, dt.datetime(2025, 3, 14)),
        ("14/03/2025", {"dayfirst": True}, dt.datetime(2025, 3, 14)),
        ("03/14/2025", {}, dt.datetime(2025, 3, 14)),
        ("Mar 14, 2025", {}, dt.datetime(2025, 3, 14)),
        ("45730", {}, dt.datetime(2025, 3, 14)),
        (45730, {}, dt.datetime(2025, 3, 14)),
        (dt.date(2025, 3, 14), {}, dt.datetime(2025, 3, 14)),
        (None, {}, None),
    ],
)
def test_dates_from_text_serials_and_dates(value, kwargs, expected):
    assert cells.to_datetime(value, **kwargs) == expected


def test_not_a_date():
    with pytest.raises(CellValueError, match="is not a date"):
        cells.to_datetime("someday")


def test_day_numbers_sort_like_dates_and_blank_is_nan():
    days = cells.to_day_numbers(["2025-01-02", None, dt.datetime(2025, 1, 3), 45660])
    assert days[0] == 45659.0 and math.isnan(days[1]) and days[2] == 45660.0 and days[3] == 45660.0


@pytest.mark.parametrize("serial", [math.inf, -math.inf, math.nan, 1e9, 2958466.0, -1.0])
def test_a_serial_no_worksheet_date_has_is_refused(serial):
    # Found by random arguments: 1e9 or inf as a date argument escaped as Python's
    # OverflowError. A worksheet's day numbers run from 0 to 2,958,465 (9999-12-31).
    with pytest.raises(cells.CellValueError, match="not a date a worksheet can hold"):
        cells.serial_to_datetime(serial)
    assert cells.serial_to_datetime(2958465.0) == dt.datetime(9999, 12, 31)


def test_a_date_argument_out_of_range_names_the_argument():
    from sheetvol.functions.calling import call_worksheet
    from sheetvol.functions.convert import ArgumentError

    dates = [[dt.datetime(2024, 1, 1) + dt.timedelta(days=i)] for i in range(30)]
    closes = [[100.0 + i] for i in range(30)]
    with pytest.raises(ArgumentError, match=r"SV_AVERAGE_ON: date is 1000000000.0, not a date"):
        call_worksheet("SV_AVERAGE_ON", [1e9, dates, closes, 5])


@pytest.mark.parametrize("bad", [1e12, -5.0])
def test_a_dates_column_holding_a_serial_no_worksheet_has_is_refused_by_item(bad):
    # Found by random arguments: such a serial in the dates column reached the message
    # that shows a date and escaped as Python's OverflowError.
    from sheetvol.functions.calling import call_worksheet
    from sheetvol.functions.convert import ArgumentError

    dates = [[45000.0 + i] for i in range(30)]
    dates[7] = [bad]
    closes = [[100.0 + i] for i in range(30)]
    with pytest.raises(ArgumentError, match=r"SV_AVERAGE_ON: dates item 8 is .*not a date a "
                                            r"worksheet can hold"):
        call_worksheet("SV_AVERAGE_ON", [45020.0, dates, closes, 5])
