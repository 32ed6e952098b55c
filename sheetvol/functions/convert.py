"""Worksheet arguments as the add-in and the formula evaluator receive them, made usable.

Both faces hand us what a spreadsheet holds: a scalar for one cell, a flat
list for a one-dimensional range (xlwings without ``ndim=2``), a list of rows
for a block, a numpy array for the result of a nested sheetvol call, ``None``
for blank and error cells, text numbers, datetimes or date serial numbers.
This module turns those into what the registry wants: one float column per
``series`` argument (NaN for blanks), day numbers for ``dates`` and ``date``,
and a single value for every option. Cell-level rules (what counts as blank,
how text numbers are read) are :mod:`sheetvol.functions.cells`; this module only adds
the shape handling and a vectorised fast path for big ranges.
"""

from __future__ import annotations

import datetime as dt
import decimal
import math
import operator
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from sheetvol.core._types import FloatArray
from sheetvol.functions import cells
from sheetvol.functions.registry import ArgumentError

# Types that np.array(..., dtype=float64) turns into the right float without surprises
# (None becomes NaN). bool is deliberately absent: TRUE must not become a price of 1.0.
# Decimal: pywin32 hands over a cell formatted as currency (VT_CY) as a decimal.Decimal.
_PLAIN = frozenset({float, int, type(None), np.float64, decimal.Decimal})
# Error cells as the Windows COM layer hands them over: pywin32 turns a VT_ERROR value
# into an int, 0x800A0000 + the spreadsheet's error number (2000 #NULL!, 2007 #DIV/0!,
# 2015 #VALUE!, 2023 #REF!, 2029 #NAME?, 2036 #NUM!, 2042 #N/A; newer ones such as
# #SPILL! follow). Cell numbers come over as floats, so an int in this range is an error
# cell, read as a gap like the blank that xlwings' own cleaning would have made of it.
_COM_ERROR_BASE = -2146828288  # 0x800A0000 as a signed 32-bit number
COM_ERRORS = range(_COM_ERROR_BASE + 2000, _COM_ERROR_BASE + 2100)
COM_NA = _COM_ERROR_BASE + 2042  # #N/A
_COM_ERROR_NAMES = {2000: "#NULL!", 2007: "#DIV/0!", 2015: "#VALUE!", 2023: "#REF!",
                    2029: "#NAME?", 2036: "#NUM!", 2042: "#N/A"}


def com_error_name(code: int) -> str:
    """The spreadsheet's name of a COM error cell.

    Examples
    --------
    >>> com_error_name(-2146826246)
    '#N/A'
    """
    return _COM_ERROR_NAMES.get(code - _COM_ERROR_BASE, "an error value")
_FIRST = operator.itemgetter(0)
_EPOCH_US = int(np.datetime64(cells.EPOCH_1900, "us").astype(np.int64))
_US_PER_DAY = 86_400_000_000.0


@dataclass(frozen=True)
class Column:
    """One converted column argument and how it was laid out in the sheet."""

    values: FloatArray
    horizontal: bool = False  # True when the user gave a row rather than a column


def as_grid(value: Any) -> list[list[Any]] | None:
    """Return a range value as a list of rows, or None when it is a single value.

    Parameters
    ----------
    value : Any
        A scalar, a flat list (one-dimensional range), a list of rows, a tuple
        or a numpy array.

    Returns
    -------
    list of list or None
        Rows of cells; a flat list becomes one column.

    Examples
    --------
    >>> as_grid([1.0, 2.0])
    [[1.0], [2.0]]
    >>> as_grid(3.0) is None
    True
    """
    if isinstance(value, np.ndarray):
        if value.ndim == 0:
            return None
        if value.ndim == 1:
            return value.reshape(-1, 1).tolist()
        return value.tolist()
    if isinstance(value, (list, tuple)):
        if not value:
            return []
        if isinstance(value[0], (list, tuple)):
            return [list(r) for r in value]
        return [[v] for v in value]
    return None


def single(value: Any, *, func: str, param: str) -> Any:
    """Return the one value of an option argument (a single cell or literal).

    A 1x1 block is unwrapped; anything larger is refused with a message naming
    the function and argument.

    Examples
    --------
    >>> single([[14.0]], func="SV_ATR", param="period")
    14.0
    """
    if isinstance(value, np.ndarray) and value.size == 1:
        return value.reshape(-1)[0].item()
    grid = as_grid(value)
    if grid is None:
        return value
    if len(grid) == 1 and len(grid[0]) == 1:
        return grid[0][0]
    rows, cols = len(grid), (len(grid[0]) if grid else 0)
    raise ArgumentError(
        f"{func}: {param} must be one cell or a value, got a range of {rows} x {cols} cells"
    )


