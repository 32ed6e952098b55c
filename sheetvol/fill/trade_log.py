"""The trade-log part of the fill: find the log, review it, and say what to write.

The fill (:mod:`sheetvol.fill.job`) finds the price sheets; this module finds a
trade log (a sheet whose header row has a date, an instrument and a side, see
:data:`sheetvol.fill.review.LOG_COLUMNS`) and an instrument-details sheet, runs
:func:`sheetvol.fill.review.review_log` on them, and returns the writer's edits:
review columns to the right of the log (numbers, and the outcome and notes of
each trade as text), and a review sheet with the summary (shares as
percentages), the outcome counts, the settings and the cautions.
"""

from __future__ import annotations

import itertools
import math
import re
from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sheetvol.fill.locate import (
    HEADER_SCAN_ROWS,
    LocateError,
    col_letter,
    find_header,
    normalize_header,
    still_headed,
)
from sheetvol.fill.notes import NOTES_SHEET
from sheetvol.fill.recipe import TradeRecipe, check_measure, default_header, split_basis
from sheetvol.fill.review import (
    LOG_COLUMNS,
    SUMMARY_LABELS,
    Instrument,
    TradeSettings,
    instruments_from_frame,
    review_log,
    summarise,
)
from sheetvol.functions import cells
from sheetvol.functions._lazy import pandas as pd
from sheetvol.workbook import CellError, NewColumn, NewSheet, Package, Styled

__all__ = [
    "LARGE_RISK",
    "OUTCOME_WORDS",
    "OWN_HEADER",
    "REVIEW_SHEET",
    "TRADE_CAUTIONS",
    "TRADE_CAUTION_LINE",
    "TradeLog",
    "TradeLogError",
    "TradeReport",
    "find_instruments",
    "find_trade_log",
    "instrument_key",
    "plan_trade_review",
    "scaled_format",
    "settings_from",
]

REVIEW_SHEET = "Trade review"
TRADE_CAUTIONS = (
    "Not advice: these figures describe what past prices did to the logged trades.",
    "A stop does not guarantee the exit price: markets gap through stops and orders slip, "
    "so a loss can exceed the planned risk.",
    "Check every size against your broker's margin rules, the contract specifications and "
    "local regulation before trading.",
)
TRADE_CAUTION_LINE = ("Not advice; stops do not guarantee exit prices (gaps, slippage); check "
                      "sizes against your broker's margin rules and local regulation. "
                      f'More on the notes sheet "{NOTES_SHEET}".')
# Canonical log headers: the frame handed to review_log uses these names.
_CANONICAL = {"date": "Date", "instrument": "Instrument", "side": "Side", "entry": "Entry",
              "exit": "Exit", "exit_date": "Exit date", "quantity": "Quantity",
              "equity": "Equity"}
_REQUIRED = ("date", "instrument", "side")
# Headers this module writes (any parameters): recognised on a re-run without the notes.
OWN_HEADER = re.compile(
    r"^(Entry-bar .+|Stop \S+×vol|Target \S+×vol|Target in R|Size at \S+ risk"
    r"|Trail \S+×vol|Reviewed exit|Reviewed exit date|R multiple|Bars held|Worst move"
    r"|Best move|Worst move in R|Best move in R|Open risk|Reviewed outcome|Size note"
    r"|Review note)$"
)
# review_log's Result -> the words written in the log and counted on the review sheet
OUTCOME_WORDS = {
    "stop": "stop hit",
    "target": "target hit",
    "trail": "trailing stop hit",
    "closed": "closed at the logged exit",
    "open": "still open",
    "ambiguous": "ambiguous: stop and target on one bar",
    "": "not reviewed (see note)",
}
# review_log columns written as text; the others are numbers
_TEXT_KEYS = ("Size note", "Result", "Note")
# Summary figures by SUMMARY_LABELS key -> number format on the review sheet
_SUMMARY_FORMATS = {"trades": "0", "finished": "0", "losing_streak": "0",
                    "total_r": "0.00", "expectancy": "0.00",
                    "open_risk": "#,##0.00"}
