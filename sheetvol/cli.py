"""The ``sheetvol`` command: ``fill`` exports, list ``functions``.

Errors go to stderr as one line per file, naming the file, sheet and cell
(never a traceback; a batch goes on to the next file whatever failed, and Ctrl-C
stops the run with one line); the exit code is 0 when every file was filled, 1
when any failed or the run was interrupted, and 2 for a command line that cannot
be understood.
"""

from __future__ import annotations

import argparse
import dataclasses
import glob
import os
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from sheetvol._version import __version__
from sheetvol.fill.job import USER_ERRORS, FillOptions, fill_file, output_path
from sheetvol.fill.recipe import (
    TRADE_KEYS,
    RecipeError,
    TradeSettings,
    check_trade_number,
    default_specs,
    read_recipe,
)
from sheetvol.fill.trade_log import DEFAULTS_WORDS
from sheetvol.functions import registry

__all__ = ["build_parser", "main"]

PROG = "sheetvol"
ROLES = ("date", "open", "high", "low", "close", "volume")
NAME_PREFIX = "SV_"  # every worksheet function's name starts with it


def _default_lines() -> str:
    return "\n".join(
        f"  {s.header:<28} {s.function} {s.describe_options()}" for s in default_specs()
    )


FILL_DESCRIPTION = """\
Add volatility columns to price exports (.xlsx, .xlsm or .csv) and write a copy.

Every sheet of bars (a Date and a Close column with numbers below the
header) is filled; other sheets are left alone (--sheet picks some). Its
Date/Open/High/Low/Close(/Volume) columns are found by their headers (plain
trade words such as Close, Last, Settle, in any case, with brackets, asterisks,
units or "price" around them; the header row may be below a title; a
separate Time column of an intraday export is joined to the date). Rows are
computed in date order (newest-first exports too) and each result is written
on its bar's row; warm-up rows stay blank. Everything else in the workbook is
kept as it was.
A notes sheet ("sheetvol notes") records the input file and its SHA-256, the
columns read and each column's function and parameters. Sheetvol formulas typed
into cells (=SV_...) are evaluated too, each after the sheetvol cells it reads;
by default each becomes its value, so any spreadsheet program shows numbers,
and its text is listed on the notes sheet (--formulas keep keeps it live).

Trade log: a sheet headed Date, Instrument and Side (optionally Entry, Exit,
Exit date, Quantity, Equity) is reviewed against the bars of each instrument
(a sheet named like the instrument, or one long sheet with an Instrument
column). To the right of the log go: volatility on the entry bar, stop and
target at a multiple of it, the size that risks a share of equity (rounded
down to the lot step; point value (or multiplier, contract size, tick value),
tick size (levels are rounded to it), lot step, min/max quantity and FX rate
from a contract sheet keyed by instrument; a point value not given is 1 and
said so on the row), the trailing stop, the
reviewed exit, R, bars held and the largest moves against and for the
trade, with the outcome, size note and review note in words (blank where
nothing applies; a re-run replaces them). A "Trade review" sheet holds the
summary (hit rates, total R, expectancy in R, largest losing streak, open
risk as a share of equity), the outcome counts, the settings and the
cautions. Defaults: {trade_defaults} (risk as a share of equity; common
practice, no source).

Default columns:
{defaults}
"""

