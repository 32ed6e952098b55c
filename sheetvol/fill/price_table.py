"""From raw price columns to a clean, date-ordered table of bars.

Real exports are messy. This module decides, row by row, what each row of the
price sheet is and what the fill does with it:

* a **bar**: a date and at least one price; computed in date order, so a
  newest-first export is read bottom-up and the results go back on the same
  rows. A price cell that is blank, holds an error (``#N/A``) or a blank word
  (``n/a``) is unusable; a column that needs that price skips the bar (see
  :mod:`sheetvol.core._gaps`) and is blank there (:meth:`PriceTable.gap_bars`
  counts such bars once each);
* **blank**: nothing in any price column, skipped;
* **no prices**: a date without any price (holiday rows), skipped;
* **no usable price**: a date whose price cells hold only errors or blank
  words, skipped (not also counted as a gap);
* **summary or footer**: a row such as ``Total``/``Average`` (a summary word
  in the date column), or any row without a date below the last bar (sums,
  "Source: ..." lines), skipped.

Anything else that cannot be read is an error naming the cell: a price that is
neither a number nor blank (``abc``), a date that is not a date, High below
Low, the same date on two rows, prices without a date between bars.
"""

from __future__ import annotations

import datetime as dt
import math
import re
import warnings
from collections import Counter
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sheetvol.core.prices import BAR_PRICES
from sheetvol.functions import cells
from sheetvol.functions._lazy import pandas as pd
from sheetvol.workbook.errors import CellError
from sheetvol.workbook.package import Column

__all__ = ["PriceTable", "PriceTableError", "build_price_table", "date_order_problem",
           "price_decimals", "suspect_separator"]

PRICE_ROLES = ("open", "high", "low", "close", "volume")
SUMMARY = re.compile(
    r"^\s*(grand\s+)?(sub)?totals?\b|^\s*(sum|average|avg|mean|median|min|max|minimum|maximum|"
    r"count|summary|st\.?\s*dev|std\.?\s*dev|change|result)\b",
    re.IGNORECASE,
)
SUMMARY_LABEL = "summary or footer row"
NO_PRICES = "no prices on that date (holiday or blank)"
NO_USABLE = "no usable price on that date (only error values or blank words)"


class PriceTableError(ValueError):
    """A price sheet that cannot be used; the message names the cell and what to do."""


@dataclass
class PriceTable:
    """Bars in date order and what happened to the other rows.

    ``rows[i]`` is the sheet row of bar ``i``; ``prices[role][i]`` its value
    (NaN for a gap); ``dates[i]`` its day number (1900-system serial, NaN when
    the sheet has no date column). ``unusable`` holds, for bars only, the price
    cells that hold an error or a blank word: (row, role) -> what they hold
    (``#N/A``, ``"n/a"``); other NaN prices of a bar are blank cells.
    """

    rows: np.ndarray
    dates: np.ndarray
    prices: dict[str, np.ndarray]
    skipped: Counter = field(default_factory=Counter)
    unusable: dict[tuple[int, str], str] = field(default_factory=dict)
    order: str = "oldest first"
    rows_read: int = 0
    decimals: int = 2
    warnings: list[str] = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.rows)

    def first_last_dates(self) -> tuple[str, str] | None:
        if not len(self.dates) or not np.isfinite(self.dates).any():
            return None
        lo, hi = np.nanmin(self.dates), np.nanmax(self.dates)
        return _show_day(lo), _show_day(hi)

    def gap_bars(self, roles: Iterable[str]) -> Counter:
        """Bars where a price in ``roles`` is unusable, counted once each by what is wrong.

        A bar with a blank Close and ``#N/A`` in High counts once, under
        ``'#N/A in High + blank Close'``. Roles the table does not have are ignored.

        Parameters
        ----------
        roles : iterable of str
            The price roles the computed columns need (``close``, ``high``...).

        Returns
        -------
        collections.Counter
            What is wrong on the bar -> number of bars.

        Examples
        --------
        >>> t = PriceTable(rows=np.array([2, 3, 4]), dates=np.full(3, np.nan),
        ...                prices={"high": np.array([2.0, np.nan, 2.0]),
        ...                        "close": np.array([1.0, np.nan, np.nan])},
        ...                unusable={(3, "high"): "#N/A"})
        >>> dict(t.gap_bars(["high", "close"]))
        {'#N/A in High + blank Close': 1, 'blank Close': 1}
        """
        order = [r for r in ("date", "open", "high", "low", "close", "volume")
                 if r in set(roles) and r in self.prices]
        if not order or not len(self.rows):
            return Counter()
        missing = np.zeros(len(self.rows), dtype=bool)
        for role in order:
            missing |= ~np.isfinite(self.prices[role])
        noted_rows = {row for row, _ in self.unusable}
        counts: Counter = Counter()
        # Bars with an error or blank word are few: named one by one. The rest (often many
        # blank cells of one column) are counted per combination of blank columns.
        idx = np.flatnonzero(missing)
        special = np.isin(self.rows[idx], list(noted_rows)) if noted_rows else np.zeros(
            len(idx), dtype=bool)
        for i in idx[special]:
            row = int(self.rows[i])
            parts = []
            for role in order:
                if not math.isfinite(self.prices[role][i]):
                    what = self.unusable.get((row, role))
                    parts.append(f"{what} in {role.capitalize()}" if what
                                 else f"blank {role.capitalize()}")
            counts[" + ".join(parts)] += 1
        plain = idx[~special]
        if len(plain):
            code = np.zeros(len(plain), dtype=np.int64)
            for k, role in enumerate(order):
                code |= (~np.isfinite(self.prices[role][plain])).astype(np.int64) << k
            for value, n in zip(*np.unique(code, return_counts=True), strict=True):
                label = " + ".join(f"blank {role.capitalize()}" for k, role in enumerate(order)
                                   if int(value) >> k & 1)
                counts[label] += int(n)
        return counts


