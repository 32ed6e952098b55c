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
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from sheetvol.core.levels import STOP_MULTIPLE, TARGET_MULTIPLE, TRAIL_MULTIPLE
from sheetvol.core.review import MEASURE, PERIOD, RESULTS
from sheetvol.core.sizing import RISK_SHARE
from sheetvol.fill.locate import (
    HEADER_SCAN_ROWS,
    LocateError,
    col_letter,
    find_header,
    list_headers,
    normalize_header,
    still_headed,
)
from sheetvol.fill.notes import NOTES_SHEET
from sheetvol.fill.recipe import check_measure, default_header, split_basis
from sheetvol.fill.review import (
    LOG_COLUMNS,
    NO_EQUITY,
    POINT_VALUE_ASSUMED,
    SUMMARY_LABELS,
    TRADES_REVIEWED,
    LogArrays,
    contract_role,
    instruments_from_frame,
    latest_equity,
    review_arrays,
    summarise,
)
from sheetvol.fill.trade_settings import Instrument, TradeSettings, instrument_key
from sheetvol.functions import cells
from sheetvol.functions._lazy import pandas as pd
from sheetvol.functions.grid import MAX_COL
from sheetvol.workbook import CellError, NewColumn, NewSheet, Package, Styled

__all__ = [
    "LARGE_RISK",
    "NOT_CHOSEN_NOTE",
    "NOT_REVIEWED",
    "OUTCOME_WORDS",
    "OWN_HEADER",
    "REVIEW_SHEET",
    "TRADE_CAUTIONS",
    "TRADE_CAUTION_LINE",
    "Contracts",
    "TradeLog",
    "TradeLogError",
    "TradeReport",
    "find_instruments",
    "find_trade_log",
    "instrument_key",
    "plan_trade_review",
    "read_log",
    "scaled_format",
    "stated_equity",
    "stated_settings",
]

REVIEW_SHEET = "Trade review"
#: The Review note of a trade whose price sheet was left out with --sheet.
NOT_CHOSEN_NOTE = "not reviewed: its price sheet was not chosen (--sheet)"
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
# The log's roles, in the order of the log's columns.
_CANONICAL = ("date", "instrument", "side", "entry", "exit", "exit_date", "quantity",
              "equity")
_REQUIRED = ("date", "instrument", "side")
# Headers this module writes (any parameters).
OWN_HEADER = re.compile(
    r"^(Entry-bar .+|Stop \S+(?:×| ?x )vol|Target \S+(?:×| ?x )vol|Target in R"
    r"|Size at \S+ risk|Trail \S+(?:×| ?x )vol|Reviewed exit|Reviewed exit date|R multiple"
    r"|Bars held|Worst move"
    r"|Best move|Worst move in R|Best move in R|Open risk|Reviewed outcome|Size note"
    r"|Review note)$"
)
# review_log's Result -> what it means. The log gets the result word itself, the one
# SV_OUTCOME returns (one vocabulary for the fill, the typed forms and a lookup);
# "" is written as NOT_REVIEWED. The review sheet counts the words and says what they mean.
NOT_REVIEWED = "not reviewed"
OUTCOME_WORDS = {
    "stop": "the stop was hit first",
    "target": "the target was hit first",
    "trail": "the trailing stop was hit first",
    "closed": "closed at the logged exit, before any level",
    "open": "still open at the last bar",
    "ambiguous": "stop and target on one bar: which came first is unknown",
    "": "not reviewed: the Review note says why",
}
# review_log columns written as text; the others are numbers
_TEXT_KEYS = ("Size note", "Result", "Note")
# Summary figures by SUMMARY_LABELS key -> number format on the review sheet
_SUMMARY_FORMATS = {"trades": "0", "finished": "0", "losing_streak": "0",
                    "total_r": "0.00", "expectancy": "0.00",
                    "open_risk": "#,##0.00",
                    "open_risk_share": "0.00%"}  # as the terminal prints it