def _block_error(func: str, param: str, rows: int, width: int) -> ArgumentError:
    return ArgumentError(
        f"{func}: {param} must be one column (or one row), got a block of "
        f"{rows} rows x {width} columns; select a single column"
    )


def line_values(value: Any, func: str, param: str) -> tuple[list[Any] | np.ndarray, bool]:
    """Flatten a column or row argument; refuse blocks wider than one column."""
    if isinstance(value, np.ndarray):
        if value.ndim <= 1:
            return value.reshape(-1), False
        if value.ndim == 2 and 1 in value.shape:
            return value.reshape(-1), value.shape[0] == 1 and value.shape[1] > 1
        raise ArgumentError(f"{func}: {param} must be one column, got a block of shape "
                            f"{value.shape}")
    if not isinstance(value, (list, tuple)):
        return [value], False
    if not value:
        return [], False
    if not isinstance(value[0], (list, tuple)):
        return list(value), False  # a flat list: xlwings' form of a one-dimensional range
    if len(value) == 1:
        return list(value[0]), len(value[0]) > 1
    if len(value[0]) == 1 and len(value[-1]) == 1:
        # Spreadsheet ranges are rectangular, so the first and last rows tell the width;
        # checking every row's width cost as much as converting the column.
        try:
            return list(map(_FIRST, value)), False
        except IndexError:
            pass  # ragged rows (not from a spreadsheet): judged row by row below
    widths = set(map(len, value))
    width = max(widths)
    if width <= 1:  # ragged rows with empty ones: treat empty as blank
        return [r[0] if r else None for r in value], False
    raise _block_error(func, param, len(value), width)


def line_length(value: Any, *, func: str, param: str) -> int:
    """Number of cells in a column (or row) argument, without converting them.

    Only the shape is looked at (the first and last rows of a list of rows),
    so this costs nothing on big ranges; a block wider than one column is
    refused as :func:`column` refuses it.

    Examples
    --------
    >>> line_length([[1.0], [2.0], [None]], func="SV_X", param="prices")
    3
    >>> line_length([[1.0, 2.0, 3.0]], func="SV_X", param="prices")
    3
    """
    if isinstance(value, np.ndarray):
        if value.ndim > 2 or (value.ndim == 2 and 1 not in value.shape):
            line_values(value, func, param)  # raises
        return int(value.size)
    if not isinstance(value, (list, tuple)):
        return 1
    if not value or not isinstance(value[0], (list, tuple)):
        return len(value)
    if len(value) == 1:
        return len(value[0])
    width = max(len(value[0]), len(value[-1]))
    if width > 1:
        raise _block_error(func, param, len(value), width)
    return len(value)


def line_slice(value: Any, start: int, stop: int) -> Any:
    """Cells ``start`` to ``stop - 1`` of a column (or row) argument, in the same layout.

    Examples
    --------
    >>> line_slice([[1.0], [2.0], [3.0]], 1, 3)
    [[2.0], [3.0]]
    >>> line_slice([[1.0, 2.0, 3.0]], 2, 3)
    [[3.0]]
    """
    if isinstance(value, np.ndarray):
        return value.reshape(-1)[start:stop]
    if not isinstance(value, (list, tuple)):
        return [value][start:stop]
    if len(value) == 1 and isinstance(value[0], (list, tuple)):
        return [list(value[0][start:stop])]
    return value[start:stop]


_BLANK_CELLS = (None, "")