_SHARE_FORMAT = "0.0%"
#: Risk per trade above this share of equity is accepted but warned about (common
#: practice, no source: desks rarely risk more than a few percent on one trade).
LARGE_RISK = 0.05


class TradeLogError(ValueError):
    """A trade log or instruments sheet that was asked for but cannot be used."""


@dataclass(frozen=True)
class TradeLog:
    """Where a trade log is: its sheet, header row and a column per role."""

    sheet: str
    header_row: int
    roles: dict[str, int]
    headers: dict[int, str]
    instrument: str = ""  # no instrument column: the workbook's only price sheet


@dataclass
class TradeReport:
    """What the trade review read and wrote, for the summary and the notes sheet."""

    sheet: str
    header_row: int
    trades: int = 0
    counts: Counter = field(default_factory=Counter)
    written: list[tuple[str, str, str]] = field(default_factory=list)  # letter, header, what
    replaced: int = 0
    summary: pd.Series | None = None
    settings: list[tuple[str, str]] = field(default_factory=list)
    instruments_sheet: str = ""
    problems: list[str] = field(default_factory=list)
    reviewed: pd.DataFrame | None = None
    warnings: list[str] = field(default_factory=list)  # printed by lines(), on the sheets
    instrument: str = ""  # every trade's instrument when the log has no instrument column

    def lines(self) -> list[str]:
        """Lines for the terminal summary."""
        out = [f'  trade log "{self.sheet}", header row {self.header_row}: {self.trades} trades'
               + (f'; contract details from "{self.instruments_sheet}"'
                  if self.instruments_sheet else "; contract details: defaults (1 per point)")]
        if self.instrument:
            out.append(f'    no instrument column: every trade is on "{self.instrument}", the '
                       "only price sheet")
        order = ("stop", "target", "trail", "closed", "open", "ambiguous", "")
        shown = [f"{self.counts[k]} {k or 'not reviewed'}" for k in order if self.counts[k]]
        out.append(f"    outcomes: {', '.join(shown) or 'none'}")
        if self.summary is not None:
            s = self.summary
            share = _fmt(100 * s[SUMMARY_LABELS['open_risk_share']], '.2f')
            out.append(f"    total R {_fmt(s[SUMMARY_LABELS['total_r']], '.2f')}, expectancy "
                       f"{_fmt(s[SUMMARY_LABELS['expectancy']], '.2f')} R, open risk "
                       + (f"{share}% of equity" if share != "n/a" else
                          "share n/a (no equity: add an Equity column or --equity)"))
        if self.written:
            again = f" ({self.replaced} replaced from an earlier fill)" if self.replaced else ""
            out.append(f"    columns written{again}: "
                       + ", ".join(f"{letter} {h}" for letter, h, _ in self.written))
        out.append(f'    summary and outcome counts on sheet "{REVIEW_SHEET}"')
        out.extend(f"    warning: {w}" for w in self.warnings)
        return out


def _fmt(x: Any, spec: str) -> str:
    try:
        x = float(x)
    except (TypeError, ValueError):
        return "n/a"
    return format(x, spec) if math.isfinite(x) else "n/a"


# -- finding the sheets -------------------------------------------------------------------
def _log_roles(row: Mapping[int, object], overrides: Mapping[str, str]) -> dict[str, int]:
    by_text: dict[str, int] = {}
    for col, value in sorted(row.items()):
        if isinstance(value, str) and value.strip():
            by_text.setdefault(normalize_header(value), col)
    roles: dict[str, int] = {}
    for role, names in LOG_COLUMNS.items():
        wanted = [overrides[role]] if role in overrides else names
        for name in wanted:
            col = by_text.get(normalize_header(name))
            if col is not None:
                roles[role] = col
                break
    return roles