_SHARE_FORMAT = "0.0%"
#: The review's defaults in words, as the sheet and the CLI help give them (stated in core).
DEFAULTS_WORDS = (f"{MEASURE.upper()} {PERIOD}, "
                  f"stop {STOP_MULTIPLE:g}, target {TARGET_MULTIPLE:g}, "
                  f"trail {TRAIL_MULTIPLE:g}, risk {100 * RISK_SHARE:g}%")
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
    # what the review assumed (defaults, columns not used): the fill's report.assumptions
    assumptions: list[str] = field(default_factory=list)
    # trades whose price sheet exists but was not chosen (--sheet): not reviewed
    not_chosen: int = 0

    def lines(self) -> list[str]:
        """Lines for the terminal summary."""
        reviewed = (_fmt(self.summary[SUMMARY_LABELS["trades"]], ".0f")
                    if self.summary is not None else "0")
        out = [f'  trade log "{self.sheet}", header row {self.header_row}: {self.trades} '
               f"trades in the log, {reviewed} reviewed ({TRADES_REVIEWED})"
               + (f'; contract details from "{self.instruments_sheet}"'
                  if self.instruments_sheet else "; contract details: defaults (1 per point)")]
        if self.instrument:
            out.append(f'    no instrument column: every trade is on "{self.instrument}", the '
                       "only price sheet")
        order = (*RESULTS, "")  # "": not reviewed
        shown = [f"{self.counts[k]} {k or 'not reviewed'}" for k in order if self.counts[k]]
        out.append(f"    outcomes: {', '.join(shown) or 'none'}")
        if self.summary is not None:
            s = self.summary
            share = _fmt(100 * s[SUMMARY_LABELS['open_risk_share']], '.2f')
            money = _fmt(s[SUMMARY_LABELS['open_risk']], ',.2f')
            risk_text = (f"{share}% of equity" if share != "n/a" else
                         f"n/a ({NO_EQUITY})" if money == "n/a" else
                         f"{money} (share n/a: {NO_EQUITY})")
            out.append(f"    {'partial totals: ' if self.not_chosen else ''}"
                       f"total R {_fmt(s[SUMMARY_LABELS['total_r']], '.2f')}, expectancy "
                       f"{_fmt(s[SUMMARY_LABELS['expectancy']], '.2f')} R, open risk "
                       + risk_text)
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
            found = by_text.get(normalize_header(name))
            if found is not None:
                roles[role] = found
                break
    return roles


