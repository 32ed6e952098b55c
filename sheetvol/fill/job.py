"""The headless fill: computed columns written into a copy of a price export.

``fill_file`` is the whole job for one input: find the price sheet and
columns (:mod:`sheetvol.fill.locate`), read the bars in date order
(:mod:`sheetvol.fill.price_table`), compute the recipe's columns through the
registry (:func:`sheetvol.fill.table.compute_columns`, the same path as the
pandas helper), evaluate typed sheetvol formulas (:mod:`sheetvol.functions.evaluator`),
review a trade log when the workbook has one (:mod:`sheetvol.fill.trade_log`), and
ask the package writer for exactly those edits plus a notes sheet. The input
is only ever read; the output is written atomically by the writer.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import hashlib
import io
import math
import os
import re
import sys
import tempfile
import time
import warnings
from collections import Counter
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sheetvol.core.prices import BAR_PRICES
from sheetvol.fill.locate import (
    HEADER_SCAN_ROWS,
    ColumnFlagError,
    ColumnFlagFields,
    HeaderMatch,
    LocateError,
    col_letter,
    find_header,
    normalize_header,
    role_of,
    still_headed,
)
from sheetvol.fill.notes import (
    CAUTION_LINE,
    NOTES_SHEET,
    FormulaNote,
    SheetNote,
    WrittenColumn,
    build_notes,
    read_record,
)
from sheetvol.fill.price_table import (
    PriceTable,
    PriceTableError,
    build_price_table,
    date_order_problem,
    price_decimals,
    suspect_separator,
)
from sheetvol.fill.recipe import (
    ColumnSpec,
    RecipeError,
    TradeSettings,
    default_header,
    default_specs,
)
from sheetvol.fill.review import LOG_COLUMNS
from sheetvol.fill.spacing import TRADING_DAYS, bars_per_year
from sheetvol.fill.table import ComputeError, compute_columns, needed_roles
from sheetvol.fill.trade_log import (
    REVIEW_SHEET,
    TRADE_CAUTION_LINE,
    Contracts,
    TradeLog,
    TradeLogError,
    TradeReport,
    find_instruments,
    find_trade_log,
    instrument_key,
    plan_trade_review,
)
from sheetvol.functions import cells, registry
from sheetvol.functions._lazy import pandas as pd
from sheetvol.functions.grid import MAX_COL, MAX_ROW
from sheetvol.workbook import (
    CellError,
    CellResult,
    Column,
    FormulaCell,
    LineChart,
    NewColumn,
    NewSheet,
    Package,
    SpillResult,
    ValueResult,
    WorkbookError,
    write_package,
)
from sheetvol.workbook.newbook import write_new_workbook
from sheetvol.workbook.package import changed_during_fill

__all__ = ["FillError", "FillOptions", "FillReport", "fill_file", "output_path"]

CHART_SHEET = "sheetvol charts"
OWN_SHEETS = {NOTES_SHEET.casefold(), CHART_SHEET.casefold(), REVIEW_SHEET.casefold()}
WORKBOOK_SUFFIXES = {".xlsx", ".xlsm"}
TEXT_SUFFIXES = {".csv", ".txt", ".tsv"}
# A progress bar only for fills that take a while: price sheets holding at least this much
# XML (about 20,000 rows of dates and OHLCV prices).
PROGRESS_MIN_BYTES = 4_000_000
CSV_PROGRESS_MIN_ROWS = 20_000  # the same for a CSV export, converted before it is read


class FillError(ValueError):
    """The fill cannot go on; the message names the file and what to do."""


# Every error a fill reports to the user as one message (no traceback).
USER_ERRORS = (FillError, WorkbookError, LocateError, PriceTableError, RecipeError, ComputeError,
               TradeLogError)


@dataclass
class FillOptions:
    """What the command line (or a script) asks of one fill.

    ``formulas`` says what happens to sheetvol formulas typed into cells:
    ``"values"`` (default) stores their results as plain values, so the file
    shows numbers in any spreadsheet program, and lists each formula's text on
    the notes sheet for add-in users; ``"keep"`` keeps the formulas and stores
    their results beside them; ``"skip"`` leaves them untouched.
    ``sheets`` names the price sheets (default: every sheet of bars: a Date and
    a Close column with numbers below the header; see ``PRICE_SHEET_RULE``).
    ``columns`` maps a role (``date``, ``open``, ``high``, ``low``, ``close``,
    ``volume``) to a header text or column letter. ``trades`` holds the trade-log settings
    (None: the defaults); a trade log found in the workbook is reviewed unless
    ``review_trades`` is False.
    """

    output: Path | None = None
    out_dir: Path | None = None
    sheets: tuple[str, ...] = ()
    header_row: int | None = None
    columns: dict[str, str] = field(default_factory=dict)
    specs: list[ColumnSpec] | None = None
    decimal_comma: bool = False
    dayfirst: bool = False
    in_place: bool = False
    formulas: str = "values"
    chart: bool = False
    progress: bool = False
    trades: TradeSettings | None = None
    review_trades: bool = True

    def __post_init__(self) -> None:
        # A script may name the places as text, as fill_file takes its input.
        if self.output is not None:
            self.output = Path(self.output)
        if self.out_dir is not None:
            self.out_dir = Path(self.out_dir)


@dataclass
class SheetReport:
    """What the fill read and wrote on one price sheet."""

    sheet: str
    match: HeaderMatch
    table: PriceTable | None = None
    written: list[WrittenColumn] = field(default_factory=list)
    replaced: int = 0
    long_sheet: str = ""  # instruments of one long price sheet: read for the trade review only
    gaps: Counter = field(default_factory=Counter)  # bars missing a needed price, by what

    def summary(self) -> list[str]:
        lines = [f'  sheet "{self.sheet}", header row {self.match.row}: {self.match.describe()}']
        if self.long_sheet:
            lines.append(f"    {self.long_sheet}")
        t = self.table
        if t is not None:
            span = t.first_last_dates()
            bars = f"{len(t)} bars" + (f" ({span[0]} to {span[1]})" if span else "")
            lines.append(f"    rows read: {t.rows_read}; {bars}, {t.order}")
            lines.append(f"    rows skipped: {_describe_counts(t.skipped) or 'none'}")
            if self.gaps:
                lines.append(f"    {_describe_gaps(self.gaps)}")
                if where := _gap_cells(t, self.match, self.gaps):
                    lines.append(f"    cells to fix or clear: {where}")
        if self.written:
            cols = ", ".join(f"{w.letter} {w.spec.header}" for w in self.written)
            again = f" ({self.replaced} replaced from an earlier fill)" if self.replaced else ""
            lines.append(f"    columns written{again}: {cols}")
        return lines


@dataclass
class FillReport:
    """What one fill did, for the summary and for tests."""

    input: Path
    output: Path
    sheets: list[SheetReport] = field(default_factory=list)
    formulas: list[FormulaNote] = field(default_factory=list)
    formulas_ok: int = 0
    warnings: list[str] = field(default_factory=list)
    # What the fill assumed because the workbook did not say (a default point value,
    # bars per year from the dates, a column it did not use): terminal and notes sheet.
    assumptions: list[str] = field(default_factory=list)
    backup: Path | None = None
    trades: TradeReport | None = None
    skipped: list[str] = field(default_factory=list)  # sheets that are not price sheets: why
    input_sha256: str = ""  # of the input as read (the notes sheet names it)
    cleaned: list[Path] = field(default_factory=list)  # stale temporary files removed

    # The first (often only) price sheet, for short access.
    @property
    def sheet(self) -> str:
        return self.sheets[0].sheet

    @property
    def match(self) -> HeaderMatch:
        return self.sheets[0].match

    @property
    def table(self) -> PriceTable:
        table = next((s.table for s in self.sheets if s.table is not None), None)
        assert table is not None
        return table

    @property
    def written(self) -> list[WrittenColumn]:
        return [w for s in self.sheets for w in s.written]

    @property
    def replaced(self) -> int:
        return sum(s.replaced for s in self.sheets)

    def summary(self) -> list[str]:
        """A few lines for the terminal: what was read, skipped and written."""
        lines = [f"{self.input.name} -> {self.output}"]
        for s in self.sheets:
            lines.extend(s.summary())
        if self.skipped:
            lines.append(f"  sheets left alone, not price sheets: {', '.join(self.skipped)} "
                         "(to fill one, name it with --sheet and its columns with --date-col "
                         "and --close-col)")
        if self.trades is not None:
            lines.extend(self.trades.lines())
        if self.formulas:
            failed = len(self.formulas) - self.formulas_ok
            lines.append(
                f"  typed formulas evaluated: {self.formulas_ok}"
                + (f", {failed} could not be (see warnings)" if failed else "")
            )
        for a in self.assumptions:
            lines.append(f"  assumed: {a}")
        for w in self.warnings:
            lines.append(f"  warning: {w}")
        if self.backup is not None:
            lines.append(f"  backup of the input: {self.backup}")
        for path in self.cleaned:
            lines.append(f"  removed a temporary file left by an interrupted run: {path}")
        # Sizes were printed: spell the cautions out; otherwise point at the notes sheet.
        lines.append(f"  {TRADE_CAUTION_LINE if self.trades is not None else CAUTION_LINE}")
        return lines


def _describe_counts(counts: Mapping[str, int]) -> str:
    return ", ".join(f"{n} {what}" for what, n in counts.items() if n)


GAP_CELLS_SHOWN = 5  # cells named one by one in the summary; the rest are counted


def _gap_cells(table: PriceTable, match: HeaderMatch, gaps: Mapping[str, int]) -> str:
    """The cells holding an error or a word on a bar (first few by name, then a count)."""
    needed = " ".join(gaps)
    found = sorted((row, match.columns[role], what) for (row, role), what in
                   table.unusable.items()
                   if role in match.columns and f"in {role.capitalize()}" in needed)
    shown = [f"{col_letter(col)}{row} {what}" for row, col, what in found[:GAP_CELLS_SHOWN]]
    more = len(found) - len(shown)
    return ", ".join(shown) + (f" and {more} more" if more > 0 else "")


def _describe_gaps(gaps: Mapping[str, int]) -> str:
    """One line on the bars kept with a needed price unusable (each bar counted once)."""
    n = sum(gaps.values())
    return (f"bars with a gap: {n} ({_describe_counts(gaps)}); the columns that need "
            f"that price are blank on {'that bar' if n == 1 else 'those bars'}")


# -- progress ----------------------------------------------------------------------------
class _Progress:
    """One bar over the whole fill, moved by stages: never per cell.

    The shares are those measured on a 1,048,576-row fill (cProfile; reading the
    price columns about a third, scanning for typed formulas 4 %, computing 2 %,
    writing the rest); each price sheet weighs by the size of its XML part, and
    the writing phase moves with the rows the writer reports. Without a bar every
    method does nothing.
    """

    SCAN, READ, COMPUTE = 4.0, 32.0, 2.0  # percent of the job; writing takes the rest
    WRITE = 100.0 - SCAN - READ - COMPUTE

    def __init__(self, bar: Any = None, sizes: Mapping[str, int] | None = None) -> None:
        self.bar = bar
        self.sizes = dict(sizes or {})
        self.share: dict[str, float] = {}

    @classmethod
    def start(cls, pkg: Package, src: Path, options: FillOptions) -> _Progress:
        """A bar when asked, on a terminal, for a workbook with large sheets; else a no-op."""
        if not (options.progress and sys.stderr.isatty()):
            return cls()
        parts = {s.part: s.name for s in pkg.sheets if s.kind == "worksheet"}
        with pkg._zip() as zf:  # the central directory only: no part inflated
            sizes = {parts[i.filename]: i.file_size for i in zf.infolist()
                     if i.filename in parts}
        if sum(sizes.values()) < PROGRESS_MIN_BYTES:
            return cls()
        from tqdm import tqdm

        bar = tqdm(total=100.0, desc=f"{src.name}: finding the price columns", file=sys.stderr,
                   leave=False, bar_format="{desc} {percentage:3.0f}%|{bar}| {elapsed}<{remaining}")
        return cls(bar, sizes)

    def stage(self, text: str) -> None:
        if self.bar is not None:
            self.bar.set_description_str(text, refresh=True)

    def advance(self, percent: float) -> None:
        if self.bar is not None and percent > 0:
            left = self.bar.total - self.bar.n
            self.bar.update(min(percent, max(left, 0.0)))

    def sheets(self, names: Sequence[str]) -> None:
        """The price sheets to read: each one's share of the reading and computing."""
        total = sum(self.sizes.get(n, 0) for n in names) or 1
        self.share = {n: self.sizes.get(n, 0) / total for n in names}

    def writer(self, rows: int) -> Callable[[int], None] | None:
        """A callback for the package writer: rows written -> the rest of the bar."""
        if self.bar is None:
            return None
        step = self.WRITE / max(rows, 1)
        return lambda done: self.advance(done * step)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


