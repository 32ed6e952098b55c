"""The notes sheet: what the fill did, with which settings, and the cautions.

The colleague who receives a filled workbook reads here what each added
column is, how it was computed and from which file. The ``Columns written``
block doubles as the record a later fill reads to replace its own columns
instead of adding duplicates (:func:`read_record`).
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from sheetvol._version import __version__
from sheetvol.fill.recipe import ColumnSpec

__all__ = [
    "CAUTIONS",
    "CONVENTIONS",
    "NOTES_SHEET",
    "FormulaNote",
    "SheetNote",
    "WrittenColumn",
    "build_notes",
    "cautions",
    "read_record",
    "sha256_of",
]

NOTES_SHEET = "sheetvol notes"
RECORD_TITLE = "Columns written"
SHEETS_TITLE = "Sheets read"
TRADES_TITLE = "Trade review"
TRADE_FUNCTION = "trade review"
CAUTION_LINE = f'Not advice; see the notes sheet "{NOTES_SHEET}".'

CONVENTIONS = (
    "Standard deviation divides by N (population) unless a column says sample; with the "
    "simple average it is the ordinary rolling standard deviation.",
    "Bands are the moving average plus or minus width x that standard deviation; "
    "%b is 0 at the lower band and 1 at the upper band.",
    "Exponential and Wilder averages (and Wilder ATR) start from the simple average of "
    "their first N values; the first value appears on the Nth usable bar (a column whose "
    "parameters say seed=first starts from the first value instead).",
    "True range of the first bar is its high minus low, as there is no previous close "
    "(a column whose parameters say first_bar=blank leaves it blank).",
    "Close vol is the sample standard deviation of log returns over N returns, "
    "times the square root of the bars per year.",
    "Gaps: a bar whose needed prices are blank or errors is skipped; its results are blank "
    "and the windows continue over the remaining bars.",
    "Rows are computed in date order whatever the sheet order; each result is written on "
    "the row of its bar. Warm-up rows (not enough history yet) are left blank.",
)

# One list for every notes sheet. It covers the trade review's cautions too
# (sheetvol.fill.trade_log.TRADE_CAUTIONS, repeated on its own sheet), so a workbook with a
# trade log gets one sentence more, never the same caution twice.
CAUTIONS = (
    "Not investment advice. Volatility figures describe the past and do not predict "
    "future moves.",
    "A stop at a volatility distance does not guarantee the exit price: markets gap through "
    "stops and orders slip, so a loss can exceed the planned risk.",
    "Check every position size against your broker's margin rules, the contract "
    "specifications and local regulation.",
    "Check the columns read above: results are only as good as the export they come from.",
)
TRADE_REVIEW_CAUTION = ("The trade review shows what past prices did to the logged trades; "
                        "it does not say what to trade.")


def cautions(trade_review: bool = False) -> list[str]:
    """The cautions of the notes sheet, once each (one more line with a trade review).

    Parameters
    ----------
    trade_review : bool
        Whether the fill reviewed a trade log.

    Returns
    -------
    list of str

    Examples
    --------
    >>> len(cautions()), len(cautions(trade_review=True))
    (4, 5)
    """
    out = list(CAUTIONS)
    if trade_review:
        out.insert(1, TRADE_REVIEW_CAUTION)
    return out


@dataclass(frozen=True)
class WrittenColumn:
    """One column the fill wrote: where, which header and how it was computed."""

    sheet: str
    letter: str
    spec: ColumnSpec
    input_letters: Mapping[str, str]


@dataclass(frozen=True)
class SheetNote:
    """Where one sheet's prices were read and what was left out, in words."""

    sheet: str
    header_row: int
    columns_read: str
    bars: str
    skipped: str
    gaps: str = "none"


@dataclass(frozen=True)
class FormulaNote:
    """A typed sheetvol formula the fill evaluated (or could not).

    ``outcome`` is the result itself when it is one number or text (stored as
    such on the notes sheet), else words such as ``"column of 40 values"``.
    """

    cell: str
    formula: str
    outcome: str | float