def find_trade_log(pkg: Package, recipe: TradeSettings, skip: Sequence[str] = (),
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
    recipe : TradeSettings
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
    >>> find_trade_log(Package.open("desk.xlsx"), TradeSettings())  # doctest: +SKIP
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
    # The row most like a log header, over all sheets: where a header named in the
    # recipe was looked for in vain.
    closest: tuple[int, str, int, dict[str, int], dict[int, str]] | None = None
    for name in names:
        grid = pkg.read_grid(name, max_rows=HEADER_SCAN_ROWS)
        best: tuple[int, dict[str, int]] | None = None
        only: str | None = None  # looked up once, when a row lacks only the instrument
        for r in sorted(grid.rows):
            roles = _log_roles(grid.rows[r], recipe.columns)
            headers = {c: str(v) for c, v in grid.rows[r].items()
                       if isinstance(v, str) and v.strip()}
            if all(k in roles for k in _REQUIRED):
                _check_named_columns(recipe, name, r, roles, headers, where=where)
                return TradeLog(name, r, roles, headers)
            if best is None or len(roles) > len(best[1]):
                best = (r, roles)
            if closest is None or len(roles) > closest[0]:
                closest = (len(roles), name, r, roles, headers)
            no_instrument = all(k in roles for k in _REQUIRED if k != "instrument")
            if no_instrument and (recipe.sheet or "entry" in roles):
                if only is None:
                    only = _only_price_sheet(pkg, [n for n in others if n != name])
                if only:
                    _check_named_columns(recipe, name, r, roles, headers, where=where)
                    return TradeLog(name, r, roles, headers, instrument=only)
        if recipe.sheet:
            if closest is not None:
                _check_named_columns(recipe, *closest[1:], where=where)
            row, roles = best if best is not None else (0, {})
            found = ", ".join(f"{k} ({col_letter(c)})" for k, c in roles.items()) or "none"
            missing = ", ".join(f"{k} ({'/'.join(LOG_COLUMNS[k][:3])})" for k in _REQUIRED
                                if k not in roles)
            where_row = f"best header row {row}" if row else f"first {HEADER_SCAN_ROWS} rows"
            extra = (" (a log without one is used when the workbook has exactly one price "
                     "sheet)" if "instrument" not in roles else "")
            way_out = ("name the log's own header for a missing role with [trades] columns, "
                       'e.g. columns = { side = "<its header>" }')
            raise TradeLogError(
                f'{where}, sheet "{name}": no header row with the trade-log columns; '
                f"{where_row}: found {found}; missing {missing}{extra}; {way_out}")
    if closest is not None:
        _check_named_columns(recipe, *closest[1:], where=where)
    return None


def _check_named_columns(recipe: TradeSettings, sheet: str, row: int, roles: Mapping[str, int],
                         headers: Mapping[int, str], *, where: str) -> None:
    """Refuse headers named in ``[trades] columns`` that the closest header row lacks."""
    absent = {role: given for role, given in recipe.columns.items() if role not in roles}
    if not absent:
        return
    named = ", ".join(f'{role} = "{given}"' for role, given in absent.items())
    heads = " or ".join(f'"{given}"' for given in absent.values())
    usual = "; ".join(f"{role}: {'/'.join(LOG_COLUMNS[role][:3])}" for role in absent
                      if role in LOG_COLUMNS)
    raise TradeLogError(
        f'{where}, sheet "{sheet}": [trades] columns: {named}: no column headed {heads} in row '
        f"{row} (headers there: {list_headers(headers)}); give a header from that row, or "
        f"remove it from [trades] columns so the usual names are looked for ({usual})")


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


@dataclass(frozen=True)
class Contracts:
    """Contract details found in the workbook: the sheet, each instrument's details, and the
    headers on that sheet the review does not use."""

    sheet: str = ""
    instruments: Mapping[str, Instrument] = field(default_factory=dict)
    unused: tuple[str, ...] = ()
    header_row: int = 0


def find_instruments(pkg: Package, recipe: TradeSettings, skip: Sequence[str] = (),
                     where: str = "") -> Contracts:
    """Contract details from ``recipe.contract_sheet`` or the first sheet that has them.

    A contract sheet has a header row with an instrument column (the words of
    :data:`sheetvol.fill.review.LOG_COLUMNS`, as in the log) and at least one
    contract detail under its usual trade words (see
    :func:`sheetvol.fill.review.contract_role`). Its other headers are reported
    as not used.

    Parameters
    ----------
    pkg : Package
        The opened workbook.
    recipe : TradeSettings
        ``instruments`` (optional sheet name).
    skip : sequence of str
        Sheets not to consider.
    where : str
        File name for messages.

    Returns
    -------
    Contracts
        Empty (``sheet`` "") when no sheet has contract details.

    Examples
    --------
    >>> find_instruments(Package.open("desk.xlsx"), TradeSettings())  # doctest: +SKIP
    Contracts(sheet='Instruments', instruments={'KESTREL': Instrument(...), ...}, ...)
    """
    skipped = {s.casefold() for s in skip}
    names = ([pkg.sheet(recipe.contract_sheet).name] if recipe.contract_sheet else
             [s.name for s in pkg.sheets
              if s.kind == "worksheet" and s.name.casefold() not in skipped])
    for name in names:
        grid = pkg.read_grid(name, max_rows=2000)
        for r in sorted(grid.rows)[:HEADER_SCAN_ROWS]:
            texts = {c: v for c, v in grid.rows[r].items() if isinstance(v, str) and v.strip()}
            roles = {c: contract_role(v) for c, v in texts.items()}
            if "instrument" not in roles.values() or not set(roles.values()) - {
                    "instrument", None}:
                continue
            cols = sorted(texts)
            body = [[_plain(grid.rows.get(rr, {}).get(c)) for c in cols]
                    for rr in range(r + 1, grid.max_row + 1)]
            frame = pd.DataFrame(body, columns=[texts[c] for c in cols])
            seen: set[str | None] = set()
            unused = []
            for c in cols:  # the first column of a role is read, as instruments_from_frame does
                if roles[c] is None or roles[c] in seen:
                    unused.append(texts[c].strip())
                seen.add(roles[c])
            try:
                return Contracts(name, instruments_from_frame(frame), tuple(unused), r)
            except (ValueError, cells.CellValueError) as exc:
                raise TradeLogError(f'{where}, sheet "{name}": {exc}') from None
        if recipe.contract_sheet:
            raise TradeLogError(
                f'{where}, sheet "{name}": no header row with an instrument column '
                f"({'/'.join(LOG_COLUMNS['instrument'])}) and a contract detail (point value, "
                "multiplier, contract size, tick size, tick value, lot step, min/max qty, FX "
                "rate)")
    return Contracts()


#: Sheet names where a workbook states settings such as the account equity (the template's).
SETTINGS_SHEETS = ("settings",)


def stated_equity(pkg: Package, skip: Sequence[str] = ()) -> tuple[float, str] | None:
    """The account equity the workbook itself states, and where: a defined name or a
    Settings sheet.

    A workbook-level name spelled like an equity header of the log (``Equity``,
    ``Account_equity``, ``AccountEquity``) pointing at one cell with a number
    wins; else the first row of a sheet named Settings whose label reads as
    equity with a number in the next cell to its right (the template's
    layout).

    Parameters
    ----------
    pkg : Package
        The opened workbook.
    skip : sequence of str
        Sheets not to read (the log, the contract sheet).

    Returns
    -------
    tuple or None
        The equity and its cell (``"Settings!B1"``), or None.

    Examples
    --------
    >>> stated_equity(Package.open("workbooks/template.xlsx"))
    (100000.0, 'Settings!B1')
    """
    words = [normalize_header(w) for w in LOG_COLUMNS["equity"]]
    for word in words:
        for spelling in (word.replace(" ", "_"), word.replace(" ", ""),
                         word.title().replace(" ", "")):
            found = pkg.named_cell(spelling)
            if found is None:
                continue
            sheet, row, col = found
            try:
                value = pkg.read_range(sheet, row, col, row, col)[0][0]
            except (KeyError, ValueError):  # a name pointing at no worksheet: not an equity
                continue
            if isinstance(value, (int, float)) and not isinstance(value, bool) and value > 0:
                return float(value), f"{_ref_sheet(sheet)}!{col_letter(col)}{row}"
    return stated_settings(pkg, skip).get("equity")


def _settings_key(label: str) -> str | None:
    """The review setting a Settings-sheet label names (None: not one)."""
    text = normalize_header(label)
    if text in {normalize_header(w) for w in LOG_COLUMNS["equity"]}:
        return "equity"
    words = set(text.split())
    if "risk" in words:
        return "risk"
    for key, word in (("trail_multiple", "trail"), ("trail_multiple", "trailing"),
                      ("stop_multiple", "stop"), ("target_multiple", "target")):
        if word in words:
            return key
    return None


def stated_settings(pkg: Package, skip: Sequence[str] = ()) -> dict[str, tuple[float, str]]:
    """Figures a Settings sheet states for the review: equity, risk, stop, target, trail.

    A label in one cell (``Account equity``, ``Risk per trade``, ``Stop distance
    (ATR multiples)``, ``Target distance``, ``Trailing stop``) with a number in the
    cell to its right; the first of each counts.

    Parameters
    ----------
    pkg : Package
        The opened workbook.
    skip : sequence of str
        Sheets not to read.

    Returns
    -------
    dict
        Setting (``equity``, ``risk``, ``stop_multiple``, ``target_multiple``,
        ``trail_multiple``) -> (value, cell).

    Examples
    --------
    >>> stated_settings(Package.open("workbooks/template.xlsx"))["risk"]
    (0.01, 'Settings!B2')
    """
    skipped = {s.casefold() for s in skip}
    found: dict[str, tuple[float, str]] = {}
    for info in pkg.sheets:
        if (info.kind != "worksheet" or info.name.casefold() not in SETTINGS_SHEETS
                or info.name.casefold() in skipped):
            continue
        grid = pkg.read_grid(info.name, max_rows=HEADER_SCAN_ROWS)
        for r in sorted(grid.rows):
            row = grid.rows[r]
            for c in sorted(row):
                v, right = row[c], row.get(c + 1)
                key = _settings_key(v) if isinstance(v, str) else None
                if (key and key not in found and isinstance(right, (int, float))
                        and not isinstance(right, bool) and right >= 0):
                    found[key] = (float(right),
                                  f"{_ref_sheet(info.name)}!{col_letter(c + 1)}{r}")
    return found


def _ref_sheet(sheet: str) -> str:
    return sheet if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_.]*", sheet) else f"'{sheet}'"


