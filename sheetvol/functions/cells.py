"""Turning spreadsheet cell values into numbers and dates, at the edge.

Kernels only ever see float arrays with NaN for blanks. Everything a cell can
hold on the way in (None, empty or whitespace text, error text such as
``#N/A``, numbers stored as text with thousands separators or a decimal comma,
booleans, datetimes, date serial numbers) is converted here, once, for the
add-in, the formula evaluator and the fill alike.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Iterable
from typing import Any, overload

import numpy as np

from sheetvol.core._types import FloatArray
from sheetvol.functions._lazy import pandas as pd

ERROR_TEXTS = frozenset(
    {
        "#N/A",
        "#NULL!",
        "#DIV/0!",
        "#VALUE!",
        "#REF!",
        "#NAME?",
        "#NUM!",
        "#GETTING_DATA",
        "#SPILL!",
        "#CALC!",
        "#FIELD!",
        "#BLOCKED!",
        "#UNKNOWN!",
        "#BUSY!",
        "#CONNECT!",
    }
)
BLANK_TEXTS = frozenset({"", "-", "--", "n/a", "na", "nan", "null", "none"})

EPOCH_1900 = dt.datetime(1899, 12, 30)
#: A worksheet's first date (day 1 of the 1900 system): an earlier one cannot be stored.
FIRST_DATE = dt.datetime(1900, 1, 1)
EPOCH_1904 = dt.datetime(1904, 1, 1)
#: Days between the two date systems: a 1904-system serial plus this is the 1900-system one.
DATE_1904_OFFSET = float((EPOCH_1904 - EPOCH_1900).days)
#: Day number of a worksheet's last date, 9999-12-31, in the 1900 and 1904 systems.
LAST_SERIAL = 2_958_465
LAST_SERIAL_1904 = LAST_SERIAL - int(DATE_1904_OFFSET)

NUMBER_TEXT = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
# Numbers with thousands separators: groups of exactly three digits (key: decimal comma).
_GROUPED = {
    False: re.compile(r"^[+-]?\d{1,3}(,\d{3})+(\.\d*)?$"),
    True: re.compile(r"^[+-]?\d{1,3}(\.\d{3})+(,\d*)?$"),
}


class CellValueError(ValueError):
    """A cell value that is not blank but cannot be read as what is needed."""


class EarlyDateError(CellValueError):
    """A date before a worksheet's first date (1900-01-01), which no cell can hold."""


def is_blank(value: Any) -> bool:
    """True for values that mean "no data here": None, NaN, empty or error text."""
    if value is None:
        return True
    if isinstance(value, float) and math.isnan(value):
        return True
    if isinstance(value, str):
        text = value.strip()
        return text.lower() in BLANK_TEXTS or text.upper() in ERROR_TEXTS
    return False


def to_number(value: Any, *, decimal_comma: bool = False) -> float:
    """Read one cell as a float; blanks become NaN.

    Text numbers may carry thousands separators, spaces or accounting
    brackets for negatives. Currency and percent signs are refused rather than
    guessed at, since either would silently change the scale. With
    ``decimal_comma`` the roles of ``.`` and ``,`` swap, as in
    many European exports.

    >>> to_number("1,234.5")
    1234.5
    >>> to_number("1.234,5", decimal_comma=True)
    1234.5
    >>> to_number(None)
    nan

    Raises
    ------
    CellValueError
        For text that is neither blank nor a number (the caller adds the cell).
    """
    if is_blank(value):
        return math.nan
    if isinstance(value, bool):
        raise CellValueError(f"{value!r} is a true/false value, not a number")
    if isinstance(value, (int, float, np.integer, np.floating)):
        return float(value)
    if isinstance(value, str):
        text = value.strip().replace("\u00a0", "").replace(" ", "").replace("'", "")
        if text.startswith("(") and text.endswith(")"):  # accounting negative
            text = "-" + text[1:-1]
        thousands, decimal = (".", ",") if decimal_comma else (",", ".")
        if thousands in text:
            # A separator outside groups of three digits is the other decimal mark:
            # reading "101,5" as 1015 would be silently wrong by a factor of ten.
            if not _GROUPED[decimal_comma].match(text):
                other = "a decimal comma" if thousands == "," else "a decimal point"
                raise CellValueError(
                    f"{value!r} is not a number here: its {thousands!r} is not a thousands "
                    f"separator (is it {other}?)"
                )
            text = text.replace(thousands, "")
        text = text.replace(decimal, ".")
        if NUMBER_TEXT.match(text):
            return float(text)
    raise CellValueError(f"{value!r} is not a number")