def data_height(value: Any) -> int:
    """Cells of a column (or row) argument down to its last non-blank one.

    The one rule for ranges taller than their data (a whole-column reference
    such as ``C:C`` arrives as 1,048,576 cells): trailing blank cells (empty,
    or empty text) carry no bar, so a result stops where the data stops.
    Blocks are judged by whole rows. The common case, a last cell that is not
    blank, costs nothing; otherwise the blank tail is counted once, slice by
    slice, without a Python loop over the cells.

    Parameters
    ----------
    value : Any
        A column or row argument as :func:`column` takes it.

    Returns
    -------
    int
        Number of leading cells to keep (0 when every cell is blank).

    Examples
    --------
    >>> data_height(((1.0,), (None,), (2.0,), (None,), (None,)))
    3
    >>> data_height([[1.0, 2.0, None]])
    2
    >>> data_height(np.array([1.0, np.nan]))  # a nested result keeps its rows
    2
    """
    if isinstance(value, np.ndarray):
        # A nested result: its NaN rows are values shown as "no value", not blank cells
        # (the spreadsheet passes them back as #N/A), so only None and "" count.
        flat = value.reshape(-1)
        if flat.dtype != object:
            return int(flat.size)
        filled = np.flatnonzero([v is not None and v != "" for v in flat.tolist()])
        return int(filled[-1]) + 1 if filled.size else 0
    if not isinstance(value, (list, tuple)):
        return 0 if value in _BLANK_CELLS else 1
    if not value:
        return 0
    first = value[0]
    if isinstance(first, (list, tuple)):
        if len(value) == 1:  # one row: its cells
            return _filled_length(first, _BLANK_CELLS)
        last = value[-1]
        width = len(last)
        if last[0] not in _BLANK_CELLS:
            return len(value)
        if width == 1 and len(first) == 1:
            return cut_to_data(value)[1]
        return _rows_height(value)
    return _filled_length(value, _BLANK_CELLS)


def cut_to_data(value: Any) -> tuple[Any, int]:
    """A column argument ready for :func:`column`, and its :func:`data_height`.

    A one-column range whose last cell is blank (a whole-column reference) is
    walked once: its cells are taken out of their rows into a flat list, which
    is counted for the height (a blank is the None object itself, cheaper to
    count than rows compared with a blank row) and returned in place of the
    rows, so the conversion does not walk the rows again. Anything else comes
    back as it was, with :func:`data_height`.

    Examples
    --------
    >>> cut_to_data(((1.0,), (None,), (2.0,), (None,)))
    ([1.0, None, 2.0, None], 3)
    >>> cut_to_data(((1.0,), (2.0,)))
    (((1.0,), (2.0,)), 2)
    """
    if (isinstance(value, (list, tuple)) and len(value) > 1
            and isinstance(value[0], (list, tuple)) and isinstance(value[-1], (list, tuple))
            and len(value[0]) == 1 and len(value[-1]) == 1
            and value[-1][0] in _BLANK_CELLS):
        try:
            flat = list(map(_FIRST, value))
        except IndexError:  # ragged rows (not from a spreadsheet)
            return value, _rows_height(value)
        return flat, _filled_length(flat, _BLANK_CELLS)
    return value, data_height(value)


def _rows_height(rows: Any) -> int:
    # Rows compared with a blank row as wide as the last one.
    last = rows[-1]
    blank_rows = tuple(type(last)((b,) * len(last)) for b in _BLANK_CELLS)
    return _filled_length(rows, blank_rows)


def _filled_length(seq: Sequence[Any], blanks: tuple[Any, ...]) -> int:
    end = len(seq)
    if end == 0 or seq[-1] not in blanks:
        return end

    def all_blank(start: int, stop: int) -> bool:
        part = seq[start:stop]
        left = len(part)
        for b in blanks:  # mostly the first kind of blank alone settles it
            left -= part.count(b)
            if left == 0:
                return True
        return False

    # Upwards in slices (growing to 65,536 cells) until one holds a value: the blank tail
    # is counted once, then only the one slice holding the last value is halved.
    size = 64
    while True:
        start = max(0, end - size)
        if not all_blank(start, end):
            break
        if start == 0:
            return 0
        end, size = start, min(size * 2, 65_536)
    while end - start > 64:  # halve: seq[end:] stays blank, seq[start:end] holds a value
        mid = (start + end) // 2
        if all_blank(mid, end):
            end = mid
        else:
            start = mid
    for i in range(end - 1, start - 1, -1):
        if seq[i] not in blanks:
            return i + 1
    return start  # pragma: no cover - the slice held a non-blank cell


def head(value: Any, height: int) -> Any:
    """The first ``height`` cells of a column (or row) argument, in the same layout.

    Examples
    --------
    >>> head(((1.0,), (2.0,), (None,)), 2)
    ((1.0,), (2.0,))
    >>> head([[1.0, 2.0, None]], 2)
    [[1.0, 2.0]]
    """
    if isinstance(value, np.ndarray):
        if value.ndim == 2 and value.shape[0] == 1:
            return value[:, :height]
        return value[:height]
    if not isinstance(value, (list, tuple)):
        return value
    # taken before the length test, which narrows a tuple's type to one item
    kind: type[list[Any]] | type[tuple[Any, ...]] = type(value)
    if len(value) == 1 and isinstance(value[0], (list, tuple)) and height:
        return kind([value[0][:height]])
    return value[:height]


