"""Scanning worksheet XML as bytes: rows, cells and their values.

A 1,048,576-row sheet is a few hundred MB of XML; a tree parser (or openpyxl) needs
minutes and gigabytes for it. The grammar of ``<sheetData>`` is small and regular, so
it is scanned with regular expressions over bytes, chunk by chunk:

- attributes may come in any order and with either quote;
- rows and cells may be self-closing, and may omit ``r`` (position then implied);
- the namespace prefix of the main namespace is taken from the ``<sheetData>`` tag,
  so ``<x:c>`` sheets are read as well as the usual unprefixed ones.

Text never contains a raw ``<``, so element starts found by the patterns are real.
"""

from __future__ import annotations

import queue
import re
import threading
import zipfile
import zlib
from collections.abc import Callable, Iterator
from functools import lru_cache
from typing import Protocol

from sheetvol.functions.grid import MAX_COL, MAX_ROW, column_letters, column_number
from sheetvol.workbook._safety import check_prolog
from sheetvol.workbook.errors import CellError, WorkbookError

# a sheet's XML goes through in chunks of about this many bytes: a chunk and what is
# made of it stay in the CPU's cache, and the first chunk's inflating and the last
# one's deflating (which nothing overlaps) are short (measured, docs/performance.md)
CHUNK = 1 << 20
HEAD_READ = 1 << 16

_SHEETDATA = re.compile(rb"<([A-Za-z_][\w.\-]*:)?sheetData(?=[\s>/])[^>]*?(/?)>")
ATTR_R_ROW = re.compile(rb"""(?:^|\s)r\s*=\s*["'](\d+)["']""")
ATTR_R_CELL = re.compile(rb"""(?:^|\s)r\s*=\s*["']([A-Z]{1,3})(\d+)["']""")
_ATTR_R_ANY = re.compile(rb"""(?:^|\s)r\s*=\s*["']([^"']*)["']""")


def bad_cell_ref(attrs: bytes, where: str, row: int) -> WorkbookError | None:
    """The refusal of a cell whose ``r`` is there but not an A1 reference, else None.

    Taken for a cell without ``r``, it would be placed by guess, and an editor adding
    the position would give the cell two ``r`` attributes (a sheet no program opens).

    Examples
    --------
    >>> print(bad_cell_ref(b' r="e7"', "a.xlsx", 7))  # doctest: +ELLIPSIS
    a.xlsx, row 7: a cell reference 'e7' that is not one (such as B7); the file is damaged...
    >>> bad_cell_ref(b' s="1"', "a.xlsx", 7) is None
    True
    """
    m = _ATTR_R_ANY.search(attrs)
    if m is None:
        return None
    shown = m[1].decode("utf-8", "replace")[:20]
    return WorkbookError(f"{where}, row {row}: a cell reference {shown!r} that is not one "
                         "(such as B7); the file is damaged. Open it in your spreadsheet "
                         "program and save it again.")
_ATTR_T = re.compile(rb"""(?:^|\s)t\s*=\s*["'](\w+)["']""")
_ENTITY = re.compile(r"&(#x[0-9A-Fa-f]+|#\d+|amp|lt|gt|quot|apos);")
_XESC = re.compile(r"_x([0-9A-Fa-f]{4})_")
_NAMED = {"amp": "&", "lt": "<", "gt": ">", "quot": '"', "apos": "'"}


class Patterns:
    """Compiled patterns for one namespace prefix (``b""`` or e.g. ``b"x:"``)."""

    def __init__(self, prefix: bytes) -> None:
        p = re.escape(prefix)
        self.prefix = prefix
        self.row = re.compile(rb"<" + p + rb"row(?=[\s>/])([^>]*?)(/>|>(.*?)</" + p + rb"row>)",
                              re.S)
        self.cell = re.compile(rb"<" + p + rb"c(?=[\s>/])([^>]*?)(/>|>(.*?)</" + p + rb"c>)",
                               re.S)
        self.v = re.compile(rb"<" + p + rb"v(?:\s[^>]*)?>([^<]*)</" + p + rb"v>")
        self.f = re.compile(rb"<" + p + rb"f(?=[\s>/])([^>]*?)(?:/>|>([^<]*)</" + p + rb"f>)")
        self.t = re.compile(rb"<" + p + rb"t(?:\s[^>]*)?>([^<]*)</" + p + rb"t>")
        self.rph = re.compile(rb"<" + p + rb"rPh(?=[\s>/]).*?</" + p + rb"rPh>", re.S)
        self.row_start = b"<" + prefix + b"row"
        self.cell_start = b"<" + prefix + b"c"
        self.row_end = b"</" + prefix + b"row>"
        self.sheetdata_end = b"</" + prefix + b"sheetData>"