def find_trade_log(pkg: Package, recipe: TradeRecipe, skip: Sequence[str] = (),
                   where: str = "") -> TradeLog | None:
    """The trade-log sheet: ``recipe.sheet``, else the first sheet whose header has the roles.

    A log without an instrument column is used when the workbook has exactly
    one price sheet (a sheet whose header has a date and a close, and no
    instrument column): every trade is taken to be on it. Found by itself, such
    a log also needs an entry-price column, so a sheet with only a date and a
    side is not mistaken for a log.

    Parameters
    ----------
    pkg : Package
        The opened workbook.
    recipe : TradeRecipe
        ``sheet`` (optional) and ``columns`` (header overrides).
    skip : sequence of str
        Sheet names not to consider (sheetvol's own sheets), compared casefolded.
    where : str
        File name for messages.

    Returns
    -------
    TradeLog or None
        None when no sheet looks like a trade log (and none was named).

    Raises
    ------
    TradeLogError
        The named sheet does not exist or lacks a date, instrument or side
        column; the message lists the roles found and those missing.

    Examples
    --------
    >>> find_trade_log(Package.open("desk.xlsx"), TradeRecipe())  # doctest: +SKIP
    TradeLog(sheet='Trades', header_row=1, ...)
    """
    skipped = {s.casefold() for s in skip}
    if recipe.sheet:
        names = [pkg.sheet(recipe.sheet).name]
    else:
        names = [s.name for s in pkg.sheets
                 if s.kind == "worksheet" and s.name.casefold() not in skipped]
    others = [s.name for s in pkg.sheets if s.kind == "worksheet"
              and s.name.casefold() not in skipped]
    for name in names:
        grid = pkg.read_grid(name, max_rows=HEADER_SCAN_ROWS)
        best: tuple[int, dict[str, int]] | None = None
        only: str | None = None  # looked up once, when a row lacks only the instrument
        for r in sorted(grid.rows):
            roles = _log_roles(grid.rows[r], recipe.columns)
            headers = {c: str(v) for c, v in grid.rows[r].items()
                       if isinstance(v, str) and v.strip()}
            if all(k in roles for k in _REQUIRED):
                return TradeLog(name, r, roles, headers)
            if best is None or len(roles) > len(best[1]):
                best = (r, roles)
            no_instrument = all(k in roles for k in _REQUIRED if k != "instrument")
            if no_instrument and (recipe.sheet or "entry" in roles):
                if only is None:
                    only = _only_price_sheet(pkg, [n for n in others if n != name])
                if only:
                    return TradeLog(name, r, roles, headers, instrument=only)
        if recipe.sheet:
            row, roles = best if best is not None else (0, {})
            found = ", ".join(f"{k} ({col_letter(c)})" for k, c in roles.items()) or "none"
            missing = ", ".join(f"{k} ({'/'.join(LOG_COLUMNS[k][:3])})" for k in _REQUIRED
                                if k not in roles)
            where_row = f"best header row {row}" if row else f"first {HEADER_SCAN_ROWS} rows"
            extra = (" (a log without one is used when the workbook has exactly one price "
                     "sheet)" if "instrument" not in roles else "")
            raise TradeLogError(
                f'{where}, sheet "{name}": no header row with the trade-log columns; '
                f"{where_row}: found {found}; missing {missing}{extra}; name a column with "
                '[trades] columns, e.g. columns = { side = "B/S" }')
    return None


def _only_price_sheet(pkg: Package, names: Sequence[str]) -> str:
    """The one sheet among ``names`` with bars of a single instrument ("" unless exactly one)."""
    found = []
    instrument_words = {normalize_header(n) for n in LOG_COLUMNS["instrument"]}
    for name in names:
        grid = pkg.read_grid(name, max_rows=HEADER_SCAN_ROWS)
        try:
            match = find_header(grid.rows)
        except LocateError:
            continue
        if "date" not in match.columns:
            continue
        if any(normalize_header(t) in instrument_words for t in match.headers.values()):
            return ""  # one long sheet of several instruments
        found.append(name)
    return found[0] if len(found) == 1 else ""


