"""The one error type of the workbook layer.

Every refusal or failure of the package layer is a :class:`WorkbookError`. Its message
is meant for the user: it names the file (and the sheet, cell or column when there is
one) and says what to do.
"""

from __future__ import annotations


class WorkbookError(ValueError):
    """A workbook that cannot be read or written as asked; the message is user-facing."""