# -- paths -------------------------------------------------------------------------------
def output_path(src: Path, options: FillOptions) -> Path:
    """Where the output of ``src`` goes: ``-o``, ``--out-dir``, in place, or beside it.

    Parameters
    ----------
    src : Path
        The input file.
    options : FillOptions
        ``output``, ``out_dir`` and ``in_place`` decide.

    Returns
    -------
    Path

    Examples
    --------
    >>> output_path(Path("exports/prices.csv"), FillOptions()).as_posix()
    'exports/prices-filled.xlsx'
    >>> output_path(Path("book.xlsm"), FillOptions()).as_posix()
    'book-filled.xlsm'
    """
    suffix = ".xlsm" if src.suffix.lower() == ".xlsm" else ".xlsx"
    if options.in_place:
        return src
    if options.output is not None:
        return options.output
    folder = options.out_dir if options.out_dir is not None else src.parent
    return folder / f"{src.stem}-filled{suffix}"


def backup_path(src: Path, number: int = 1) -> Path:
    """Where ``--in-place`` keeps the old file: ``prices.xlsx`` -> ``prices.bak.xlsx``.

    A backup is never overwritten: when that name is taken, the next free of
    ``prices.bak2.xlsx``, ``prices.bak3.xlsx``, ... is used (``number``).

    Parameters
    ----------
    src : Path
        The input file.
    number : int
        1 for the first backup name, 2 and up for the numbered ones.

    Returns
    -------
    Path

    Examples
    --------
    >>> backup_path(Path("a/prices.xlsx")).as_posix()
    'a/prices.bak.xlsx'
    >>> backup_path(Path("a/prices.xlsx"), 2).as_posix()
    'a/prices.bak2.xlsx'
    """
    return src.with_name(f"{src.stem}.bak{number if number > 1 else ''}{src.suffix}")


def _keep_backup(pkg: Package, src: Path) -> Path:
    """Copy the input as read to the first free backup name (never over a file)."""
    for number in range(1, 10_000):
        dest = backup_path(src, number)
        try:
            pkg.copy_to(dest)
        except FileExistsError:
            continue
        except OSError as exc:
            raise FillError(f"{src.name}: cannot write the backup {dest}: {exc.strerror}; "
                            "nothing was changed") from None
        return dest
    raise FillError(f"{src.name}: every backup name up to {backup_path(src, 9999).name} is "
                    "taken; move some backups away and run again")


