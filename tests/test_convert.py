"""Edge conversion of worksheet arguments (sheetvol.functions.convert), for add-in and evaluator.

Sources for the date checks: the 1900 date system numbers 1900-01-01 as 1 and
counts a fictitious 1900-02-29 as 60, so 1900-03-01 is 61 and 2025-01-01 is
45658; the 1904 system is 1,462 days behind (Microsoft's support article
"Differences between the 1900 and the 1904 date system in Excel"; values from
memory of that article and of typing =DATE(2025,1,1) into a spreadsheet).
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol.functions import cells
from sheetvol.functions import convert as _convert
from sheetvol.functions.registry import ArgumentError


# -- shapes ------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("value", "expected", "horizontal"),
    [
        ([[1.0], [2.0], [3.0]], [1.0, 2.0, 3.0], False),  # a column with ndim=2
        ([1.0, 2.0, 3.0], [1.0, 2.0, 3.0], False),  # xlwings' flat list for a 1-D range
        ([[1.0, 2.0, 3.0]], [1.0, 2.0, 3.0], True),  # a row with ndim=2
        (((1.0,), (2.0,)), [1.0, 2.0], False),  # tuples, as COM hands them over
        (np.array([1.0, 2.0]), [1.0, 2.0], False),  # a nested sheetvol result
        (np.array([[1.0], [2.0]]), [1.0, 2.0], False),
        (5.0, [5.0], False),  # a single cell
    ],
)
def test_column_shapes(value, expected, horizontal):
    col = _convert.column(value, func="SV_X", param="prices")
    np.testing.assert_array_equal(col.values, expected)
    assert col.horizontal is horizontal


def test_two_column_block_is_refused_with_the_function_name_first():
    with pytest.raises(ArgumentError) as err:
        _convert.column([[1.0, 2.0], [3.0, 4.0], [5.0, 6.0]], func="SV_ATR", param="high")
    msg = str(err.value)
    assert msg.startswith("SV_ATR: high must be one column")
    assert "3 rows x 2 columns" in msg


def test_single_unwraps_one_cell_and_refuses_ranges():
    assert _convert.single([[14.0]], func="SV_ATR", param="period") == 14.0
    assert _convert.single([14.0], func="SV_ATR", param="period") == 14.0
    assert _convert.single("simple", func="SV_ATR", param="kind") == "simple"
    with pytest.raises(ArgumentError, match=r"^SV_ATR: period must be one cell"):
        _convert.single([[14.0], [15.0]], func="SV_ATR", param="period")


# -- cell values ------------------------------------------------------------------------
def test_blanks_errors_text_numbers_and_headers():
    # xlwings passes blank and error cells as None; the fill's reader gives error text.
    raw = [["Close"], [None], ["1,234.5"], [" 7 "], ["#N/A"], [2], [3.5], [None]]
    got = _convert.column(raw, func="SV_X", param="prices").values
    expected = [math.nan, math.nan, 1234.5, 7.0, math.nan, 2.0, 3.5, math.nan]
    np.testing.assert_array_equal(got, expected)


def test_decimal_comma_option():
    got = _convert.column([["1.234,5"], ["2,5"]], func="SV_X", param="p", decimal_comma=True)
    np.testing.assert_array_equal(got.values, [1234.5, 2.5])


@pytest.mark.parametrize("bad", ["abc", True, dt.datetime(2025, 1, 1)])
def test_non_numbers_among_numbers_are_refused_with_their_position(bad):
    with pytest.raises(ArgumentError) as err:
        _convert.column([[1.0], [bad], [2.0]], func="SV_DEVIATION", param="prices")
    assert str(err.value).startswith("SV_DEVIATION: prices item 2 is ")


@settings(max_examples=60, deadline=None)
@given(st.lists(st.one_of(st.none(), st.floats(allow_nan=False, allow_infinity=False, width=64),
                          st.integers(-10**6, 10**6),
                          st.floats(-1e6, 1e6).map(lambda x: f"{x:,.4f}")),
                min_size=1, max_size=40))
def test_vectorised_path_agrees_with_cell_by_cell(values):
    # Reference: sheetvol.functions.cells.to_number applied cell by cell (the rule for one cell).
    got = _convert.column([[v] for v in values], func="SV_X", param="p").values
    ref = np.array([cells.to_number(v) for v in values])
    np.testing.assert_array_equal(got, ref)


# -- dates -------------------------------------------------------------------------------
def test_day_numbers_from_datetimes_serials_and_text_agree():
    # 2025-01-01 is serial 45658 in the 1900 system (see module docstring).
    as_datetimes = [[dt.datetime(2025, 1, 1)], [dt.datetime(2025, 1, 2, 12)], [None]]
    as_serials = [[45658.0], [45659.5], [None]]
    as_text = [["2025-01-01"], ["2025-01-02 12:00"], [""]]
    expected = [45658.0, 45659.5, math.nan]
    for raw in (as_datetimes, as_serials, as_text):
        np.testing.assert_array_equal(
            _convert.day_numbers(raw, func="SV_X_ON", param="dates"), expected)


def test_dates_as_date_objects_and_a_header():
    got = _convert.day_numbers([["Date"], [dt.date(2025, 1, 1)], [dt.date(2025, 1, 2)]],
                               func="SV_X_ON", param="dates")
    np.testing.assert_array_equal(got, [math.nan, 45658.0, 45659.0])


def test_1904_serials_are_shifted_by_1462_days():
    # Serial 0 in the 1904 system is 1904-01-01, serial 1462 in the 1900 system.
    got = _convert.day_numbers([[0.0], [44196.0]], func="SV_X_ON", param="dates", date1904=True)
    np.testing.assert_array_equal(got, [1462.0, 45658.0])
    one = _convert.day_number(44196.0, func="SV_X_ON", param="date", date1904=True)
    assert one == 45658.0


def test_early_1900_serials_follow_the_fictitious_leap_day():
    # Serials 1..60 sit before the fictitious 1900-02-29; 61 is 1900-03-01. Day numbers
    # count real days, so 59 (1900-02-28) and 61 (1900-03-01) are one day apart.
    got = _convert.day_numbers([[59.0], [61.0]], func="SV_X_ON", param="dates")
    assert got[1] - got[0] == 1.0
    assert cells.serial_to_datetime(59.0) == dt.datetime(1900, 2, 28)


def test_date_argument_refuses_non_dates():
    with pytest.raises(ArgumentError, match=r"^SV_ATR_ON: date is 'soon', not a date"):
        _convert.day_number("soon", func="SV_ATR_ON", param="date")


# -- results ---------------------------------------------------------------------------------
def test_results_blank_as_none_not_nan():
    rows = _convert.to_cells(np.array([np.nan, 1.5, np.inf, 2.0]))
    assert rows == [[None], [1.5], [None], [2.0]]
    assert _convert.to_cells(np.array([np.nan, 1.0]), horizontal=True) == [[None, 1.0]]


def test_text_results_are_kept_and_cut_to_255():
    rows = _convert.to_cells(np.array(["stop", np.nan, "x" * 300], dtype=object))
    assert rows[0] == ["stop"] and rows[1] == [None]
    assert len(rows[2][0]) == 255


def test_to_cell():
    one = _convert.to_cell(np.float64(2.5))
    assert one == 2.5 and type(one) is float
    assert _convert.to_cell(float("nan")) is None
    assert _convert.to_cell("SV_SIZE: no risk budget") == "SV_SIZE: no risk budget"


def test_text_alone_is_not_taken_for_a_header():
    with pytest.raises(ArgumentError, match=r"^SV_X: prices item 1 is 'abc', not a number"):
        _convert.column("abc", func="SV_X", param="prices")
    with pytest.raises(ArgumentError, match=r"^SV_X_ON: dates item 1 is 'Date', not a date"):
        _convert.day_numbers([["Date"], [None]], func="SV_X_ON", param="dates")


@settings(max_examples=40, deadline=None)
@given(st.lists(st.one_of(st.none(), st.datetimes(dt.datetime(1900, 3, 1),
                                                  dt.datetime(9999, 12, 31))),
                min_size=1, max_size=30))
def test_vectorised_dates_agree_with_cell_by_cell(values):
    # Reference: sheetvol.functions.cells.datetime_to_serial applied cell by cell (the rule for one
    # cell); the column path converts all datetimes at once through pandas.
    got = _convert.day_numbers([[v] for v in values], func="SV_X_ON", param="dates")
    ref = [math.nan if v is None else cells.datetime_to_serial(v) for v in values]
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9)


# -- parts of a range (what _LAST and _ON read of a window function) ---------------------------
@pytest.mark.parametrize(
    ("value", "length", "part"),
    [
        ([[1.0], [2.0], [3.0]], 3, [[2.0], [3.0]]),  # a column with ndim=2
        ([1.0, 2.0, 3.0], 3, [2.0, 3.0]),  # a flat list
        ([[1.0, 2.0, 3.0]], 3, [[2.0, 3.0]]),  # a row
        (np.array([[1.0], [2.0], [3.0]]), 3, np.array([2.0, 3.0])),  # a nested result
        (5.0, 1, []),  # a single cell
    ],
)
def test_line_length_and_slice(value, length, part):
    assert _convert.line_length(value, func="SV_X", param="p") == length
    got = _convert.line_slice(value, 1, 3)
    if isinstance(part, np.ndarray):
        np.testing.assert_array_equal(got, part)
    else:
        assert got == part


def test_line_length_refuses_a_block_with_its_whole_size():
    with pytest.raises(ArgumentError, match=r"^SV_ATR: high must be one column .* 3 rows x 2"):
        _convert.line_length([[1.0, 2.0]] * 3, func="SV_ATR", param="high")


def test_a_part_below_the_top_counts_items_from_its_place_and_holds_no_header():
    # Cells 101.. of a range: a message names the item's place in the whole range, and
    # text before the part's first number is not a header (only the top can hold one).
    with pytest.raises(ArgumentError, match=r"^SV_X: prices item 102 is 'x', not a number"):
        _convert.column([[1.0], ["x"]], func="SV_X", param="prices", first_item=100)
    with pytest.raises(ArgumentError, match=r"^SV_X: prices item 101 is 'Close'"):
        _convert.column([["Close"], [1.0]], func="SV_X", param="prices", first_item=100)
    top = _convert.column([["Close"], [1.0]], func="SV_X", param="prices").values
    np.testing.assert_array_equal(top, [math.nan, 1.0])


def test_ragged_rows_with_empty_ones_read_as_blanks():
    # Not what a spreadsheet passes, but a Python caller might: an empty row is a blank.
    got = _convert.column([[1.0], [], [2.0]], func="SV_X", param="prices").values
    np.testing.assert_array_equal(got, [1.0, math.nan, 2.0])


# -- ranges taller than their data, COM error cells, COM dates ----------------------------
def _naive_height(cells_: list[object]) -> int:
    # Reference: walk up from the bottom to the first cell that is not None or "".
    for i in range(len(cells_) - 1, -1, -1):
        if cells_[i] is not None and cells_[i] != "":
            return i + 1
    return 0


def test_whole_column_is_cut_below_its_last_value():
    # A whole-column reference (C:C) holds 1,048,576 cells: 1 header, 100 prices, blanks.
    col = (("Close",),) + tuple((100.0 + i,) for i in range(100)) + ((None,),) * (1_048_576 - 101)
    assert _convert.data_height(col) == 101
    # Blank cells inside the data are kept (they are gaps); only the tail goes.
    assert _convert.data_height([[1.0], [None], [2.0], [""], [None]]) == 3
    assert _convert.data_height([1.0, None, None]) == 1  # a flat list
    assert _convert.data_height([[1.0, None, 2.0, None]]) == 3  # a row
    # A nested result's NaN rows are "no value" (#N/A on the sheet), not blank cells.
    assert _convert.data_height(np.array([[1.0], [np.nan]])) == 2
    assert _convert.data_height(np.array([1.0, None, ""], dtype=object)) == 1
    assert _convert.data_height(((None,),) * 5) == 0
    assert _convert.data_height(7.0) == 1 and _convert.data_height(None) == 0
    # Blocks: a row counts as blank only when all its cells are.
    assert _convert.data_height(((1.0, 2.0), (None, 3.0), (None, None))) == 2


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from([None, None, None, "", 1.5, "x"]), max_size=400),
       st.integers(0, 3000))
def test_data_height_agrees_with_walking_up_from_the_bottom(cells_, tail):
    cells_ = cells_ + [None] * tail
    expected = _naive_height(cells_)
    assert _convert.data_height(cells_) == expected
    assert _convert.data_height(tuple((c,) for c in cells_)) == expected
    assert _convert.data_height([[c] for c in cells_]) == expected
    assert _convert.head(tuple((c,) for c in cells_), expected) == tuple(
        (c,) for c in cells_[:expected])
    # The one-walk form for the calls: the same height, and cells a column reads alike.
    rows = tuple((c,) for c in cells_)
    ready, height = _convert.cut_to_data(rows)
    assert height == expected
    assert list(_convert.line_values(ready, "SV_X", "prices")[0]) == cells_


def test_cut_to_data_keeps_ragged_and_exact_ranges_as_they_came():
    exact = ((1.0,), (2.0,))
    assert _convert.cut_to_data(exact) == (exact, 2)
    # An empty row (not from a spreadsheet) is judged as rows compared with a blank row.
    ragged = ((1.0,), (), (None,))
    assert _convert.cut_to_data(ragged) == (ragged, 2)


def test_com_error_cells_are_gaps_and_whole_numbers_stay_numbers():
    # pywin32 hands an error cell over as an int: #N/A is 0x800A07FA = -2146826246 and
    # #DIV/0! -2146826281 (xlwings._xlwindows.cell_errors lists the same numbers).
    na, div0 = -2146826246, -2146826281
    got = _convert.column(((1.5,), (na,), (div0,), (2.0,)), func="SV_X", param="prices")
    np.testing.assert_array_equal(got.values, [1.5, np.nan, np.nan, 2.0])
    # Among text numbers (the cell-by-cell path) too.
    got = _convert.column(((1.5,), (na,), ("2.5",)), func="SV_X", param="prices")
    np.testing.assert_array_equal(got.values, [1.5, np.nan, 2.5])
    # A whole number typed by a Python caller is a price, not an error.
    np.testing.assert_array_equal(
        _convert.column([100, 101], func="SV_X", param="prices").values, [100.0, 101.0])
    days = _convert.day_numbers(((45658.0,), (na,)), func="SV_X_ON", param="dates")
    np.testing.assert_array_equal(days, [45658.0, np.nan])


class _ComTime(dt.datetime):
    """Shaped like pywin32's datetime: a datetime subclass carrying a UTC time zone."""