@lru_cache(maxsize=8)
def patterns(prefix: bytes) -> Patterns:
    """Cached :class:`Patterns` for ``prefix``."""
    return Patterns(prefix)


COLS_BLOCK: dict[bytes, int] = {}


def col_index(letters: bytes) -> int:
    """1-based column number of column letters (``b"A"`` -> 1, ``b"AA"`` -> 27).

    The hot path of the reader: a cache in front of the one rule,
    :func:`sheetvol.functions.grid.column_number`.
    """
    n = COLS_BLOCK.get(letters)
    if n is None:
        n = COLS_BLOCK[letters] = column_number(letters.decode("ascii"))
    return n


#: Column letters of a 1-based column number (1 -> ``"A"``): the one rule.
col_letters = column_letters


def cell_name(row: int, col: int) -> str:
    """A1-style name of a cell."""
    return f"{col_letters(col)}{row}"


def parse_ref(ref: str) -> tuple[int, int, int, int]:
    """``"A1:F300"`` -> (top, left, bottom, right); a single cell gives a 1x1 block."""
    m = re.fullmatch(r"\$?([A-Z]{1,3})\$?(\d+)(?::\$?([A-Z]{1,3})\$?(\d+))?", ref.strip().upper())
    if not m:
        raise ValueError(f"not a cell range: {ref!r}")
    left, top = col_index(m[1].encode()), int(m[2])
    right, bottom = (col_index(m[3].encode()), int(m[4])) if m[3] else (left, top)
    return min(top, bottom), min(left, right), max(top, bottom), max(left, right)


class CellTextError(WorkbookError):
    """Cell text that is not XML character data (bad UTF-8, a reference to no character).

    The readers that know the cell re-raise it naming the cell; anywhere else it still
    reaches the user as a refusal, never a traceback.
    """


def _shown(raw: bytes) -> str:
    text = raw.decode("utf-8", "replace")
    return repr(text if len(text) <= 40 else text[:37] + "...")


def unescape(raw: bytes) -> str:
    """Text of XML character data: entity references and ``_xHHHH_`` escapes decoded.

    Raises
    ------
    CellTextError
        Bytes that are not UTF-8, or a character reference beyond Unicode (the callers
        name the cell).

    Examples
    --------
    >>> unescape(b"a &amp; b &#65;&#x42; _x0043_")
    'a & b AB C'
    """
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise CellTextError(f"bytes that are not UTF-8 text ({exc.reason} at byte "
                            f"{exc.start})") from None
    if "&" in text:
        text = _ENTITY.sub(_entity, text)
    if "_x" in text:
        text = _XESC.sub(lambda m: chr(int(m[1], 16)), text)
    return text


def unescape_ooxml(text: str) -> str:
    """Decode the ``_xHHHH_`` escapes OOXML uses for characters XML cannot carry."""
    return _XESC.sub(lambda m: chr(int(m[1], 16)), text) if "_x" in text else text


def _entity(m: re.Match[str]) -> str:
    body = m[1]
    if body[0] == "#":
        digits = body[2:] if body[1] in "xX" else body[1:]
        if len(digits) > 8:  # int() of a huge text is slow and chr() of it overflows
            raise CellTextError(f"a character reference {m[0][:20]}... beyond Unicode")
        code = int(digits, 16) if body[1] in "xX" else int(digits)
        if not 0 < code <= 0x10FFFF:
            raise CellTextError(f"a character reference {m[0]} beyond Unicode (at most "
                                "U+10FFFF)")
        return chr(code)
    return _NAMED[body]


def beyond_sheet(name: str, part: str, ref: str) -> WorkbookError:
    """The refusal of a cell or row number beyond the sheet's limits."""
    return WorkbookError(
        f"{name}: part {part}, cell {ref}: beyond the sheet's limits ({MAX_ROW:,} rows, "
        f"{MAX_COL:,} columns); the file is damaged or was not written by a spreadsheet "
        "program.")