def _show_day(day: float) -> str:
    when = cells.serial_to_datetime(day)
    return when.strftime("%Y-%m-%d %H:%M") if when.time() != dt.time() else when.strftime(
        "%Y-%m-%d"
    )


def _is_error(value: object) -> bool:
    """A spreadsheet error: an error cell, or error text such as ``#N/A`` in a CSV."""
    if isinstance(value, CellError):
        return True
    return isinstance(value, str) and value.strip().upper() in cells.ERROR_TEXTS


def suspect_separator(text: str, decimal_comma: bool) -> bool:
    """True for text numbers that read differently with the other decimal mark.

    ``101,25`` without ``--decimal-comma`` (or ``101.25`` with it) would
    silently become 10125, so such text is refused instead of read.

    Parameters
    ----------
    text : str
        A cell's text.
    decimal_comma : bool
        Whether ``--decimal-comma`` was given.

    Returns
    -------
    bool

    Examples
    --------
    >>> suspect_separator("101,25", decimal_comma=False), suspect_separator("1,234", False)
    (True, False)
    """
    t = text.strip().replace("\u00a0", "").replace(" ", "").lstrip("+-(")
    if decimal_comma:
        return bool(re.fullmatch(r"\d+\.(\d{1,2}|\d{4,})\)?", t)
                    or re.fullmatch(r"\d{1,3}(,\d{3})+\.\d+\)?", t))
    return bool(re.fullmatch(r"\d+,(\d{1,2}|\d{4,})\)?", t)
                or re.fullmatch(r"\d{1,3}(\.\d{3})+,\d+\)?", t))


def _yyyymmdd(values: np.ndarray) -> np.ndarray | None:
    """Dates written as numbers like 20250314 (some exports do), else None."""
    finite = values[np.isfinite(values)]
    if not len(finite) or not np.all((finite >= 19000101) & (finite <= 21001231)):
        return None
    if not np.all(finite == np.floor(finite)):
        return None
    stamps = pd.to_datetime(
        pd.Series(values).map(lambda v: f"{int(v):08d}" if math.isfinite(v) else None),
        format="%Y%m%d", errors="coerce",
    )
    if stamps[np.isfinite(values)].isna().any():
        return None
    return _stamps_to_days(stamps)


def _before_first_date(value: object, dayfirst: bool) -> bool:
    """True for date text that reads as a date before a worksheet's first one."""
    try:
        cells.to_datetime(value, dayfirst=dayfirst)
    except cells.EarlyDateError:
        return True
    except cells.CellValueError:
        return False
    return False