def test_com_datetimes_read_as_their_wall_clock_date():
    # 2025-01-02 is serial 45659 (module docstring); the UTC zone must not shift it.
    utc = dt.timezone.utc
    col = ((_ComTime(2025, 1, 2, tzinfo=utc),), (None,), (_ComTime(2025, 1, 3, 12, tzinfo=utc),))
    days = _convert.day_numbers(col, func="SV_X_ON", param="dates")
    np.testing.assert_array_equal(days, [45659.0, np.nan, 45660.5])
    assert _convert.day_number(_ComTime(2025, 1, 2, tzinfo=utc), func="SV_X_ON",
                               param="date") == 45659.0


def test_an_empty_one_cell_range_is_a_missing_argument():
    for v in (None, [[None]], ((None,),), [None], "", [[""]]):
        assert _convert.is_empty_cell(v), v
    for v in ([[1.0]], [[None], [None]], np.array([np.nan]), 0.0):
        assert not _convert.is_empty_cell(v), v


def test_a_header_above_plain_numbers_reads_like_cell_by_cell():
    # The vectorised path below a header must give what reading each cell gives: the
    # header blank, error cells blank, text numbers in the header block read as numbers.
    cells_ = [("Close",), ("note",), (1.5,), (None,), (-2146826246,), (2.0,)]
    got = _convert.column(tuple(cells_), func="SV_X", param="prices").values
    np.testing.assert_array_equal(got, [np.nan, np.nan, 1.5, np.nan, np.nan, 2.0])
    got = _convert.column((("1.25",), (2.0,)), func="SV_X", param="prices").values
    np.testing.assert_array_equal(got, [1.25, 2.0])
    with pytest.raises(ArgumentError, match=r"prices item 1 is 'Close', not a number"):
        _convert.column((("Close",), (None,)), func="SV_X", param="prices")
    days = _convert.day_numbers((("Date",), ("2025-01-02",), (dt.datetime(2025, 1, 3),)),
                                func="SV_X_ON", param="dates")
    np.testing.assert_array_equal(days, [np.nan, 45659.0, 45660.0])  # serials: module doc
    days = _convert.day_numbers((("Date",), (45659.0,)), func="SV_X_ON", param="dates")
    np.testing.assert_array_equal(days, [np.nan, 45659.0])


def test_currency_cells_from_com_are_numbers():
    # pywin32 returns a cell formatted as currency (VT_CY) as decimal.Decimal.
    from decimal import Decimal

    got = _convert.column(((Decimal("101.25"),), (None,), (102.5,)), func="SV_X",
                          param="prices").values
    np.testing.assert_array_equal(got, [101.25, np.nan, 102.5])
    got = _convert.column(((Decimal("101.25"),), ("102.5",)), func="SV_X", param="prices")
    np.testing.assert_array_equal(got.values, [101.25, 102.5])