def escape_text(text: str) -> str:
    """Escape text for XML character data or a double-quoted attribute."""
    text = (text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
            .replace('"', "&quot;"))
    # Control characters are not allowed raw in XML 1.0; OOXML spells them _xHHHH_.
    if any(ord(ch) < 32 and ch not in "\t\n" for ch in text):
        text = "".join(f"_x{ord(ch):04X}_" if ord(ch) < 32 and ch not in "\t\n" else ch
                       for ch in text)
    return text


class Readable(Protocol):
    """What the sheet reader needs of a file: ``read``."""

    def read(self, n: int = -1, /) -> bytes: ...


class SheetStream:
    """A worksheet part read in chunks: ``head``, then body chunks of whole rows, then ``tail``.

    ``head`` ends with the ``<sheetData>`` start tag (or the self-closing one); the body
    chunks hold whole ``<row>`` elements (and any whitespace between them); ``tail``
    starts with ``</sheetData>`` and is complete once :meth:`body` is exhausted.
    """

    def __init__(self, fh: Readable, part: str, name: str, chunk: int = CHUNK,
                 ahead: bool = False) -> None:
        self.fh: Readable = fh  # a ReadAhead over fh during a whole pass
        self.ahead = ahead  # inflate the next chunk in a second thread (whole passes only)
        self.part = part
        self.name = name
        self.chunk = chunk
        buf = b""
        step = HEAD_READ  # the head is small: no whole chunk inflated just to find it
        while True:
            data = self._read(step)
            buf += data
            m = _SHEETDATA.search(buf)
            if m or not data:
                break
            step = min(step * 4, chunk)
        check_prolog(buf[:4096], part, name)
        if not m:
            raise WorkbookError(f"{name}: part {part} has no <sheetData>; it is not a worksheet.")
        self.prefix = m[1] or b""
        self.pat = patterns(self.prefix)
        self.head = buf[: m.end()]
        self.empty = m[2] == b"/"
        self._rest = buf[m.end():]
        self.tail = b""

    def _read(self, n: int) -> bytes:
        try:
            return self.fh.read(n)
        except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as exc:
            raise WorkbookError(f"{self.name}: part {self.part} is damaged ({exc}); open the "
                                "file in your spreadsheet program and save it again.") from None

    def body(self) -> Iterator[bytes]:
        """Yield chunks of complete rows; sets :attr:`tail` at the end."""
        if self.empty:
            self.tail = self._rest + self._read(-1)
            return
        if not self.ahead:
            yield from self._body()
            return
        fh = self.fh
        self.fh = ahead = ReadAhead(fh, self.chunk)
        try:
            yield from self._body()
        finally:
            ahead.close()
            self.fh = fh

    def _body(self) -> Iterator[bytes]:
        buf = self._rest
        self._rest = b""
        end_tag = self.pat.sheetdata_end
        start = self.pat.row_start
        eof = False
        while True:
            end = buf.find(end_tag)
            if end >= 0:
                if end:
                    yield buf[:end]
                self.tail = buf[end:] + self._read(-1)
                return
            if eof:
                raise WorkbookError(
                    f"{self.name}: part {self.part} ends inside <sheetData>; the file is damaged."
                )
            cut = _last_row_start(buf, start)
            if cut > 0:
                yield buf[:cut]
                buf = buf[cut:]
            data = self._read(self.chunk)
            if not data:
                eof = True
            buf += data


class Pieces:
    """A sheet's XML already inflated, read back piece by piece (as a :class:`SheetStream`
    reads a part: ``read(n)`` gives the next piece whatever ``n``, ``read()`` the rest).

    Examples
    --------
    >>> fh = Pieces([b"<sheetData>", b"<row/>", b"</sheetData>"])
    >>> fh.read(4), fh.read()
    (b'<sheetData>', b'<row/></sheetData>')
    """

    def __init__(self, pieces: list[bytes]) -> None:
        self._pieces = pieces
        self._next = 0

    def read(self, n: int = -1, /) -> bytes:
        i = self._next
        if n < 0:
            self._next = len(self._pieces)
            return b"".join(self._pieces[i:])
        if i >= len(self._pieces):
            return b""
        self._next = i + 1
        return self._pieces[i]