def _plain(value: object) -> object:
    return None if isinstance(value, CellError) else value


# -- settings ---------------------------------------------------------------------------------
def _num(x: float) -> str:
    return f"{x:g}"


def _headers(recipe: TradeSettings) -> dict[str, str]:
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
        "Stop": f"Stop {_num(recipe.stop_multiple)}x vol",
        "Target": f"Target {_num(recipe.target_multiple)}x vol",
        "Target R": "Target in R",
        "Size": f"Size at {_num(100 * recipe.risk)}% risk",
        "Size note": "Size note",
        "Trail": f"Trail {_num(recipe.trail_multiple)}x vol",
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
    "Trail": "trailing stop: on the exit bar for a closed trade; for an open one the level "
             "set at the last close, to place now (as SV_TRAIL); rounded away from the price",
    "Result": "which came first: stop, target, trail (trailing stop), closed (at the logged "
              "exit); or open, ambiguous (stop and target on one bar), not reviewed: the "
              "words SV_OUTCOME returns",
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
def read_log(pkg: Package, log: TradeLog) -> tuple[LogArrays, Any]:
    """The log read once, straight from its cells: :class:`LogArrays` indexed by sheet row
    (dates as day numbers, amounts as floats), and the sheet's cells.

    Rows where every role column is blank are left out. Columns are those
    :func:`find_trade_log` located; number cells named in messages by their header.

    Parameters
    ----------
    pkg : Package
        The opened workbook.
    log : TradeLog
        From :func:`find_trade_log`.

    Returns
    -------
    tuple
        The arrays and the sheet's grid.

    Examples
    --------
    >>> arrays, grid = read_log(pkg, find_trade_log(pkg, TradeSettings()))  # doctest: +SKIP
    """
    grid = pkg.read_grid(log.sheet)
    offset = cells.DATE_1904_OFFSET if pkg.date1904 else 0.0
    rows: list[int] = []
    values: dict[str, list[object]] = {role: [] for role in _CANONICAL}
    for r in sorted(r for r in grid.rows if r > log.header_row):  # rows with cells only
        cells_r = grid.rows[r]
        got = {role: _plain(cells_r.get(col)) for role, col in log.roles.items()}
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in got.values()):
            continue
        rows.append(r)
        for role in _CANONICAL:
            values[role].append(got.get(role))
    n = len(rows)

    def unreadable(role: str, k: int, what: str) -> TradeLogError:
        col = log.roles[role]
        head = log.headers.get(col, role)
        return TradeLogError(
            f'trade log, sheet "{log.sheet}", cell {col_letter(col)}{rows[k]}: '
            f'{values[role][k]!r} under "{head}" is not {what}; type {what} there or clear '
            "the cell")

    def days(role: str) -> np.ndarray:
        out = np.full(n, np.nan)
        for k, v in enumerate(values[role]):
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                out[k] = float(v) + offset if math.isfinite(v) else math.nan
            elif v is not None:
                try:
                    out[k] = cells.to_day_numbers([v], date1904=pkg.date1904)[0]
                except cells.CellValueError:
                    raise unreadable(role, k, "a date") from None
        return out

    def numbers(role: str) -> np.ndarray:
        if role not in log.roles:
            return np.full(n, np.nan)
        out = np.full(n, np.nan)
        for k, v in enumerate(values[role]):
            try:
                out[k] = cells.to_number(v)
            except cells.CellValueError:
                raise unreadable(role, k, "a number") from None
        return out

    names = (np.full(n, log.instrument, dtype=object) if "instrument" not in log.roles
             else np.array(values["instrument"], dtype=object))
    arrays = LogArrays(
        index=pd.Index(rows), names=names, sides=np.array(values["side"], dtype=object),
        entry_days=days("date"), entries=numbers("entry"), exits=numbers("exit"),
        exit_days=days("exit_date"), quantities=numbers("quantity"),
        equities=numbers("equity"))
    return arrays, grid