def find_instruments(pkg: Package, recipe: TradeRecipe, skip: Sequence[str] = (),
                     where: str = "") -> tuple[str, dict[str, Instrument]]:
    """Instrument details from ``recipe.instruments`` or a sheet headed Instrument + Point value.

    Parameters
    ----------
    pkg : Package
        The opened workbook.
    recipe : TradeRecipe
        ``instruments`` (optional sheet name).
    skip : sequence of str
        Sheets not to consider.
    where : str
        File name for messages.

    Returns
    -------
    tuple
        The sheet name ("" when none) and :class:`Instrument` by name.

    Examples
    --------
    >>> find_instruments(Package.open("desk.xlsx"), TradeRecipe())  # doctest: +SKIP
    ('Instruments', {'KESTREL': Instrument(...), ...})
    """
    skipped = {s.casefold() for s in skip}
    names = ([pkg.sheet(recipe.instruments).name] if recipe.instruments else
             [s.name for s in pkg.sheets
              if s.kind == "worksheet" and s.name.casefold() not in skipped])
    detail_words = {"point value", "lot step", "min qty", "max qty", "fx rate", "tick",
                    "tick size"}
    for name in names:
        grid = pkg.read_grid(name, max_rows=2000)
        for r in sorted(grid.rows)[:HEADER_SCAN_ROWS]:
            texts = {c: normalize_header(v) for c, v in grid.rows[r].items()
                     if isinstance(v, str)}
            if "instrument" in texts.values() and detail_words & set(texts.values()):
                cols = sorted(texts)
                body = [[_plain(grid.rows.get(rr, {}).get(c)) for c in cols]
                        for rr in range(r + 1, grid.max_row + 1)]
                frame = pd.DataFrame(body, columns=[grid.rows[r][c] for c in cols])
                try:
                    return name, instruments_from_frame(frame)
                except (ValueError, cells.CellValueError) as exc:
                    raise TradeLogError(f'{where}, sheet "{name}": {exc}') from None
        if recipe.instruments:
            raise TradeLogError(
                f'{where}, sheet "{name}": no header row with Instrument and Point value / Lot '
                "step / Min qty / Max qty / FX rate / Tick columns")
    return "", {}


def instrument_key(name: object) -> str:
    """An instrument or sheet name as compared: case and surrounding spaces ignored.

    Examples
    --------
    >>> instrument_key(" Kestrel ")
    'kestrel'
    """
    return " ".join(str(name).split()).lower()


def _plain(value: object) -> object:
    return None if isinstance(value, CellError) else value


# -- settings ---------------------------------------------------------------------------------
def settings_from(recipe: TradeRecipe, instruments: Mapping[str, Instrument]) -> TradeSettings:
    """The :class:`TradeSettings` of a recipe plus the instrument details found.

    Parameters
    ----------
    recipe : TradeRecipe
        Measure, multiples, risk share and equity.
    instruments : mapping
        Contract details by instrument name.

    Returns
    -------
    TradeSettings

    Examples
    --------
    >>> settings_from(TradeRecipe(risk=0.02), {}).risk
    0.02
    """
    return TradeSettings(
        measure=recipe.measure, options=dict(recipe.options),
        stop_multiple=recipe.stop_multiple, target_multiple=recipe.target_multiple,
        trail_multiple=recipe.trail_multiple, risk=recipe.risk, equity=recipe.equity,
        instruments=dict(instruments),
    )


def _num(x: float) -> str:
    return f"{x:g}"


def _headers(recipe: TradeRecipe) -> dict[str, str]:
    """Output column of :func:`review_log` -> header written, in the order written."""
    func = check_measure(recipe)
    basis, options = split_basis(func, recipe.options)
    opts = func.bind(kwargs={**{p.name: np.zeros(1) for p in func.columns}, **options})
    bound = {p.name: opts[p.name] for p in func.options}
    label = default_header(func.name, bound, {"prices": basis} if any(
        p.name == "prices" for p in func.columns) else {})
    heads = {
        "Volatility": f"Entry-bar {label}",
        "Bar date": "Entry-bar date",
        "Stop": f"Stop {_num(recipe.stop_multiple)}×vol",
        "Target": f"Target {_num(recipe.target_multiple)}×vol",
        "Target R": "Target in R",
        "Size": f"Size at {_num(100 * recipe.risk)}% risk",
        "Size note": "Size note",
        "Trail": f"Trail {_num(recipe.trail_multiple)}×vol",
        "Result": "Reviewed outcome",
        "Exit price": "Reviewed exit",
        "Exit date": "Reviewed exit date",
        "R": "R multiple",
        "Bars": "Bars held",
        "Adverse": "Worst move",
        "Favourable": "Best move",
        "Adverse R": "Worst move in R",
        "Favourable R": "Best move in R",
        "Open risk": "Open risk",
        "Note": "Review note",
    }
    if recipe.trail_multiple == 0:
        del heads["Trail"]
    return heads