# The writer's temporary file: ".NAME.xlsx.<8 random characters>.part" (tempfile.mkstemp).
def _stale_parts(out: Path, before: float) -> list[Path]:
    """This output's temporary files left by an interrupted run (older than ``before``)."""
    pattern = re.compile(r"\." + re.escape(out.name) + r"\.[a-z0-9_]{8}\.part")
    found = []
    try:
        names = os.listdir(out.parent if str(out.parent) else ".")
    except OSError:
        return []
    for name in names:
        if pattern.fullmatch(name):
            path = out.parent / name
            try:
                if path.is_file() and path.stat().st_mtime < before:
                    found.append(path)
            except OSError:
                continue
    return sorted(found)


# -- CSV input ---------------------------------------------------------------------------
def _csv_to_workbook(src: Path, dest: Path, options: FillOptions) -> str:
    """Write a CSV export as a one-sheet workbook: numbers as numbers, the date column as dates.

    Cells that are neither stay text, so the price reader later names them exactly
    as it would in a workbook (row and column are the CSV's). Returns the SHA-256 of
    the bytes read (the file is read once).
    """
    raw = src.read_bytes()
    digest = hashlib.sha256(raw).hexdigest()
    text = raw.decode("utf-8-sig") if _is_utf8(raw) else raw.decode("cp1252", errors="replace")
    sample = text[:65536]
    try:
        dialect: type[csv.Dialect] | csv.Dialect = csv.Sniffer().sniff(sample, ",;\t|")
    except csv.Error:
        dialect = csv.excel
    # newline="": the csv module splits lines itself (CR alone, LF, CR LF, and line
    # breaks inside quoted fields), as its documentation asks of the stream.
    reader = csv.reader(io.StringIO(text, newline=""), dialect)
    try:
        rows = list(reader)
    except csv.Error as exc:  # e.g. a field over csv.field_size_limit() characters
        raise FillError(f"{src.name}, line {reader.line_num}: not readable as CSV ({exc}); "
                        "check that the file is a price export") from None
    if not any(any(cell.strip() for cell in row) for row in rows):
        raise FillError(f"{src.name} is empty")
    if len(rows) > MAX_ROW:
        raise FillError(f"{src.name}: {len(rows):,} lines; a worksheet holds at most "
                        f"{MAX_ROW:,} rows: split the export")
    for i, row in enumerate(rows, start=1):
        if len(row) > MAX_COL:
            raise FillError(f"{src.name}, line {i}: {len(row):,} columns; a worksheet holds "
                            f"at most {MAX_COL:,}: export fewer columns")
    top = {i: {j: v for j, v in enumerate(row, start=1) if v.strip()}
           for i, row in enumerate(rows[:HEADER_SCAN_ROWS], start=1)}
    date_col = None
    header_row = 0
    try:
        match = find_header(top, header_row=options.header_row,
                            overrides=options.columns, where=src.name)
        date_col, header_row = match.columns.get("date"), match.row
    except LocateError:
        pass  # the workbook path reports it with the same words
    sheet_name = re.sub(r"[\[\]:*?/\\]", "_", src.stem)[:31] or "Prices"
    when = _csv_dates(rows[header_row:], date_col, options.dayfirst) if date_col else {}
    bar = None
    if options.progress and len(rows) >= CSV_PROGRESS_MIN_ROWS and sys.stderr.isatty():
        from tqdm import tqdm

        bar = tqdm(total=len(rows), desc=f"{src.name}: converting to a workbook", unit=" rows",
                   file=sys.stderr, leave=False)

    def values() -> Iterator[list[object]]:
        for i, row in enumerate(rows):
            if bar is not None and i and not i % 10_000:  # by blocks of rows, not per cell
                bar.update(10_000)
            out: list[object] = []
            for j, value in enumerate(row):
                if not value.strip():
                    out.append(None)
                    continue
                stamp = when.get(i - header_row) if j + 1 == date_col else None
                if stamp is not None:
                    out.append(stamp)  # a date cell (with its time when not midnight)
                    continue
                number = _csv_number(value, options.decimal_comma) if i + 1 > header_row else None
                out.append(number if number is not None else value)
            yield out

    try:
        write_new_workbook(dest, sheet_name, values())
    finally:
        if bar is not None:
            bar.close()
    return digest


def _csv_dates(rows: Sequence[Sequence[str]], col: int, dayfirst: bool
               ) -> dict[int, dt.datetime]:
    """Text dates of one CSV column parsed in one pass (cell by cell only where that fails)."""
    texts = [row[col - 1].strip() if len(row) >= col else "" for row in rows]
    try:
        with warnings.catch_warnings():  # "could not infer format": handled below
            warnings.simplefilter("ignore", UserWarning)
            stamps = pd.to_datetime(pd.Series(texts), dayfirst=dayfirst, errors="coerce")
    except (ValueError, TypeError, OverflowError):
        stamps = pd.Series([pd.NaT] * len(texts))
    out: dict[int, dt.datetime] = {}
    for k, (text, stamp) in enumerate(zip(texts, stamps, strict=True)):
        if not text or cells.is_blank(text) or date_order_problem(text, dayfirst):
            continue  # left as text: the price reader names the cell
        if not pd.isna(stamp):
            parsed = stamp.to_pydatetime()
        else:
            try:
                parsed = cells.to_datetime(text, dayfirst=dayfirst)
            except cells.CellValueError:
                continue  # left as text: the price reader names the cell if it matters
        # A worksheet's dates start on 1900-01-01: an earlier one stays text, named below.
        if parsed is not None and parsed >= cells.FIRST_DATE:
            out[k] = parsed
    return out


def _is_utf8(raw: bytes) -> bool:
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


def _csv_number(value: str, decimal_comma: bool) -> float | None:
    if cells.is_blank(value) or suspect_separator(value, decimal_comma):
        return None
    try:
        number = cells.to_number(value, decimal_comma=decimal_comma)
    except cells.CellValueError:
        return None
    return number if math.isfinite(number) else None


