"""Finding the price columns of an export by their headers.

Exports put their header row anywhere near the top (often under a title and
a blank line) and dress the same plain words in many ways: any case,
brackets, asterisks and other punctuation, units in brackets, a price
abbreviation before the word or "price" after it, a date-format pattern
beside a date. A header is normalised (:func:`normalize_header`), stripped of
such words around it, and compared whole with plain trade words per role
(:data:`SYNONYMS`), so that one of our own headers such as
``Close vol 20 (ann.)`` is never taken for the close.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, TypedDict

from sheetvol.functions.grid import MAX_COL, column_letters, column_number

__all__ = [
    "HEADER_SCAN_ROWS",
    "ColumnFlagError",
    "HeaderMatch",
    "LocateError",
    "col_letter",
    "col_number",
    "find_header",
    "list_headers",
    "normalize_header",
    "resolve_column",
    "role_of",
]

HEADER_SCAN_ROWS = 50
"""How many rows from the top are searched for the header row."""

# role -> plain trade words, best first; the index is the preference when two columns
# fit one role (e.g. "Close" beats "Adj Close", which beats "Price").
SYNONYMS: dict[str, tuple[str, ...]] = {
    "date": (
        "date", "date time", "datetime", "timestamp", "day", "trade date", "trading date",
        "trading day", "session", "period", "as of", "pricing date", "value date", "dt",
    ),
    # A separate time of day (intraday exports with Date and Time columns); a lone
    # Time column holding full timestamps is taken as the date column.
    "time": ("time", "time of day", "tm", "hour"),
    "open": ("open", "opening", "o", "first"),
    "high": ("high", "hi", "h", "max", "maximum"),
    "low": ("low", "lo", "l", "min", "minimum"),
    "close": ("close", "closing", "last", "c", "settle", "settlement", "adj close",
              "adjusted close", "price"),
    "volume": ("volume", "vol", "v", "qty", "quantity", "shares", "contracts", "tick volume"),
}

# Words around a role word that leave its meaning alone: "Open price", "Px high",
# "Session high", "Bar time", "UTC time". Before the word they may also be written
# joined to it ("PxLow", "TickVol").
WORDS_BEFORE = ("px", "price", "bar", "day", "daily", "session", "local", "gmt", "utc",
                "exchange", "tick")
WORDS_AFTER = ("price", "px")

# A date-format pattern beside (or instead of) a date header: "Date (yyyy-mm-dd)", "DTYYYYMMDD".
_DATE_PATTERN = re.compile(
    r"(?:y{2}|y{4})[ ./-]?m{1,2}[ ./-]?d{1,2}|d{1,2}[ ./-]?m{1,2}[ ./-]?(?:y{2}|y{4})"
    r"|m{1,2}[ ./-]?d{1,2}[ ./-]?(?:y{2}|y{4})"
)

_SYNONYM_INDEX: dict[str, tuple[str, int]] = {}
for _role, _names in SYNONYMS.items():
    for _rank, _name in enumerate(_names):
        _SYNONYM_INDEX.setdefault(_name, (_role, _rank))
class LocateError(ValueError):
    """The price columns cannot be found; the message lists what was found."""


class ColumnFlagFields(TypedDict):
    """The parts of a :class:`ColumnFlagError`, to raise it again with one part changed."""

    role: str
    given: str
    row: int
    headers: dict[int, str]
    file: str
    sheet: str
    also: str


class ColumnFlagError(LocateError):
    """A column the user named by flag (``--close-col Settle``) is not on the sheet.

    The message says so first, then where it looked and the headers it saw.

    Examples
    --------
    >>> print(ColumnFlagError(role="close", given="Settle", row=1, headers={1: "Date"},
    ...                       file="p.xlsx", sheet="Prices"))
    p.xlsx: --close-col "Settle": no column headed "Settle" on sheet "Prices" (headers found \
in row 1: A 'Date'); give a header from that row or a column letter
    """

    def __init__(self, *, role: str, given: str, row: int, headers: Mapping[int, str],
                 file: str = "", sheet: str = "", also: str = "") -> None:
        self.fields: ColumnFlagFields = {
            "role": role, "given": given, "row": row, "headers": dict(headers),
            "file": file, "sheet": sheet, "also": also}
        self.sheet = sheet
        on = f' on sheet "{sheet}"' if sheet else ""
        super().__init__(
            (f"{file}: " if file else "")
            + f'--{role}-col "{given}": no column headed "{given}"{on} (headers found in row '
            f"{row}: {list_headers(headers)}){also}; give a header from that row or a column "
            "letter"
        )


def normalize_header(text: object) -> str:
    """Lower-case a header and strip decorations, units and separators.

    A header wrapped whole in brackets is unwrapped; other bracketed parts
    (units such as ``(USD)``) are dropped; asterisks, quotes, currency signs
    and separators (``_ - . / : |``) become spaces.

    Parameters
    ----------
    text : object
        A header cell's value.

    Returns
    -------
    str

    Examples
    --------
    >>> normalize_header("  Close* (USD) ")
    'close'
    >>> normalize_header("[Adj. close]")
    'adj close'
    """
    s = str(text).strip().lower()
    while (m := re.fullmatch(r"[<\[{(]\s*(.*?)\s*[>\]})]", s)) is not None:
        s = m[1]
    s = re.sub(r"\([^)]*\)|\[[^\]]*\]|\{[^}]*\}", " ", s)  # units: "(USD)", "[EUR]"
    s = re.sub(r"[<>*\"'`:_./\\|#~$€£-]", " ", s)
    return re.sub(r"\s+", " ", s).strip()


def role_of(text: object) -> tuple[str, int] | None:
    """The price role a header stands for and its preference rank, or None.

    The normalised header must be one of the role's plain words
    (:data:`SYNONYMS`), possibly with words around it that leave its meaning
    alone (``Open price``, ``Session high``), or two words of one role
    (``Close / Last``); a date-format pattern marks a date.

    Parameters
    ----------
    text : object
        A header cell's value.

    Returns
    -------
    tuple of (str, int) or None
        The role and its rank (0 is the most usual word).

    Examples
    --------
    >>> role_of("Adj Close")
    ('close', 6)
    >>> role_of("PX_HIGH")
    ('high', 0)
    >>> role_of("Close vol 20 (ann.)") is None
    True
    """
    if not isinstance(text, str) or not text.strip():
        return None
    raw = text.strip().lower()
    dated = _DATE_PATTERN.search(raw)
    if dated:
        raw = (raw[:dated.start()] + " " + raw[dated.end():])
    norm = normalize_header(raw)
    if dated and (not norm or norm in SYNONYMS["date"]):
        return ("date", SYNONYMS["date"].index(norm) if norm else 0)
    hit = _SYNONYM_INDEX.get(norm) or _SYNONYM_INDEX.get(_strip_words(norm))
    if hit is not None:
        return hit
    # Two words of one role, as in "Close / Last".
    hits = [_SYNONYM_INDEX.get(w) for w in norm.split()]
    if len(hits) == 2 and hits[0] and hits[1] and hits[0][0] == hits[1][0]:
        return min(hits[0], hits[1])
    return None


def _strip_words(norm: str) -> str:
    """``norm`` without the words around a role word that leave it alone."""
    words = norm.split()
    while len(words) > 1 and words[0] in WORDS_BEFORE:
        words.pop(0)
    while len(words) > 1 and words[-1] in WORDS_AFTER:
        words.pop()
    if len(words) == 1:  # a word joined to the role word: "pxlow", "tickvol"
        for before in WORDS_BEFORE:
            rest = words[0].removeprefix(before)
            if rest != words[0] and len(rest) > 1 and rest in _SYNONYM_INDEX:
                return rest
    return " ".join(words)


@dataclass
class HeaderMatch:
    """Where the price columns are: the header row and a 1-based column per role."""

    row: int
    columns: dict[str, int]
    headers: dict[int, str] = field(default_factory=dict)

    def describe(self) -> str:
        """``Date = A, Close = E`` for messages and the notes sheet."""
        return ", ".join(
            f"{role.capitalize()} = {col_letter(col)}"
            for role, col in sorted(self.columns.items(), key=lambda kv: kv[1])
        )


#: Column letters and numbers: the one rule, in :mod:`sheetvol.functions.grid`.
col_letter = column_letters
col_number = column_number



def still_headed(recorded: Mapping[str, str], headers: Mapping[int, Any]) -> dict[int, str]:
    """Columns from a record of ``letter -> header`` whose header cell still says so.

    A fill records the columns it wrote; on a re-run only those whose header is
    unchanged are taken as its own (a user may have moved or renamed them).

    >>> still_headed({"G": "ATR 14", "ZZZ9": "x", "H": "gone"}, {7: "ATR 14", 8: "mine"})
    {7: 'ATR 14'}
    """
    own: dict[int, str] = {}
    for letter, header in recorded.items():
        try:
            col = col_number(letter)
        except ValueError:
            continue
        if headers.get(col) == header:
            own[col] = header
    return own


def _text_cells(cells: Mapping[int, object]) -> dict[int, str]:
    return {c: str(v).strip() for c, v in cells.items() if isinstance(v, str) and v.strip()}


def _match_row(cells: Mapping[int, object]) -> dict[str, tuple[int, int]]:
    """role -> (rank, column) for the best-ranked header of each role in one row."""
    found: dict[str, tuple[int, int]] = {}
    for col, text in sorted(_text_cells(cells).items()):
        hit = role_of(text)
        if hit is None:
            continue
        role, rank = hit
        if role not in found or rank < found[role][0]:
            found[role] = (rank, col)
    return found


def find_header(
    rows: Mapping[int, Mapping[int, object]],
    *,
    header_row: int | None = None,
    overrides: Mapping[str, str] | None = None,
    where: str = "",
    file: str = "",
    sheet: str = "",
) -> HeaderMatch:
    """Find the header row and the column of each price role.

    Parameters
    ----------
    rows : mapping
        row -> column -> value for the top of a sheet (1-based).
    header_row : int, optional
        Use this row as the header row instead of searching.
    overrides : mapping, optional
        role -> header text or column letter given by the user.
    where : str
        ``file, sheet`` prefix for messages.
    file, sheet : str
        The file and sheet names, for the message about a column named by flag.

    Returns
    -------
    HeaderMatch

    Raises
    ------
    LocateError
        When no row has a close column; the message lists the headers seen.
    ColumnFlagError
        When a column named in ``overrides`` is neither a header nor a column letter.

    Examples
    --------
    >>> m = find_header({1: {1: "Prices"}, 3: {1: "Date", 2: "High", 3: "Low", 4: "Last"}})
    >>> (m.row, m.columns["close"])
    (3, 4)
    """
    overrides = {k: v for k, v in (overrides or {}).items() if v}
    prefix = f"{where}: " if where else ""
    if header_row is not None:
        candidates = [header_row]
    else:
        candidates = sorted(r for r in rows if r <= HEADER_SCAN_ROWS)
    best: tuple[int, int, dict[str, tuple[int, int]]] | None = None
    for r in candidates:
        found = _match_row(rows.get(r, {}))
        score = len(found) + len(overrides)
        if "close" not in found and "close" not in overrides:
            continue
        if best is None or score > best[1]:
            best = (r, score, found)
    if best is None:
        if header_row is not None:
            seen = _text_cells(rows.get(header_row, {}))
            raise LocateError(
                f"{prefix}row {header_row} has no Close column (headers there: "
                f"{list_headers(seen)}); name it with --close-col or pick another --header-row"
            )
        raise LocateError(
            f"{prefix}no Close column found in the first {HEADER_SCAN_ROWS} rows "
            f"(headers found: {list_headers(_first_text_row(rows))}); name it with "
            "--close-col (header text or column letter) and, if needed, --header-row"
        )
    row, _, found = best
    header_cells = _text_cells(rows.get(row, {}))
    columns = {role: col for role, (_, col) in found.items()}
    for role, given in overrides.items():
        columns[role] = resolve_column(given, header_cells, role=role, row=row, where=where,
                                       file=file, sheet=sheet)
    if "time" in columns and "date" not in columns:
        columns["date"] = columns.pop("time")
    used: dict[int, str] = {}
    for role, col in sorted(columns.items()):
        if col in used:
            raise LocateError(
                f"{prefix}column {col_letter(col)} was taken as both {used[col]} and {role}; "
                f"name the columns with --{used[col]}-col/--{role}-col"
            )
        used[col] = role
    return HeaderMatch(row=row, columns=columns, headers=header_cells)


def resolve_column(
    given: str, header_cells: Mapping[int, str], *, role: str, row: int, where: str = "",
    file: str = "", sheet: str = "",
) -> int:
    """A user's column choice: header text (case-insensitive) first, else a column letter.

    Parameters
    ----------
    given : str
        What the user typed after ``--<role>-col``.
    header_cells : mapping
        column -> header text of the header row.
    role : str
        The role, for the message.
    row : int
        The header row, for the message.
    where : str
        ``file, sheet`` prefix for messages (used when ``file`` is not given).
    file, sheet : str
        The file and sheet, named in the message.

    Returns
    -------
    int
        1-based column.

    Raises
    ------
    ColumnFlagError
        Neither a header of the row nor a column letter.

    Examples
    --------
    >>> resolve_column("Last", {5: "Last"}, role="close", row=1)
    5
    >>> resolve_column("F", {5: "Last"}, role="close", row=1)
    6
    """
    text = str(given).strip()
    for col, header in header_cells.items():
        if header.lower() == text.lower():
            return col
    if re.fullmatch(r"[A-Za-z]{1,3}", text) and col_number(text) <= MAX_COL:
        return col_number(text)
    raise ColumnFlagError(role=role, given=text, row=row, headers=header_cells,
                          file=file or where, sheet=sheet)


def _first_text_row(rows: Mapping[int, Mapping[int, object]]) -> dict[int, str]:
    """The text cells of the row with the most text, to show the user what was seen."""
    best: dict[int, str] = {}
    for r in sorted(rows):
        if r > HEADER_SCAN_ROWS:
            break
        cells = _text_cells(rows[r])
        if len(cells) > len(best):
            best = cells
    return best


def list_headers(cells: Mapping[int, str]) -> str:
    """Header cells for a message: ``A 'Date', B 'Close'`` (the first 20, then a count).

    >>> list_headers({1: "Date", 3: "Side"})
    "A 'Date', C 'Side'"
    """
    if not cells:
        return "none"
    shown = [f"{col_letter(c)} {t!r}" for c, t in sorted(cells.items())[:20]]
    more = len(cells) - len(shown)
    return ", ".join(shown) + (f" and {more} more" if more > 0 else "")