_MEANING = {
    "Volatility": "volatility on the entry bar (last bar on or before the entry date)",
    "Bar date": "date of that bar",
    "Stop": "entry -/+ stop multiple x volatility (mirrored for short trades), rounded away "
            "from entry to the instrument's tick",
    "Target": "entry +/- target multiple x volatility, rounded toward entry to the tick",
    "Target R": "target distance in units of the stop distance",
    "Size": "equity x risk / (stop distance x point value x FX rate), down to the lot step "
            "(the distance to the rounded stop)",
    "Size note": "why the size is zero, below the minimum or capped (blank when fine)",
    "Trail": "trailing stop in force at the end of the review (rounded away from the price "
             "to the tick)",
    "Result": "which came first: stop, target, trailing stop, logged exit; or still open, "
              "or ambiguous (stop and target on one bar)",
    "Exit price": "exit price found by the review (stop, target, trail or logged exit)",
    "Exit date": "date of that exit",
    "R": "result in R (open trades: marked at the last close)",
    "Bars": "bars held after the entry bar",
    "Adverse": "largest move against the trade while held (price)",
    "Favourable": "largest move for the trade while held (price)",
    "Adverse R": "the same in R",
    "Favourable R": "the same in R",
    "Open risk": "open trades: money lost if the stop in force were hit from the last close",
    "Note": "why something on the row could not be computed (blank when all went well)",
}


# -- reading the log ----------------------------------------------------------------------
def _read_log(pkg: Package, log: TradeLog) -> tuple[pd.DataFrame, Any]:
    """The log's role columns as a frame indexed by sheet row, and the sheet's cells."""
    grid = pkg.read_grid(log.sheet)
    rows = []
    index = []
    for r in range(log.header_row + 1, grid.max_row + 1):
        cells_r = grid.rows.get(r, {})
        values = {role: _plain(cells_r.get(col)) for role, col in log.roles.items()}
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in values.values()):
            continue
        for role in ("date", "exit_date"):
            v = values.get(role)
            if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v):
                values[role] = pd.Timestamp(cells.serial_to_datetime(
                    float(v), date1904=pkg.date1904))
        rows.append({_CANONICAL[k]: v for k, v in values.items()})
        index.append(r)
    frame = pd.DataFrame(rows, index=index, columns=[_CANONICAL[k] for k in log.roles])
    return frame, grid


def _own_columns(log: TradeLog, grid: Any, recorded: Mapping[str, str]) -> dict[int, str]:
    """Columns an earlier fill wrote right of the log: col -> header."""
    header_cells = grid.rows.get(log.header_row, {})
    own = still_headed(recorded, header_cells)
    for col, value in header_cells.items():
        if isinstance(value, str) and OWN_HEADER.match(value):
            own[col] = value
    return {c: h for c, h in own.items() if c not in set(log.roles.values())}