# -- the fill ---------------------------------------------------------------------------
def fill_file(src: str | Path, options: FillOptions | None = None) -> FillReport:
    """Fill one workbook or CSV export and write the result.

    Parameters
    ----------
    src : str or Path
        An ``.xlsx``, ``.xlsm`` or ``.csv`` export.
    options : FillOptions, optional
        Sheet, columns, recipe, output and the rest (defaults: find everything,
        default columns, ``<name>-filled.xlsx`` beside the input).

    Returns
    -------
    FillReport

    Raises
    ------
    FillError, WorkbookError, LocateError, PriceTableError, RecipeError, ComputeError, TradeLogError
        With a message naming the file, sheet and cell; nothing is written then.

    Examples
    --------
    >>> report = fill_file("prices.xlsx")  # doctest: +SKIP
    >>> print("\\n".join(report.summary()))  # doctest: +SKIP
    """
    options = options or FillOptions()
    src = Path(src)
    if not src.exists():
        raise FillError(f"{src}: no such file")
    suffix = src.suffix.lower()
    if suffix == ".xls":
        raise FillError(f"{src.name} is in the old .xls format; save it as .xlsx and run again")
    if suffix not in WORKBOOK_SUFFIXES | TEXT_SUFFIXES:
        raise FillError(f"{src.name}: sheetvol reads .xlsx, .xlsm and .csv files, not {suffix!r}")
    out = output_path(src, options)
    if options.in_place and suffix in TEXT_SUFFIXES:
        raise FillError(f"{src.name}: --in-place needs a workbook; a CSV cannot hold the columns")
    if out.resolve() == src.resolve() and not options.in_place:
        raise FillError(f"{src.name}: the output would overwrite the input; use --in-place "
                        "to mean that (a backup is kept)")
    want_xlsm = src.suffix.lower() == ".xlsm"
    if want_xlsm and out.suffix.lower() != ".xlsm":
        raise FillError(f"{src.name} is macro-enabled; its output must end in .xlsm to keep "
                        f"the macros, not {out.name}")
    if not want_xlsm and out.suffix.lower() not in (".xlsx",):
        raise FillError(f"output {out.name}: use a name ending in .xlsx")
    if not out.parent.exists():
        raise FillError(f"output folder {out.parent} does not exist")

    started = time.time()
    report = FillReport(input=src, output=out)
    with tempfile.TemporaryDirectory(prefix="sheetvol-") as tmp:
        book = src
        if suffix in TEXT_SUFFIXES:
            book = Path(tmp) / (src.stem + ".xlsx")
            seen = os.stat(src)
            report.input_sha256 = _csv_to_workbook(src, book, options)
        with Package.open(book) as pkg:
            if pkg.is_macro_enabled and not want_xlsm:
                raise FillError(f"{src.name} holds macros but is named .xlsx; rename it to "
                                ".xlsm")
            if book == src:
                report.input_sha256 = pkg.sha256()
            progress = _Progress.start(pkg, src, options)
            try:
                edits = _plan(pkg, src, options, report, progress)
                if book != src and _changed(src, seen):
                    raise changed_during_fill(src.name)
                if options.in_place:
                    pkg.check_unchanged()  # no backup of a file about to be refused
                    report.backup = _keep_backup(pkg, src)
                for stale in _stale_parts(out, started):
                    try:
                        stale.unlink()
                    except OSError:
                        continue
                    report.cleaned.append(stale)
                _write(pkg, out, edits, report, progress)
            finally:
                progress.close()
    return report


def _changed(path: Path, seen: os.stat_result) -> bool:
    try:
        now = os.stat(path)
    except OSError:
        return True
    return (now.st_ino, now.st_size, now.st_mtime_ns) != (seen.st_ino, seen.st_size,
                                                           seen.st_mtime_ns)


def _where(src: Path, sheet: str) -> str:
    return f'{src.name}, sheet "{sheet}"'


# A price sheet needs bars: a date column, and a close column with numbers below the header.
PRICE_SHEET_RULE = "a price sheet needs a Date column and a Close column with numbers below it"
NO_DATE = "no date column"
QUALIFY_ROWS = 20  # rows below the header looked at to see numbers in the Close column
_NUMBER_LIKE = re.compile(r"[\s+\-\u2212(]*(?:[^\W\d_]{1,3}|[$\u20ac\u00a3\u00a5])?"
                          r"\s*\d[\d\s.,'\u2019]*[)%]?\s*")


def _not_prices(grid_rows: Mapping[int, Mapping[int, object]], match: HeaderMatch
                ) -> str | None:
    """Why a sheet with this header is not a price sheet (None: it is one)."""
    if "date" not in match.columns:
        return NO_DATE
    close, date = match.columns["close"], match.columns["date"]
    below = [grid_rows[r] for r in sorted(grid_rows)
             if match.row < r <= match.row + QUALIFY_ROWS]
    for cells_ in below:
        value = cells_.get(close)
        number = ((isinstance(value, (int, float)) and not isinstance(value, bool))
                  # text written like a number (any separators: the price table says
                  # which option reads it)
                  or (isinstance(value, str) and _NUMBER_LIKE.fullmatch(value) is not None))
        if number and not cells.is_blank(cells_.get(date)):
            return None
    return "no numbers below the Close header"


def _choose_sheets(pkg: Package, src: Path, options: FillOptions,
                   exclude: frozenset[str] = frozenset(), skipped: list[str] | None = None,
                   ) -> list[tuple[str, HeaderMatch, int]]:
    """The price sheets with their header match and the rightmost used column near the top.

    By default every sheet that holds bars (``exclude``: the trade log and the
    instrument details, casefolded); the others are listed in ``skipped`` with the
    reason. ``--sheet`` names restrict the choice, and a named sheet that holds no
    bars is an error.
    """
    def locate(name: str) -> tuple[tuple[str, HeaderMatch, int], str | None]:
        grid = pkg.read_grid(name, max_rows=HEADER_SCAN_ROWS + QUALIFY_ROWS)
        match = find_header(grid.rows, header_row=options.header_row,
                            overrides=options.columns, where=_where(src, name),
                            file=src.name, sheet=name)
        return (name, match, grid.max_col), _not_prices(grid.rows, match)

    if options.sheets:
        chosen = []
        for name in dict.fromkeys(options.sheets):
            hit, why = locate(pkg.sheet(name).name)
            if why == NO_DATE and options.columns.get("close"):
                why = None  # sheet and Close column both named: bars in row order (warned)
            named = options.columns.get("close")
            if why and named and why != NO_DATE:
                # the user chose the Close column: say that this column is the problem
                raise FillError(
                    f"{_where(src, hit[0])}: the Close column chosen with --close-col {named} "
                    f"has no numbers in the {QUALIFY_ROWS} rows below the header row "
                    f"{hit[1].row}; choose the column that holds the close prices")
            if why:
                raise FillError(
                    f"{_where(src, hit[0])}: not a price sheet ({why}; {PRICE_SHEET_RULE}); "
                    "name the Date and Close columns with --date-col and --close-col (a sheet "
                    "without dates: --close-col alone, bars in row order), or choose another "
                    "sheet with --sheet")
            chosen.append(hit)
        return chosen
    found: list[tuple[str, HeaderMatch, int]] = []
    tried: list[str] = []
    passed: dict[str, str] = {}  # sheets with a Close header that hold no bars: why
    first_error: LocateError | None = None
    flag_errors: list[ColumnFlagError] = []
    for info in pkg.sheets:
        if info.kind != "worksheet" or info.name.casefold() in OWN_SHEETS | exclude:
            continue
        try:
            hit, why = locate(info.name)
        except LocateError as exc:
            first_error = first_error or exc
            tried.append(info.name)
            if isinstance(exc, ColumnFlagError):
                flag_errors.append(exc)
            continue
        if why:
            passed[info.name] = why
        else:
            found.append(hit)
    if found:
        if skipped is not None and passed:
            skipped.extend(f'"{name}" ({why})' for name, why in passed.items())
        return found
    if flag_errors:  # a column the user named by flag: that is the news, said first
        # told about the sheet that looks most like prices (most headers known)
        best = max(flag_errors, key=lambda e: sum(
            role_of(h) is not None for h in e.fields["headers"].values()))
        others = [t for t in tried if t != best.sheet]
        also = f"; not on {', '.join(repr(t) for t in others)} either" if others else ""
        fields: ColumnFlagFields = {**best.fields, "also": also}
        raise ColumnFlagError(**fields)
    if passed:
        why = "; ".join(f"{name!r}: {w}" for name, w in passed.items())
        no_close = f"; no Close header on {', '.join(repr(t) for t in tried)}" if tried else ""
        raise FillError(
            f"{src.name}: no price sheet found ({PRICE_SHEET_RULE}; {why}{no_close}); pick the "
            "sheet with --sheet and name its columns with --date-col and --close-col")
    if len(tried) == 1 and first_error is not None:
        raise first_error
    if not tried:
        raise FillError(f"{src.name} has no worksheet with cells")
    names = ", ".join(repr(t) for t in tried)
    raise LocateError(
        f"{src.name}: no sheet has a Close column in its first {HEADER_SCAN_ROWS} rows "
        f"(sheets: {names}; on the first: {first_error}); pick the sheet with --sheet and "
        "name the column with --close-col"
    )