def is_empty_cell(value: Any) -> bool:
    """True for an omitted argument and for a range of one empty cell.

    The two cannot be told apart on every path (the in-Excel runtime passes
    both as nothing), so sheetvol treats them alike everywhere: a missing
    argument.

    Examples
    --------
    >>> is_empty_cell(None), is_empty_cell([[None]]), is_empty_cell([[1.0]])
    (True, True, False)
    """
    if isinstance(value, np.ndarray):
        return False
    while isinstance(value, (list, tuple)) and len(value) == 1:
        value = value[0]
    return value is None or (isinstance(value, str) and value == "")


def column(
    value: Any, *, func: str, param: str, decimal_comma: bool = False, first_item: int = 0
) -> Column:
    """Convert a ``series`` argument to a float column (NaN for blanks).

    Numbers, blanks and error cells (which xlwings passes as None) take a
    vectorised path. Text numbers are read as numbers. Text above the first
    number (a header caught in the range, e.g. a whole-column reference) is
    treated as blank; other text, true/false values and dates are refused with
    the row that holds them.

    Parameters
    ----------
    value : Any
        What the spreadsheet passed for the argument.
    func, param : str
        Function and argument names, for messages.
    decimal_comma : bool
        Read text numbers with a decimal comma.
    first_item : int
        Position of ``value``'s first cell in the whole range, when ``value``
        is a part of it (:func:`line_slice`): messages count from there, and
        only a part starting at the top can hold a header.

    Returns
    -------
    Column
        The float values and whether the range was a row.

    Examples
    --------
    >>> column([[1.0], [None], ["2.5"]], func="SV_X", param="prices").values
    array([1. , nan, 2.5])
    """
    if value is None:
        raise ArgumentError(f"{func}: {param} is required (a column of numbers)")
    flat, horizontal = line_values(value, func, param)
    if isinstance(flat, np.ndarray) and flat.dtype.kind in "fiu":
        return Column(flat.astype(np.float64, copy=False), horizontal)
    if isinstance(flat, np.ndarray):
        flat = flat.tolist()
    # Text cells at the top (a header caught by a whole-column reference) are read one by
    # one; the cells below them take the vectorised path when they are plain numbers.
    top = 0
    while top < len(flat) and type(flat[top]) is str:
        top += 1
    rest = flat[top:] if top else flat
    kinds = set(map(type, rest))
    if not kinds <= _PLAIN:
        out, seen_number, header = _read_cells(flat, func, param, decimal_comma, first_item)
    else:
        out = np.array(rest, dtype=np.float64)
        if int in kinds:
            _blank_com_errors(rest, out)
        if not top:
            return Column(out, horizontal)
        head, seen_number, header = _read_cells(flat[:top], func, param, decimal_comma,
                                                first_item)
        seen_number = seen_number or not np.isnan(out).all()
        out = np.concatenate([head, out])
    if header is not None and not seen_number:
        raise ArgumentError(
            f"{func}: {param} item {header + 1} is {_show(flat[header])}, not a number"
        )
    return Column(out, horizontal)


def _read_cells(
    flat: Sequence[Any], func: str, param: str, decimal_comma: bool, first_item: int
) -> tuple[FloatArray, bool, int | None]:
    """Cell by cell: the values, whether a number was seen, and the first header cell."""
    out = np.empty(len(flat), dtype=np.float64)
    seen_number = False
    header: int | None = None
    for i, v in enumerate(flat):
        if type(v) in _PLAIN:
            out[i] = math.nan if v is None or (type(v) is int and v in COM_ERRORS) else float(v)
            seen_number = seen_number or v is not None
            continue
        try:
            out[i] = cells.to_number(v, decimal_comma=decimal_comma)
        except cells.CellValueError:
            if isinstance(v, str) and not seen_number and first_item == 0:
                out[i] = math.nan  # a header above the numbers
                header = i if header is None else header
                continue
            raise ArgumentError(
                f"{func}: {param} item {first_item + i + 1} is {_show(v)}, not a number"
            ) from None
        seen_number = seen_number or not math.isnan(out[i])
    return out, seen_number, header


def _blank_com_errors(flat: Sequence[Any], out: FloatArray) -> None:
    # Only ints can be COM error cells; a column of floats never pays for this loop.
    for i, v in enumerate(flat):
        if type(v) is int and v in COM_ERRORS:
            out[i] = math.nan