# -- the plan ---------------------------------------------------------------------------------
def plan_trade_review(
    pkg: Package,
    log: TradeLog,
    recipe: TradeRecipe,
    prices: Mapping[str, pd.DataFrame],
    decimals: Mapping[str, int],
    *,
    instruments: tuple[str, Mapping[str, Instrument]] = ("", {}),
    recorded: Mapping[str, str] | None = None,
    where: str = "",
) -> tuple[list, TradeReport]:
    """Review the log and return the edits: log columns and the review sheet.

    Parameters
    ----------
    pkg : Package
        The opened workbook (for the log's cells and its date system).
    log : TradeLog
        From :func:`find_trade_log`.
    recipe : TradeRecipe
        The settings.
    prices : mapping
        Bars per instrument (Date, Open, High, Low, Close columns).
    decimals : mapping
        Price decimals per instrument (for the number formats).
    instruments : tuple
        Sheet name and details, from :func:`find_instruments`.
    recorded : mapping, optional
        Column letter -> header an earlier fill recorded for this sheet.
    where : str
        File name for messages.

    Returns
    -------
    tuple
        The edits (:class:`NewColumn` and one :class:`NewSheet`) and a :class:`TradeReport`.

    Examples
    --------
    >>> edits, rep = plan_trade_review(pkg, log, TradeRecipe(), prices, {})  # doctest: +SKIP
    """
    settings = settings_from(recipe, instruments[1])
    frame, grid = _read_log(pkg, log)
    if log.instrument and "Instrument" not in frame.columns:
        frame["Instrument"] = log.instrument
    report = TradeReport(sheet=log.sheet, header_row=log.header_row, trades=len(frame),
                         instruments_sheet=instruments[0], instrument=log.instrument)
    if recipe.risk > LARGE_RISK:
        report.warnings.append(
            f"risk per trade is {_num(100 * recipe.risk)}% of equity, above "
            f"{_num(100 * LARGE_RISK)}%: risk is a share of equity (0.01 = 1%); check the "
            "setting")
    try:
        reviewed = review_log(frame, prices, settings)
    except ValueError as exc:  # settings were checked; this is the log itself
        raise TradeLogError(f'{where}, sheet "{log.sheet}": {exc}') from None
    report.reviewed = reviewed
    report.counts = Counter(reviewed["Result"].tolist())
    report.summary = summarise(reviewed, frame, settings)
    for row, note in zip(reviewed.index, reviewed["Note"], strict=True):
        if note and "no prices" in note:
            report.problems.append(f'{where}, sheet "{log.sheet}" row {row}: {note}')

    heads = _headers(recipe)
    own = _own_columns(log, grid, recorded or {})
    # Earlier columns of ours are reused in order; more go right of every used column.
    used = [c for row in grid.rows.values() for c, v in row.items() if v is not None]
    start = max([*used, *log.roles.values()]) + 1
    free = sorted(own)
    targets = {}
    for key in heads:
        if free:
            targets[key] = free.pop(0)
        else:
            targets[key] = start
            start += 1
    report.replaced = len(own) - len(free)

    names = [instrument_key(n) for n in frame.get("Instrument", pd.Series(dtype=object))]
    price_places = [decimals.get(n, 2) for n in names]
    size_places = [_step_decimals(settings.instrument(n).lot_step) for n in names]
    formats = {"Bar date": "yyyy-mm-dd", "Exit date": "yyyy-mm-dd", "Target R": "0.00",
               "R": "0.00", "Adverse R": "0.00", "Favourable R": "0.00", "Bars": "0",
               "Open risk": "#,##0.00"}
    first, last = log.header_row + 1, max([log.header_row + 1, *frame.index])
    edits: list = []
    for key, header in heads.items():
        col = targets[key]
        if key in _TEXT_KEYS:
            texts = _texts(reviewed[key], key)
            values = np.full(last - first + 1, None, dtype=object)
            values[np.asarray(frame.index, dtype=int) - first] = texts
            edits.append(NewColumn(sheet=log.sheet, col=col, header_row=log.header_row,
                                   header=header, first_row=first, values=values,
                                   number_format="General", width=_text_width(header, texts),
                                   replace=col in own))
            report.written.append((col_letter(col), header, _MEANING[key]))
            continue
        values = np.full(last - first + 1, np.nan)
        column = reviewed[key]
        if key in ("Bar date", "Exit date"):
            nums = [math.nan if pd.isna(v) else cells.datetime_to_serial(
                pd.Timestamp(v).to_pydatetime(), date1904=pkg.date1904) for v in column]
        else:
            nums = pd.to_numeric(column, errors="coerce").to_numpy(dtype=float)
        values[np.asarray(frame.index, dtype=int) - first] = nums
        fmt = formats.get(key) or scaled_format(
            np.asarray(nums, dtype=float), size_places if key == "Size" else price_places)
        edits.append(NewColumn(sheet=log.sheet, col=col, header_row=log.header_row,
                               header=header, first_row=first, values=values,
                               number_format=fmt,
                               width=_width(header, nums, fmt, size_places if key == "Size"
                                            else price_places),
                               replace=col in own))
        report.written.append((col_letter(col), header, _MEANING[key]))
    for col in free:  # earlier columns these settings no longer write
        edits.append(NewColumn(sheet=log.sheet, col=col, header_row=log.header_row, header="",
                               first_row=first, values=np.full(1, np.nan),
                               number_format="General"))
    report.settings = _settings_rows(recipe, settings, instruments[0], log.instrument)
    report.settings += [("Warning", w) for w in report.warnings]
    edits.append(NewSheet(name=REVIEW_SHEET, rows=_review_rows(report), widths=[40, 14]))
    return edits, report