FILL_EPILOG = """\
rows the fill skips or leaves blank:
  skipped: blank rows; dated rows without prices (holidays) or with only
  error values or blank words in the price cells; summary and footer rows
  ("Total", "Average", or anything without a date after the last bar).
  Gaps: on a kept bar, a blank price cell, an error (#N/A) or a blank word
  ("n/a", "-"); the columns that need that price are blank on that bar and
  their windows continue over the other bars. The summary counts each
  skipped row and each gap bar once, and names the cells holding an error
  or a word (the first five, then how many more).
  Text that is not a number ("abc"), High below Low, the same date twice or
  an unreadable date stop the fill with the cell named; nothing is written.

recipe file (TOML), for any registry function (see `sheetvol functions`):
  [[column]]
  function = "SV_DEVIATION"
  options = { period = 20, average = "exponential" }

  [[column]]
  function = "SV_ATR"
  id = "atr"
  header = "ATR 10"
  options = { period = 10 }

  [[column]]
  function = "SV_VOLRANK"
  inputs = { values = "atr" }     # a price column or an earlier column's id

  [trades]                        # the trade-log review (every key optional)
  sheet = "Trades"                # default: the sheet headed Date/Instrument/Side
  instruments = "Instruments"     # default: the first sheet of contract details
  measure = "atr"                 # or "deviation", or e.g. "SV_ATR"
  options = { period = 20 }
  stop_multiple = 2
  target_multiple = 3
  trail_multiple = 3              # 0 turns the trailing stop off
  risk = 0.01                     # share of equity per trade
  equity = 100000                 # where the log has no Equity column
  columns = { side = "B/S" }      # the log's own header for a role
  A recipe with only [trades] keeps the default columns.

examples:
  sheetvol fill prices.xlsx                     writes prices-filled.xlsx beside it
  sheetvol fill export.csv -o report.xlsx
  sheetvol fill exports/*.xlsx --out-dir filled/
  sheetvol fill book.xlsm --sheet Daily --close-col "Settle" --header-row 4
  sheetvol fill workbooks/demo-desk.xlsx        every price sheet and the trade log
  sheetvol fill desk.xlsx --sheet KESTREL       only that sheet (its trades still reviewed)
  sheetvol fill desk.xlsx --risk 0.005 --stop-multiple 1.5 --target-multiple 4
  sheetvol fill desk.xlsx --no-trades           volatility columns only
  sheetvol fill prices.xlsx --close-col F --date-col A
  sheetvol fill eu-export.csv --decimal-comma --dayfirst
  sheetvol fill prices.xlsx --recipe my-columns.toml --chart
  sheetvol fill prices.xlsx --in-place          keeps prices.bak.xlsx

exit status: 0 all files filled, 1 any file failed (each reports its own
error; the others are still filled), 2 bad command line.
Not advice: volatility figures describe the past. A stop does not guarantee
the exit price (gaps, slippage); check sizes against your broker's margin
rules and local regulation.
"""