def sha256_of(path: str | Path) -> str:
    """SHA-256 of a file, read in blocks.

    Parameters
    ----------
    path : str or Path
        The file.

    Returns
    -------
    str
        Hex digest.

    Examples
    --------
    >>> import tempfile, os
    >>> with tempfile.NamedTemporaryFile(delete=False) as f:
    ...     _ = f.write(b"abc")
    >>> sha256_of(f.name)[:16]
    'ba7816bf8f01cfea'
    >>> os.unlink(f.name)
    """
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def build_notes(
    *,
    input_name: str,
    input_sha256: str,
    sheets: Sequence[SheetNote],
    written: Sequence[WrittenColumn],
    formulas: Sequence[FormulaNote] = (),
    warnings: Sequence[str] = (),
    assumptions: Sequence[str] = (),
    run_at: dt.datetime | None = None,
    trade_columns: Sequence[tuple[str, str, str, str]] = (),
    trade_settings: Sequence[tuple[str, str]] = (),
    trade_review: bool = False,
) -> list[list[object]]:
    """Rows of the notes sheet (first row is the title, shown bold).

    Parameters
    ----------
    input_name, input_sha256 : str
        The input file's name and checksum, so a reader can tell which export
        the numbers come from.
    sheets : sequence of SheetNote
        Where the prices were read, per sheet.
    written : sequence of WrittenColumn
        The computed columns.
    formulas : sequence of FormulaNote
        Typed formulas evaluated.
    warnings : sequence of str
        Anything the reader should know (e.g. unsorted rows).
    assumptions : sequence of str
        What the fill assumed because the workbook did not say (a default used, a
        column not used, the bars per year), listed in a block of their own.
    run_at : datetime, optional
        Time of the run (UTC now by default).
    trade_columns : sequence of tuple
        Trade-review columns written: (sheet, letter, header, meaning); they
        join the ``Columns written`` record so a later fill replaces them.
    trade_settings : sequence of tuple
        (setting, value) of the trade review, listed in a block of their own.
    trade_review : bool
        Whether a trade log was reviewed (adds its line to the one list of cautions).

    Returns
    -------
    list of list
        Rows of cell values.

    Examples
    --------
    >>> rows = build_notes(input_name="p.xlsx", input_sha256="0" * 64,
    ...                    sheets=[SheetNote("Prices", 1, "Close = E", "20", "none")], written=[])
    >>> rows[0], rows[7]
    (['sheetvol notes'], ['Prices', 1, 'Close = E', '20', 'none', 'none'])
    """
    when = (run_at or dt.datetime.now(dt.timezone.utc)).strftime("%Y-%m-%d %H:%M:%S UTC")
    rows: list[list[object]] = [
        [NOTES_SHEET],
        ["Tool", f"sheetvol {__version__}"],
        ["Run at", when],
        ["Input file", input_name],
        ["Input SHA-256", input_sha256],
        [SHEETS_TITLE],
        ["Sheet", "Header row", "Columns read", "Bars", "Rows skipped", "Gaps"],
    ]
    rows.extend([n.sheet, n.header_row, n.columns_read, n.bars, n.skipped, n.gaps]
                for n in sheets)
    rows += [[], [RECORD_TITLE], ["Sheet", "Column", "Header", "Function", "Parameters", "Inputs"]]
    for w in written:
        inputs = ", ".join(
            f"{k}={v}" + (f" ({w.input_letters[v]})" if v in w.input_letters else "")
            for k, v in w.spec.inputs.items()
        )
        rows.append([w.sheet, w.letter, w.spec.header, w.spec.function,
                     w.spec.describe_options(), inputs])
    rows.extend([sheet, letter, header, TRADE_FUNCTION, meaning, "the trade log's columns"]
                for sheet, letter, header, meaning in trade_columns)
    rows.append([])
    if trade_settings:
        rows.append([TRADES_TITLE])
        rows.extend([k, v] for k, v in trade_settings)
        rows.append([])
    if formulas:
        rows.append(["Typed formulas"])
        rows.append(["Cell", "Formula", "Result"])
        rows.extend([f.cell, "=" + f.formula, f.outcome] for f in formulas)
        rows.append([])
    if assumptions:
        rows.append(["Assumptions"])
        rows.extend([a] for a in assumptions)
        rows.append([])
    if warnings:
        rows.append(["Warnings"])
        rows.extend([w] for w in warnings)
        rows.append([])
    rows.append(["Conventions"])
    rows.extend([c] for c in CONVENTIONS)
    rows.append([])
    rows.append(["Cautions"])
    rows.extend([c] for c in cautions(trade_review))
    return rows


def read_record(rows: Mapping[int, Mapping[int, object]]) -> dict[str, dict[str, str]]:
    """The columns an earlier fill recorded: sheet -> {column letter: header}.

    Parameters
    ----------
    rows : mapping
        row -> column -> value of an existing notes sheet.

    Returns
    -------
    dict
        Sheet names (as recorded) to the letters and headers written there.

    Examples
    --------
    >>> read_record({12: {1: "Columns written"}, 13: {1: "Sheet"},
    ...              14: {1: "Prices", 2: "H", 3: "ATR 14 (Wilder)"}})
    {'Prices': {'H': 'ATR 14 (Wilder)'}}
    """
    record: dict[str, dict[str, str]] = {}
    start = next((r + 2 for r in sorted(rows) if rows[r].get(1) == RECORD_TITLE), None)
    if start is None:
        return record
    r = start
    while r in rows and isinstance(rows[r].get(1), str) and rows[r].get(1):
        letter, header = rows[r].get(2), rows[r].get(3)
        if isinstance(letter, str) and isinstance(header, str):
            record.setdefault(str(rows[r][1]), {})[letter] = header
        r += 1
    return record
