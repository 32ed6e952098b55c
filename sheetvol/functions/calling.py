"""Calling a worksheet function by the name a user types, with spreadsheet arguments.

This is the one implementation of what a worksheet call means, shared by the
xlwings add-in (:mod:`sheetvol.addin`) and the headless formula evaluator
(:mod:`sheetvol.functions.evaluator`):

* ``NAME(...)`` for a series function returns the whole column;
* ``NAME_LAST(...)`` returns the value on the last row of the given ranges;
* ``NAME_ON(date, dates, ...)`` returns the value on the last usable bar dated
  on or before ``date`` (never a later bar), computing in date order;
* scalar functions (trade levels, sizes) work on single values, or row by row
  when given ranges (a bad row gets its message in its own cell).

``_LAST`` and ``_ON`` of a window function (see :data:`TAIL_BARS`) convert and
compute only the bars its value depends on, so a filled-down column of them
does not re-read the whole range for every cell.

Arguments arrive as the spreadsheet holds them (see :mod:`sheetvol.functions.convert`).
Every problem is raised as :class:`~sheetvol.functions.registry.ArgumentError` whose
message starts with the name the user typed.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np

from sheetvol.core._types import FloatArray
from sheetvol.core.averages import WINDOW_KINDS
from sheetvol.core.bounds import BarError
from sheetvol.functions import cells
from sheetvol.functions import convert as _convert
from sheetvol.functions.registry import (
    ArgumentError,
    Function,
    Param,
    Variant,
    variant_of,
    variant_params,
)

Result = float | str | None | np.ndarray

_SUFFIX = {"column": "", "last": "_LAST", "on": "_ON"}


def worksheet_name(func: Function, variant: Variant) -> str:
    """The name a user types for a function and variant.

    Examples
    --------
    >>> from sheetvol.functions.registry import get
    >>> worksheet_name(get("SV_ATR"), "on")
    'SV_ATR_ON'
    """
    return func.name + _SUFFIX[variant]


def call_worksheet(
    name: str, args: Sequence[Any], *, date1904: bool = False, decimal_comma: bool = False
) -> Result:
    """Evaluate one worksheet call.

    Parameters
    ----------
    name : str
        The worksheet name, e.g. ``"SV_ATR"``, ``"SV_ATR_LAST"``, ``"SV_ATR_ON"``
        (case-insensitive).
    args : sequence
        Positional arguments as the spreadsheet gives them: ranges as lists of
        rows or flat lists, numpy arrays (results of nested calls), single
        values, ``None`` for blank or omitted arguments.
    date1904 : bool
        The workbook uses the 1904 date system (affects date serial numbers).
    decimal_comma : bool
        Read text numbers with a decimal comma.

    Returns
    -------
    float, None or numpy.ndarray
        A column (1-D array; a ``(1, n)`` array when the ranges were rows) for
        series functions, one value for ``_LAST``, ``_ON`` and scalar
        functions called with single values. None means a blank cell.

    Raises
    ------
    ArgumentError
        With a cell-ready message starting with ``name``.

    Examples
    --------
    >>> call_worksheet("SV_STOP", [100.0, 2.0, 2, "long"])
    96.0
    """
    try:
        func, variant, wname, params = _NAMES[name]
    except KeyError:
        try:
            func, variant = variant_of(name)
        except KeyError:
            raise ArgumentError(
                f"{name.strip().upper()}: no sheetvol function by that name") from None
        wname = worksheet_name(func, variant)
        params = variant_params(func, variant)
        if len(_NAMES) >= _NAMES_SIZE:
            _NAMES.clear()
        _NAMES[name] = func, variant, wname, params
    args = list(args)
    if len(args) > len(params):
        raise ArgumentError(f"{wname}: takes at most {len(params)} arguments, got {len(args)}")
    args += [None] * (len(params) - len(args))
    try:
        if func.shape == "scalar":
            return _call_scalar(func, wname, args, date1904, decimal_comma)
        return _call_series(func, variant, wname, args, date1904, decimal_comma)
    except ArgumentError as exc:
        raise ArgumentError(_rename(str(exc), func.name, wname)) from None


# Names as typed, with what they name: a filled-down column repeats one name on every cell.
_NAMES: dict[str, tuple[Function, Variant, str, tuple[Param, ...]]] = {}
_NAMES_SIZE = 1024


def _rename(message: str, base: str, wname: str) -> str:
    if message.startswith(base + ":") and wname != base:
        return wname + message[len(base):]
    if message.startswith(wname + ":"):
        return message
    return f"{wname}: {message}"


# -- series functions -------------------------------------------------------------
# How many usable bars the last value of a series function depends on, read from its
# name and options; None when it depends on the whole history. Window functions (simple
# or linearly weighted averages, deviation about them, bands on them, the estimators,
# percentile rank) look back a fixed number of bars: their _LAST and _ON forms convert
# and compute only that tail. Exponential and Wilder averages (and everything built on
# them: Wilder ATR, ATR bands, deviation-to-ATR) carry the whole history in their
# value, so they read whole columns. tests/test_addin.py checks every entry against the
# full-column computation, and that every series function of the registry is listed.
_WINDOW_AVERAGES = WINDOW_KINDS


def _by_average(option: str) -> Callable[[Mapping[str, Any]], int | None]:
    return lambda o: o["period"] if o[option] in _WINDOW_AVERAGES else None


def _simple_atr(o: Mapping[str, Any]) -> int | None:
    # period true ranges, the first of which needs the close before it.
    return o["period"] + 1 if o["smoothing"] == "simple" else None


TAIL_BARS: dict[str, Callable[[Mapping[str, Any]], int | None]] = {
    "SV_AVERAGE": _by_average("kind"),
    "SV_PRICE": lambda o: 1,  # one bar
    "SV_DEVIATION": _by_average("average"),
    "SV_TRUERANGE": lambda o: 2,  # the bar and the close before it
    "SV_ATR": _simple_atr,
    "SV_ATRPCT": _simple_atr,
    "SV_BAND": _by_average("average"),
    "SV_PCTB": _by_average("average"),
    "SV_BANDWIDTH": _by_average("average"),
    "SV_ATRBAND": lambda o: None,  # exponential middle line and Wilder ATR
    "SV_ENVELOPE": _by_average("average"),
    "SV_CLOSEVOL": lambda o: o["period"] + 1,  # period returns need period + 1 closes
    "SV_PARKINSON": lambda o: o["period"],
    "SV_GARMANKLASS": lambda o: o["period"],
    "SV_ROGERSSATCHELL": lambda o: o["period"],
    "SV_YANGZHANG": lambda o: o["period"] + 1,  # overnight returns need the close before
    "SV_VOLRANK": lambda o: o["lookback"],
    "SV_DEVATR": lambda o: None,  # Wilder ATR
}
# Estimators take logarithms: a price <= 0 is a gap for them, so it does not count as a
# usable bar of the tail either.
_LOGGED = frozenset({"SV_CLOSEVOL", "SV_PARKINSON", "SV_GARMANKLASS", "SV_ROGERSSATCHELL",
                     "SV_YANGZHANG"})


def tail_bars(func: Function, options: Mapping[str, Any]) -> int | None:
    """Usable bars that the last value of ``func`` depends on; None for the whole history.

    Parameters
    ----------
    func : Function
        A series function of the registry.
    options : mapping
        Its bound options (``Function.bind``), defaults filled in.

    Returns
    -------
    int or None
        The window (plus one bar when the first value of the window needs the
        close before it), or None for recursive averages and for any function
        not in the table.

    Examples
    --------
    >>> from sheetvol.functions.registry import get
    >>> tail_bars(get("SV_DEVIATION"), {"period": 14, "average": "simple"})
    14
    >>> tail_bars(get("SV_ATR"), {"period": 14, "smoothing": "wilder"}) is None
    True
    """
    rule = TAIL_BARS.get(func.name)
    return None if rule is None else rule(options)


def _call_series(
    func: Function, variant: Variant, wname: str, args: list[Any], date1904: bool,
    decimal_comma: bool,
) -> Result:
    if variant == "on":
        date_arg, dates_arg, args = args[0], args[1], args[2:]
    options: dict[str, Any] = {}
    raw: dict[str, Any] = {}
    for p, column, a in zip(func.params, _column_flags(func), args, strict=True):
        if column:
            # An empty one-cell range arrives as nothing on some paths, so nothing is read
            # as that one blank cell everywhere: a _LAST over a blank row is blank.
            raw[p.name] = [[None]] if _convert.is_empty_cell(a) else a
        else:
            options[p.name] = _option(p, a, wname, date1904)
    opts = _bound_options(func, raw, options)
    reader = _Reader(func, wname, raw, decimal_comma)

    if variant == "column":
        reader.cut_blank_tail()
        columns, horizontal = reader.whole()
        _check_high_low(wname, columns)
        out = _compute(func, wname, columns, opts)
        return out.reshape(1, -1) if horizontal else out
    need = tail_bars(func, opts)
    if variant == "last":
        if reader.height == 0:
            return None
        part = reader.tail(reader.height, need) if need is not None else None
        if part is None:
            columns, _ = reader.whole()
            part = columns, np.arange(reader.height)
        _check_high_low(wname, *part)
        return _convert.to_cell(_compute(func, wname, part[0], opts, part[1])[-1])
    return _on(reader, opts, need, date_arg, dates_arg, date1904)


_COLUMN_FLAGS: dict[str, tuple[bool, ...]] = {}


def _column_flags(func: Function) -> tuple[bool, ...]:
    """``p.is_column`` for each parameter of ``func``, worked out once per function."""
    try:
        return _COLUMN_FLAGS[func.name]
    except KeyError:
        flags = _COLUMN_FLAGS[func.name] = tuple(p.is_column for p in func.params)
        return flags


# Options validated by Function.bind, by function and given values: a filled-down column
# of per-cell calls repeats the same few options on every cell. Values are keyed with
# their type (1 and True, or 14 and 14.0, are not the same argument to bind).
_BOUND: dict[tuple[Any, ...], dict[str, Any]] = {}
_BOUND_SIZE = 1024


def _bound_options(func: Function, raw: Mapping[str, Any], options: Mapping[str, Any]
                   ) -> dict[str, Any]:
    """``func.bind`` of the options, which also notices missing columns (cached)."""
    values = tuple(options.values())  # the names are func's own options, in order
    key: tuple[Any, ...] = (func.name, tuple(raw), tuple(a is None for a in raw.values()),
                            tuple(options), values, tuple(map(type, values)))
    try:
        return dict(_BOUND[key])
    except KeyError:
        pass
    except TypeError:  # an unhashable value: bind without the cache
        key = ()
    # bind() validates options and notices missing columns; columns are converted later.
    given = {k: (None if a is None else 0.0) for k, a in raw.items()}
    bound = func.bind((), {**given, **options})
    opts = {k: v for k, v in bound.items() if k not in raw}
    if key:
        if len(_BOUND) >= _BOUND_SIZE:
            _BOUND.clear()
        _BOUND[key] = opts
    return dict(opts)


class _Reader:
    """The column arguments of one call, converted whole or only at the end."""

    def __init__(self, func: Function, wname: str, raw: dict[str, Any],
                 decimal_comma: bool) -> None:
        self.func, self.wname, self.raw, self.decimal_comma = func, wname, raw, decimal_comma
        heights = {k: _convert.line_length(a, func=wname, param=k) for k, a in raw.items()}
        _same_height(wname, heights)
        self.height = next(iter(heights.values()), 0)

    def cut_blank_tail(self) -> None:
        """Drop the rows below the last value of every column (a whole column, ``C:C``).

        One height for all columns, so that the bars stay aligned; a result is
        then as tall as the data. The ``_LAST`` form does not cut: its value
        belongs to the last row of the ranges as given.
        """
        heights = {}
        for k, a in self.raw.items():
            # A whole column comes back as the flat list of its cells: walked once.
            self.raw[k], heights[k] = _convert.cut_to_data(a)
        height = max(heights.values(), default=0)
        if height == 0 and self.raw:
            names = " and ".join(self.raw)
            raise ArgumentError(f"{self.wname}: {names} hold no values (every cell is blank)")
        if height < self.height:
            self.raw = {k: _convert.head(a, height) for k, a in self.raw.items()}
            self.height = height

    def whole(self) -> tuple[dict[str, FloatArray], bool]:
        columns: dict[str, FloatArray] = {}
        horizontal = False
        for k, a in self.raw.items():
            col = _convert.column(a, func=self.wname, param=k, decimal_comma=self.decimal_comma)
            columns[k] = col.values
            horizontal = horizontal or col.horizontal
        return columns, horizontal

    def tail(
        self, stop: int, need: int, dated: np.ndarray | None = None
    ) -> tuple[dict[str, FloatArray], np.ndarray] | None:
        """Convert only rows up to ``stop`` back to the ``need``-th last usable bar.

        Rows are converted in growing chunks from ``stop`` upwards until enough
        usable bars (every price finite, and positive for the estimators; with
        ``dated``, also dated) have been seen or the top is reached. Returns the
        columns and their row numbers (0-based in the ranges), or None when a
        cell cannot be judged without the rows above it (text that could be a
        header): the caller then converts whole columns, which also gives the
        exact message for a bad cell.
        """
        logged = self.func.name in _LOGGED
        if need <= stop and (dated is None or dated[stop - need:stop].all()):
            # The usual case, no gap among the last bars: exactly those rows are read.
            last = self._rows(stop - need, stop)
            if last is not None and np.count_nonzero(_usable(last.values(), logged)) == need:
                return last, np.arange(stop - need, stop)
        parts: dict[str, list[FloatArray]] = {k: [] for k in self.raw}
        seen, start, size = 0, stop, max(2 * need, 64)
        while start > 0 and seen < need:
            end, start = start, max(0, start - size)
            chunk = self._rows(start, end)
            if chunk is None:
                return None
            for k, v in chunk.items():
                parts[k].append(v)
            ok = _usable(chunk.values(), logged)
            if dated is not None:
                ok &= dated[start:end]
            seen += int(ok.sum())
            size *= 2
        columns = {k: np.concatenate(v[::-1]) for k, v in parts.items()}
        rows = np.arange(start, stop)
        ok = _usable(columns.values(), logged)
        if dated is not None:
            keep = dated[start:stop]
            columns = {k: v[keep] for k, v in columns.items()}
            rows, ok = rows[keep], ok[keep]
        usable = np.flatnonzero(ok)
        if len(usable) >= need:
            cut = usable[-need]
            columns = {k: v[cut:] for k, v in columns.items()}
            rows = rows[cut:]
        return columns, rows

    def _rows(self, start: int, stop: int) -> dict[str, FloatArray] | None:
        """Rows ``start`` to ``stop - 1`` of every column; None if a cell needs the rows above."""
        try:
            return {
                k: _convert.column(_convert.line_slice(a, start, stop), func=self.wname,
                                   param=k, decimal_comma=self.decimal_comma,
                                   first_item=start).values
                for k, a in self.raw.items()
            }
        except ArgumentError:
            return None


def _usable(columns: Any, positive: bool = False) -> np.ndarray:
    ok: np.ndarray | None = None
    for v in columns:
        good = np.isfinite(v)
        if positive:
            good &= v > 0  # a comparison with NaN is False and does not warn
        ok = good if ok is None else ok & good
    assert ok is not None
    return ok


def _check_high_low(wname: str, columns: Mapping[str, FloatArray],
                    rows: np.ndarray | None = None) -> None:
    """Refuse a usable bar whose high is below its low: the columns are likely swapped."""
    if "high" not in columns or "low" not in columns:
        return
    if not (columns["high"] < columns["low"]).any():  # the usual case (NaN compares False)
        return
    series = [v for k, v in columns.items() if k != "dates"]
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(_usable(series) & (columns["high"] < columns["low"]))
    if bad.size:
        row = int(bad[0] if rows is None else rows[bad[0]]) + 1
        raise ArgumentError(
            f"{wname}: high is below low on row {row} of the ranges (are the columns swapped?)"
        )


def _option(p: Param, value: Any, wname: str, date1904: bool) -> Any:
    if value is None or (p.kind != "date" and (type(value) in _PLAIN_OPTIONS or (
            type(value) is int and value not in _convert.COM_ERRORS))):
        return value  # what the general steps below give these (per-cell calls: every cell)
    v = _convert.single(value, func=wname, param=p.name)
    if type(v) is int and v in _convert.COM_ERRORS:  # an error cell, as COM passes it
        raise ArgumentError(f"{wname}: {p.name} is an error cell ({_convert.com_error_name(v)})")
    if p.kind == "date" and not cells.is_blank(v):
        return _convert.day_number(v, func=wname, param=p.name, date1904=date1904)
    return v


# Option values that are one cell already and cannot be error cells (those come as ints,
# which are let through above only outside the range of error codes).
_PLAIN_OPTIONS = frozenset({float, str})


def _same_height(wname: str, heights: Mapping[str, int]) -> None:
    if len(set(heights.values())) > 1:
        raise ArgumentError(
            f"{wname}: the ranges differ in height ("
            + ", ".join(f"{k} {h}" for k, h in heights.items())
            + " rows); give ranges covering the same rows"
        )


def _compute(func: Function, wname: str, columns: dict[str, FloatArray], opts: dict,
             rows: np.ndarray | None = None) -> FloatArray:
    try:
        out = func.compute({**columns, **opts})
    except ArgumentError:
        raise
    except BarError as exc:  # name the row of the user's ranges, not of the part read
        where = f"row {int(rows[exc.bar]) + 1} of the ranges" if rows is not None else None
        raise ArgumentError(f"{wname}: {exc.at(where) if where else exc}") from None
    except (ValueError, TypeError) as exc:
        raise ArgumentError(f"{wname}: {exc}") from None
    return np.asarray(out, dtype=np.float64)


def _on(
    reader: _Reader, opts: dict, need: int | None, date_arg: Any, dates_arg: Any,
    date1904: bool,
) -> Result:
    func, wname, n = reader.func, reader.wname, reader.height
    if date_arg is None:
        raise ArgumentError(f"{wname}: date is required (the date to read the value on)")
    target = _convert.day_number(date_arg, func=wname, param="date", date1904=date1904)
    days = _convert.day_numbers(dates_arg, func=wname, param="dates", date1904=date1904)
    if len(days) != n:
        raise ArgumentError(
            f"{wname}: dates has {len(days)} rows but the price ranges have {n}; "
            "give ranges covering the same rows"
        )
    if _in_order(days):  # the usual layout: the rows are their own order
        return _on_in_order(reader, opts, need, days, target)
    dated = np.isfinite(days)
    dated_rows = np.flatnonzero(dated)
    ascending = bool(np.all(np.diff(days[dated_rows]) > 0))
    if ascending:  # oldest first, each date once: the usual layout, no sorting needed
        order = dated_rows
    else:
        order = dated_rows[np.argsort(days[dated_rows], kind="stable")]
    sorted_days = days[order]
    same = np.flatnonzero(np.diff(sorted_days) == 0)
    if same.size:
        raise ArgumentError(
            f"{wname}: dates holds {_show_day(sorted_days[same[0]])} more than once; "
            "each bar needs its own date"
        )
    pos = int(np.searchsorted(sorted_days, target, side="right")) - 1
    if pos < 0:
        first = f"; the first date is {_show_day(sorted_days[0])}" if len(sorted_days) else ""
        raise ArgumentError(f"{wname}: no bar on or before {_show_day(target)}{first}")
    part = None
    if ascending and need is not None:
        part = reader.tail(int(order[pos]) + 1, need, dated)
    if part is None:
        whole, _ = reader.whole()
        rows = order[: pos + 1]
        if need is not None:  # a window function: its value needs only the last bars
            ok = np.flatnonzero(_usable((v[rows] for v in whole.values()),
                                        func.name in _LOGGED))
            if len(ok) >= need:
                rows = rows[ok[-need]:]
        part = {k: v[rows] for k, v in whole.items()}, rows
    columns, rows = part
    _check_high_low(wname, columns, rows)
    usable = np.flatnonzero(_usable(columns.values()))
    if usable.size == 0:
        return None
    out = _compute(func, wname, columns, opts, rows)
    return _convert.to_cell(out[usable[-1]])


def _in_order(days: FloatArray) -> bool:
    """Every row dated, oldest first, each date once (a NaN step fails the test)."""
    return (len(days) > 0 and math.isfinite(days[0]) and math.isfinite(days[-1])
            and bool((np.diff(days) > 0).all()))


def _on_in_order(reader: _Reader, opts: dict, need: int | None, days: FloatArray,
                 target: float) -> Result:
    """:func:`_on` when every row is dated in ascending order (the same steps, unmasked)."""
    func, wname = reader.func, reader.wname
    pos = int(np.searchsorted(days, target, side="right")) - 1
    if pos < 0:
        raise ArgumentError(f"{wname}: no bar on or before {_show_day(target)}; "
                            f"the first date is {_show_day(days[0])}")
    part = reader.tail(pos + 1, need) if need is not None else None
    if part is None:
        whole, _ = reader.whole()
        start = 0
        if need is not None:  # a window function: its value needs only the last bars
            ok = np.flatnonzero(_usable((v[: pos + 1] for v in whole.values()),
                                        func.name in _LOGGED))
            if len(ok) >= need:
                start = int(ok[-need])
        part = {k: v[start: pos + 1] for k, v in whole.items()}, np.arange(start, pos + 1)
    columns, rows = part
    _check_high_low(wname, columns, rows)
    usable = np.flatnonzero(_usable(columns.values()))
    if usable.size == 0:
        return None
    out = _compute(func, wname, columns, opts, rows)
    return _convert.to_cell(out[usable[-1]])


def _show_day(day: float) -> str:
    when = cells.EPOCH_1900 + dt.timedelta(days=float(day))
    if when.hour or when.minute or when.second:
        return when.strftime("%Y-%m-%d %H:%M")
    return when.strftime("%Y-%m-%d")


# -- scalar functions -----------------------------------------------------------------
def _call_scalar(
    func: Function, wname: str, args: list[Any], date1904: bool, decimal_comma: bool
) -> Result:
    """Scalar functions: columns (bars of a trade) are taken whole; other arguments are
    single values, or ranges that make the call run once per row (a trade log)."""
    fixed: dict[int, Any] = {}
    lines: dict[int, list[Any]] = {}
    horizontal = False
    for i, (p, a) in enumerate(zip(func.params, args, strict=True)):
        if p.is_column:
            if _convert.is_empty_cell(a):
                fixed[i] = None  # bind() reports the missing column
            elif p.kind == "dates":
                fixed[i] = _convert.day_numbers(a, func=wname, param=p.name, date1904=date1904)
            else:
                fixed[i] = _convert.column(
                    a, func=wname, param=p.name, decimal_comma=decimal_comma).values
        elif _is_many(a):
            values, horiz = _convert.line_values(a, wname, p.name)
            lines[i] = list(values)
            horizontal = horizontal or horiz
    given = {func.params[i].name: v for i, v in fixed.items() if v is not None}
    _same_height(wname, {k: len(v) for k, v in given.items()})
    _check_high_low(wname, {k: v for k, v in given.items() if func.param(k).kind == "series"})

    def one(row: list[Any]) -> Any:
        values = []
        for i, (p, a) in enumerate(zip(func.params, row, strict=True)):
            values.append(fixed[i] if i in fixed else _option(p, a, wname, date1904))
        bound = func.bind(tuple(values))
        try:
            out = func.compute(bound)
        except ArgumentError:
            raise
        except (ValueError, TypeError) as exc:
            raise ArgumentError(f"{wname}: {exc}") from None
        return _scalar(out)

    if not lines:
        return one(args)
    heights = {len(v) for v in lines.values()}
    if len(heights) > 1:
        raise ArgumentError(
            f"{wname}: the ranges differ in height; give ranges covering the same rows"
        )
    # A single value applies to every row: a bad one is the whole call's error.
    for i, (p, a) in enumerate(zip(func.params, args, strict=True)):
        if i not in fixed and i not in lines:
            v = _option(p, a, wname, date1904)
            if not cells.is_blank(v):
                func.check(p, v)
    n = heights.pop()
    results: list[Any] = [None] * n
    required = [p.required and not p.is_column for p in func.params]
    for r in range(n):
        row = [lines[i][r] if i in lines else a for i, a in enumerate(args)]
        # A row whose required inputs are blank (an unfilled trade) stays blank.
        if any(req and cells.is_blank(v) for req, v in zip(required, row, strict=True)):
            continue
        try:
            results[r] = one(row)
        except ArgumentError as exc:
            # Only this trade's cell shows the problem; the other rows keep their values.
            results[r] = _convert.to_cell(str(exc))
    if any(isinstance(v, str) for v in results):
        out: np.ndarray = np.array(results, dtype=object)
    else:
        out = np.array([math.nan if v is None else v for v in results], dtype=np.float64)
    return out.reshape(1, -1) if horizontal else out


def _scalar(out: Any) -> Any:
    if isinstance(out, str):
        return out
    arr = np.asarray(out)
    if arr.dtype.kind in "US":
        return str(arr.reshape(-1)[0])
    if arr.dtype == object:
        return _scalar(arr.reshape(-1)[0]) if arr.size else None
    flat = arr.astype(np.float64).reshape(-1)
    return _convert.to_cell(flat[0]) if flat.size else None


def _is_many(a: Any) -> bool:
    if isinstance(a, np.ndarray):
        return a.size > 1
    grid = _convert.as_grid(a)
    return grid is not None and sum(len(r) for r in grid) > 1
