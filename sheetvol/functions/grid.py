"""The size of a worksheet: the one statement of the sheet limits.

Every layer that meets a row or column number checks it against these two numbers
(the worksheet reader, the writer, the headless formula evaluator). They are the
limits of the .xlsx format as spreadsheet programs implement it: 1,048,576 rows
(2**20) and 16,384 columns (2**14, column ``XFD``).

Examples
--------
>>> MAX_ROW, MAX_COL
(1048576, 16384)
"""

from __future__ import annotations

__all__ = ["MAX_COL", "MAX_ROW"]

MAX_ROW = 1_048_576
MAX_COL = 16_384