def _own_columns(log: TradeLog, grid: Any, recorded: Mapping[str, str]) -> dict[int, str]:
    """Columns an earlier fill wrote right of the log: col -> header.

    Only the notes sheet's record says so; a header alone (see :data:`OWN_HEADER`)
    never makes a user's column ours.
    """
    header_cells = grid.rows.get(log.header_row, {})
    own = still_headed(recorded, header_cells)
    return {c: h for c, h in own.items() if c not in set(log.roles.values())}


# -- the plan ---------------------------------------------------------------------------------
def plan_trade_review(
    pkg: Package,
    log: TradeLog,
    recipe: TradeSettings,
    prices: Mapping[str, pd.DataFrame],
    decimals: Mapping[str, int],
    *,
    instruments: Contracts | None = None,
    recorded: Mapping[str, str] | None = None,
    where: str = "",
    not_chosen: Sequence[str] = (),
) -> tuple[list, TradeReport]:
    """Review the log and return the edits: log columns and the review sheet.

    Parameters
    ----------
    pkg : Package
        The opened workbook (for the log's cells and its date system).
    log : TradeLog
        From :func:`find_trade_log`.
    recipe : TradeSettings
        The settings.
    prices : mapping
        Bars per instrument (Date, Open, High, Low, Close columns).
    decimals : mapping
        Price decimals per instrument (for the number formats).
    instruments : Contracts, optional
        From :func:`find_instruments` (None: no contract sheet).
    recorded : mapping, optional
        Column letter -> header an earlier fill recorded for this sheet.
    where : str
        File name for messages.
    not_chosen : sequence of str
        Price sheets left out of the fill (``--sheet``): their trades are not
        reviewed, said once, and the totals are labelled partial.

    Returns
    -------
    tuple
        The edits (:class:`NewColumn` and one :class:`NewSheet`) and a :class:`TradeReport`.

    Examples
    --------
    >>> edits, rep = plan_trade_review(pkg, log, TradeSettings(), prices, {})  # doctest: +SKIP
    """
    contracts = instruments or Contracts()
    arrays, grid = read_log(pkg, log)
    report = TradeReport(sheet=log.sheet, header_row=log.header_row, trades=len(arrays.index),
                         instruments_sheet=contracts.sheet, instrument=log.instrument)
    equity, equity_text = _equity(pkg, log, recipe, contracts, report)
    # one settings object: the recipe's, with the contract details found and the equity
    settings = replace(recipe, instruments={**recipe.instruments, **contracts.instruments},
                       equity=equity)
    report.assumptions.extend(
        f'column "{h}" on sheet "{contracts.sheet}" not used' for h in contracts.unused)
    report.assumptions.extend(_settings_differ(pkg, log, recipe, contracts))
    traded = dict.fromkeys(str(n).strip() for n in arrays.names
                           if isinstance(n, str) and n.strip())
    defaulted = [n for n in traded if not math.isfinite(settings.instrument(n).point_value)]
    if defaulted:
        where_pv = (f'not on the contract sheet "{contracts.sheet}"' if contracts.sheet
                    else "no contract sheet")
        report.assumptions.append(
            f"{POINT_VALUE_ASSUMED} for {', '.join(defaulted)} ({where_pv}); sizes and open "
            "risk of those trades use 1 per point, and their Size notes say so")
    if recipe.risk > LARGE_RISK:
        report.warnings.append(
            f"risk per trade is {_num(100 * recipe.risk)}% of equity, above "
            f"{_num(100 * LARGE_RISK)}%: risk is a share of equity (0.01 = 1%); check the "
            "setting")
    try:
        reviewed = review_arrays(arrays, prices, settings)
    except ValueError as exc:  # settings were checked; this is the log itself
        raise TradeLogError(f'{where}, sheet "{log.sheet}": {exc}') from None
    left_out = {instrument_key(n): n for n in not_chosen}
    names_left = []
    for row, name, note in zip(reviewed.index, arrays.names, reviewed["Note"], strict=True):
        if note and note.startswith("no prices") and instrument_key(name) in left_out:
            reviewed.loc[row, "Note"] = NOT_CHOSEN_NOTE
            names_left.append(left_out[instrument_key(name)])
    report.not_chosen = len(names_left)
    if names_left:
        report.warnings.append(
            f"{len(names_left)} trades on sheets not chosen with --sheet "
            f"({', '.join(dict.fromkeys(names_left))}) were not reviewed; the review's "
            "totals are partial")
    report.reviewed = reviewed
    report.counts = Counter(reviewed["Result"].tolist())
    report.summary = summarise(reviewed, settings=settings if math.isfinite(settings.equity)
                               else replace(settings, equity=latest_equity(arrays)))
    for row, note in zip(reviewed.index, reviewed["Note"], strict=True):
        if note and note.startswith("no prices"):
            report.problems.append(f'{where}, sheet "{log.sheet}" row {row}: {note}')

    heads = _headers(recipe)
    own = _own_columns(log, grid, recorded or {})
    for col, value in sorted(grid.rows.get(log.header_row, {}).items()):
        if (col not in own and col not in log.roles.values() and isinstance(value, str)
                and OWN_HEADER.match(value)):
            report.problems.append(
                f'{where}, sheet "{log.sheet}": column {col_letter(col)} is headed "{value}" '
                "like a sheetvol column, but no record of an earlier fill says sheetvol wrote "
                "it, so it is left as it is (not written by sheetvol)")
    # Earlier columns of ours are reused in order; more go right of every used column.
    used = [c for row in grid.rows.values() for c, v in row.items() if v is not None]
    start = max([*used, *log.roles.values()]) + 1
    # merged blocks at or below the header row show only their top-left cell: not free
    merged = [(lo, hi) for _top, lo, bottom, hi in pkg.merged_blocks(log.sheet)
              if bottom >= log.header_row]
    free = sorted(own)
    targets = {}
    for key in heads:
        if free:
            targets[key] = free.pop(0)
        else:
            while any(lo <= start <= hi for lo, hi in merged):
                start += 1
            if start > MAX_COL:
                raise TradeLogError(
                    f'trade log, sheet "{log.sheet}": no room for the review columns: cells or '
                    f"merged blocks right of the log reach column {col_letter(MAX_COL)}, the "
                    "sheet's last; clear or move them")
            targets[key] = start
            start += 1
    report.replaced = len(own) - len(free)

    names = [instrument_key(n) for n in arrays.names]
    price_places = [decimals.get(n, 2) for n in names]
    size_places = [_step_decimals(settings.instrument(n).lot_step) for n in names]
    log_date = _date_format(pkg, log, "date", first_row=log.header_row + 1)
    formats = {"Bar date": log_date,
               "Exit date": _date_format(pkg, log, "exit_date", log.header_row + 1, log_date),
               "Target R": "0.00",
               "R": "0.00", "Adverse R": "0.00", "Favourable R": "0.00", "Bars": "0",
               "Open risk": "#,##0.00"}
    first, last = log.header_row + 1, max([log.header_row + 1, *arrays.index])
    at = np.asarray(arrays.index, dtype=int) - first
    edits: list = []
    for key, header in heads.items():
        col = targets[key]
        if key in _TEXT_KEYS:
            texts = _texts(reviewed[key], key)
            values = np.full(last - first + 1, None, dtype=object)
            values[at] = texts
            edits.append(NewColumn(sheet=log.sheet, col=col, header_row=log.header_row,
                                   header=header, first_row=first, values=values,
                                   number_format="General", width=_text_width(header, texts),
                                   replace=col in own))
            report.written.append((col_letter(col), header, _MEANING[key]))
            continue
        values = np.full(last - first + 1, np.nan)
        column = reviewed[key]
        nums = pd.to_numeric(column, errors="coerce").to_numpy(dtype=float)
        if key in ("Bar date", "Exit date"):  # day numbers -> the workbook's date system
            nums = nums - (cells.DATE_1904_OFFSET if pkg.date1904 else 0.0)
        values[at] = nums
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
    report.settings = _settings_rows(recipe, settings, contracts.sheet, log.instrument,
                                     equity_text)
    report.settings += [("Warning", w) for w in report.warnings]
    edits.append(NewSheet(name=REVIEW_SHEET, rows=_review_rows(report), widths=[40, 14, 50]))
    return edits, report