def _texts(column: pd.Series, key: str) -> list[str | None]:
    """A text column of the review as written: outcome words, blanks for empty notes."""
    if key == "Result":
        return [OUTCOME_WORDS.get(str(v), str(v)) for v in column]
    return [None if v is None or (isinstance(v, float) and math.isnan(v)) or not str(v)
            else str(v) for v in column]


def _text_width(header: str, texts: Sequence[str | None]) -> float:
    """A width that fits the header and the longest text, within 10 to 40 characters."""
    longest = max([len(header), *(len(t) for t in texts if t)])
    return float(max(10, min(40, longest + 1.5)))


def _decimal_format(decimals: int) -> str:
    return "#,##0" + ("." + "0" * decimals if decimals > 0 else "")


def scaled_format(values: np.ndarray, places: Sequence[int]) -> str:
    """One number format that shows each instrument's decimals, where magnitudes allow.

    A column mixes instruments (a currency pair to 5 decimals, an index to 2). A
    column has one number format, so the rows are told apart by size: when the
    instruments with different decimals occupy separate ranges of values (at most
    three groups), the format gets conditions at a round threshold between them.
    Otherwise, or with negative values, every row shows the most decimals.

    Parameters
    ----------
    values : numpy.ndarray
        The column's values (NaN for blanks), one per row.
    places : sequence of int
        Decimals wanted on each row.

    Returns
    -------
    str

    Examples
    --------
    >>> scaled_format(np.array([1.08, 101.5, 2010.25]), [5, 2, 2])
    '[<10]#,##0.00000;[>=10]#,##0.00'
    >>> scaled_format(np.array([1.08, 1.05, 2010.25]), [5, 2, 2])  # overlap: most decimals
    '#,##0.00000'
    """
    x = np.asarray(values, dtype=float)
    p = np.asarray(places, dtype=int)
    ok = np.isfinite(x)
    if not ok.any():
        return _decimal_format(int(p.max()) if len(p) else 2)
    x, p = x[ok], p[ok]
    most = _decimal_format(int(p.max()))
    if len(set(p.tolist())) == 1 or (x < 0).any():
        return most
    nonzero = x != 0  # zero reads the same with any decimals
    groups = sorted([float(x[nonzero & (p == d)].min()), float(x[nonzero & (p == d)].max()), d]
                    for d in set(p[nonzero].tolist()))  # [low, high, decimals] by low
    if len(groups) > 3:
        return most
    cuts = []
    for lower, upper in itertools.pairwise(groups):
        if not lower[1] < upper[0]:
            return most  # the instruments' values overlap: sizes cannot tell them apart
        cuts.append(_round_between(lower[1], upper[0]))
    if len(groups) == 1:
        return _decimal_format(int(groups[0][2]))
    fmts = [_decimal_format(int(g[2])) for g in groups]
    if len(groups) == 2:
        return f"[<{cuts[0]:g}]{fmts[0]};[>={cuts[0]:g}]{fmts[1]}"
    return f"[<{cuts[0]:g}]{fmts[0]};[<{cuts[1]:g}]{fmts[1]};{fmts[2]}"


def _round_between(low: float, high: float) -> float:
    """A round number above ``low`` and at most ``high`` (a power of ten when one fits)."""
    if high <= 0:
        return high
    power = 10.0 ** math.ceil(math.log10(max(low, 1e-12) * (1 + 1e-12)))
    if low < power <= high:
        return power
    mid = math.sqrt(max(low, 1e-12) * high)
    step = 10.0 ** (math.floor(math.log10(mid)) - 1)
    cut = math.ceil(mid / step) * step
    return cut if low < cut <= high else high