def _own_columns(match: HeaderMatch, recorded: Mapping[str, str]) -> dict[int, str]:
    """Columns of a price sheet an earlier fill wrote: col -> header.

    Only the workbook's own record says so (the notes sheet's ``Columns written``,
    letter and header still agreeing); a header alone never makes a column ours, as
    a user may head a column of their own exactly like one of ours.
    """
    own = still_headed(recorded, match.headers)
    used = set(match.columns.values())
    return {c: h for c, h in own.items() if c not in used}


def _look_alikes(match: HeaderMatch, own: Mapping[int, str],
                 specs: Sequence[ColumnSpec]) -> dict[int, str]:
    """Columns headed like one of ours that no record says sheetvol wrote: col -> header."""
    ours = {s.header for s in specs}
    used = set(match.columns.values())
    return {c: t for c, t in match.headers.items()
            if isinstance(t, str) and t in ours and c not in own and c not in used}


def _plain_times(header: str) -> str:
    """An earlier fill's header in today's spelling: ``20×2`` -> ``20x2``.

    Examples
    --------
    >>> _plain_times("Upper band 20×2"), _plain_times("Lower ATR band 20, 2×ATR 10")
    ('Upper band 20x2', 'Lower ATR band 20, 2x ATR 10')
    """
    return re.sub(r"(\d)×(?=\d)", r"\1x", header).replace("×ATR", "x ATR")


def _recorded(pkg: Package) -> dict[str, dict[str, str]]:
    """An earlier fill's record of its columns (sheet name casefolded)."""
    names = {s.name.casefold(): s.name for s in pkg.sheets}
    if NOTES_SHEET.casefold() not in names:
        return {}
    notes = pkg.read_grid(names[NOTES_SHEET.casefold()], max_rows=2000)
    return {k.casefold(): v for k, v in read_record(notes.rows).items()}


def _has_cells(column: Column) -> bool:
    return bool(np.isfinite(column.numbers).any() or any(
        v is not None and v != "" for v in column.other.values()))


def _number_format(spec: ColumnSpec, decimals: int) -> str:
    """Price units as the prices are quoted, with thousands separators (``#,##0.00``).

    Examples
    --------
    >>> from sheetvol.fill.recipe import make_spec
    >>> _number_format(make_spec("SV_ATR", {}), 1), _number_format(make_spec("SV_CLOSEVOL", {}), 2)
    ('#,##0.0', '0.00%')
    """
    unit = spec.func.unit
    if unit == "percent":
        return "0.00%"
    if unit == "ratio":
        return "0.000"
    if unit == "quantity":
        return "General"  # sizes may be whole contracts or fractional lots
    if unit == "number":
        return "0"
    return "#,##0." + "0" * decimals if decimals else "#,##0"


def _select_specs(options: FillOptions, match: HeaderMatch, where: str,
                  report: FillReport) -> list[ColumnSpec]:
    specs = options.specs if options.specs is not None else default_specs()
    missing = needed_roles(specs) - set(match.columns)
    if not missing:
        return specs
    found = ", ".join(f"{col_letter(c)} {t!r}" for c, t in sorted(match.headers.items()))
    if options.specs is None:  # the default set: leave out what the export cannot feed
        kept = [s for s in specs if not set(s.inputs.values()) & missing]
        left_out = sorted({s.header for s in specs} - {s.header for s in kept})
        report.warnings.append(
            f"{where}: no {'/'.join(sorted(m.capitalize() for m in missing))} column, so "
            f"{', '.join(left_out)} left out (headers in row {match.row}: {found})"
        )
        return kept
    role = sorted(missing)[0]
    users = ", ".join(s.header for s in specs if role in s.inputs.values())
    raise LocateError(
        f"{where}: no {role.capitalize()} column found, and {users} need it (headers in row "
        f"{match.row}: {found}); name it with --{role}-col"
    )


def _find_log(pkg: Package, src: Path, options: FillOptions
              ) -> tuple[TradeLog | None, Contracts]:
    """The trade log and instrument details, when the fill reviews trades."""
    recipe = options.trades or TradeSettings()
    if not (options.review_trades and recipe.enabled):
        return None, Contracts()
    own = [s.name for s in pkg.sheets if s.name.casefold() in OWN_SHEETS]
    log = find_trade_log(pkg, recipe, skip=own, where=src.name)
    if log is None:
        return None, Contracts()
    return log, find_instruments(pkg, recipe, skip=[*own, log.sheet], where=src.name)


def _plan(pkg: Package, src: Path, options: FillOptions, report: FillReport,
          progress: _Progress | None = None) -> list:
    """Every edit of the fill, computed before anything is written."""
    progress = progress or _Progress()
    log, instruments = _find_log(pkg, src, options)
    exclude = frozenset(n.casefold() for n in (log.sheet if log else "", instruments.sheet) if n)
    chosen = _choose_sheets(pkg, src, options, exclude, report.skipped)
    progress.sheets([name for name, _, _ in chosen])
    scan = options.formulas != "skip"
    recorded = _recorded(pkg)
    edits: list = []
    taken: dict[str, set[int]] = {}
    specs_by_sheet: list[tuple[SheetReport, list[ColumnSpec], list[int]]] = []
    bars: dict[str, pd.DataFrame] = {}
    decimals: dict[str, int] = {}
    for sheet, match, max_col in chosen:
        sr = SheetReport(sheet=sheet, match=match)
        report.sheets.append(sr)
        share = progress.share.get(sheet, 0.0)
        progress.stage(f'{src.name}: reading sheet "{sheet}"')
        inst_col = _instrument_column(match)
        if inst_col is not None:  # one long sheet of several instruments
            found = _long_sheet_bars(pkg, sr, inst_col)
            progress.advance((progress.READ + progress.COMPUTE) * share)
            for key, (frame, places) in found.items():
                bars.setdefault(key, frame)
                decimals.setdefault(key, places)
            sr.long_sheet = (
                f"instrument column {col_letter(inst_col)}: {len(found)} instruments read for "
                "the trade review; no volatility columns written here (one column would mix "
                "instruments; give each instrument its own sheet for those)")
            report.warnings.append(f"{_where(src, sheet)}: {sr.long_sheet}")
            continue
        specs = _select_specs(options, match, _where(src, sheet), report)
        cols, targets, specs = _plan_sheet(pkg, src, options, sr, specs, max_col, scan,
                                           recorded.get(sheet.casefold(), {}),
                                           report.warnings, progress, share,
                                           report.assumptions)
        edits.extend(cols)
        taken[sheet] = {e.col for e in cols}
        specs_by_sheet.append((sr, specs, targets))
    if log is not None:
        progress.stage(f'{src.name}: reviewing the trade log "{log.sheet}"')
        for sr, _, _ in specs_by_sheet:  # bars as the review reads them: only when reviewing
            assert sr.table is not None
            bars[instrument_key(sr.sheet)] = _bars_frame(sr.table)
            decimals[instrument_key(sr.sheet)] = sr.table.decimals
        chosen_names = {name.casefold() for name, _, _ in chosen}
        not_chosen = [s.name for s in pkg.sheets if options.sheets and s.kind == "worksheet"
                      and s.name.casefold() not in chosen_names | OWN_SHEETS | exclude]
        trade_edits, report.trades = plan_trade_review(
            pkg, log, options.trades or TradeSettings(), bars, decimals, instruments=instruments,
            recorded=recorded.get(log.sheet.casefold(), {}), where=src.name,
            not_chosen=not_chosen)
        edits.extend(trade_edits)
        taken.setdefault(log.sheet, set()).update(
            e.col for e in trade_edits if isinstance(e, NewColumn))
        report.warnings.extend(report.trades.problems)
        report.assumptions.extend(report.trades.assumptions)
    # the price sheets' formulas were noted while they were read: only the others are read now
    progress.stage(f"{src.name}: looking for typed sheetvol formulas")
    typed = pkg.formula_cells() if scan else []
    progress.advance(progress.SCAN)
    if typed:
        progress.stage(f"{src.name}: evaluating typed sheetvol formulas")
        edits.extend(_evaluate_formulas(pkg, typed, taken, report, keep=options.formulas == "keep"))
    if options.chart and specs_by_sheet:
        edits.append(NewSheet(name=CHART_SHEET, rows=[["Charts of the filled sheets"]]))
        written = {(e.sheet, e.col): e.values for e in edits if isinstance(e, NewColumn)}
        for k, (sr, specs, targets) in enumerate(specs_by_sheet):
            edits.extend(_charts(sr, specs, targets, top=3 + 44 * k, written=written))
    edits.append(NewSheet(name=NOTES_SHEET, rows=_notes_rows(src, report),
                          widths=[16, 14, 30, 16, 52, 40]))
    return edits


