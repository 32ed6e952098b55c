"""Evaluating sheetvol formulas typed into cells, without a spreadsheet program.

A workbook saved by a spreadsheet program that has the add-in holds formulas
such as ``SV_ATR(C2:C400,D2:D400,E2:E400,14)``; one saved without it may hold
``_xludf.SV_ATR(...)``, ``[1]!SV_ATR(...)`` or ``'addin.xlam'!SV_ATR(...)``.
:func:`evaluate` computes such a formula with the same code the live add-in
uses (:func:`sheetvol.functions.calling.call_worksheet`), reading cells through a
*resolver* callback, so the fill can store the results and a reader without
the add-in sees numbers.

Formula text is split into tokens by openpyxl's tokenizer. Supported: sheetvol
calls (nested too: a column result feeds a column argument), cell references
and ranges (``E2``, ``$E$2:$E$300``, whole columns ``E:E`` cut to the used
rows, other sheets ``Prices!E2:E300`` and ``'My Sheet'!E2:E300``), numbers,
text, TRUE/FALSE, unary minus, ``%`` and ``+ - * /`` (on numbers and
element-wise on columns). Anything else raises :class:`FormulaError` saying
what could not be evaluated.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from decimal import ROUND_DOWN, ROUND_HALF_UP, ROUND_UP, Context, Decimal, InvalidOperation
from typing import Any

import numpy as np
from openpyxl.formula.tokenizer import Token, Tokenizer, TokenizerError

from sheetvol.functions import cells as _cells
from sheetvol.functions import convert as _convert
from sheetvol.functions.calling import Result, call_worksheet
from sheetvol.functions.grid import MAX_COL as MAX_COLS
from sheetvol.functions.grid import MAX_ROW as MAX_ROWS
from sheetvol.functions.grid import column_number
from sheetvol.functions.registry import ArgumentError, variant_of

Resolver = Callable[[str | None, int, int, int | None, int | None], list[list[object]]]
"""``resolver(sheet, top, left, bottom, right)`` -> rows of cell values (1-based, inclusive).

