"""The size of a worksheet and its column letters: the one statement of each.

Every layer that meets a row or column number checks it against these two numbers
(the worksheet reader, the writer, the headless formula evaluator). They are the
limits of the .xlsx format as spreadsheet programs implement it: 1,048,576 rows
(2**20) and 16,384 columns (2**14, column ``XFD``).

Columns are named by letters, A to Z, then AA to ZZ, then AAA up to XFD: a
number written in base 26 with the digits A=1 to Z=26 and no zero.
:func:`column_letters` and :func:`column_number` are that rule; the workbook
reader's byte parser keeps a cache in front of :func:`column_number`.

Examples
--------
>>> MAX_ROW, MAX_COL
(1048576, 16384)
>>> column_letters(MAX_COL), column_number("xfd")
('XFD', 16384)
"""

from __future__ import annotations

__all__ = ["MAX_COL", "MAX_ROW", "column_letters", "column_number"]

MAX_ROW = 1_048_576
MAX_COL = 16_384


def column_letters(col: int) -> str:
    """The letters of a column number (1 is ``A``, 27 is ``AA``).

    Parameters
    ----------
    col : int
        Column number from 1 to :data:`MAX_COL`.

    Returns
    -------
    str

    Raises
    ------
    ValueError
        ``col`` is outside 1..16384.

    Examples
    --------
    >>> column_letters(1), column_letters(28), column_letters(703)
    ('A', 'AB', 'AAA')
    """
    if not 1 <= col <= MAX_COL:
        raise ValueError(f"column {col} is outside 1..{MAX_COL}")
    out = ""
    while col:
        col, rem = divmod(col - 1, 26)
        out = chr(65 + rem) + out
    return out


def column_number(letters: str) -> int:
    """The number of column letters, any case (``"ab"`` is 28).

    Letters beyond ``XFD`` give their number (above :data:`MAX_COL`); the caller
    compares it with the limit and says what to do.

    Parameters
    ----------
    letters : str
        Letters A to Z; spaces around them are ignored.

    Returns
    -------
    int

    Raises
    ------
    ValueError
        ``letters`` is empty or holds anything but the letters A to Z.

    Examples
    --------
    >>> column_number("A"), column_number(" ab "), column_number("XFD")
    (1, 28, 16384)
    """
    text = letters.strip().upper()
    if not text or not all("A" <= ch <= "Z" for ch in text):
        raise ValueError(f"{letters!r} is not a column letter")
    n = 0
    for ch in text:
        n = n * 26 + ord(ch) - 64
    return n