def _plan_sheet(pkg: Package, src: Path, options: FillOptions, sr: SheetReport,
                specs: list[ColumnSpec], max_col: int, typed: bool,
                recorded: Mapping[str, str], warnings: list[str],
                progress: _Progress | None = None, share: float = 0.0,
                assumptions: list[str] | None = None,
                ) -> tuple[list[NewColumn], list[int], list[ColumnSpec]]:
    """Read one price sheet, compute its columns and say where each one goes.

    Returns the edits, each spec's column and the specs as computed (bars per year
    filled in from the dates where the recipe did not state them). ``typed``: typed
    sheetvol formulas count as used cells (they are evaluated, and their cells kept);
    the reading pass notes them.
    """
    assumptions = assumptions if assumptions is not None else []
    progress = progress or _Progress()
    sheet, match = sr.sheet, sr.match
    where = _where(src, sheet)
    # Where each column goes: its own earlier place, else a freed earlier place, else new
    # columns right of everything used (top rows, a table, typed formulas, cells below).
    # an earlier fill's headers in today's spelling ("20×2" was written before "20x2")
    own = {c: _plain_times(h) for c, h in _own_columns(match, recorded).items()}
    table_of_bars = None
    for t in pkg.tables(sheet):
        if t.header_row == match.row and t.left <= match.columns["close"] <= t.right:
            max_col = max(max_col, t.right)
            table_of_bars = t
    max_col = max([max_col, *own])

    roles = sorted(match.columns, key=match.columns.__getitem__)
    letters = {role: col_letter(match.columns[role]) for role in roles}
    price_cols = [match.columns[r] for r in roles]
    start = max_col + 1
    # as many columns right of the sheet as there are specs, read in the same pass as the
    # prices: the headers (and so the reuse of earlier columns) are known after the dates
    read = pkg.read_columns(sheet, price_cols + list(range(start, min(start + len(specs),
                                                                        MAX_COL + 1))),
                            first_row=match.row + 1)
    # typed formulas (noted by that pass) right of the data: new columns go right of them
    typed_cols = [fc.col for fc in pkg.formula_cells([sheet])] if typed else []
    table = build_price_table(
        {role: read[match.columns[role]] for role in roles},
        header_row=match.row, letters=letters, date1904=pkg.date1904,
        decimal_comma=options.decimal_comma, dayfirst=options.dayfirst, where=where,
    )
    sr.table = table
    specs = _annualised(specs, table.dates, where, match, assumptions, warnings,
                        default_set=options.specs is None)

    headers = {s.header for s in specs}
    reused = {h: c for c, h in own.items() if h in headers}
    free = sorted(c for c in own if own[c] not in headers)
    n_new = max(0, len(specs) - len(reused) - len(free))

    def room(start: int) -> None:
        if n_new and start + n_new - 1 > MAX_COL:
            raise FillError(
                f"{where}: no room for {n_new} new columns: cells or merged blocks right of "
                f"the prices reach column {col_letter(start - 1)} and a sheet ends at "
                f"{col_letter(MAX_COL)}; clear or move them, or fill with fewer columns")

    if typed_cols and max(typed_cols) >= start:
        start = max(typed_cols) + 1
        room(start)
        read = pkg.read_columns(sheet, list(range(start, start + n_new)),
                                first_row=match.row + 1) | {c: read[c] for c in price_cols}
    # merged blocks at or below the header row: only their top-left cell shows
    merged = [(left, right) for top, left, bottom, right in pkg.merged_blocks(sheet)
              if bottom >= match.row]
    room(start)
    while busy := [c for c in range(start, start + n_new)
                   if _has_cells(read[c]) or any(lo <= c <= hi for lo, hi in merged)]:
        # cells far below the header, or a merged block, in the columns we meant to use:
        # move right of them (past a merged block in one step)
        start = max([max(busy) + 1, *(hi + 1 for lo, hi in merged if lo <= max(busy) <= hi)])
        room(start)
        read = pkg.read_columns(sheet, list(range(start, start + n_new)),
                                first_row=match.row + 1) | {c: read[c] for c in price_cols}
    new_cols = list(range(start, start + n_new))
    if table_of_bars is not None and new_cols and new_cols[0] > table_of_bars.right + 1:
        warnings.append(_outside_table(where, table_of_bars, new_cols, match.headers))
    targets = [reused[s.header] if s.header in reused else (free or new_cols).pop(0)
               for s in specs]
    sr.replaced = sum(1 for c in targets if c in own)
    look_alikes = _look_alikes(match, own, specs)  # the headers as written, per_year in
    for col, text in sorted(look_alikes.items()):
        moved = next((col_letter(t) for s, t in zip(specs, targets, strict=True)
                      if s.header == text), "")
        warnings.append(
            f'{where}: column {col_letter(col)} is headed "{text}" like a sheetvol column, but '
            "no record of an earlier fill says sheetvol wrote it, so it is left as it is (not "
            f"written by sheetvol){'; the new one is column ' + moved if moved else ''}")
    hidden = pkg.hidden_columns(sheet) & set(targets)
    if hidden:
        letters_ = ", ".join(col_letter(c) for c in sorted(hidden))
        warnings.append(f"{where}: column{'s' if len(hidden) > 1 else ''} {letters_} "
                        "written by the fill "
                        f"{'are' if len(hidden) > 1 else 'is'} hidden in the workbook; "
                        "unhide them to see the results")

    for role, chosen in options.columns.items():  # a column the user named must hold prices
        if role in table.prices and not np.isfinite(table.prices[role]).any():
            letter = letters.get(role, chosen)
            raise FillError(
                f"{where}: the {role.capitalize()} column chosen with --{role}-col {chosen} "
                f"(column {letter}) has no numbers in rows {match.row + 1} to "
                f"{int(table.rows.max())}; choose the column that holds the {role} prices")
    warnings.extend(f"{where}: {w}" for w in table.warnings)
    progress.advance(progress.READ * share)
    if not len(table):
        raise FillError(f"{where}: no price rows below the header row {match.row}")
    progress.stage(f'{src.name}: computing {len(specs)} columns for "{sheet}"')
    results = compute_columns(specs, table.prices)
    sr.gaps = table.gap_bars(needed_roles(specs))
    progress.advance(progress.COMPUTE * share)

    first_row = int(table.rows.min())
    height = int(table.rows.max()) - first_row + 1
    columns: list[NewColumn] = []
    for spec, col, values in zip(specs, targets, results, strict=True):
        placed = np.full(height, np.nan)
        placed[table.rows - first_row] = values
        columns.append(NewColumn(
            sheet=sheet, col=col, header_row=match.row, header=spec.header,
            first_row=first_row, values=placed,
            number_format=_number_format(spec, table.decimals),
            width=max(10.0, len(spec.header) * 1.1 + 2),
            replace=col in own,  # only our own earlier columns are cleared first
        ))
        sr.written.append(WrittenColumn(sheet, col_letter(col), spec, letters))
        if not np.isfinite(values).any():
            warnings.append(f"{where}: {spec.header} is blank on every row ({len(table)} bars "
                            "are not enough for its window)")
    for col in free:  # earlier columns this recipe no longer has: cleared
        columns.append(NewColumn(sheet=sheet, col=col, header_row=match.row, header="",
                                 first_row=first_row, values=np.full(1, np.nan),
                                 number_format="General"))
    return columns, targets, specs