def _width(header: str, values: Sequence[float], fmt: str, places: Sequence[int]) -> float:
    """A column width that fits the header and the widest value as shown."""
    shown = [len(f"{v:,.{d}f}") for v, d in zip(values, places, strict=True)
             if isinstance(v, float) and math.isfinite(v)]
    if "yyyy" in fmt:
        shown = [10]
    elif fmt.startswith("0.00"):
        shown = [len(f"{v:.2f}") for v in values if isinstance(v, float) and math.isfinite(v)]
    return float(max(8, min(40, max([len(header) * 0.95, *(n * 1.05 for n in shown)]) + 1.5)))


def _step_decimals(step: float) -> int:
    if not (math.isfinite(step) and step > 0) or float(step).is_integer():
        return 0
    return min(6, max(0, -math.floor(math.log10(step) + 1e-9)))


def _settings_rows(recipe: TradeRecipe, settings: TradeSettings,
                   instruments_sheet: str, instrument: str = "") -> list[tuple[str, str]]:
    func = check_measure(recipe)
    opts = ", ".join(f"{k}={v}" for k, v in recipe.options.items())
    ticks = {k: v.tick for k, v in settings.instruments.items() if v.tick > 0}
    levels = ("rounded to each instrument's tick (Tick column of the contract details): "
              "stop and trailing stop away from entry, target toward entry; the size uses "
              "the rounded stop" + ("" if len(ticks) == len(settings.instruments) else
                                    "; instruments without a tick are not rounded")
              if ticks else "not rounded (no Tick column in the contract details)")
    equity = ("the log's Equity column (the latest trade's for the open-risk share)"
              if not math.isfinite(recipe.equity) else f"{recipe.equity:,.2f}")
    details = (f'sheet "{instruments_sheet}"' if instruments_sheet else
               "none found: point value 1, lot step 1, no size limits, FX rate 1")
    return [
        ("Volatility measure", f"{func.name}({opts})" if opts else func.name),
        ("Stop multiple", _num(recipe.stop_multiple)),
        ("Target multiple", _num(recipe.target_multiple)),
        ("Trail multiple", _num(recipe.trail_multiple) + (" (off)" if not
                                                          recipe.trail_multiple else "")),
        ("Risk per trade", f"{_num(100 * recipe.risk)}% of equity"),
        ("Equity", equity),
        ("Contract details", details),
        ("Levels", levels),
        *([("Instrument", f'the log has no instrument column: every trade is on "{instrument}"'
            ", the workbook's only price sheet")] if instrument else []),
        ("Defaults", "ATR 14, stop 2, target 3, trail 3, risk 1%: common practice, no source"),
    ]


def _review_rows(report: TradeReport) -> list[list[object]]:
    """The review sheet: summary (shares as fractions shown in %), outcome counts, settings,
    cautions."""
    s = report.summary
    assert s is not None
    rows: list[list[object]] = [[f'Trade review of sheet "{report.sheet}" (not advice)'], []]
    rows.append(["Summary", "Value"])
    for key, label in SUMMARY_LABELS.items():
        value = _cell_number(s[label])
        fmt = _SUMMARY_FORMATS.get(key, _SHARE_FORMAT)
        rows.append([label, value if value is None else Styled(value, fmt)])
    rows += [[], ["Outcome", "Trades"]]
    for key, words in OUTCOME_WORDS.items():
        rows.append([words, report.counts.get(key, 0)])
    rows += [[], ["Settings"]]
    rows += [list(r) for r in report.settings]
    rows += [[], [f'Each trade\'s outcome, R, size and notes are on sheet "{report.sheet}", '
                  "beside the trade."]]
    rows += [[], ["Cautions"]]
    rows += [[c] for c in TRADE_CAUTIONS]
    return rows


def _cell_number(value: Any) -> Any:
    if value is None or isinstance(value, str):
        return value
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    if not math.isfinite(x):
        return None
    return int(x) if isinstance(value, (int, np.integer)) else x