def day_numbers(value: Any, *, func: str, param: str, date1904: bool = False) -> FloatArray:
    """Convert a ``dates`` argument to day numbers (1900-system serials, NaN for blanks).

    Accepts datetimes, date serial numbers (dynamic-array results arrive as
    serials), and dates written as text. Text above the first date (a header)
    counts as blank.

    Examples
    --------
    >>> day_numbers([[dt.datetime(2025, 1, 2)], [45660.0]], func="SV_X_ON", param="dates")
    array([45659., 45660.])
    """
    out = _day_numbers(value, func=func, param=param, date1904=date1904)
    # Serials pass through unchecked on the fast paths: one outside a worksheet's dates
    # (0 to 9999-12-31) is refused here, by item.
    with np.errstate(invalid="ignore"):
        wrong = np.flatnonzero((out < 0) | (out >= cells.LAST_SERIAL + 1))
    if wrong.size:
        item = int(wrong[0])
        flat, _ = line_values(value, func, param)
        raise ArgumentError(f"{func}: {param} item {item + 1} is {_show(flat[item])}, not a "
                            f"date a worksheet can hold (day numbers 0 to "
                            f"{cells.LAST_SERIAL:,})")
    return out


def _day_numbers(value: Any, *, func: str, param: str, date1904: bool) -> FloatArray:
    if value is None:
        raise ArgumentError(f"{func}: {param} is required (a column of dates)")
    flat, _ = line_values(value, func, param)
    if isinstance(flat, np.ndarray):
        if flat.dtype.kind in "fiu":
            out = flat.astype(np.float64)
            return out + cells.DATE_1904_OFFSET if date1904 else _fix_1900(out)
        flat = flat.tolist()
    top = 0  # text cells at the top: a header, or dates typed as text
    while top < len(flat) and type(flat[top]) is str:
        top += 1
    fast = _days_at_once(flat[top:] if top else flat, date1904)
    if fast is None:
        out, seen, header = _read_days(flat, func, param, date1904)
    elif not top:
        return fast
    else:
        head, seen, header = _read_days(flat[:top], func, param, date1904)
        seen = seen or bool(np.isfinite(fast).any())
        out = np.concatenate([head, fast])
    if header is not None and not seen:
        raise ArgumentError(f"{func}: {param} item {header + 1} is {_show(flat[header])}, "
                            "not a date")
    return out


def _days_at_once(flat: list[Any], date1904: bool) -> FloatArray | None:
    """Day numbers of serials or date objects in one pass; None when cells are mixed."""
    kinds = set(map(type, flat))
    if kinds <= _PLAIN:
        out = np.array(flat, dtype=np.float64)
        if int in kinds:
            _blank_com_errors(flat, out)
        return out + cells.DATE_1904_OFFSET if date1904 else _fix_1900(out)
    if not all(k is type(None) or issubclass(k, (dt.date, pd.Timestamp)) for k in kinds):
        return None
    midnight = _midnight_days(flat, kinds)
    if midnight is not None:  # dates of daily bars: no pandas needed
        return midnight
    # Any date or datetime type, also pywin32's own datetime (a subclass carrying a UTC
    # time zone): pandas reads them all; the wall-clock time is kept below.
    try:
        stamps = pd.DatetimeIndex(flat)
    except (TypeError, ValueError):
        return None  # e.g. mixed time zones: one cell at a time
    if stamps.tz is not None:
        stamps = stamps.tz_localize(None)
    # Integer microseconds since the epoch, then one numpy division: cheaper than pandas'
    # own timedelta arithmetic (NaT, from None, becomes NaN).
    micros = stamps.as_unit("us").asi8
    days = (micros - _EPOCH_US) / _US_PER_DAY
    days[stamps.isna()] = math.nan
    return days


_MIDNIGHT = dt.time()
_PANDAS_TIMES = (pd.Timestamp, type(pd.NaT))
_EPOCH_ORDINAL = cells.EPOCH_1900.toordinal()


def _midnight_days(flat: list[Any], kinds: set[type]) -> FloatArray | None:
    """Day numbers of dates, or of datetimes that all fall on midnight; None otherwise.

    Daily bars carry no time of day, so their day number is the wall-clock date's
    ordinal less the epoch's, the same whole number the general path reaches through
    microseconds (any time zone is left aside there too). Blanks (None) give NaN.
    """
    dated = kinds - {type(None)}
    if not dated or any(issubclass(k, _PANDAS_TIMES) for k in dated):
        return None  # pandas' own (NaT is a datetime too, with no date in it): pandas reads them
    if not all(issubclass(k, dt.datetime) for k in dated) and dated != {dt.date}:
        return None  # dates mixed with datetimes: the general path
    present = [v for v in flat if v is not None] if type(None) in kinds else flat
    if dt.date not in dated and set(map(dt.datetime.time, present)) != {_MIDNIGHT}:
        return None  # a time of day: the general path
    days = np.fromiter(map(dt.date.toordinal, present), np.float64, len(present))
    days -= _EPOCH_ORDINAL
    if len(present) == len(flat):
        return days
    out = np.full(len(flat), math.nan)
    out[[i for i, v in enumerate(flat) if v is not None]] = days
    return out