def _annualised(specs: list[ColumnSpec], dates: np.ndarray, where: str, match: HeaderMatch,
                assumptions: list[str], warnings: list[str], default_set: bool
                ) -> list[ColumnSpec]:
    """Specs with ``per_year`` from the bar dates where the recipe did not state it.

    The figure used is stated in the assumptions (and in the header when it is not
    252). Irregular spacing is refused, naming the date column and the way out; the
    default column set, which the user did not ask for, leaves those columns out
    with the same words as a warning.
    """
    wanting = [s for s in specs if "per_year" in s.options and "per_year" not in s.given]
    if not wanting:
        return specs
    spacing = bars_per_year(dates)
    names = ", ".join(s.header for s in wanting)
    per_year = spacing.per_year
    date_col = match.columns.get("date")
    if spacing.kind == "too few dates":  # nothing to annualise wrongly: say the convention
        per_year = float(TRADING_DAYS)
        assumptions.append(f"{where}: {per_year:g} bars/yr for {names} ({spacing.detail}; "
                           "trading days assumed)")
    elif not per_year:
        place = f"the dates in column {col_letter(date_col)}" if date_col else "the dates"
        message = (f"{where}: cannot tell the bars per year to annualise {names}: {place} "
                   f"are irregular ({spacing.detail}); state it in a recipe, e.g. options = "
                   "{ period = 20, per_year = 252 }, or fix the dates")
        if not default_set:
            raise FillError(message)
        warnings.append(f"{message}; left out")
        return [s for s in specs if s not in wanting]
    else:
        assumptions.append(f"{where}: {spacing.describe()} for {names}, from the dates")
    out = []
    for s in specs:
        if s in wanting:
            opts = {**s.options, "per_year": per_year}
            header = s.header if s.header_given else default_header(s.function, opts, s.inputs)
            s = dataclasses.replace(s, options=opts, header=header,
                                    given=s.given | {"per_year"})
        out.append(s)
    return out


def _outside_table(where: str, table: Any, new_cols: Sequence[int],
                   headers: Mapping[int, str]) -> str:
    """Why new columns went right of a busy column instead of into the table of bars."""
    first = table.right + 1
    head = headers.get(first)
    held = f" ({col_letter(first)}{table.header_row} {head!r})" if head else ""
    return (f'{where}: table "{table.display_name or table.name}" ({table.ref}) ends at column '
            f"{col_letter(table.right)} and column {col_letter(first)} holds other "
            f"cells{held}, so the new columns went to {col_letter(new_cols[0])}:"
            f"{col_letter(new_cols[-1])}, outside the table; to have them inside, widen the "
            f"table over column {col_letter(first)} (or move those cells) and fill again")


def _instrument_column(match: HeaderMatch) -> int | None:
    """The column of a price sheet that names the instrument of each bar, if any."""
    names = {normalize_header(n) for n in LOG_COLUMNS["instrument"]}
    used = set(match.columns.values())
    return next((c for c, text in sorted(match.headers.items())
                 if c not in used and normalize_header(text) in names), None)


def _bars_frame(table: PriceTable) -> pd.DataFrame:
    """A price table as the trade review reads bars: Date (day numbers, 1900-system serials)
    and the price columns."""
    data: dict[str, object] = {"Date": table.dates}  # day numbers: the review reads them as is
    for role in BAR_PRICES:
        if role in table.prices:
            data[role.capitalize()] = table.prices[role]
    return pd.DataFrame(data)


def _long_sheet_bars(pkg: Package, sr: SheetReport, inst_col: int
                     ) -> dict[str, tuple[pd.DataFrame, int]]:
    """Bars of each instrument on one long price sheet, and their price decimals."""
    roles = [r for r in ("date", "open", "high", "low", "close") if r in sr.match.columns]
    cols = [sr.match.columns[r] for r in roles] + [inst_col]
    first = sr.match.row + 1
    read = pkg.read_columns(sr.sheet, cols, first_row=first)

    def values(col: int) -> list[object]:
        column = read[col]
        out: list[object] = [None if x != x else x for x in column.numbers.tolist()]
        for r, v in column.other.items():
            if 0 <= r - first < len(out):
                out[r - first] = None if isinstance(v, CellError) else v
            elif r - first >= len(out):
                out.extend([None] * (r - first - len(out) + 1))
                out[r - first] = v
        return out

    raw = {role: values(sr.match.columns[role]) for role in roles}
    names = values(inst_col)
    n = max([len(names), *(len(v) for v in raw.values())])
    for key in raw:
        raw[key] += [None] * (n - len(raw[key]))
    names += [None] * (n - len(names))
    if "date" in raw:
        raw["date"] = [pd.Timestamp(cells.serial_to_datetime(float(v), date1904=pkg.date1904))
                       if isinstance(v, float) else v for v in raw["date"]]
    frame = pd.DataFrame({role.capitalize(): raw[role] for role in roles})
    keys = pd.Series([instrument_key(x) if isinstance(x, str) and x.strip() else ""
                      for x in names])
    out: dict[str, tuple[pd.DataFrame, int]] = {}
    for key in dict.fromkeys(keys):
        if not key:
            continue
        part = frame[(keys == key).to_numpy()].reset_index(drop=True)
        close = pd.to_numeric(part.get("Close"), errors="coerce").to_numpy(dtype=float)
        out[key] = (part, price_decimals(close[np.isfinite(close)]))
    return out


def _notes_rows(src: Path, report: FillReport) -> list[list[object]]:
    notes = []
    for sr in report.sheets:
        table = sr.table
        if table is None:
            notes.append(SheetNote(sr.sheet, sr.match.row, sr.match.describe(), sr.long_sheet,
                                   "none"))
            continue
        span = table.first_last_dates()
        bars = f"{len(table)}" + (f" ({span[0]} to {span[1]})" if span else "")
        bars += f", {table.order}"
        if table.order == "newest first":
            bars += "; computed oldest first, written back on each bar's row"
        notes.append(SheetNote(sr.sheet, sr.match.row, sr.match.describe(), bars,
                               _describe_counts(table.skipped) or "none",
                               _describe_gaps(sr.gaps) if sr.gaps else "none"))
    trades = report.trades
    return build_notes(
        input_name=src.name,
        input_sha256=report.input_sha256,
        sheets=notes,
        written=report.written,
        formulas=report.formulas,
        warnings=report.warnings,
        assumptions=report.assumptions,
        trade_columns=[] if trades is None else [
            (trades.sheet, letter, header, meaning) for letter, header, meaning in trades.written],
        trade_settings=[] if trades is None else [
            ("Trade log", f'sheet "{trades.sheet}", header row {trades.header_row}, '
                          f"{trades.trades} trades"),
            *trades.settings,
            ("Summary and outcomes", f'sheet "{REVIEW_SHEET}"')],
        trade_review=trades is not None,
    )