def _stamps_to_days(stamps: pd.Series) -> np.ndarray:
    epoch = pd.Timestamp(cells.EPOCH_1900)
    days = (pd.DatetimeIndex(stamps) - epoch) / pd.Timedelta(days=1)
    return np.asarray(days, dtype=np.float64)


def build_price_table(
    columns: Mapping[str, Column | Any],
    *,
    header_row: int,
    letters: Mapping[str, str] | None = None,
    date1904: bool = False,
    decimal_comma: bool = False,
    dayfirst: bool = False,
    where: str = "",
) -> PriceTable:
    """Read price columns into bars in date order, deciding what each row is.

    Parameters
    ----------
    columns : mapping
        role (``date``, ``open``, ``high``, ``low``, ``close``, ``volume``) ->
        column of cells (``numbers``, ``other``, ``first_row``), as the
        package layer's ``read_columns`` gives them. ``close`` is required.
    header_row : int
        The header row; bars start below it.
    letters : mapping, optional
        role -> column letter, for messages (``E212``).
    date1904 : bool
        Date serials count from 1904-01-01 (the workbook's date system).
    decimal_comma : bool
        Text numbers use ``,`` as the decimal mark and ``.`` for thousands.
    dayfirst : bool
        Text dates like ``03/04/2025`` are day/month/year.
    where : str
        ``file, sheet`` prefix for messages.

    Returns
    -------
    PriceTable

    Raises
    ------
    PriceTableError
        Naming the cell: non-numeric price, unreadable date, High below Low,
        duplicate dates, prices without a date between bars.

    Examples
    --------
    >>> col = Column(np.array([3.0, 2.0, 1.0]), {}, 2)
    >>> dates = Column(np.array([45002.0, 45001.0, 45000.0]), {}, 2)
    >>> t = build_price_table({"close": col, "date": dates}, header_row=1)
    >>> t.order, t.rows.tolist(), t.prices["close"].tolist()
    ('newest first', [4, 3, 2], [1.0, 2.0, 3.0])
    """
    prefix = f"{where}: " if where else ""
    letters = dict(letters or {})
    first = header_row + 1
    last = first - 1
    for c in columns.values():
        last = max(last, c.first_row + len(c.numbers) - 1, *(r for r in c.other if r >= first))
    n = max(0, last - first + 1)
    rows = np.arange(first, first + n)

    def cell(role: str, row: int) -> str:
        return f"{letters.get(role, role)}{row}"

    content = np.zeros(n, dtype=bool)  # anything at all in a price column
    noted = np.zeros(n, dtype=bool)  # an error or blank word in a price cell
    unusable: dict[tuple[int, str], str] = {}
    bad: dict[int, tuple[str, object]] = {}  # row -> (role, value) first unreadable cell

    def aligned(c: Any) -> tuple[np.ndarray, dict[int, object]]:
        vals = np.full(n, np.nan)
        src = np.asarray(c.numbers, dtype=np.float64)
        offset = c.first_row - first
        lo = max(0, -offset)
        hi = min(len(src), n - offset)
        if hi > lo:
            vals[lo + offset:hi + offset] = src[lo:hi]
        other = {r: v for r, v in c.other.items() if first <= r <= last}
        return vals, other

    prices: dict[str, np.ndarray] = {}
    for role in PRICE_ROLES:
        if role not in columns:
            continue
        vals, other = aligned(columns[role])
        content |= np.isfinite(vals)
        for r, v in other.items():
            i = r - first
            if v is None:
                continue
            content[i] = True
            if _is_error(v) or (isinstance(v, str) and cells.is_blank(v)):
                text = str(v).strip()
                what = text if _is_error(v) else (f'"{text}"' if text else "blank text")
                unusable[(r, role)] = what
                noted[i] |= role != "volume"
                continue
            if isinstance(v, str) and suspect_separator(v, decimal_comma):
                flag = "without --decimal-comma" if decimal_comma else "with --decimal-comma"
                mark = "a decimal point" if decimal_comma else "a decimal comma"
                raise PriceTableError(
                    f"{prefix}{cell(role, r)} holds {v.strip()!r}, which looks like {mark}; "
                    f"run again {flag}"
                )
            try:
                vals[i] = cells.to_number(v, decimal_comma=decimal_comma)
            except cells.CellValueError:
                bad.setdefault(r, (role, v))
        prices[role] = vals

    # ---- dates ----------------------------------------------------------------
    has_dates = "date" in columns
    dates = np.full(n, np.nan)
    summary = np.zeros(n, dtype=bool)
    if has_dates:
        raw, other = aligned(columns["date"])
        as_ymd = _yyyymmdd(raw)
        shift = cells.DATE_1904_OFFSET if date1904 else 0.0
        dates = as_ymd if as_ymd is not None else raw + shift
        with np.errstate(invalid="ignore"):
            beyond = np.flatnonzero((dates < 0) | (dates >= cells.LAST_SERIAL + 1))
        if beyond.size:  # a number no date cell can show (negative, or past 9999-12-31)
            r = first + int(beyond[0])
            raise PriceTableError(
                f"{prefix}{cell('date', r)} holds {raw[beyond[0]]:.15g}, which is not a "
                f"date a worksheet can hold (day numbers 0 to {cells.LAST_SERIAL:,}); fix the "
                "cell")
        content |= np.isfinite(dates)
        texts: dict[int, str] = {}
        for r, v in other.items():
            i = r - first
            if v is None:
                continue
            content[i] = True
            if isinstance(v, (dt.datetime, dt.date)):
                dates[i] = cells.datetime_to_serial(cells.to_datetime(v))
            elif _is_error(v) or (isinstance(v, str) and cells.is_blank(v)):
                continue  # error or blank date: the row is judged by its prices below
            elif isinstance(v, str) and SUMMARY.match(v):
                summary[i] = True
            elif isinstance(v, str):
                texts[r] = v.strip()
            else:
                bad.setdefault(r, ("date", v))
        for r, text in texts.items():
            problem = date_order_problem(text, dayfirst)
            if problem:
                raise PriceTableError(f"{prefix}{cell('date', r)} holds {text!r}, {problem}")
        if texts:
            _parse_text_dates(texts, dates, first, dayfirst, date1904, bad)
        if "time" in columns:  # a separate time-of-day column (intraday exports)
            frac = _time_fractions(*aligned(columns["time"]), first, bad)
            both = np.isfinite(frac) & np.isfinite(dates)
            dates[both] = np.floor(dates[both]) + frac[both]

    # ---- classify rows --------------------------------------------------------
    price_roles = [r for r in BAR_PRICES if r in prices]
    any_price = np.zeros(n, dtype=bool)
    for role in price_roles:
        any_price |= np.isfinite(prices[role])
    has_date = np.isfinite(dates)
    skipped: Counter = Counter()

    if has_dates:
        dated = np.flatnonzero(has_date & content)
        last_bar = dated[-1] if len(dated) else -1
        undated = content & ~has_date & ~summary
        trailing = undated & (np.arange(n) > last_bar)
        summary |= trailing
        keep = has_date & any_price & ~summary
        priceless = has_date & ~any_price & ~summary
        skipped[NO_PRICES] = int(np.count_nonzero(priceless & ~noted))
        skipped[NO_USABLE] = int(np.count_nonzero(priceless & noted))
    else:
        # Without dates a row of totals is told apart only by a summary word in a price cell.
        for r, (_role, v) in bad.items():
            if isinstance(v, str) and SUMMARY.match(v):
                summary[r - first] = True
        keep = content & ~summary
    skipped["blank"] = int(np.count_nonzero(~content))
    skipped[SUMMARY_LABEL] = int(np.count_nonzero(summary & content))

    for r, (role, v) in sorted(bad.items()):
        if summary[r - first]:
            continue
        what = {"date": "a date", "time": "a time of day"}.get(role, "a number")
        hint = (
            "use --dayfirst for day/month/year text, or fix the cell"
            if role in ("date", "time")
            else 'fix or clear the cell (blank, "n/a" and error values count as gaps)'
        )
        if role == "date" and _before_first_date(v, dayfirst):
            what, hint = "a date a worksheet can hold (they start on 1900-01-01)", "fix the cell"
        raise PriceTableError(f"{prefix}{cell(role, r)} holds {v!r}, which is not {what}; {hint}")
    if has_dates:
        inner = np.flatnonzero(content & ~has_date & ~summary & any_price)
        if len(inner):
            r = int(rows[inner[0]])
            raise PriceTableError(
                f"{prefix}row {r} has prices but no date in {cell('date', r)}; "
                "fill in the date or delete the row"
            )

    idx = np.flatnonzero(keep)
    table_rows = rows[idx]
    table_dates = dates[idx]
    table_prices = {role: vals[idx] for role, vals in prices.items()}
    kept_rows = set(table_rows.tolist()) if unusable else set()
    unusable = {k: v for k, v in unusable.items() if k[0] in kept_rows}  # bars only

    _check_high_low(table_prices, table_rows, cell, prefix)

    order_label = "row order (no date column)"
    warnings: list[str] = []
    if has_dates and len(idx):
        _check_duplicates(table_dates, table_rows, cell, prefix)
        steps = np.diff(table_dates)
        if np.all(steps > 0):
            order_label = "oldest first"
        elif np.all(steps < 0):
            order_label = "newest first"
        else:
            order_label = "not in date order"
            warnings.append("rows are not in date order; computed in date order")
        perm = np.argsort(table_dates, kind="stable")
        table_rows = table_rows[perm]
        table_dates = table_dates[perm]
        table_prices = {role: vals[perm] for role, vals in table_prices.items()}
    elif not has_dates:
        warnings.append("no date column: rows taken as oldest first, in sheet order")

    close = table_prices.get("close", np.empty(0))
    return PriceTable(
        rows=table_rows,
        dates=table_dates,
        prices=table_prices,
        skipped=Counter({k: v for k, v in skipped.items() if v}),
        unusable=unusable,
        order=order_label,
        rows_read=n,
        decimals=price_decimals(close),
        warnings=warnings,
    )