def _date_format(pkg: Package, log: TradeLog, role: str, first_row: int,
                 fallback: str = "yyyy-mm-dd") -> str:
    """The number format of the log's first dated cell in a role's column (its own date
    format), else ``fallback``."""
    col = log.roles.get(role)
    if col is None:
        return fallback
    grid_rows = pkg.read_range(log.sheet, first_row, col, first_row + 20, col)
    for offset, (value,) in enumerate(grid_rows):
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            code = pkg.number_format(log.sheet, first_row + offset, col)
            bare = re.sub(r'"[^"]*"|\[[^\]]*\]', "", code).lower()
            return code if re.search(r"[dy]", bare) else fallback
    return fallback


def _texts(column: pd.Series, key: str) -> list[str | None]:
    """A text column of the review as written: outcome words, blanks for empty notes."""
    if key == "Result":
        return [str(v) if str(v) else NOT_REVIEWED for v in column]
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


def _width(header: str, values: Sequence[float] | np.ndarray, fmt: str,
           places: Sequence[int]) -> float:
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


def _equity(pkg: Package, log: TradeLog, recipe: TradeSettings, contracts: Contracts,
            report: TradeReport) -> tuple[float, str]:
    """The equity for rows without their own, and how the Settings row describes it.

    The recipe (or ``--equity``) wins; else the figure the workbook states
    (:func:`stated_equity`); else none. A stated figure that is not used is said
    in the assumptions, so one workbook does not silently give two answers.
    """
    stated = stated_equity(pkg, skip=[log.sheet, contracts.sheet])
    has_column = "equity" in log.roles
    own = (f"the log's Equity column ({col_letter(log.roles['equity'])}) where filled; "
           if has_column else "")
    if math.isfinite(recipe.equity):
        if stated is not None and not math.isclose(stated[0], recipe.equity, rel_tol=1e-12):
            report.assumptions.append(
                f"equity {recipe.equity:,.2f} from the recipe or --equity is used, not the "
                f"{stated[0]:,.2f} the workbook states in {stated[1]}")
        return recipe.equity, f"{own}{recipe.equity:,.2f} (recipe or --equity)"
    if stated is not None:
        return stated[0], f"{own}{stated[0]:,.2f} from {stated[1]}"
    if has_column:  # rows without an Equity cell say so in their Size note
        return math.nan, f"{own[:-2]}; the latest trade's for the open-risk share"
    return math.nan, f"none ({NO_EQUITY}): sizes and open risk are blank"


