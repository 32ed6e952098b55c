"""What the fill asks the writer to put into a workbook.

These are plain records; :func:`sheetvol.workbook.writer.write_package` applies them to
a copy of the package. Rows and columns are 1-based, as on screen.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class NewColumn:
    """A computed column: a header cell and a run of values below it.

    ``values[i]`` goes to row ``first_row + i``. A float array is the fast path; an
    object array or a list may mix numbers and text: text is written as an inline
    string, numbers as numbers, and NaN, None or ``""`` leave the cell blank (no cell).
    ``number_format`` applies to every cell of the column. With ``replace`` any cell
    already in column ``col`` from ``header_row`` down is dropped first, so a second
    fill replaces the first one's output.
    """

    sheet: str
    col: int
    header_row: int
    header: str
    first_row: int
    values: np.ndarray
    number_format: str
    width: float | None = None
    replace: bool = True


@dataclass
class CellResult:
    """A stored result for an existing formula cell; the formula itself is kept."""

    sheet: str
    row: int
    col: int
    value: float | str | None


@dataclass
class SpillResult:
    """A column result of a typed formula, stored as a classic array formula.

    The anchor cell keeps ``formula`` as ``<f t="array" ref=...>`` and the values fill
    the cells from (row, col) downwards; NaN gives a blank.
    """

    sheet: str
    row: int
    col: int
    formula: str
    values: np.ndarray
    number_format: str | None = None


@dataclass
class ValueResult:
    """A typed formula replaced by its result as plain values (the formula is dropped).

    The cell at (row, col) must hold a formula. ``values`` is a scalar (number, text,
    bool, :class:`~sheetvol.workbook.CellError` or None) for that cell alone, or a 1-D
    array: ``values[0]`` goes to (row, col) and the rest to the cells below it.

    - NaN/inf/None: the anchor cell stays, with its style, but without a value; below
      it, no cell is written.
    - Existing styles are kept; ``number_format`` styles only cells that have none (an
      unstyled anchor, new cells below, unstyled blank cells below).
    - The cells below must be blank (no value, no formula; a style alone is fine), or
      belong to the anchor's own earlier array formula; anything else is refused.
    - The anchor's calculation-chain entry goes. If the anchor was the master of a
      shared formula, the next cell of that group still holding the formula becomes
      the master (formula text moved to it), so the rest keep their formulas.

    Stored values show in any spreadsheet program, with or without the add-in, even
    one that recalculates on opening (array formulas, ``fullCalcOnLoad``).
    """

    sheet: str
    row: int
    col: int
    values: np.ndarray | float | str | None
    number_format: str | None = None


@dataclass(frozen=True)
class Styled:
    """A cell of a :class:`NewSheet` shown with a number format of its own.

    ``value`` is a number (or text, or None), or a date/datetime: a date is written as
    the workbook's serial day number, so with a date format (``"yyyy-mm-dd"``) it is
    a real date in the sheet. Unwrapped dates are written as text, as before.

    Examples
    --------
    >>> Styled(0.25, "0.0%")   # shown as 25.0%
    Styled(value=0.25, number_format='0.0%')
    """

    value: object
    number_format: str


@dataclass
class NewSheet:
    """A sheet written by sheetvol (e.g. the notes); replaces an earlier one of that name.

    ``rows`` hold str/float/int/bool/None or :class:`Styled` cells; the first row is
    bold. ``widths`` are column widths in characters, from column A.
    """

    name: str
    rows: list[list[object]]
    widths: list[float] | None = None


@dataclass
class LineChart:
    """A native line chart of columns of ``sheet``, placed on ``anchor_sheet``."""

    sheet: str
    title: str
    x_col: int
    series_cols: list[int]
    first_row: int
    last_row: int
    anchor_sheet: str
    anchor_cell: str
    #: Number format of the x-axis labels (e.g. ``"yyyy-mm-dd"`` for dates); None: General.
    x_format: str | None = None
    #: Fixed value-axis bounds; None lets the program choose (which may start at 0).
    y_min: float | None = None
    y_max: float | None = None


Edit = NewColumn | CellResult | SpillResult | ValueResult | NewSheet | LineChart

__all__ = ["CellResult", "Edit", "LineChart", "NewColumn", "NewSheet", "SpillResult",
           "Styled", "ValueResult"]