_NUMERIC_DATE = re.compile(r"^\s*(\d{1,2})[/.\-](\d{1,2})[/.\-](\d{2,4})\b")


def date_order_problem(text: str, dayfirst: bool) -> str | None:
    """Why a numeric text date cannot be read in the chosen day/month order, or None.

    Mixed readings (month first where possible, day first where not) would put
    bars in the wrong order without any error, so a date that only fits the
    other order stops the fill.

    Parameters
    ----------
    text : str
        A date cell's text.
    dayfirst : bool
        Whether ``--dayfirst`` was given.

    Returns
    -------
    str or None
        The end of an error message, or None when the text is fine.

    Examples
    --------
    >>> date_order_problem("14/03/2024", dayfirst=False)
    'which reads as day/month/year; run again with --dayfirst'
    >>> date_order_problem("03/14/2024", dayfirst=True) is not None
    True
    >>> date_order_problem("2024-03-14", dayfirst=True) is None
    True
    """
    m = _NUMERIC_DATE.match(text)
    if m is None:
        return None
    a, b = int(m[1]), int(m[2])
    if not dayfirst and a > 12 and b <= 12:
        return "which reads as day/month/year; run again with --dayfirst"
    if dayfirst and b > 12 and a <= 12:
        return "which reads as month/day/year; run again without --dayfirst"
    return None