_FLAGS = {"risk": "--risk", "stop_multiple": "--stop-multiple",
          "target_multiple": "--target-multiple", "trail_multiple": "--trail-multiple"}


def _settings_differ(pkg: Package, log: TradeLog, recipe: TradeSettings,
                     contracts: Contracts) -> list[str]:
    """Settings the workbook states that the review does not use (one workbook, one answer:
    the difference is said, with the way to agree)."""
    stated = stated_settings(pkg, skip=[log.sheet, contracts.sheet])
    out = []
    for key, flag in _FLAGS.items():
        if key in stated and not math.isclose(stated[key][0], getattr(recipe, key),
                                              rel_tol=1e-12):
            value, ref = stated[key]
            out.append(f"{ref} states {key.replace('_', ' ')} {value:g}, the review uses "
                       f"{getattr(recipe, key):g}: give {flag} {value:g} (or [trades] {key}) "
                       "to agree")
    return out


def _settings_rows(recipe: TradeSettings, settings: TradeSettings,
                   instruments_sheet: str, instrument: str = "",
                   equity: str = "") -> list[tuple[str, str]]:
    func = check_measure(recipe)
    opts = ", ".join(f"{k}={v}" for k, v in recipe.options.items())
    ticks = {k: v.tick for k, v in settings.instruments.items() if v.tick > 0}
    untick = sorted(k for k, v in settings.instruments.items() if not v.tick > 0)
    if ticks:
        levels = [("Levels", "rounded to each instrument's tick (contract details)"),
                  ("  stops, trailing stops", "away from entry: never tighter"),
                  ("  targets", "toward entry"),
                  ("  size", "from the distance to the rounded stop")]
        if untick:
            levels.append(("  not rounded", ", ".join(untick) + " (no tick given)"))
    else:
        levels = [("Levels", "not rounded (no tick size in the contract details)")]
    details = (f'sheet "{instruments_sheet}"' if instruments_sheet else
               "none found: point value 1 (assumed; see the Size notes), lot step 1, no size "
               "limits, FX rate 1")
    return [
        ("Volatility measure", f"{func.name}({opts})" if opts else func.name),
        ("Stop multiple", _num(recipe.stop_multiple)),
        ("Target multiple", _num(recipe.target_multiple)),
        ("Trail multiple", _num(recipe.trail_multiple) + (" (off)" if not
                                                          recipe.trail_multiple else "")),
        ("Risk per trade", f"{_num(100 * recipe.risk)}% of equity"),
        ("Equity", equity),
        ("Contract details", details),
        *levels,
        *([("Instrument", f'the log has no instrument column: every trade is on "{instrument}"'
            ", the workbook's only price sheet")] if instrument else []),
        ("Defaults", f"{DEFAULTS_WORDS}: common practice, no source"),
    ]


def _review_rows(report: TradeReport) -> list[list[object]]:
    """The review sheet: summary (shares as fractions shown in %), outcome counts, settings,
    cautions."""
    s = report.summary
    assert s is not None
    rows: list[list[object]] = [[f'Trade review of sheet "{report.sheet}" (not advice)'], []]
    title = "Summary" + (f" (partial: {report.not_chosen} trades on sheets not chosen with "
                         "--sheet were not reviewed)" if report.not_chosen else "")
    rows.append([title, "Value"])
    rows.append(["Trades in the log", Styled(report.trades, "0")])
    for key, label in SUMMARY_LABELS.items():
        value = _cell_number(s[label])
        fmt = _SUMMARY_FORMATS.get(key, _SHARE_FORMAT)
        rows.append([label, value if value is None else Styled(value, fmt)])
    rows += [[], ["Outcome", "Trades", "Meaning"]]
    for key, words in OUTCOME_WORDS.items():
        rows.append([key or NOT_REVIEWED, report.counts.get(key, 0), words])
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