def _read_days(
    flat: Sequence[Any], func: str, param: str, date1904: bool
) -> tuple[FloatArray, bool, int | None]:
    """Cell by cell: day numbers, whether a date was seen, and the first header cell."""
    out = np.empty(len(flat), dtype=np.float64)
    seen = False
    header: int | None = None
    for i, v in enumerate(flat):
        if type(v) is int and v in COM_ERRORS:
            out[i] = math.nan
            continue
        try:
            when = cells.to_datetime(v, date1904=date1904)
        except cells.CellValueError:
            if isinstance(v, str) and not seen:
                out[i] = math.nan
                header = i if header is None else header
                continue
            raise ArgumentError(f"{func}: {param} item {i + 1} is {_show(v)}, not a date") from None
        out[i] = math.nan if when is None else cells.datetime_to_serial(when)
        seen = seen or when is not None
    return out, seen, header


def day_number(value: Any, *, func: str, param: str, date1904: bool = False) -> float:
    """Convert a ``date`` argument (one cell) to a day number.

    Examples
    --------
    >>> day_number("2025-01-02", func="SV_X_ON", param="date")
    45659.0
    """
    v = single(value, func=func, param=param)
    if type(v) is int and v in COM_ERRORS:
        v = None  # an error cell holds no date
    try:
        when = cells.to_datetime(v, date1904=date1904)
    except cells.CellValueError:
        raise ArgumentError(f"{func}: {param} is {_show(v)}, not a date") from None
    if when is None:
        raise ArgumentError(f"{func}: {param} is required (a date)")
    return cells.datetime_to_serial(when)


def _fix_1900(serials: FloatArray) -> FloatArray:
    # Serials below 61 sit before the 1900 system's fictitious Feb 29; shift them as
    # cells.serial_to_datetime does so that day numbers stay one per real day.
    low = serials < 61
    if low.any():
        serials = serials.copy()
        serials[low] += 1.0
    return serials


def _show(v: Any) -> str:
    text = repr(v) if isinstance(v, str) else str(v)
    return text if len(text) <= 40 else text[:37] + "..."


def to_cells(
    values: FloatArray | Sequence[float], *, horizontal: bool = False, blank: Any = None
) -> list[list[Any]]:
    """Turn a result column into rows for the spreadsheet, ``blank`` where there is no value.

    NaN and inf (warm-up rows, gaps) become ``blank``; the add-in passes the
    marker its spreadsheet path shows as "no value" (see :mod:`sheetvol.addin`).

    Examples
    --------
    >>> to_cells(np.array([np.nan, 1.5]))
    [[None], [1.5]]
    >>> to_cells(np.array([np.nan, 1.5]), horizontal=True, blank="#N/A")
    [['#N/A', 1.5]]
    """
    raw = np.asarray(values)
    if raw.dtype == object:  # mixed text and numbers (e.g. trade outcomes)
        cells_ = [to_cell(v) for v in raw.reshape(-1).tolist()]
        cells_ = [blank if v is None else v for v in cells_]
        return [cells_] if horizontal else [[v] for v in cells_]
    arr = raw.astype(np.float64).reshape(-1)
    bad = np.flatnonzero(~np.isfinite(arr)).tolist()
    if horizontal:
        row = arr.tolist()
        for i in bad:
            row[i] = blank
        return [row]
    rows = arr.reshape(-1, 1).tolist()
    for i in bad:
        rows[i][0] = blank
    return rows


def to_cell(value: Any) -> Any:
    """One result value for a cell: NaN and inf become None, numpy scalars plain floats,
    text cut to the 255 characters a returned array can hold."""
    if value is None:
        return None
    if isinstance(value, str):
        return value if len(value) <= 255 else value[:252] + "..."
    if isinstance(value, (np.floating, float, int, np.integer)) and not isinstance(value, bool):
        f = float(value)
        return f if math.isfinite(f) else None
    return value