class ReadAhead:
    """Reads ``fh`` in chunks of ``size`` in a second thread, one chunk ahead of the caller.

    Inflating (zlib) releases the GIL, so the next chunk inflates on the other core
    while the caller scans this one. The caller must :meth:`close` it (the thread then
    stops even when the rest was never asked for). Errors of the thread are raised in
    the caller's :meth:`read`.
    """

    def __init__(self, fh: Readable, size: int) -> None:
        self.fh = fh
        self.size = size
        self._queue: queue.Queue[bytes | BaseException] = queue.Queue(maxsize=1)
        self._stop = False
        self._done = False
        self._thread = threading.Thread(target=self._run, name="sheetvol-inflate", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        try:
            while not self._stop:
                data = self.fh.read(self.size)
                self._queue.put(data)
                if not data:
                    return
        except BaseException as exc:  # handed to the caller's thread
            self._queue.put(exc)

    def _next(self) -> bytes:
        if self._done:
            return b""
        item = self._queue.get()
        if isinstance(item, BaseException):
            self._done = True
            raise item
        self._done = not item
        return item

    def read(self, n: int = -1) -> bytes:
        """The next chunk (``n`` is the chunk size), or everything left when ``n`` < 0."""
        if n >= 0:
            return self._next()
        parts = []
        while data := self._next():
            parts.append(data)
        return b"".join(parts)

    def close(self) -> None:
        """Stop the thread: it ends after the chunk it is inflating."""
        self._stop = True
        while self._thread.is_alive():
            try:
                self._queue.get(timeout=0.05)  # unblock a waiting put
            except queue.Empty:
                pass
        self._thread.join()


def _last_row_start(buf: bytes, start: bytes) -> int:
    """Offset of the last ``<row`` start tag in ``buf`` (0 when none beyond the start)."""
    pos = len(buf)
    while True:
        pos = buf.rfind(start, 0, pos)
        if pos <= 0:
            return 0
        nxt = buf[pos + len(start) : pos + len(start) + 1]
        if nxt in (b" ", b">", b"/", b"\t", b"\n", b"\r"):
            return pos
        if not nxt:  # tag cut at the end of the buffer: wait for more data
            continue


class CellReader:
    """Turns cell elements into Python values."""

    def __init__(self, pat: Patterns, shared: list[str] | None) -> None:
        self.pat = pat
        self.shared = shared

    def _shared_text(self, raw: bytes) -> str:
        """The shared string a cell points at; a pointer to none is refused (named above)."""
        table = self.shared or []
        try:
            index = int(raw)
        except ValueError:
            raise CellTextError(f"{_shown(raw)} where a shared-string number belongs"
                                ) from None
        if not 0 <= index < len(table):
            raise CellTextError(f"a pointer to shared string {index}, but the workbook's "
                                f"table has {len(table)} (numbered from 0)") from None
        return table[index]

    def value(self, attrs: bytes, inner: bytes | None) -> object:
        """Value of one cell: float, str, bool, CellError or None."""

        if not inner:
            return None
        m = _ATTR_T.search(attrs) if b"t" in attrs else None
        t = m[1] if m else b"n"
        if t == b"inlineStr":
            return self.inline_text(inner)
        mv = self.pat.v.search(inner)
        if mv is None:
            return None
        raw = mv[1]
        if t == b"n":
            try:
                return float(raw)
            except ValueError:
                if not raw.strip():
                    return None
                # Read as blank, it would drop a price without a word (the callers name
                # the cell).
                raise CellTextError(f"{_shown(raw)} in a number cell") from None
        if t == b"s":
            return self._shared_text(raw)
        if t == b"str":
            return unescape(raw)
        if t == b"b":
            return raw.strip() in (b"1", b"true")
        if t == b"e":
            return CellError(unescape(raw))
        return unescape(raw)  # t="d" (ISO date text) and anything unknown: as text

    def inline_text(self, inner: bytes) -> str:
        """Text of an ``<is>`` inline string (phonetic runs left out)."""
        if b"rPh" in inner:
            inner = self.pat.rph.sub(b"", inner)
        return "".join(unescape(t) for t in self.pat.t.findall(inner))

    def formula(self, inner: bytes | None) -> tuple[bytes, str | None, dict[str, str]] | None:
        """(attrs, text or None, parsed attrs) of the ``<f>`` of a cell, or None."""
        if not inner or b"f" not in inner:
            return None
        m = self.pat.f.search(inner)
        if m is None:
            return None
        attrs = {k.decode(): unescape(v) for k, _q, v in _ATTRS.findall(m[1])}
        return m[1], (unescape(m[2]) if m[2] is not None else None), attrs


_ATTRS = re.compile(rb"""([\w:.\-]+)\s*=\s*(["'])(.*?)\2""", re.S)


class RowCursor:
    """Walks the body chunks of one sheet in order, keeping the row number across them.

    Rows and cells that omit ``r`` take the position after the previous one, so the
    row number carries from chunk to chunk; :meth:`skip` passes over a chunk without
    parsing it when its last row states its number.
    """

    def __init__(self, pat: Patterns, name: str = "", part: str = "") -> None:
        self.pat = pat
        self.name, self.part = name, part  # the file and part a refusal names
        self.r = 0
        self.done = False  # a row beyond ``max_row`` was reached

    def skip(self, chunk: bytes) -> bool:
        """Pass over ``chunk`` unparsed; False (nothing done) when its last row has no ``r``."""
        last = _last_row_start(chunk, self.pat.row_start)
        m = ATTR_R_ROW.search(chunk, last, chunk.find(b">", last))
        if m:
            self.r = int(m[1])
        return m is not None

    def cells(self, chunk: bytes, max_row: int | None = None
              ) -> Iterator[tuple[int, int, bytes, bytes | None]]:
        """(row, col, attrs, inner) of each cell of ``chunk``, up to row ``max_row``."""
        row_re, cell_re = self.pat.row, self.pat.cell
        r = self.r
        for rm in row_re.finditer(chunk):
            mr = ATTR_R_ROW.search(rm[1])
            r = self.r = int(mr[1]) if mr else r + 1
            if r > MAX_ROW:
                first = ATTR_R_CELL.search(rm[3] or b"")
                ref = (first[1].decode() if first else "") + str(r)
                raise beyond_sheet(self.name, self.part, ref if first else f"row {r}")
            if max_row is not None and r > max_row:
                self.done = True
                return
            inner = rm[3]
            if not inner:
                continue
            c = 0
            for cm in cell_re.finditer(inner):
                attrs = cm[1]
                mc = ATTR_R_CELL.search(attrs)
                if mc is None and (bad := bad_cell_ref(attrs, f"{self.name}: part {self.part}",
                                                       r)):
                    raise bad
                c = col_index(mc[1]) if mc else c + 1
                if c > MAX_COL:
                    raise beyond_sheet(self.name, self.part,
                                       (mc[1].decode() if mc else f"column {c} ") + str(r))
                yield r, c, attrs, cm[3]


def iter_cells(
    stream: SheetStream,
    max_row: int | None = None,
    skip_chunk: Callable[[bytes], bool] | None = None,
) -> Iterator[tuple[int, int, bytes, bytes | None]]:
    """Yield (row, col, attrs, inner) for each cell, with implied positions filled in.

    ``skip_chunk(chunk)`` True passes over a whole chunk of rows unparsed (when its last
    row states its number, so later implied row numbers stay right).
    """
    cursor = RowCursor(stream.pat, stream.name, stream.part)
    for chunk in stream.body():
        if skip_chunk is not None and skip_chunk(chunk) and cursor.skip(chunk):
            if max_row is not None and cursor.r > max_row:
                return
            continue
        yield from cursor.cells(chunk, max_row)
        if cursor.done:
            return


_REF_TOKEN = re.compile(
    r"""("(?:[^"]|"")*")"""  # a string literal: left alone
    r"""|('(?:[^']|'')*'!|\b[A-Za-z_][\w.]*!)"""  # a sheet qualifier: kept
    r"""|(?<![\w.$])(\$?)([A-Z]{1,3})(\$?)(\d+)(?![\w(!])"""  # an A1 reference
)


def shift_formula(text: str, drow: int, dcol: int) -> str:
    """Move the relative references of a shared formula by (drow, dcol).

    Examples
    --------
    >>> shift_formula('SV_X(E2:E30,14,"A1")', 3, 1)
    'SV_X(F5:F33,14,"A1")'
    """
    def repl(m: re.Match[str]) -> str:
        if m[1] or m[2]:
            return m[0]
        cabs, letters, rabs, digits = m[3], m[4], m[5], m[6]
        col = col_index(letters.encode())
        row = int(digits)
        if col > MAX_COL or row > MAX_ROW:
            return m[0]
        if not cabs:
            col += dcol
        if not rabs:
            row += drow
        if col < 1 or row < 1:
            return "#REF!"
        return f"{cabs}{col_letters(col)}{rabs}{row}"

    return _REF_TOKEN.sub(repl, text)