def to_series(
    values: Iterable[Any], *, decimal_comma: bool = False, name: str = "values"
) -> FloatArray:
    """Convert a flat sequence of cell values to a float array (NaN for blanks).

    Raises
    ------
    CellValueError
        Naming the 1-based position of the first value that is not a number.
    """
    out = []
    for i, v in enumerate(values, start=1):
        try:
            out.append(to_number(v, decimal_comma=decimal_comma))
        except CellValueError as exc:
            raise CellValueError(f"{name}: item {i}: {exc}") from None
    return np.asarray(out, dtype=np.float64)


def serial_to_datetime(serial: float, *, date1904: bool = False) -> dt.datetime:
    """Convert a spreadsheet date serial number to a datetime.

    In the 1900 system serial 60 is the fictitious 1900-02-29; serials below
    61 are shifted by one day so that 1 is 1900-01-01, as spreadsheets show it.
    """
    days = float(serial)
    # Day numbers of 0001-01-01 to 9999-12-31 fit a datetime; a worksheet's run from 0.
    if not 0.0 <= days < (LAST_SERIAL_1904 if date1904 else LAST_SERIAL) + 1:
        raise CellValueError(f"{serial!r} is not a date a worksheet can hold (day numbers "
                             f"0 to {LAST_SERIAL_1904 if date1904 else LAST_SERIAL:,})")
    if date1904:
        return EPOCH_1904 + dt.timedelta(days=days)
    if days < 61:
        days += 1
    return EPOCH_1900 + dt.timedelta(days=days)


def datetime_to_serial(value: dt.date | dt.datetime, *, date1904: bool = False) -> float:
    """Inverse of :func:`serial_to_datetime` for dates after 1900-03-01."""
    if not isinstance(value, dt.datetime):
        value = dt.datetime(value.year, value.month, value.day)
    epoch = EPOCH_1904 if date1904 else EPOCH_1900
    delta = value.replace(tzinfo=None) - epoch
    return delta.days + delta.seconds / 86400 + delta.microseconds / 86_400_000_000


@overload
def to_datetime(
    value: dt.date, *, date1904: bool = False, dayfirst: bool = False
) -> dt.datetime: ...


@overload
def to_datetime(
    value: Any, *, date1904: bool = False, dayfirst: bool = False
) -> dt.datetime | None: ...


def to_datetime(
    value: Any, *, date1904: bool = False, dayfirst: bool = False
) -> dt.datetime | None:
    """Read one cell as a date (datetime); blanks give None.

    Accepts datetimes and dates, serial numbers (1900 or 1904 system) and
    text in the usual spellings (ISO ``2025-03-14``, ``14/03/2025`` with
    ``dayfirst``, ``Mar 14, 2025``...), parsed by pandas.
    """
    if is_blank(value):
        return None
    if isinstance(value, dt.datetime):
        return value.replace(tzinfo=None)
    if isinstance(value, dt.date):
        return dt.datetime(value.year, value.month, value.day)
    if isinstance(value, bool):
        raise CellValueError(f"{value!r} is a true/false value, not a date")
    if isinstance(value, (int, float, np.integer, np.floating)):
        return serial_to_datetime(float(value), date1904=date1904)
    if isinstance(value, str):
        text = value.strip()
        if NUMBER_TEXT.match(text):
            return serial_to_datetime(float(text), date1904=date1904)
        try:
            stamp = pd.Timestamp(pd.to_datetime(text, dayfirst=dayfirst))
        except (ValueError, TypeError, OverflowError):
            raise CellValueError(f"{value!r} is not a date") from None
        if pd.isna(stamp):
            raise CellValueError(f"{value!r} is not a date")
        when = stamp.to_pydatetime().replace(tzinfo=None)
        if when < FIRST_DATE:
            raise EarlyDateError(f"{value!r} is before 1900-01-01, a worksheet's first date")
        return when
    raise CellValueError(f"{value!r} is not a date")


def to_day_numbers(
    values: Iterable[Any], *, date1904: bool = False, dayfirst: bool = False
) -> FloatArray:
    """Convert cell values to float day numbers (1900-system serials; NaN for blanks).

    Day numbers compare and sort like dates and are what the kernels use for
    "on or before" look-ups.
    """
    out = []
    for v in values:
        when = to_datetime(v, date1904=date1904, dayfirst=dayfirst)
        out.append(math.nan if when is None else datetime_to_serial(when))
    return np.asarray(out, dtype=np.float64)