def _evaluate_formulas(pkg: Package, found: Sequence[FormulaCell],
                       taken: Mapping[str, set[int]], report: FillReport, *,
                       keep: bool) -> list:
    """Results for typed sheetvol formulas, as values or (``keep``) beside the formula text.

    Values are the default because a spreadsheet program without the add-in may
    recalculate a kept formula on opening (array formulas always are, in
    LibreOffice) and then shows an error; the notes sheet keeps every formula's
    text, so an add-in user can type it back.
    """
    try:
        from sheetvol.functions import evaluator as formulas
    except ImportError:  # the evaluator ships with the package; guard for partial installs
        report.warnings.append("typed sheetvol formulas found but the evaluator is missing")
        return []
    # Cells in columns the fill replaces are skipped, and so is text that merely contains
    # "SV_" (a string such as ="SV_ATR("&A1 calls no sheetvol function).
    kept = [fc for fc in found if fc.col not in taken.get(fc.sheet, set())
            and formulas.mentions_sheetvol(fc.formula)]
    resolver = formulas.package_resolver(pkg)
    # All cells at once, each after the sheetvol cells it reads (a stop reading an ATR cell
    # sees the fresh ATR); one cell at a time only if that pass itself cannot run.
    results: dict = {}
    try:
        results = formulas.evaluate_cells(kept, resolver, date1904=pkg.date1904)
    except (WorkbookError, ValueError) as exc:
        report.warnings.append(f"typed formulas evaluated one by one ({exc})")
    edits: list = []
    for fc in kept:
        ref = f"{_quote(fc.sheet)}!{col_letter(fc.col)}{fc.row}"
        try:
            value = results.get((fc.sheet, fc.row, fc.col))
            if value is None and (fc.sheet, fc.row, fc.col) not in results:
                value = formulas.evaluate(fc.formula, resolver, current_sheet=fc.sheet,
                                          date1904=pkg.date1904)
            if isinstance(value, formulas.FormulaError):
                raise value
        except formulas.ArgumentMessage as exc:
            # One policy for a bad argument: the cell shows the add-in's own message.
            report.warnings.append(f"{ref}: {exc.text}")
            edits.append(CellResult(fc.sheet, fc.row, fc.col, exc.text) if keep
                         else ValueResult(fc.sheet, fc.row, fc.col, exc.text))
            report.formulas.append(FormulaNote(ref, fc.formula, f"bad argument: {exc.text}"))
            continue
        except (formulas.FormulaError, registry.ArgumentError, WorkbookError, ValueError) as exc:
            report.warnings.append(f"{ref}: formula left as it was: {exc}")
            report.formulas.append(FormulaNote(ref, fc.formula, f"not evaluated: {exc}"))
            continue
        if isinstance(value, np.ndarray):
            values = np.asarray(value, dtype=np.float64).reshape(-1)
            below = pkg.read_range(fc.sheet, fc.row + 1, fc.col, fc.row + len(values) - 1,
                                   fc.col) if len(values) > 1 else []
            if any(row[0] is not None for row in below) and fc.array_ref is None:
                report.warnings.append(
                    f"{ref}: a column of {len(values)} results would cover cells below it "
                    "that are not empty; formula left as it was"
                )
                report.formulas.append(FormulaNote(ref, fc.formula, "not written: cells below"))
                continue
            edits.append(SpillResult(fc.sheet, fc.row, fc.col, fc.formula, values) if keep
                         else ValueResult(fc.sheet, fc.row, fc.col, values))
            outcome = f"column of {len(values)} values"
        else:
            if isinstance(value, float) and not math.isfinite(value):
                value = None
            edits.append(CellResult(fc.sheet, fc.row, fc.col, value) if keep
                         else ValueResult(fc.sheet, fc.row, fc.col, value))
            outcome = "blank" if value is None else value  # a number stays a number
        report.formulas_ok += 1
        report.formulas.append(FormulaNote(ref, fc.formula, outcome))
    return edits


def _quote(sheet: str) -> str:
    return sheet if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_.]*", sheet) else f"'{sheet}'"


def _charts(sr: SheetReport, specs: Sequence[ColumnSpec], targets: Sequence[int],
            top: int, written: Mapping[tuple[str, int], np.ndarray]) -> list:
    """Close with the bands, and the price-unit dispersion columns, as native line charts."""
    table = sr.table
    assert table is not None
    match = sr.match
    x_col = match.columns.get("date", match.columns["close"])
    lo, hi = int(table.rows.min()), int(table.rows.max())
    bands = [c for s, c in zip(specs, targets, strict=True)
             if s.func.unit == "price" and s.func.group in ("bands", "averages")]
    spread = [c for s, c in zip(specs, targets, strict=True)
              if s.func.unit == "price" and s.func.group in ("dispersion", "ranges")]
    x_format = "yyyy-mm-dd" if "date" in match.columns else None
    # A price axis from 0 flattens every line: bound it by the plotted values instead.
    shown = [table.prices["close"], *(written[(sr.sheet, c)] for c in bands)]
    y_min, y_max = axis_bounds(np.concatenate(shown))
    edits: list = [LineChart(sr.sheet, f"{sr.sheet}: close and bands", x_col,
                             [match.columns["close"], *bands], lo, hi, CHART_SHEET, f"A{top}",
                             x_format=x_format, y_min=y_min, y_max=y_max)]
    if spread:
        edits.append(LineChart(sr.sheet, f"{sr.sheet}: dispersion and ATR", x_col, spread, lo,
                               hi, CHART_SHEET, f"A{top + 22}", x_format=x_format))
    return edits


def axis_bounds(values: np.ndarray) -> tuple[float | None, float | None]:
    """Round value-axis bounds a little outside the finite values (None when there are none).

    >>> axis_bounds(np.array([1.0512, 1.2487, np.nan]))
    (1.04, 1.26)
    >>> axis_bounds(np.array([35136.0, 42101.65]))
    (34700.0, 42500.0)
    """
    finite = values[np.isfinite(values)]
    if not len(finite):
        return None, None
    lo, hi = float(finite.min()), float(finite.max())
    span = hi - lo or abs(hi) or 1.0
    step = 10.0 ** (math.floor(math.log10(span)) - 1)  # two significant digits of the span
    pad = 0.05 * span
    return (round(math.floor((lo - pad) / step) * step, 12),
            round(math.ceil((hi + pad) / step) * step, 12))


def _write(pkg: Package, out: Path, edits: list, report: FillReport,
           progress: _Progress | None = None) -> None:
    progress = progress or _Progress()
    tables = [s.table for s in report.sheets if s.table is not None and len(s.table)]
    progress.stage(f"writing {out.name}")
    callback = progress.writer(sum(int(t.rows.max()) for t in tables))
    # Stored results only help if the program does not recalculate everything on opening.
    kept = any(isinstance(e, (CellResult, SpillResult)) for e in edits)
    try:
        write_package(pkg, out, edits, progress=callback,
                      calc_on_load=False if kept else None)
    except OSError as exc:  # the output's folder or disk, never the input here
        raise FillError(f"{report.input.name}: cannot write the output {out}: "
                        f"{exc.strerror or exc}") from None
    progress.advance(100.0)  # the rest (sheets beyond the price rows), then shown full
    progress.stage(f"wrote {out.name}")