``sheet`` is None for the formula's own sheet. ``bottom`` is None for a whole
column (read to the last used row) and ``right`` None for a whole row.
"""

_PREFIXES = ("_xludf.", "_xlfn.", "_xlws.")
_SV_NAME = re.compile(r"SV_[A-Z0-9_]*$", re.IGNORECASE)


MESSAGE_LIMIT = 255
"""Longest message a cell shows (what the add-in returns for a bad argument)."""

WORKSHEET_FUNCTIONS = ("DATE", "ROUND", "ROUNDUP", "ROUNDDOWN", "MIN", "MAX", "ABS", "IF",
                       "IFERROR", "AND", "OR")
"""Ordinary worksheet functions evaluated around sheetvol calls."""

_COMPARISONS = ("=", "<>", "<", ">", "<=", ">=")


class FormulaError(ValueError):
    """A formula that cannot be evaluated headless; the message says why."""


class ArgumentMessage(FormulaError):
    """A sheetvol call in the formula has a bad argument.

    ``text`` is the message the live add-in shows in the cell (see
    :func:`cell_message`); the fill writes it into the cell.
    """

    def __init__(self, message: str) -> None:
        self.text = cell_message(message)
        super().__init__(self.text)


def cell_message(message: str) -> str:
    """A sheetvol message as a cell shows it: the first line, at most 255 characters.

    The add-in returns the same text for a bad argument (a test compares them).

    Examples
    --------
    >>> cell_message("SV_ATR: period must be a whole number from 2 to 5000, got 1\\nmore")
    'SV_ATR: period must be a whole number from 2 to 5000, got 1'
    """
    first = message.strip().splitlines()[0] if message.strip() else "error"
    first = " ".join(first.split())
    if len(first) <= MESSAGE_LIMIT:
        return first
    return first[: MESSAGE_LIMIT - 3].rsplit(" ", 1)[0] + "..."


class _Message(str):
    """The text a sheetvol call with a bad argument leaves in its cell."""


@dataclass(frozen=True)
class _Error:
    """A worksheet error value (``#VALUE!``, ``#DIV/0!``, ``#NUM!``) met while evaluating.

    ``cause`` is the sheetvol message that led to it, if one did.
    """

    code: str
    cause: str | None = None


# -- syntax tree -----------------------------------------------------------------
@dataclass(frozen=True)
class Literal:
    value: float | str | bool | None  # None: an omitted argument, as in SV_ATR(A:A,B:B,C:C,,)


@dataclass(frozen=True)
class Ref:
    text: str
    sheet: str | None
    top: int
    left: int
    bottom: int | None  # None: to the last used row
    right: int | None  # None: to the last used column


@dataclass(frozen=True)
class Call:
    name: str  # normalised worksheet name, e.g. SV_ATR_LAST
    text: str  # as written, for messages
    args: tuple[Node, ...]


@dataclass(frozen=True)
class Unary:
    op: str  # "-", "+" or "%"
    operand: Node


@dataclass(frozen=True)
class Binary:
    op: str
    left: Node
    right: Node


Node = Literal | Ref | Call | Unary | Binary


# -- names -----------------------------------------------------------------------
def function_name(token_value: str) -> str:
    """The bare function name of a FUNC token, without add-in or future-function prefixes.

    Examples
    --------
    >>> function_name("[1]!SV_ATR(")
    'SV_ATR'
    >>> function_name("_xludf.sv_atr_last(")
    'SV_ATR_LAST'
    >>> function_name("'addin.xlam'!SV_ATR(")
    'SV_ATR'
    """
    name = token_value[:-1] if token_value.endswith("(") else token_value
    if "!" in name:
        name = name.rsplit("!", 1)[1]
    low = name.lower()
    for prefix in _PREFIXES:
        if low.startswith(prefix):
            name = name[len(prefix):]
            break
    return name.strip().upper()


def mentions_sheetvol(text: str) -> bool:
    """True when a formula calls a function named ``SV_...`` (any prefix form).

    Examples
    --------
    >>> mentions_sheetvol("=ROUND(_xludf.SV_ATR(C2:C9,D2:D9,E2:E9),2)")
    True
    >>> mentions_sheetvol('=A1&"SV_ATR("')
    False
    """
    if "SV_" not in text.upper():
        return False
    try:
        tokens = Tokenizer(_with_equals(text)).items
    except TokenizerError:
        return False
    return any(
        t.type == Token.FUNC and t.subtype == Token.OPEN and _SV_NAME.match(function_name(t.value))
        for t in tokens
    )


def _with_equals(text: str) -> str:
    text = text.strip()
    return text if text.startswith("=") else "=" + text


# -- parsing -----------------------------------------------------------------------
def parse(text: str, names: Mapping[str, str] | None = None) -> Node:
    """Parse formula text (with or without the leading ``=``) into a tree.

    Parameters
    ----------
    text : str
        The formula, e.g. ``"SV_ATR(C2:C300,D2:D300,E2:E300,14)"``.
    names : mapping, optional
        Defined names the formula may use, mapped to a reference such as
        ``"Prices!$E$2:$E$300"``.

    Returns
    -------
    Node
        The syntax tree.

    Raises
    ------
    FormulaError
        For syntax the evaluator does not support, naming the part.

    Examples
    --------
    >>> parse("SV_AVERAGE(E2:E9, 3)").name
    'SV_AVERAGE'
    """
    try:
        tokens = Tokenizer(_with_equals(text)).items
    except TokenizerError as exc:
        raise FormulaError(f"cannot read the formula {text!r}: {exc}") from None
    except IndexError:  # the tokenizer's own failure on a ")" or "}" that closes nothing
        raise FormulaError(f"cannot read the formula {text!r}: a closing bracket with no "
                           "opening one") from None
    parser = _Parser(tokens, text, {k.upper(): v for k, v in (names or {}).items()})
    node = parser.expression()
    if parser.pos < len(parser.tokens):
        extra = parser.tokens[parser.pos].value
        raise FormulaError(f"cannot evaluate {text!r}: unexpected {extra!r}")
    return node


class _Parser:
    def __init__(self, tokens: list[Token], text: str, names: dict[str, str]) -> None:
        self.text = text
        self.names = names
        self.tokens: list[Token] = []
        for i, t in enumerate(tokens):
            if t.type == Token.WSPACE:
                # A space between two references is the intersection operator.
                prev = tokens[i - 1] if i else None
                nxt = tokens[i + 1] if i + 1 < len(tokens) else None
                if prev is not None and nxt is not None and prev.type == Token.OPERAND \
                        and nxt.type == Token.OPERAND:
                    raise FormulaError(
                        f"cannot evaluate {text!r}: range intersection (a space between "
                        "references) is not supported headless"
                    )
                continue
            self.tokens.append(t)
        self.pos = 0

    def peek(self) -> Token | None:
        return self.tokens[self.pos] if self.pos < len(self.tokens) else None

    def take(self) -> Token:
        t = self.peek()
        if t is None:
            raise FormulaError(f"cannot evaluate {self.text!r}: the formula ends too early")
        self.pos += 1
        return t

    def expression(self) -> Node:
        # Lowest precedence first: comparisons, then &, then + -, then * /.
        node = self.concatenation()
        while (t := self.peek()) is not None and t.type == Token.OP_IN \
                and t.value in _COMPARISONS:
            self.pos += 1
            node = Binary(t.value, node, self.concatenation())
        t = self.peek()
        if t is not None and t.type == Token.OP_IN:
            raise FormulaError(
                f"cannot evaluate {self.text!r}: the operator {t.value!r} is not supported "
                "headless (only + - * / %, & and comparisons)"
            )
        return node

    def concatenation(self) -> Node:
        node = self.additive()
        while (t := self.peek()) is not None and t.type == Token.OP_IN and t.value == "&":
            self.pos += 1
            node = Binary("&", node, self.additive())
        return node

    def additive(self) -> Node:
        node = self.term()
        while (t := self.peek()) is not None and t.type == Token.OP_IN and t.value in "+-":
            self.pos += 1
            node = Binary(t.value, node, self.term())
        return node

    def term(self) -> Node:
        node = self.unary()
        while (t := self.peek()) is not None and t.type == Token.OP_IN and t.value in "*/":
            self.pos += 1
            node = Binary(t.value, node, self.unary())
        return node

    def unary(self) -> Node:
        t = self.peek()
        if t is not None and t.type == Token.OP_PRE:
            self.pos += 1
            return Unary(t.value, self.unary())
        node = self.primary()
        while (t := self.peek()) is not None and t.type == Token.OP_POST and t.value == "%":
            self.pos += 1
            node = Unary("%", node)
        return node

    def primary(self) -> Node:
        t = self.take()
        if t.type == Token.OPERAND:
            return self.operand(t)
        if t.type == Token.PAREN and t.subtype == Token.OPEN:
            node = self.expression()
            close = self.take()
            if not (close.type == Token.PAREN and close.subtype == Token.CLOSE):
                raise FormulaError(f"cannot evaluate {self.text!r}: unbalanced brackets")
            return node
        if t.type == Token.FUNC and t.subtype == Token.OPEN:
            return self.call(t)
        if t.type == Token.ARRAY:
            raise FormulaError(
                f"cannot evaluate {self.text!r}: array constants {{...}} are not supported "
                "headless; put the values in cells"
            )
        raise FormulaError(f"cannot evaluate {self.text!r}: unexpected {t.value!r}")

    def operand(self, t: Token) -> Node:
        if t.subtype == Token.NUMBER:
            return Literal(float(t.value))
        if t.subtype == Token.TEXT:
            return Literal(t.value[1:-1].replace('""', '"'))
        if t.subtype == Token.LOGICAL:
            return Literal(t.value.upper() == "TRUE")
        if t.subtype == Token.ERROR:
            raise FormulaError(f"cannot evaluate {self.text!r}: it refers to {t.value}")
        return self.reference(t.value)

    def reference(self, text: str, *, via_name: bool = False) -> Ref:
        try:
            return parse_reference(text)
        except FormulaError:
            if "!" in text:
                raise
            if not via_name and text.upper() in self.names:
                return self.reference(self.names[text.upper()], via_name=True)
            kind = "table references" if "[" in text else "defined names"
            raise FormulaError(
                f"cannot evaluate {text}: {kind} are not supported headless; "
                "use a cell range such as E2:E300"
            ) from None

    def call(self, t: Token) -> Node:
        name = function_name(t.value)
        written = t.value[:-1] + "(...)"
        try:
            if name not in WORKSHEET_FUNCTIONS:
                variant_of(name)
        except KeyError:
            if _SV_NAME.match(name):
                raise FormulaError(
                    f"cannot evaluate {written}: no sheetvol function named {name}"
                ) from None
            raise FormulaError(
                f"cannot evaluate {written}: {name} is not evaluated headless (only sheetvol "
                f"functions and {', '.join(WORKSHEET_FUNCTIONS)})"
            ) from None
        args: list[Node] = []
        expect_arg = True
        while True:
            nxt = self.peek()
            if nxt is None:
                raise FormulaError(f"cannot evaluate {self.text!r}: a bracket is not closed")
            if nxt.type == Token.FUNC and nxt.subtype == Token.CLOSE:
                self.pos += 1
                if expect_arg and args:
                    args.append(Literal(None))  # trailing comma: omitted last argument
                break
            if nxt.type == Token.SEP and nxt.subtype == Token.ARG:
                self.pos += 1
                if expect_arg:
                    args.append(Literal(None))
                expect_arg = True
                continue
            args.append(self.expression())
            expect_arg = False
        return Call(name, written, tuple(args))


_CELL = re.compile(r"^\$?([A-Za-z]{1,3})\$?(\d+)$")
_COL = re.compile(r"^\$?([A-Za-z]{1,3})$")
_ROW = re.compile(r"^\$?(\d+)$")


def parse_reference(text: str) -> Ref:
    """Parse ``A1``, ``$A$1:$B$5``, ``C:C``, ``2:3``, ``Prices!E2:E9``, ``'My Sheet'!E:E``.

    Examples
    --------
    >>> parse_reference("'My Sheet'!$E$2:E300")
    Ref(text="'My Sheet'!$E$2:E300", sheet='My Sheet', top=2, left=5, bottom=300, right=5)
    >>> parse_reference("C:C").bottom is None
    True
    """
    sheet = None
    body = text
    if "!" in text:
        sheet_part, body = text.rsplit("!", 1)
        if sheet_part.startswith("'") and sheet_part.endswith("'") and len(sheet_part) >= 2:
            sheet = sheet_part[1:-1].replace("''", "'")
        else:
            sheet = sheet_part
        if sheet.startswith("[") or not sheet:
            raise FormulaError(
                f"cannot evaluate {text}: references to other workbooks are not supported"
            )
    first, _, second = body.partition(":")
    second = second or first
    a, b = _CELL.match(first), _CELL.match(second)
    if a and b:
        top, bottom = sorted((int(a[2]), int(b[2])))
        left, right = sorted((column_number(a[1]), column_number(b[1])))
        if bottom > MAX_ROWS or right > MAX_COLS or top < 1:
            raise FormulaError(f"cannot evaluate {text}: not a cell reference")
        return Ref(text, sheet, top, left, bottom, right)
    if ":" in body:
        ca, cb = _COL.match(first), _COL.match(second)
        if ca and cb:
            left, right = sorted((column_number(ca[1]), column_number(cb[1])))
            return Ref(text, sheet, 1, left, None, right)
        ra, rb = _ROW.match(first), _ROW.match(second)
        if ra and rb:
            top, bottom = sorted((int(ra[1]), int(rb[1])))
            return Ref(text, sheet, top, 1, bottom, None)
    raise FormulaError(f"cannot evaluate {text}: not a cell reference")


# -- evaluation ----------------------------------------------------------------------
def evaluate(
    text: str | Node,
    resolver: Resolver,
    *,
    current_sheet: str | None = None,
    date1904: bool = False,
    names: Mapping[str, str] | None = None,
) -> Result:
    """Compute a sheetvol formula.

    Parameters
    ----------
    text : str or Node
        Formula text (leading ``=`` optional) or a tree from :func:`parse`.
    resolver : callable
        ``resolver(sheet, top, left, bottom, right)`` returning the block's
        values as rows (see :data:`Resolver`); formula cells give their stored
        result.
    current_sheet : str, optional
        The sheet holding the formula; references without a sheet name are
        passed to the resolver with this name.
    date1904 : bool
        The workbook counts dates from 1904 (serial numbers in cells).
    names : mapping, optional
        Defined names the formula may use (name -> reference text).

    Returns
    -------
    float, None or numpy.ndarray
        One value (None for a blank result) or a column (1-D array, NaN for
        blanks) for whole-column functions.

    Raises
    ------
    ArgumentMessage
        A sheetvol call has a bad argument; ``text`` is the message the live
        add-in shows in the cell (e.g. ``"SV_ATR: period must be ..."``).
    FormulaError
        With a message saying what could not be evaluated (a function other
        than sheetvol's and :data:`WORKSHEET_FUNCTIONS`, a defined name, an
        error value such as ``#DIV/0!`` as the result...).

    Examples
    --------
    >>> data = {(1, 1): 100.0, (2, 1): 102.0}
    >>> def cells(sheet, top, left, bottom, right):
    ...     return [[data.get((r, c)) for c in range(left, right + 1)]
    ...             for r in range(top, bottom + 1)]
    >>> evaluate("=SV_STOP(A2, 1.5, 2)", cells)
    99.0
    """
    node = parse(text, names) if isinstance(text, str) else text
    ev = _Evaluator(resolver, current_sheet, date1904)
    value = ev.value(node, top=True)
    if isinstance(value, np.ndarray):
        return value.reshape(-1) if value.ndim == 2 and 1 in value.shape else value
    if isinstance(value, _Block):
        return ev.block_result(value)
    if isinstance(value, _Message):
        raise ArgumentMessage(str(value))
    if isinstance(value, _Error):
        if value.cause is not None:
            raise ArgumentMessage(value.cause)
        shown = text if isinstance(text, str) else "the formula"
        raise FormulaError(f"cannot evaluate {shown}: it gives {value.code}")
    return _convert.to_cell(value) if not isinstance(value, (str, bool)) else value


_ARITY = {"DATE": (3, 3), "ROUND": (2, 2), "ROUNDUP": (2, 2), "ROUNDDOWN": (2, 2),
          "MIN": (1, 255), "MAX": (1, 255), "ABS": (1, 1), "IF": (1, 3), "IFERROR": (2, 2),
          "AND": (1, 255), "OR": (1, 255)}
_DECIMAL = Context(prec=400)


def _round(x: float, digits: float, mode: str) -> float:
    """ROUND, ROUNDUP, ROUNDDOWN: halves away from zero, on the number as written.

    The decimal text of the float (``2.675``, not its binary value 2.67499...)
    is rounded, as spreadsheets do. ``digits`` is truncated to a whole number.

    >>> _round(2.675, 2, ROUND_HALF_UP), _round(-1.29, 1, ROUND_DOWN), _round(1234.5, -2, ROUND_UP)
    (2.68, -1.2, 1300.0)
    """
    if x != x or x in (np.inf, -np.inf):
        return x
    try:
        q = Decimal(repr(float(x))).quantize(Decimal(1).scaleb(-int(digits)), rounding=mode,
                                             context=_DECIMAL)
    except InvalidOperation:
        return float(x)
    return float(q) + 0.0  # + 0.0 turns -0.0 into 0.0


def _date_serial(year: int, month: int, day: int, *, date1904: bool) -> Any:
    """DATE(year, month, day) as a serial number; months and days beyond their range roll over.

    >>> _date_serial(2025, 3, 14, date1904=False), _date_serial(2025, 14, -3, date1904=False)
    (45730.0, 46050.0)
    """
    if 0 <= year < 1900:
        year += 1900  # spreadsheets read DATE(25,1,1) as 1925
    year += (month - 1) // 12
    month = (month - 1) % 12 + 1
    if not 1 <= year <= 9999:
        return _Error("#NUM!")
    try:
        when = dt.datetime(year, month, 1) + dt.timedelta(days=day - 1)
    except OverflowError:
        return _Error("#NUM!")
    serial = _cells.datetime_to_serial(when, date1904=date1904)
    if not date1904 and serial < 61:
        serial -= 1  # the 1900 system counts a 29 February 1900 that never was
    if serial < 0:
        return _Error("#NUM!")
    return float(serial)


def _general(x: float) -> str:
    """A number as text the way ``&`` shows it (General format, up to 15 digits).

    >>> _general(2.0), _general(0.1 + 0.2), _general(1e20), _general(-0.00001234)
    ('2', '0.3', '1E+20', '-1.234E-05')
    """
    if x != x or x in (np.inf, -np.inf):
        return "#NUM!"
    text = f"{x:.15g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        text = f"{mantissa}E{int(exponent):+03d}"
    return text


def _comparable(value: Any, other: Any) -> tuple[int, Any]:
    """(kind, key) for comparisons: numbers 0, text 1 (any case), TRUE/FALSE 2.

    A blank compares as the other side's empty value: 0, "" or FALSE.
    """
    if value is None:
        if isinstance(other, bool):
            value = False
        elif isinstance(other, str):
            value = ""
        else:
            value = 0.0
    if isinstance(value, bool):
        return (2, value)
    if isinstance(value, str):
        return (1, value.lower())
    return (0, float(value))


def _cell_value(value: Any) -> Any:
    """A cell's stored value, with a stored error (``#N/A``...) as an error value."""
    if isinstance(value, str) and value in _cells.ERROR_TEXTS:
        return _Error(value)
    return value


def _number_or_nan(value: Any) -> float:
    # A spreadsheet shows an error where arithmetic meets text; a blank is the nearest
    # thing a stored result can hold.
    if isinstance(value, (int, float, np.number)) and not isinstance(value, bool):
        return float(value)
    return float("nan")


@dataclass
class _Block:
    """Values of a referenced range, kept as cell values until an argument's kind is known."""

    ref: Ref
    rows: list[list[object]]


class _Evaluator:
    def __init__(self, resolver: Resolver, sheet: str | None, date1904: bool) -> None:
        self.resolver = resolver
        self.sheet = sheet
        self.date1904 = date1904

    def value(self, node: Node, top: bool = False) -> Any:
        if isinstance(node, Literal):
            return node.value
        if isinstance(node, Ref):
            rows = self.resolver(node.sheet if node.sheet is not None else self.sheet,
                                 node.top, node.left, node.bottom, node.right)
            return _Block(node, rows)
        if isinstance(node, Call):
            if node.name in WORKSHEET_FUNCTIONS:
                return self.worksheet_function(node)
            args = [self.argument(a) for a in node.args]
            for a in args:
                if isinstance(a, _Error):
                    return a
            try:
                return call_worksheet(node.name, args, date1904=self.date1904)
            except ArgumentError as exc:
                # The live add-in shows this text in the cell; the formula gets it as a value.
                return _Message(cell_message(str(exc)))
        if isinstance(node, Unary):
            operand = self.number(node.operand)
            if isinstance(operand, _Error):
                return operand
            if node.op == "-":
                return -operand
            if node.op == "%":
                return operand / 100.0
            return operand
        if isinstance(node, Binary):
            if node.op in _COMPARISONS:
                return self.compare(node)
            if node.op == "&":
                left, right = self.text(node.left), self.text(node.right)
                for side in (left, right):
                    if isinstance(side, _Error):
                        return side
                return left + right
            left, right = self.number(node.left), self.number(node.right)
            for side in (left, right):
                if isinstance(side, _Error):
                    return side
            if isinstance(left, np.ndarray) and isinstance(right, np.ndarray) \
                    and left.shape != right.shape:
                raise FormulaError(f"cannot evaluate {node.op}: the two sides differ in size")
            if node.op == "/" and not isinstance(right, np.ndarray) and right == 0 \
                    and not isinstance(left, np.ndarray):
                return _Error("#DIV/0!")
            with np.errstate(divide="ignore", invalid="ignore"):
                if node.op == "+":
                    return left + right
                if node.op == "-":
                    return left - right
                if node.op == "*":
                    return left * right
                return left / right
        raise FormulaError(f"cannot evaluate {node!r}")

    def argument(self, node: Node) -> Any:
        value = self.value(node)
        if isinstance(value, _Block):
            return value.rows
        return value

    def number(self, node: Node) -> Any:
        """An operand of arithmetic: a float or a float column."""
        value = self.value(node)
        if isinstance(value, _Block):
            grid = value.rows
            if len(grid) == 1 and len(grid[0]) == 1:
                value = grid[0][0]
            else:
                try:
                    return _convert.column(grid, func="formula", param=value.ref.text).values
                except ArgumentError as exc:
                    raise FormulaError(
                        f"cannot evaluate arithmetic on {value.ref.text}: {exc}"
                    ) from None
        if isinstance(value, np.ndarray):
            if value.dtype == object:  # a row-by-row result with messages in some rows
                return np.array([_number_or_nan(v) for v in value.reshape(-1).tolist()],
                                dtype=np.float64).reshape(value.shape)
            return value.astype(np.float64)
        return self.scalar_number(value)

    def scalar_number(self, value: Any) -> Any:
        """One value as a spreadsheet's arithmetic reads it: a float or an :class:`_Error`."""
        if isinstance(value, _Error):
            return value
        if value is None:
            return 0.0  # a blank cell counts as 0 in arithmetic
        if isinstance(value, bool):
            return 1.0 if value else 0.0
        if isinstance(value, (dt.date, dt.datetime)):
            return _cells.datetime_to_serial(value, date1904=self.date1904)
        if isinstance(value, str):
            if _cells.NUMBER_TEXT.match(value.strip()):
                return float(value)
            return _Error("#VALUE!", str(value) if isinstance(value, _Message) else None)
        try:
            return float(value)
        except (TypeError, ValueError):
            raise FormulaError(f"cannot evaluate arithmetic on {value!r}: not a number") from None

    # -- ordinary worksheet functions and operators ------------------------------------
    def single(self, node: Node) -> Any:
        """A scalar operand: one cell's value, a literal or a call's one value."""
        value = self.value(node)
        if isinstance(value, _Block):
            grid = value.rows
            if len(grid) == 1 and len(grid[0]) == 1:
                return _cell_value(grid[0][0])
            raise FormulaError(
                f"cannot evaluate {value.ref.text}: a range where one value belongs is not "
                "supported headless"
            )
        if isinstance(value, np.ndarray):
            raise FormulaError(
                "cannot evaluate a column of results where one value belongs (use the _LAST "
                "or _ON form of the sheetvol function)"
            )
        return value

    def text(self, node: Node) -> Any:
        """An operand of ``&``: text as a cell shows it, or an :class:`_Error`."""
        value = self.single(node)
        if isinstance(value, _Error):
            return value
        if value is None:
            return ""
        if isinstance(value, bool):
            return "TRUE" if value else "FALSE"
        if isinstance(value, (dt.date, dt.datetime)):
            value = _cells.datetime_to_serial(value, date1904=self.date1904)
        if isinstance(value, (int, float, np.number)):
            return _general(float(value))
        return str(value)

    def compare(self, node: Binary) -> Any:
        left, right = self.single(node.left), self.single(node.right)
        for side in (left, right):
            if isinstance(side, _Error):
                return side
        left, right = (_cells.datetime_to_serial(v, date1904=self.date1904)
                       if isinstance(v, (dt.date, dt.datetime)) else v for v in (left, right))
        a, b = _comparable(left, right), _comparable(right, left)
        if a[0] != b[0]:
            order = a[0] - b[0]  # numbers < text < TRUE/FALSE, as spreadsheets sort them
        else:
            order = (a[1] > b[1]) - (a[1] < b[1])
        return {"=": order == 0, "<>": order != 0, "<": order < 0, ">": order > 0,
                "<=": order <= 0, ">=": order >= 0}[node.op]

    def logical(self, value: Any) -> Any:
        """A condition as IF, AND and OR read it: a bool, None (no value) or an _Error."""
        if isinstance(value, _Error) or value is None or isinstance(value, bool):
            return value
        if isinstance(value, str):
            word = value.strip().upper()
            if word in ("TRUE", "FALSE"):
                return word == "TRUE"
            return _Error("#VALUE!", str(value) if isinstance(value, _Message) else None)
        number = self.scalar_number(value)
        return number if isinstance(number, _Error) else number != 0

    def worksheet_function(self, node: Call) -> Any:
        name, args = node.name, node.args
        low, high = _ARITY[name]
        if not low <= len(args) <= high:
            raise FormulaError(
                f"cannot evaluate {node.text}: {name} takes "
                + (f"{low}" if low == high else f"{low} to {high}") + " arguments"
            )
        if name == "IF":
            condition = self.logical(self.single(args[0]))
            if isinstance(condition, _Error):
                return condition
            if condition:
                branch = args[1] if len(args) > 1 else Literal(None)
                return 0.0 if branch == Literal(None) else self.value(branch)
            if len(args) < 3:
                return False
            return 0.0 if args[2] == Literal(None) else self.value(args[2])
        if name == "IFERROR":
            first = self.value(args[0])
            if isinstance(first, _Error):
                return 0.0 if args[1] == Literal(None) else self.value(args[1])
            return first
        if name in ("MIN", "MAX", "AND", "OR"):
            return self.aggregate(name, args)
        if name == "DATE":
            parts = [self.scalar_number(self.single(a)) for a in args]
            for part in parts:
                if isinstance(part, _Error):
                    return part
            return _date_serial(*(int(p) for p in parts), date1904=self.date1904)
        # ABS and the three roundings work cell by cell on a column too.
        x = self.number(args[0])
        if isinstance(x, _Error):
            return x
        if name == "ABS":
            return np.abs(x) if isinstance(x, np.ndarray) else abs(x)
        digits = self.scalar_number(self.single(args[1]))
        if isinstance(digits, _Error):
            return digits
        mode = {"ROUND": ROUND_HALF_UP, "ROUNDUP": ROUND_UP, "ROUNDDOWN": ROUND_DOWN}[name]
        if isinstance(x, np.ndarray):
            return np.array([_round(v, digits, mode) for v in x.reshape(-1).tolist()],
                            dtype=np.float64).reshape(x.shape)
        return _round(x, digits, mode)

    def aggregate(self, name: str, args: Sequence[Node]) -> Any:
        """MIN, MAX, AND, OR: ranges give their numbers (and TRUE/FALSE for AND/OR),
        skipping text and blanks; values typed as arguments count as written."""
        logical = name in ("AND", "OR")
        seen: list[Any] = []
        for arg in args:
            value = self.value(arg)
            if isinstance(value, _Block):
                for row in value.rows:
                    for v in map(_cell_value, row):
                        if isinstance(v, _Error):
                            return v
                        if isinstance(v, bool):
                            if logical:
                                seen.append(v)
                        elif isinstance(v, (int, float, np.number)):
                            if v == v:
                                seen.append(float(v) != 0 if logical else float(v))
                        elif isinstance(v, (dt.date, dt.datetime)) and not logical:
                            seen.append(self.scalar_number(v))
                continue
            if isinstance(value, np.ndarray):
                finite = [float(v) for v in self.number(arg).reshape(-1) if v == v]
                seen.extend(v != 0 for v in finite) if logical else seen.extend(finite)
                continue
            if arg == Literal(None):
                value = 0.0 if not logical else False
            one = self.logical(value) if logical else self.scalar_number(value)
            if isinstance(one, _Error):
                return one
            seen.append(one)
        if logical:
            if not seen:
                return _Error("#VALUE!")
            return all(seen) if name == "AND" else any(seen)
        if not seen:
            return 0.0
        return min(seen) if name == "MIN" else max(seen)

    def block_result(self, block: _Block) -> Result:
        grid = block.rows
        if len(grid) == 1 and len(grid[0]) == 1:
            return _convert.to_cell(grid[0][0])
        raise FormulaError(
            f"cannot evaluate {block.ref.text}: a bare range is not a sheetvol formula"
        )


# -- many cells, in dependency order -------------------------------------------------------
CellKey = tuple[str, int, int]


def evaluate_cells(
    cells: Sequence[Any],
    resolver: Resolver,
    *,
    date1904: bool = False,
    names: Mapping[str, str] | None = None,
) -> dict[CellKey, Result | FormulaError]:
    """Evaluate many formula cells, each after the sheetvol cells it reads.

    A trade log's stop may read the ATR cell beside it, which is itself a
    sheetvol formula whose stored value is stale or absent. Formulas are
    ordered so that such a cell is computed first, and its fresh result (a
    column spills downwards) is what the later formula reads.

    Parameters
    ----------
    cells : sequence
        Objects with ``sheet``, ``row``, ``col`` and ``formula`` (such as
        :class:`sheetvol.workbook.package.FormulaCell`).
    resolver : callable
        As for :func:`evaluate`; it gives stored values for everything else.
    date1904 : bool
        The workbook counts dates from 1904.
    names : mapping, optional
        Defined names (name -> reference text).

    Returns
    -------
    dict
        ``(sheet, row, col)`` (sheet as given) -> result, or the
        :class:`FormulaError` saying why that cell was not evaluated.

    Examples
    --------
    >>> from types import SimpleNamespace as C
    >>> values = {(1, 1): 100.0, (1, 2): 2.0}
    >>> def read(sheet, top, left, bottom, right):
    ...     return [[values.get((r, c)) for c in range(left, right + 1)]
    ...             for r in range(top, bottom + 1)]
    >>> out = evaluate_cells([C(sheet="S", row=1, col=4, formula="SV_STOP(A1,C1)"),
    ...                       C(sheet="S", row=1, col=3, formula="SV_STOP(10,B1,1)")], read)
    >>> out[("S", 1, 3)], out[("S", 1, 4)]
    (8.0, 84.0)
    """
    results: dict[CellKey, Result | FormulaError] = {}
    trees: dict[CellKey, Node] = {}
    by_cell: dict[tuple[str, int, int], CellKey] = {}
    for fc in cells:
        key = (fc.sheet, fc.row, fc.col)
        by_cell[(fc.sheet.lower(), fc.row, fc.col)] = key
        try:
            trees[key] = parse(fc.formula, names)
        except FormulaError as exc:
            results[key] = exc
    deps = {key: _depends_on(key, tree, by_cell) for key, tree in trees.items()}
    overlay: dict[tuple[str, int], dict[int, object]] = {}

    def read(sheet: str | None, top: int, left: int, bottom: int | None,
             right: int | None) -> list[list[object]]:
        rows = resolver(sheet, top, left, bottom, right)
        if sheet is None or not overlay:
            return rows
        for j in range(len(rows[0]) if rows else 0):
            fresh = overlay.get((sheet.lower(), left + j))
            if not fresh:
                continue
            for r, v in fresh.items():
                if 0 <= r - top < len(rows):
                    rows[r - top][j] = v
        return rows

    for key in _order(deps, results):
        if key in results:
            continue
        sheet, row, col = key
        try:
            value = evaluate(trees[key], read, current_sheet=sheet, date1904=date1904)
        except (FormulaError, ArgumentError) as exc:
            results[key] = exc if isinstance(exc, FormulaError) else FormulaError(str(exc))
            if isinstance(exc, ArgumentMessage):  # later formulas read the message it shows
                overlay.setdefault((sheet.lower(), col), {})[row] = exc.text
            continue
        results[key] = value
        column = overlay.setdefault((sheet.lower(), col), {})
        if isinstance(value, np.ndarray):
            for i, v in enumerate(value.reshape(-1).tolist()):
                column[row + i] = v if isinstance(v, str) or v == v else None
        else:
            column[row] = value
    return results


def _refs(node: Node) -> list[Ref]:
    if isinstance(node, Ref):
        return [node]
    if isinstance(node, Call):
        return [r for a in node.args for r in _refs(a)]
    if isinstance(node, Unary):
        return _refs(node.operand)
    if isinstance(node, Binary):
        return _refs(node.left) + _refs(node.right)
    return []


def _depends_on(key: CellKey, tree: Node, by_cell: dict[tuple[str, int, int], CellKey]
                ) -> set[CellKey]:
    out = set()
    for ref in _refs(tree):
        sheet = (ref.sheet or key[0]).lower()
        for (s, r, c), other in by_cell.items():
            if s != sheet or other == key:
                continue
            inside_rows = ref.top <= r <= (ref.bottom or MAX_ROWS)
            if inside_rows and ref.left <= c <= (ref.right or MAX_COLS):
                out.add(other)
    return out


def _order(deps: dict[CellKey, set[CellKey]], results: dict) -> list[CellKey]:
    """Cells in an order where each comes after the cells it reads; a cycle is an error."""
    done: list[CellKey] = []
    state: dict[CellKey, int] = {}  # 1 = in progress, 2 = done
    for start in deps:
        if state.get(start):
            continue
        state[start] = 1
        stack = [(start, iter(sorted(deps[start])))]
        while stack:
            node, children = stack[-1]
            child = next(children, None)
            if child is None:
                stack.pop()
                state[node] = 2
                done.append(node)
            elif child in deps and not state.get(child):
                state[child] = 1
                stack.append((child, iter(sorted(deps[child]))))
            elif state.get(child) == 1:
                for k, _ in stack:
                    results.setdefault(k, FormulaError(
                        f"cannot evaluate: circular reference between sheetvol formulas "
                        f"({child[0]}!R{child[1]}C{child[2]})"))
    return done


# -- resolvers ------------------------------------------------------------------------
def openpyxl_resolver(workbook: Any, *, default_sheet: str | None = None) -> Resolver:
    """A resolver reading an openpyxl workbook (load it with ``data_only=True`` for stored results).

    Sheet names match case-insensitively; whole columns stop at the sheet's
    last used row.

    Examples
    --------
    >>> from openpyxl import Workbook
    >>> wb = Workbook(); ws = wb.active; ws["A1"] = 5.0
    >>> openpyxl_resolver(wb)(ws.title, 1, 1, 1, 1)
    [[5.0]]
    """
    by_name = {ws.title.lower(): ws for ws in workbook.worksheets}

    def resolve(sheet: str | None, top: int, left: int, bottom: int | None,
                right: int | None) -> list[list[object]]:
        name = sheet if sheet is not None else default_sheet
        ws = by_name.get(name.lower()) if name is not None else workbook.active
        if ws is None:
            raise FormulaError(f"cannot evaluate: there is no sheet named {name!r}")
        bottom = ws.max_row if bottom is None else bottom
        right = ws.max_column if right is None else right
        if bottom < top or right < left:
            return []
        return [list(row) for row in ws.iter_rows(min_row=top, max_row=bottom, min_col=left,
                                                  max_col=right, values_only=True)]

    return resolve


def package_resolver(package: Any) -> Resolver:
    """A resolver over a :class:`sheetvol.workbook.package.Package` (the fill's reader).

    Columns are read once per sheet with ``Package.read_columns`` (one pass
    over the sheet's XML for all the columns asked so far) and blocks are cut
    from them, so a sheet of many formulas over the same columns is not
    re-read for each formula. Whole columns end at the last used row of the
    columns asked.
    """
    cache: dict[str, dict[int, tuple[list[object], int]]] = {}

    def columns(sheet: str, cols: list[int]) -> dict[int, tuple[list[object], int]]:
        have = cache.setdefault(sheet.lower(), {})
        missing = [c for c in cols if c not in have]
        if missing:
            for c, col in package.read_columns(sheet, missing, first_row=1).items():
                values: list[object] = [None if x != x else x for x in col.numbers.tolist()]
                for r, v in col.other.items():
                    values[r - 1] = v
                have[c] = (values, len(values))
        return {c: have[c] for c in cols}

    def resolve(sheet: str | None, top: int, left: int, bottom: int | None,
                right: int | None) -> list[list[object]]:
        if sheet is None:
            raise FormulaError("cannot evaluate: a reference without a sheet and no current sheet")
        if right is None:
            right = max(package.read_grid(sheet, max_rows=bottom).max_col, left)
        cols = list(range(left, right + 1))
        found = columns(sheet, cols)
        if bottom is None:
            bottom = max(n for _, n in found.values())
        rows: list[list[object]] = []
        for r in range(top - 1, bottom):
            rows.append([found[c][0][r] if r < found[c][1] else None for c in cols])
        return rows

    return resolve
