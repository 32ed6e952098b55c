"""The error types of the workbook layer: a refusal, and an error value held in a cell.

Every refusal or failure of the package layer is a :class:`WorkbookError`. Its message
is meant for the user: it names the file (and the sheet, cell or column when there is
one) and says what to do.
"""

from __future__ import annotations


class WorkbookError(ValueError):
    """A workbook that cannot be read or written as asked; the message is user-facing."""


class CellError(str):
    """A spreadsheet error value such as ``#N/A`` (a ``t="e"`` cell).

    Examples
    --------
    >>> CellError("#N/A") == "#N/A"
    True
    """

    __slots__ = ()

    def __repr__(self) -> str:
        return f"CellError({str.__repr__(self)})"