def _time_fractions(nums: np.ndarray, other: Mapping[int, object], first: int,
                    bad: dict[int, tuple[str, object]]) -> np.ndarray:
    """Times of day as fractions of a day: serial fractions, HHMM/HHMMSS numbers or text."""
    frac = np.full(len(nums), np.nan)
    finite = np.isfinite(nums)
    vals = nums[finite]
    if len(vals) and np.all(vals == np.floor(vals)) and vals.max() >= 1 and vals.max() <= 235959:
        six = vals.max() > 2359  # 093000 style rather than 0930
        hours = vals // 10000 if six else vals // 100
        minutes = (vals // 100) % 100 if six else vals % 100
        seconds = vals % 100 if six else 0.0
        frac[finite] = (hours * 3600 + minutes * 60 + seconds) / 86400
    else:
        frac[finite] = vals - np.floor(vals)
    for r, v in other.items():
        i = r - first
        if isinstance(v, (dt.time, dt.datetime)):
            t = v.time() if isinstance(v, dt.datetime) else v
            frac[i] = (t.hour * 3600 + t.minute * 60 + t.second + t.microsecond / 1e6) / 86400
        elif isinstance(v, str) and re.fullmatch(r"\d{3,6}", v.strip()):
            digits = v.strip().rjust(6 if len(v.strip()) > 4 else 4, "0").ljust(6, "0")
            frac[i] = (int(digits[:2]) * 3600 + int(digits[2:4]) * 60 + int(digits[4:])) / 86400
        elif isinstance(v, str) and not _is_error(v) and not cells.is_blank(v):
            try:
                when = pd.Timestamp(pd.to_datetime(v.strip(), format="mixed"))
            except (ValueError, TypeError):
                bad.setdefault(r, ("time", v))
                continue
            frac[i] = (when - when.normalize()) / pd.Timedelta(days=1)
    return frac


def _parse_text_dates(
    texts: dict[int, str],
    dates: np.ndarray,
    first: int,
    dayfirst: bool,
    date1904: bool,
    bad: dict[int, tuple[str, object]],
) -> None:
    """Parse text dates in one vectorised pass; cell by cell only where that fails."""
    keys = list(texts)
    values = [texts[k] for k in keys]
    numeric = [bool(cells.NUMBER_TEXT.match(v)) for v in values]
    if not any(numeric):
        try:
            with warnings.catch_warnings():  # "could not infer format": handled below
                warnings.simplefilter("ignore", UserWarning)
                stamps = pd.Series(pd.to_datetime(values, dayfirst=dayfirst, errors="coerce"))
        except (ValueError, TypeError, OverflowError):
            stamps = pd.Series([pd.NaT] * len(values))
        days = _stamps_to_days(stamps)
        # Before a worksheet's first date: judged one by one below, which names the cell.
        days[days < cells.datetime_to_serial(cells.FIRST_DATE)] = np.nan
    else:
        days = np.full(len(values), np.nan)
    for k, v, d in zip(keys, values, days, strict=True):
        if math.isfinite(d):
            dates[k - first] = d
            continue
        try:
            when = cells.to_datetime(v, date1904=date1904, dayfirst=dayfirst)
        except cells.CellValueError:
            bad.setdefault(k, ("date", v))
            continue
        if when is not None:
            dates[k - first] = cells.datetime_to_serial(when)


def _check_high_low(prices: Mapping[str, np.ndarray], rows: np.ndarray, cell: Any, prefix: str
                    ) -> None:
    if "high" not in prices or "low" not in prices:
        return
    high, low = prices["high"], prices["low"]
    with np.errstate(invalid="ignore"):
        wrong = np.flatnonzero(high < low)
    if len(wrong):
        i = wrong[0]
        r = int(rows[i])
        more = f" (and {len(wrong) - 1} more rows)" if len(wrong) > 1 else ""
        raise PriceTableError(
            f"{prefix}High below Low on row {r}: {cell('high', r)} = {high[i]:g} is below "
            f"{cell('low', r)} = {low[i]:g}{more}; check that the High and Low columns are the "
            "right ones (--high-col, --low-col) or fix the row"
        )


def _check_duplicates(dates: np.ndarray, rows: np.ndarray, cell: Any, prefix: str) -> None:
    order = np.argsort(dates, kind="stable")
    sd = dates[order]
    same = np.flatnonzero(sd[1:] == sd[:-1])
    if len(same):
        a, b = sorted((int(rows[order[same[0]]]), int(rows[order[same[0] + 1]])))
        more = f" ({len(same) - 1} more repeats)" if len(same) > 1 else ""
        raise PriceTableError(
            f"{prefix}the date {_show_day(sd[same[0]])} appears twice, on rows {a} and {b} "
            f"({cell('date', a)}, {cell('date', b)}){more}; delete the extra row"
        )


def price_decimals(close: np.ndarray, *, cap: int = 6) -> int:
    """Decimals the prices are quoted with (from the close column; at least 2).

    Parameters
    ----------
    close : numpy.ndarray
        Close prices (NaN ignored; the first 5,000 are looked at).
    cap : int
        Most decimals to look for.

    Returns
    -------
    int

    Examples
    --------
    >>> price_decimals(np.array([1.08345, 1.0841, 1.08]))
    5
    >>> price_decimals(np.array([4512.0, 4530.0]))
    2
    """
    x = np.asarray(close, dtype=np.float64)
    x = x[np.isfinite(x)][:5000]
    if not len(x):
        return 2
    for d in range(cap + 1):
        scaled = x * 10.0**d
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-6 * np.maximum(1.0, np.abs(scaled))):
            return max(d, 2)
    return 4