def _share(text: str) -> float:
    """A share given as ``1%`` or ``0.01`` (the percent sign divides by 100).

    Examples
    --------
    >>> _share("1%"), _share("0.5 %"), _share("0.02")
    (0.01, 0.005, 0.02)
    """
    raw = text.strip()
    try:
        if raw.endswith("%"):
            return float(raw[:-1].strip()) / 100
        return float(raw)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r} is not a share; write one percent as 1% or 0.01") from None


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (also used to render the help in the docs).

    Returns
    -------
    argparse.ArgumentParser

    Examples
    --------
    >>> build_parser().parse_args(["fill", "a.xlsx", "--chart"]).chart
    True
    """
    parser = argparse.ArgumentParser(
        prog=PROG,
        description="Volatility, bands, stops and position sizes for price exports and "
                    "trade logs kept in workbooks.",
        epilog="Run `sheetvol fill --help` for the fill and its examples.",
    )
    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    fill = sub.add_parser(
        "fill",
        help="add volatility columns to .xlsx/.xlsm/.csv exports",
        description=FILL_DESCRIPTION.format(defaults=_default_lines(),
                                            trade_defaults=DEFAULTS_WORDS),
        epilog=FILL_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    fill.set_defaults(command_parser=fill)  # its own usage for its errors
    fill.add_argument("files", nargs="+", type=Path, metavar="FILE",
                      help="one or more .xlsx, .xlsm or .csv files")
    where = fill.add_argument_group("output (default: NAME-filled.xlsx beside each input)")
    dest = where.add_mutually_exclusive_group()
    dest.add_argument("-o", "--output", type=Path, metavar="OUT",
                      help="output file (one input only); .xlsm input needs .xlsm output")
    dest.add_argument("--out-dir", type=Path, metavar="DIR",
                      help="folder for the outputs of several inputs")
    dest.add_argument("--in-place", action="store_true",
                      help="replace the input (written atomically; NAME.bak.xlsx keeps the old, "
                           "or NAME.bak2.xlsx, ... when taken: never overwritten)")

    cols = fill.add_argument_group(
        "where the prices are (found by their headers unless given)"
    )
    cols.add_argument("--sheet", metavar="NAME", action="append",
                      help="sheet to fill (default: every sheet with a Date and a Close "
                           "column of numbers); repeat for several")
    cols.add_argument("--header-row", type=int, metavar="N",
                      help="row of the column headers (default: searched in the first 50 rows)")
    for role, letter in zip(ROLES, "ABCDEF", strict=True):
        cols.add_argument(f"--{role}-col", metavar="COL",
                          help=f"{role.capitalize()} column: header text or letter "
                               f"(e.g. {letter})")

    what = fill.add_argument_group("what to compute")
    what.add_argument("--recipe", type=Path, metavar="FILE.toml",
                      help="columns to add instead of the defaults (format below)")

    trade = fill.add_argument_group(
        "trade log (reviewed when the workbook has one; flags override the recipe)")
    trade.add_argument("--no-trades", action="store_true",
                       help="do not review a trade log")
    trade.add_argument("--trades-sheet", metavar="NAME",
                       help="the trade-log sheet (default: found by its headers)")
    trade.add_argument("--risk", type=_share, metavar="SHARE",
                       help="share of equity risked per trade, as 1%% or 0.01 (default 1%%; "
                            "above 0, at most 25%%; a warning above 5%%)")
    trade.add_argument("--stop-multiple", type=float, metavar="K",
                       help="stop at K volatility units from entry (default 2)")
    trade.add_argument("--target-multiple", type=float, metavar="K",
                       help="target at K volatility units from entry (default 3)")
    trade.add_argument("--trail-multiple", type=float, metavar="K",
                       help="trailing stop K units from the best price since entry "
                            "(default 3; 0 = off)")
    trade.add_argument("--equity", type=float, metavar="AMOUNT",
                       help="account equity where the log has no Equity cell (default: "
                            "the workbook's Equity name or Settings sheet; none: sizes "
                            "blank)")

    read = fill.add_argument_group("reading")
    read.add_argument("--decimal-comma", action="store_true",
                      help='text numbers use "," for decimals and "." for thousands '
                           '("1.234,5"), as in many European exports')
    read.add_argument("--dayfirst", action="store_true",
                      help='text dates are day/month/year ("03/04/2025" is 3 April)')

    extra = fill.add_argument_group("formulas, charts, messages")
    forms = extra.add_mutually_exclusive_group()
    forms.add_argument("--formulas", choices=("values", "keep", "skip"), default="values",
                       help="sheetvol formulas typed into cells: 'values' (default) replaces "
                            "each with its result, so any spreadsheet program shows numbers, "
                            "and lists the formula text on the notes sheet; 'keep' stores the "
                            "results beside the formulas (for add-in users); 'skip' leaves "
                            "them as they are")
    forms.add_argument("--keep-formulas", dest="formulas", action="store_const", const="keep",
                       help="same as --formulas keep")
    forms.add_argument("--skip-formulas", dest="formulas", action="store_const", const="skip",
                       help="same as --formulas skip")
    extra.add_argument("--chart", action="store_true",
                       help='add a "sheetvol charts" sheet: close with the bands, and '
                            "dispersion with ATR, as native charts")
    extra.add_argument("-q", "--quiet", action="store_true",
                       help="no progress bar and no summary; errors are still shown (the "
                            "bar, on stderr, appears only on a terminal for large fills)")

    funcs = sub.add_parser(
        "functions",
        help="list the worksheet functions, or show one",
        description="List sheetvol's worksheet functions (usable in recipes and as "
                    "formulas), or show one function's arguments.",
        epilog="examples:\n  sheetvol functions\n  sheetvol functions SV_ATR\n"
               "  sheetvol functions atr_last      (any case; the SV_ prefix is optional)",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    funcs.add_argument("name", nargs="?", help="a function name, e.g. SV_ATR or atr")
    return parser


def _print_functions(name: str | None) -> int:
    if name is None:
        group = None
        for f in registry.FUNCTIONS:
            if f.group != group:
                group = f.group
                print(f"\n{group}:")
            print(f"  {f.name:<18} {f.summary}")
        print("\nColumn functions also come as NAME_LAST (value on the last row) and "
              "NAME_ON(date, dates, ...)\n(value on or before a date). "
              "`sheetvol functions NAME` shows the arguments.")
        return 0
    shown = name.strip().upper()
    if not shown.startswith(NAME_PREFIX):  # "atr" means SV_ATR: the prefix is optional
        shown = NAME_PREFIX + shown
    try:
        func, variant = registry.variant_of(shown)
    except KeyError:
        print(f"{PROG}: no function named {name!r}; `sheetvol functions` lists them",
              file=sys.stderr)
        return 1
    params = registry.variant_params(func, variant)
    print(f"{shown}({', '.join(p.name if p.required else f'[{p.name}]' for p in params)})")
    print(f"  {func.summary}")
    print(f"  returns: {func.returns}")
    print("  arguments:")
    for p in params:
        default = "" if p.required else f" (default {_show_default(p.default)})"
        print(f"    {p.name:<12} {p.describe_range()}{default}: {p.help}")
    if func.example:
        print(f"  example: {func.example}")
    if func.notes:
        print(f"  note: {func.notes}")
    return 0


def _show_default(value: object) -> str:
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _expand(files: Sequence[Path]) -> list[Path]:
    """Expand wildcards the shell left alone (Windows shells pass ``*.xlsx`` as typed)."""
    out: list[Path] = []
    for f in files:
        text = str(f)
        if not f.exists() and any(ch in text for ch in "*?["):
            matches = sorted(Path(p) for p in glob.glob(text))
            out.extend(matches or [f])
        else:
            out.append(f)
    return out


def _run_fill(args: argparse.Namespace, parser: argparse.ArgumentParser) -> int:
    files = _expand(args.files)
    if args.output is not None and len(files) > 1:
        parser.error("-o/--output takes one input; use --out-dir for several")
    if args.out_dir is not None and not args.out_dir.is_dir():
        parser.error(f"--out-dir {args.out_dir}: no such folder")
    if args.header_row is not None and args.header_row < 1:
        parser.error("--header-row must be 1 or more")
    specs = None
    trades = TradeSettings()
    if args.recipe is not None:
        try:
            recipe = read_recipe(args.recipe)
        except RecipeError as exc:
            print(f"{PROG}: error: {exc}", file=sys.stderr)
            return 1
        specs, trades = recipe.columns, recipe.trades or trades
    # field name -> value (float or sheet name); dataclasses.replace checks the names
    changes: dict[str, Any] = {}
    for key in ("risk", "stop_multiple", "target_multiple", "trail_multiple", "equity"):
        value = getattr(args, key)
        if value is not None:
            try:
                changes[key] = check_trade_number(key, value)
            except RecipeError:
                pct = f" ({value:g} is {value * 100:g}%)" if key == "risk" else ""
                parser.error(f"--{key.replace('_', '-')} {value:g}: {TRADE_KEYS[key]}{pct}")
    if args.trades_sheet:
        changes["sheet"] = args.trades_sheet
    trades = dataclasses.replace(trades, **changes)
    columns = {role: getattr(args, f"{role}_col") for role in ROLES}
    options = FillOptions(
        output=args.output, out_dir=args.out_dir, sheets=tuple(args.sheet or ()),
        header_row=args.header_row, columns={k: v for k, v in columns.items() if v},
        specs=specs, decimal_comma=args.decimal_comma, dayfirst=args.dayfirst,
        in_place=args.in_place, formulas=args.formulas, chart=args.chart,
        progress=not args.quiet, trades=trades, review_trades=not args.no_trades,
    )
    outputs = [output_path(f, options) for f in files]
    if len(set(outputs)) < len(outputs):
        parser.error("two inputs would write the same output file; use separate runs")
    failed = 0
    for k, src in enumerate(files):
        try:
            report = fill_file(src, options)
        except USER_ERRORS as exc:
            failed += 1
            print(f"{PROG}: error: {_with_file(src, str(exc))}", file=sys.stderr)
            continue
        except OSError as exc:
            failed += 1
            where = f" ({exc.filename})" if exc.filename and str(exc.filename) != str(src) else ""
            print(f"{PROG}: error: {src}{where}: {exc.strerror or exc}", file=sys.stderr)
            continue
        except KeyboardInterrupt:
            # Ctrl-C stops the run: the file being filled gets no output (the writer
            # removes its temporary file), and the files after it are not started.
            rest = len(files) - k - 1
            print(f"{PROG}: interrupted while filling {src.name}; its output was not written"
                  + (f", and {rest} more file{'s' if rest > 1 else ''} not started" if rest
                     else ""), file=sys.stderr)
            return 1
        except Exception as exc:  # one file's failure never stops the batch
            failed += 1
            print(f"{PROG}: error: {src.name}: unexpected failure ({type(exc).__name__}: {exc}); "
                  "nothing was written for it. Please report this with the file if you can.",
                  file=sys.stderr)
            continue
        if not args.quiet:
            print("\n".join(report.summary()))
    if len(files) > 1 and not args.quiet:
        print(f"{len(files) - failed} of {len(files)} files filled")
    return 1 if failed else 0


def _with_file(src: Path, message: str) -> str:
    return message if src.name in message else f"{src.name}: {message}"


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit code.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments without the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 1 when any file failed, 2 for a bad command line.

    Examples
    --------
    >>> main(["functions", "SV_ATR"])  # doctest: +ELLIPSIS
    SV_ATR(high, low, close, [period], ...)
      Average true range: ...
    0
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if args.command == "fill":
            return _run_fill(args, args.command_parser)
        if args.command == "functions":
            return _print_functions(args.name)
        parser.print_help()
        return 0
    except SystemExit as exc:  # argparse exits for --help, --version and usage errors
        return exc.code if isinstance(exc.code, int) else 2
    except BrokenPipeError:
        # the reader went away (`sheetvol functions | head -1`): stop quietly, and point
        # stdout at nothing so the interpreter's last flush does not complain either
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except KeyboardInterrupt:  # between files or while summarising: nothing half-written
        print(f"{PROG}: interrupted", file=sys.stderr)
        return 1

