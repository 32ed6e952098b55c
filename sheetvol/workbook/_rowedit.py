"""Splicing new cells into the rows of a worksheet part, streaming.

The sheet XML goes through in chunks of whole rows. Rows nobody edits are copied as
they are (as slices of the input). An edited row keeps every cell element it had,
byte for byte, except cells that an edit replaces; new cells are placed in column
order and missing rows are created in row order.
"""

from __future__ import annotations

import math
import re
from bisect import bisect_right
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from itertools import repeat

import numpy as np

try:
    import orjson
except ImportError:  # e.g. the add-in's in-Excel Python (Pyodide) may not have it
    orjson = None  # type: ignore[assignment]  # absent: repr_texts uses repr (same text)

from sheetvol.functions.grid import MAX_COL
from sheetvol.workbook._sheetxml import (
    ATTR_R_CELL,
    ATTR_R_ROW,
    COLS_BLOCK,
    Patterns,
    bad_cell_ref,
    cell_name,
    col_index,
    col_letters,
    escape_text,
    shift_formula,
)
from sheetvol.workbook.errors import CellError, WorkbookError

_SPANS = re.compile(rb"""\s+spans\s*=\s*(["'])[^"']*\1""")
_T_ATTR = re.compile(rb"""\s+t\s*=\s*(["'])[^"']*\1""")
_S_ATTR = re.compile(rb"""(?:^|\s)s\s*=\s*["'](\d+)["']""")
_F_REF = re.compile(rb"""(?:^|\s)ref\s*=\s*["']([A-Z$]+\d+(?::[A-Z$]+\d+)?)["']""")
_F_T = re.compile(rb"""(?:^|\s)t\s*=\s*["'](\w+)["']""")
_F_SI = re.compile(rb"""(?:^|\s)si\s*=\s*["'](\d+)["']""")
# attributes of a formula cell that mean nothing once it holds a plain value: the
# value type (written anew), cell metadata (dynamic arrays) and value metadata
_FORMULA_CELL_ATTRS = re.compile(rb"""\s+(?:t|cm|vm)\s*=\s*(["'])[^"']*\1""")
# <f> attributes that a plain (non-shared) formula does not carry
_SHARED_ATTRS = re.compile(rb"""\s+(?:t|si|ref)\s*=\s*(["'])[^"']*\1""")
# whole-column (E:E) and whole-row (2:5) references: not moved by shift_formula
_LINE_REF = re.compile(r"""(?<![\w$.:])\$?(?:[A-Z]{1,3}:\$?[A-Z]{1,3}|\d+:\$?\d+)(?![\w(!:])""")
_INF = float("inf")


def _drop_spans(attrs: bytes) -> bytes:
    """Row attributes without the ``spans`` hint (which new cells would contradict)."""
    i = attrs.find(b' spans="')
    if i >= 0:
        j = attrs.find(b'"', i + 8)
        if j > 0:
            return attrs[:i] + attrs[j + 1 :]
    return _SPANS.sub(b"", attrs)


def number_text(value: float) -> str:
    """Shortest text that reads back to the same double (``repr``), e.g. ``1850.25``."""
    text = repr(value)
    return text[:-2] if text.endswith(".0") else text


# Python's repr switches to an exponent below 1e-4; orjson writes such numbers in another
# style (0.00005, 5e-7 for 5e-05, 5e-07), so they take repr itself
_SMALL = 1e-4


def repr_texts(values: np.ndarray) -> list[str]:
    """``repr`` of each double (its shortest round-trip text), ``""`` for NaN and inf.

    orjson writes the same shortest digits as ``repr`` several times faster; the few
    numbers it spells differently (magnitudes below 1e-4) take ``repr`` itself. Without
    orjson every number takes ``repr``.

    Examples
    --------
    >>> repr_texts(np.array([1850.25, 1.0, 3e-05, np.nan, -0.0, 1e16]))
    ['1850.25', '1.0', '3e-05', '', '-0.0', '1e+16']
    """
    arr = np.ascontiguousarray(values, dtype=np.float64).ravel()
    if not len(arr):
        return []
    if orjson is None:  # the same texts, slower
        return [repr(x) if x - x == 0 else "" for x in arr.tolist()]
    texts = orjson.dumps(arr, option=orjson.OPT_SERIALIZE_NUMPY)[1:-1].decode("ascii").split(",")
    with np.errstate(invalid="ignore"):
        small = np.flatnonzero((np.abs(arr) < _SMALL) & (arr != 0))
    for i in small.tolist():
        texts[i] = repr(float(arr[i]))
    if not np.isfinite(arr).all():  # orjson writes null for NaN and inf: no cell
        texts = ["" if t == "null" else t for t in texts]
    return texts


def text_cell(ref: str, text: str, style: int | None, prefix: str = "") -> str:
    """An inline-string cell; ``xml:space`` kept when the text has outer spaces."""
    s = f' s="{style}"' if style else ""
    space = ' xml:space="preserve"' if text != text.strip() or "\n" in text else ""
    p = prefix
    return (f'<{p}c r="{ref}"{s} t="inlineStr"><{p}is><{p}t{space}>{escape_text(text)}'
            f"</{p}t></{p}is></{p}c>")


def value_cell(ref: str, value: object, style: int | None, prefix: str = "") -> str | None:
    """A cell for a Python value (None/NaN/inf give no cell)."""

    s = f' s="{style}"' if style else ""
    p = prefix
    if value is None:
        return None
    if isinstance(value, CellError):
        return f'<{p}c r="{ref}"{s} t="e"><{p}v>{escape_text(str(value))}</{p}v></{p}c>'
    if isinstance(value, (bool, np.bool_)):
        return f'<{p}c r="{ref}"{s} t="b"><{p}v>{int(bool(value))}</{p}v></{p}c>'
    if isinstance(value, (int, float, np.integer, np.floating)):
        x = float(value)
        if not math.isfinite(x):
            return None
        return f'<{p}c r="{ref}"{s}><{p}v>{number_text(x)}</{p}v></{p}c>'
    return text_cell(ref, str(value), style, prefix)


@dataclass
class ColumnRun:
    """Numbers for rows first_row.. of one column (NaN/inf -> no cell).

    ``texts`` holds the finished cell XML of text cells by sheet row; ``values`` is NaN
    on those rows. A run without text (the usual, numeric case) keeps the fast path.
    """

    col: int
    first_row: int
    values: list[float]
    style: int
    letters: str = ""
    replace_from: int | None = None  # drop existing cells of the column from this row down
    texts: dict[int, str] | None = None

    def __post_init__(self) -> None:
        self.letters = col_letters(self.col)

    @property
    def last_row(self) -> int:
        return self.first_row + len(self.values) - 1


@dataclass
class SharedMove:
    """A shared formula whose master cell became a value: its group needs a new master.

    The first remaining cell of group ``si`` (rows are read in order, so it follows the
    old master) gets the formula text, moved by the offset, and ``ref`` from itself to
    the bottom right of the old ``ref``; a cell of the group outside that new range
    (left of it, in a later row of a 2-D group) gets a plain formula of its own.
    """

    si: bytes
    text: str  # the old master's formula text, unescaped
    row: int
    col: int
    top: int
    left: int
    bottom: int
    right: int
    new_ref: tuple[int, int, int, int] | None = None
    done: bool = False  # every cell still to come follows the new master

    def covers(self, r: int, c: int) -> bool:
        return self.top <= r <= self.bottom and self.left <= c <= self.right


@dataclass
class SheetEdits:
    """All edits of one sheet, in a form the row loop can use quickly."""

    file: str
    sheet: str
    runs: list[ColumnRun] = field(default_factory=list)
    # single new cells (headers): (row, col) -> (xml text, replace allowed)
    points: dict[tuple[int, int], tuple[str, bool]] = field(default_factory=dict)
    # changes to an existing cell: (row, col) -> function(existing match or None) -> xml
    modifiers: dict[tuple[int, int], Callable[[re.Match[bytes] | None], bytes | None]] = field(
        default_factory=dict)
    # drop ranges: (col, from_row, to_row) with existing cells removed silently
    drops: list[tuple[int, int, float]] = field(default_factory=list)
    # guarded ranges: (col, from_row, to_row, label); an existing cell is an error unless
    # it is blank (no value, no formula): a blank keeps its style under the new value
    guards: list[tuple[int, int, int, str]] = field(default_factory=list)
    # shared formulas whose master became a value (found while the rows stream)
    shared: list[SharedMove] = field(default_factory=list)
    prefix: str = ""
    # called when a spill anchor reveals an older, longer spill whose cells must go
    on_change: Callable[[], None] = lambda: None

    def claim(self, row: int, col: int, what: str) -> None:
        """Refuse two edits aimed at the same cell."""
        key = (row, col)
        if key in self.points or key in self.modifiers or any(
            run.col == col and run.first_row <= row <= run.last_row for run in self.runs
        ):
            raise WorkbookError(f"{self.file}: sheet {self.sheet!r} cell {cell_name(row, col)} "
                                f"is written twice ({what}); give each result its own cell.")

    def rows_needed(self) -> list[int]:
        """Sorted rows that get new or changed cells."""
        parts = [np.array(sorted({r for r, _ in self.points} | {r for r, _ in self.modifiers}),
                          dtype=np.int64)]
        for run in self.runs:
            vals = np.asarray(run.values, dtype=np.float64)
            parts.append(np.flatnonzero(np.isfinite(vals)) + run.first_row)
            if run.texts:
                parts.append(np.fromiter(run.texts, dtype=np.int64, count=len(run.texts)))
        rows = np.concatenate(parts)
        if not len(rows):
            return []
        # a mask over the row range: linear, where np.unique sorts or hashes
        lo = int(rows.min())
        mask = np.zeros(int(rows.max()) - lo + 1, dtype=bool)
        mask[rows - lo] = True
        return (np.flatnonzero(mask) + lo).tolist()

    def extent(self) -> tuple[int, int, int, int] | None:
        """(top, left, bottom, right) of everything written, or None."""
        cells = [(r, c) for r, c in self.points] + [(r, c) for r, c in self.modifiers]
        for run in self.runs:
            if run.values:
                cells += [(run.first_row, run.col), (run.last_row, run.col)]
        if not cells:
            return None
        rows = [r for r, _ in cells]
        cols = [c for _, c in cells]
        return min(rows), min(cols), max(rows), max(cols)


_LETTERS = re.compile(rb"[A-Z]{1,3}")
_DELIM = frozenset(b" \t\r\n>/")
BLOCK = 1 << 12


class RowEditor:
    """Applies :class:`SheetEdits` to the body chunks of a sheet.

    The text of new number cells is made a block of rows at a time with one list
    comprehension per column (the hot loop of a million-row fill). A chunk of plain rows
    is edited as a whole, with bytes and numpy operations per chunk
    (:meth:`_whole_chunk`); in any other chunk rows are found with ``bytes.find``, and
    a row whose existing cells all lie left of the new ones gets them appended without
    being parsed.
    """

    def __init__(self, edits: SheetEdits, pat: Patterns) -> None:
        self.e = edits
        self.pat = pat
        self.p = pat.prefix.decode()
        self.need = edits.rows_needed()
        self.ni = 0
        self.rows_done = 0
        self.by_row_points: dict[int, list[tuple[int, str, bool]]] = {}
        for (r, c), (xml, repl) in edits.points.items():
            self.by_row_points.setdefault(r, []).append((c, xml, repl))
        self.by_row_mods: dict[int, dict[int, Callable]] = {}
        for (r, c), fn in edits.modifiers.items():
            self.by_row_mods.setdefault(r, {})[c] = fn
        self.special = set(self.by_row_points) | set(self.by_row_mods)
        self._blk_lo = self._blk_hi = 0
        self._blk: list[bytes] = []
        self._blk_arr: np.ndarray = np.empty(0, dtype=object)  # the same, as an array
        # chunks edited as a whole (plain rows) and row by row: what tests look at
        self.chunks_whole = self.chunks_by_row = 0
        self._row_r = pat.row_start + b' r="'
        self._special = np.array(sorted(self.special), dtype=np.int64)
        self._arrays: dict[int, np.ndarray] = {}  # the runs' numbers as arrays
        self._run_min = min((run.col for run in edits.runs), default=MAX_COL)
        self._last_cell = re.compile(rb"<" + re.escape(pat.prefix) + rb'c r="([A-Z]{1,3})\d')
        self._refresh_ranges()

    def _refresh_ranges(self) -> None:
        e = self.e
        ranges = [(c, a, b) for c, a, b in e.drops]
        ranges += [(c, a, b) for c, a, b, _ in e.guards]
        ranges += [(run.col, run.replace_from, _INF) for run in e.runs
                   if run.replace_from is not None]
        # rows of a shared group whose master went: each is read for the new master
        watched = [m for m in e.shared if not m.done]
        self.watch_from = min((m.row for m in watched), default=_INF)
        self.watch_to = max((m.bottom for m in watched), default=0)
        ranges += [(m.left, m.row, m.bottom) for m in watched]
        self.check_from = min((a for _, a, _ in ranges), default=_INF)
        self.check_to = max((b for _, _, b in ranges), default=0)
        self.ranges = ranges
        # cached _active() result valid for rows seg[0]..seg[1] (the end may be infinite)
        self._seg: tuple[int, float] = (1, 0)
        self._seg_act: dict[int, bool] = {}
        self._seg_min = MAX_COL + 1

    # -- new cells ---------------------------------------------------------------------
    def _block(self, r: int) -> list[bytes]:
        """Encoded new number cells for rows in the current block (one bytes per row).

        Rows where every column of the block has a number (the usual case) are laid out
        by slice assignment into one list of pieces, joined, encoded and split once; the
        other rows (gaps, text cells, columns starting or ending inside the block) take
        one f-string per cell.
        """
        if self._blk_lo <= r < self._blk_hi:
            return self._blk
        lo, hi = r, r + BLOCK
        p = self.p
        cols = []  # (run, a, b, number texts of rows a..b-1, the numbers)
        for run in sorted(self.e.runs, key=lambda x: x.col):
            a, b = max(lo, run.first_row), min(hi, run.last_row + 1)
            if a < b:
                vals = self._values(run)[a - run.first_row : b - run.first_row]
                cols.append((run, a, b, repr_texts(vals), vals))
        n = hi - lo
        # rows that take the layout: every column covers them with a number, no text cell
        full = np.full(n, bool(cols))
        some = np.zeros(n, dtype=bool)  # rows with anything new at all
        for run, a, b, _, vals in cols:
            has = np.zeros(n, dtype=bool)
            has[a - lo : b - lo] = np.isfinite(vals)  # where repr_texts gave text
            some |= has
            if run.texts:
                rows = np.fromiter(run.texts, dtype=np.int64, count=len(run.texts)) - lo
                rows = rows[(rows >= 0) & (rows < n)]
                has[rows] = False
                some[rows] = True
            full &= has
        blk = np.full(n, b"", dtype=object)
        idx = np.flatnonzero(full)
        if len(idx):
            m = len(idx)
            first = int(idx[0])
            run_of_rows = int(idx[-1]) - first + 1 == m
            row_texts = list(map(str, range(lo + first, lo + first + m))) if run_of_rows \
                else list(map(str, (idx + lo).tolist()))
            stride = 4 * len(cols) + 1
            pieces: list[str] = [""] * (m * stride)  # every slot is set below
            before = ""
            for k, (run, a, _, nums, _) in enumerate(cols):
                s = f' s="{run.style}"' if run.style else ""
                pieces[4 * k :: stride] = [f'{before}<{p}c r="{run.letters}'] * m
                pieces[4 * k + 1 :: stride] = row_texts
                pieces[4 * k + 2 :: stride] = [f'"{s}><{p}v>'] * m
                j = lo + first - a
                pieces[4 * k + 3 :: stride] = (nums[j : j + m] if run_of_rows else
                                               [nums[i] for i in (idx + (lo - a)).tolist()])
                before = f"</{p}v></{p}c>"
            pieces[stride - 1 :: stride] = [before + "\n"] * m  # numbers hold no newline
            texts = np.empty(m, dtype=object)
            texts[:] = "".join(pieces).encode().split(b"\n")[:m]
            blk[idx] = texts
        rest = np.flatnonzero(some & ~full).tolist()
        if rest:
            others = np.empty(len(rest), dtype=object)
            for o, i in enumerate(rest):
                row = lo + i
                cells = []
                for run, a, b, nums, _ in cols:
                    if not a <= row < b:
                        continue
                    if run.texts and row in run.texts:  # its XML is ready-made
                        cells.append(run.texts[row])
                    elif t := nums[row - a]:  # "" for NaN and +-inf: no cell
                        s = f' s="{run.style}"' if run.style else ""
                        cells.append(f'<{p}c r="{run.letters}{row}"{s}><{p}v>{t}</{p}v></{p}c>')
                others[o] = "".join(cells).encode()
            blk[rest] = others
        out = blk.tolist()
        self._blk_lo, self._blk_hi, self._blk, self._blk_arr = lo, hi, out, blk
        return out

    def new_cells(self, r: int) -> dict[int, tuple[str, bool]]:
        """New cells of row r: col -> (xml, replacing allowed)."""
        out: dict[int, tuple[str, bool]] = {}
        p = self.p
        for run in self.e.runs:
            i = r - run.first_row
            if 0 <= i < len(run.values):
                v = run.values[i]
                if run.texts and r in run.texts:
                    out[run.col] = (run.texts[r], run.replace_from is not None)
                elif v - v == 0:
                    s = f' s="{run.style}"' if run.style else ""
                    out[run.col] = (f'<{p}c r="{run.letters}{r}"{s}><{p}v>{v!r}'
                                    f"</{p}v></{p}c>", run.replace_from is not None)
        for c, xml, repl in self.by_row_points.get(r, ()):
            out[c] = (xml, repl)
        return out

    def _new_row(self, r: int) -> bytes:
        cells = self.new_cells(r)
        for c, fn in self.by_row_mods.get(r, {}).items():
            got = fn(None)
            if got:
                cells[c] = (got.decode(), True)
        p = self.p
        body = "".join(cells[c][0] for c in sorted(cells))
        return f'<{p}row r="{r}">{body}</{p}row>'.encode()

    # -- the loop ----------------------------------------------------------------------
    def process(self, chunks: Iterator[bytes],
                progress: Callable[[int], None] | None = None) -> Iterator[bytes]:
        """Yield the edited body, chunk by chunk.

        This loop runs once per row of the sheet, so it keeps its state in local
        variables and calls out only for rows that need more than an append.
        """
        rs, rend = self.pat.row_start, self.pat.row_end
        rsl, rel = len(rs), len(rend)
        need = self.need
        n_need = len(need)
        ni = self.ni
        special = self.special
        prefix = self.pat.prefix
        row_open = b"<" + prefix + b"row"
        run_min = self._run_min
        cr = b"<" + prefix + b'c r="'
        crl = len(cr)
        cs = self.pat.cell_start
        letters_match = _LETTERS.match
        row_number = ATTR_R_ROW.search
        known_cols = COLS_BLOCK
        check_from, check_to = self.check_from, self.check_to
        watch_from, watch_to = self.watch_from, self.watch_to
        seg_end: float = -1  # rows up to seg_end share the cached self._active() answer
        limit = run_min
        blk: list[bytes] = []
        blk_lo = blk_hi = 0
        r = 0
        for chunk in chunks:
            got = self._whole_chunk(chunk, ni)
            if got is not None:
                self.chunks_whole += 1
                piece, ni, r = got
                if progress is not None and r > self.rows_done:
                    progress(r - self.rows_done)
                    self.rows_done = r
                yield piece
                continue
            self.chunks_by_row += 1
            find = chunk.find
            out: list[bytes] = []
            append = out.append
            pos = 0
            scan = 0
            while True:
                s = find(rs, scan)
                if s < 0:
                    break
                if chunk[s + rsl] not in _DELIM:  # not a <row> tag
                    scan = s + rsl
                    continue
                gt = find(b">", s)
                if chunk[gt - 1] == 47:  # "/>": an empty row
                    attrs = chunk[s + rsl : gt - 1]
                    inner_s = inner_e = gt
                    end = gt + 1
                else:
                    attrs = chunk[s + rsl : gt]
                    inner_s = gt + 1
                    inner_e = find(rend, inner_s)
                    if inner_e < 0:
                        raise WorkbookError(f"{self.e.file}: a row of sheet {self.e.sheet!r} "
                                            "is not closed; the file is damaged.")
                    end = inner_e + rel
                scan = end
                mr = row_number(attrs)
                r = int(mr[1]) if mr else r + 1
                has_new = False
                if ni < n_need:
                    if need[ni] < r:
                        append(chunk[pos:s])
                        pos = s
                        while ni < n_need and need[ni] < r:
                            append(self._new_row(need[ni]))
                            ni += 1
                    if ni < n_need and need[ni] == r:
                        has_new = True
                        ni += 1
                in_check = check_from <= r <= check_to
                if not has_new and not in_check:
                    continue
                if r in special or watch_from <= r <= watch_to:
                    edited = self.edit_row(r, attrs, chunk[inner_s:inner_e], has_new)
                    if edited is not None:
                        append(chunk[pos:s])
                        append(edited)
                        pos = end
                    # a spill anchor may have added a range: refresh what is cached
                    check_from, check_to = self.check_from, self.check_to
                    watch_from, watch_to = self.watch_from, self.watch_to
                    seg_end = -1
                    continue
                # Fast path: new number cells all right of the existing ones.
                if in_check:
                    if r > seg_end:
                        self._active(r)
                        seg_end = self._seg[1]
                        limit = min(run_min, self._seg_min)
                    lim = limit
                else:
                    lim = run_min
                if inner_s == inner_e:
                    last: int | None = 0
                else:
                    lp = chunk.rfind(cr, inner_s, inner_e)
                    if lp >= 0 and find(cs, lp + 1, inner_e) < 0:
                        m = letters_match(chunk, lp + crl)
                        last = (known_cols.get(m[0]) or col_index(m[0])) if m else None
                    else:
                        last = self._last_col(chunk[inner_s:inner_e])
                if last is None or last >= lim:
                    edited = self.edit_row(r, attrs, chunk[inner_s:inner_e], has_new)
                    if edited is not None:
                        append(chunk[pos:s])
                        append(edited)
                        pos = end
                    continue
                if not has_new:
                    continue
                if r >= blk_hi:
                    blk = self._block(r)
                    blk_lo, blk_hi = self._blk_lo, self._blk_hi
                tail = blk[r - blk_lo]
                if inner_s != inner_e and (i := attrs.find(b' spans="')) >= 0 and (
                        j := attrs.find(b'"', i + 8)) > 0:
                    # the usual spans="1:7": copy around it, no row tag built
                    append(chunk[pos : s + rsl + i])
                    append(chunk[s + rsl + j + 1 : inner_e])
                    append(tail)
                    pos = inner_e
                elif inner_s == inner_e or b"spans" in attrs:
                    append(chunk[pos:s])
                    append(row_open + _drop_spans(attrs) + b">")
                    append(chunk[inner_s:inner_e])
                    append(tail)
                    append(rend)
                    pos = end
                else:  # splice just before </row>
                    append(chunk[pos:inner_e])
                    append(tail)
                    pos = inner_e
            append(chunk[pos:])
            if progress is not None and r > self.rows_done:
                progress(r - self.rows_done)
                self.rows_done = r
            yield b"".join(out)
        rest = [self._new_row(row) for row in need[ni:]]
        self.ni = n_need
        if rest:
            yield b"".join(rest)

    def _whole_chunk(self, chunk: bytes, ni: int) -> tuple[bytes, int, int] | None:
        """The edited chunk made in one go when all its rows are plain, else None.

        Plain rows (what spreadsheet programs and exports write): each starts with
        ``<row r="N"`` right after the previous ``</row>``, numbers increase, none is
        a header, a formula to replace or in a checked range, no new row goes between
        them, and a row that gets new cells has its own cells, each with ``r`` first,
        all left of the new ones. Such a row gets exactly what the row loop gives it:
        its ``spans`` hint dropped and the new cells put before ``</row>``; the other
        rows stay as they are. The tests compare both ways byte for byte.

        Returns (edited chunk, index into the rows needing new cells, last row).
        """
        rend = self.pat.row_end
        pieces = chunk.split(rend)  # each one row without its end tag ...
        rest = pieces.pop()  # ... and what follows the last one
        n = len(pieces)
        if not n or chunk.count(self.pat.row_start) != n:
            return None
        head = self._row_r
        if not all(map(bytes.startswith, pieces, repeat(head))):
            return None  # (so each piece holds exactly one row start, at its start)
        a = np.frombuffer(chunk, dtype=np.uint8)
        size = np.fromiter(map(len, pieces), dtype=np.int64, count=n)
        offs = np.zeros(n, dtype=np.int64)
        np.cumsum(size[:-1] + len(rend), out=offs[1:])
        # the row numbers: up to 7 digits and a quote
        at = offs + len(head)
        win = np.take(a, at[:, None] + np.arange(8), mode="clip")
        digit = (win >= 48) & (win <= 57)
        k = np.argmin(digit, axis=1)  # the first byte that is not a digit
        lines = np.arange(n)
        if not digit[:, 0].all() or digit.all(axis=1).any() or (win[lines, k] != 34).any():
            return None
        rows = np.zeros(n, dtype=np.int64)
        for j in range(7):
            rows = np.where(j < k, rows * 10 + win[:, j] - 48, rows)
        if n > 1 and (np.diff(rows) <= 0).any():
            return None
        first, last = int(rows[0]), int(rows[-1])
        if first <= self.watch_to and last >= self.watch_from:
            return None  # a shared formula may need a new master: the row loop
        sp = self._special
        if len(sp) and ((sp >= first) & (sp <= last)).any():
            return None
        # columns whose existing cells go (a replaced column, a spill's range): a row
        # with a cell there goes row by row, so every row is looked at, not only the
        # rows with new cells
        lim = self._run_min
        checked = first <= self.check_to and last >= self.check_from
        if checked:
            lim = min([lim] + [c for c, lo, hi in self.ranges if lo <= last and hi >= first])
        need = self.need
        nj = bisect_right(need, last, ni)
        if nj == ni and not checked:  # nothing new in these rows
            return chunk, ni, last
        wanted = np.array(need[ni:nj], dtype=np.int64)
        at_row = np.searchsorted(rows, wanted)
        present = rows[at_row] == wanted  # (at_row < n: wanted ends at the last row)
        new = at_row[present]  # the rows that get new cells
        missing = wanted[~present]  # rows with new cells that the sheet lacks
        if any(x in self.by_row_mods for x in missing.tolist()):
            return None  # a formula's result in a row the sheet lacks: the row loop
        look = lines if checked else new  # the rows whose last column matters
        sel = [pieces[i] for i in look.tolist()]
        p = offs[look]
        # the end of the row tag (the first ">") and the existing cells' last column
        gt = np.fromiter(map(bytes.find, sel, repeat(b">")), dtype=np.int64,
                         count=len(look)) + p
        if (gt < at[look]).any() or (a[gt - 1] == 47).any():  # no ">", or "/>"
            return None
        cr = b"<" + self.pat.prefix + b'c r="'
        lp = np.fromiter(map(bytes.rfind, sel, repeat(cr)), dtype=np.int64, count=len(look))
        inner = gt + 1 < p + size[look]
        has_cell = lp >= 0
        if (inner & ~has_cell).any():
            return None  # cells without r: the row loop finds their columns
        after = np.fromiter(map(bytes.find, sel, repeat(self.pat.cell_start),
                                (lp + 1).tolist()), dtype=np.int64, count=len(look))
        if (has_cell & (after >= 0)).any():
            return None  # a later cell without r (or rich text): the row loop
        lpos = np.where(has_cell, p + lp + len(cr), 0)
        let = np.take(a, lpos[:, None] + np.arange(4), mode="clip").astype(np.int64)
        is_letter = (let >= 65) & (let <= 90)
        nlet = np.argmin(is_letter, axis=1)
        if (has_cell & ((nlet == 0) | is_letter.all(axis=1))).any():
            return None
        col = np.zeros(len(look), dtype=np.int64)
        for j in range(3):
            col = np.where(j < nlet, col * 26 + let[:, j] - 64, col)
        if (has_cell & (col >= lim)).any():
            return None  # an existing cell at or right of a new column: the row loop
        if checked:
            sel = [pieces[i] for i in new.tolist()]
            gt = gt[new]
        p = offs[new]
        q = at[new] + k[new] + 1  # just after the quote closing r
        spans = np.all(np.take(a, q[:, None] + np.arange(8), mode="clip")
                       == np.frombuffer(b' spans="', dtype=np.uint8), axis=1)
        if not (spans | (a[q] == 62)).all():  # other attributes first: the row loop
            return None
        # the new cells' text, block by block
        tails = np.empty(len(new), dtype=object)
        rnew = rows[new]
        i = 0
        while i < len(new):
            r0 = int(rnew[i])
            if not self._blk_lo <= r0 < self._blk_hi:
                self._block(r0)
            j = int(np.searchsorted(rnew, self._blk_hi))
            tails[i:j] = self._blk_arr[rnew[i:j] - self._blk_lo]
            i = j
        # drop spans="..." (up to its closing quote) from the rows that get cells
        cut = np.zeros(len(new), dtype=np.int64)
        if spans.any():
            w = np.flatnonzero(spans)
            close = np.fromiter(map(bytes.find, [sel[i] for i in w.tolist()], repeat(b'"'),
                                    (q[w] - p[w] + 8).tolist()), dtype=np.int64, count=len(w))
            if (close < 0).any() or (close + p[w] >= gt[w]).any():
                return None  # no closing quote inside the tag: the row loop
            cut[w] = close + 1 - (q[w] - p[w])
        # the missing rows, made as the row loop makes them, go before the next row
        made: dict[int, list[bytes]] = {}
        for i, x in zip(at_row[~present].tolist(), missing.tolist(), strict=True):
            made.setdefault(i, []).append(self._new_row(x))
        rel = (q - p).tolist()
        body = np.empty(n, dtype=object)
        body[:] = pieces
        body[new] = [x if c == 0 else x[:s] + x[s + c:]
                     for x, s, c in zip(sel, rel, cut.tolist(), strict=True)]
        for i, made_rows in made.items():
            body[i] = b"".join(made_rows) + body[i]
        tail_all = np.full(n, b"", dtype=object)
        tail_all[new] = tails
        out: list[bytes] = [rend] * (3 * n)
        out[0::3] = body.tolist()
        out[1::3] = tail_all.tolist()
        out.append(rest)
        return b"".join(out), nj, last

    def _values(self, run: ColumnRun) -> np.ndarray:
        """A run's numbers as an array (made once)."""
        got = self._arrays.get(id(run))
        if got is None or len(got) != len(run.values):
            got = self._arrays[id(run)] = np.asarray(run.values, dtype=np.float64)
        return got

    def _active(self, r: int) -> dict[int, bool]:
        """Columns whose existing cells go at row r: col -> True if that is an error."""
        lo, hi = self._seg
        if lo <= r <= hi:
            return self._seg_act
        act: dict[int, bool] = {}
        for c, a, b in self.e.drops:
            if a <= r <= b:
                act[c] = False
        for run in self.e.runs:
            if run.replace_from is not None and r >= run.replace_from:
                act.setdefault(run.col, False)
        for c, a, b, _ in self.e.guards:
            if a <= r <= b:
                act.setdefault(c, True)
        # the same answer holds until the next range starts or the row after one ends
        seg_end = min([a - 1 for _, a, _ in self.ranges if a > r]
                      + [b for _, a, b in self.ranges if a <= r <= b] + [_INF])
        self._seg = (r, seg_end)
        self._seg_min = min(act, default=MAX_COL + 1)
        self._seg_act = act
        return act

    def _last_col(self, inner: bytes) -> int | None:
        start = self.pat.cell_start
        pos = len(inner)
        while True:
            pos = inner.rfind(start, 0, pos)
            if pos < 0:
                return 0
            nxt = inner[pos + len(start) : pos + len(start) + 1]
            if nxt == b" ":
                m = self._last_cell.match(inner, pos)
                if m:
                    return col_index(m[1])
            if nxt in (b" ", b"\t", b"\n", b"\r"):
                end = inner.find(b">", pos)
                m = ATTR_R_CELL.search(inner, pos, end)
                return col_index(m[1]) if m else None
            if nxt in (b">", b"/"):
                return None

    def edit_row(self, r: int, attrs: bytes, inner: bytes, has_new: bool) -> bytes | None:
        """The new bytes of row r, or None when it stays as it is."""
        act = self._active(r)
        start = _drop_spans(attrs) if b"spans" in attrs else attrs
        row_open = b"<" + self.pat.prefix + b"row" + start + b">"
        return self._edit_row_slow(r, row_open, inner, has_new, act)

    def _edit_row_slow(self, r: int, row_open: bytes, inner: bytes, has_new: bool,
                       act: dict[int, bool]) -> bytes | None:
        new = self.new_cells(r) if has_new else {}
        mods = dict(self.by_row_mods.get(r, {}))
        moves = [m.left for m in self.e.shared if m.top <= r <= m.bottom and not m.done]
        if not new and not mods and not act and not moves:
            return None
        touched = set(new) | set(mods) | set(act) | set(moves)
        last = self._last_col(inner) if inner else 0
        if last is not None and last < min(touched):
            # everything new goes after the existing cells
            if not new and not mods:
                return None
            for c, fn in mods.items():
                got = fn(None)
                if got:
                    new[c] = (got.decode(), True)
            tail = "".join(new[c][0] for c in sorted(new)).encode()
            return row_open + inner + tail + self.pat.row_end
        cells: list[tuple[int, bytes]] = []
        c = 0
        for cm in self.pat.cell.finditer(inner):
            cattrs = cm[1]
            mc = ATTR_R_CELL.search(cattrs)
            if mc:
                c = col_index(mc[1])
                raw = cm[0]
            else:
                if bad := bad_cell_ref(cattrs, f"{self.e.file}: sheet {self.e.sheet!r}", r):
                    raise bad
                # keep the position explicit, since new cells may now precede this one
                c += 1
                raw = (b"<" + self.pat.prefix + b'c r="' + col_letters(c).encode()
                       + str(r).encode() + b'"' + cm[0][len(self.pat.cell_start):])
            if c in mods:
                got = mods.pop(c)(cm)
                if got:
                    cells.append((c, got))
                continue
            if self.e.shared and cm[3]:  # (a master converted earlier in this row counts)
                raw = self._move_shared(r, c, raw)
            if c in act and c not in new:
                if act[c]:
                    if not self._blank(cm[3]):
                        self._guard_error(r, c)
                    cells.append((c, raw))  # a blank cell where no value goes: kept
                continue
            if c in new:
                if act.get(c):
                    if not self._blank(cm[3]):
                        self._guard_error(r, c)
                    cells.append((c, _onto_blank(raw, new.pop(c)[0], self.pat)))
                    continue
                if not new[c][1] and c not in act:
                    raise WorkbookError(
                        f"{self.e.file}: sheet {self.e.sheet!r} cell {cell_name(r, c)} already "
                        "holds a value; write to an empty column, or give the edit "
                        "replace=True to clear its column on purpose.")
                continue
            cells.append((c, raw))
        for c, fn in mods.items():
            got = fn(None)
            if got:
                cells.append((c, got))
        for c, (xml, _) in new.items():
            cells.append((c, xml.encode()))
        cells.sort(key=lambda item: item[0])
        body = b"".join(x for _, x in cells)
        return row_open + body + self.pat.row_end

    def _blank(self, inner: bytes | None) -> bool:
        """No value, no formula, no text: a cell that only carries a style."""
        if not inner or not inner.strip():
            return True
        if self.pat.f.search(inner) or b"is>" in inner:
            return False
        mv = self.pat.v.search(inner)
        return mv is None or not mv[1].strip()

    def _move_shared(self, r: int, c: int, raw: bytes) -> bytes:
        """Cell (r, c) as it must be now that its shared group may have lost its master."""
        fm = self.pat.f.search(raw)
        if fm is None or fm[2]:  # no formula, or one with its own text
            return raw
        ft, fsi = _F_T.search(fm[1]), _F_SI.search(fm[1])
        if not ft or ft[1] != b"shared" or not fsi:
            return raw
        move = next((m for m in self.e.shared if m.si == fsi[1] and m.covers(r, c)), None)
        if move is None:
            return raw
        nr = move.new_ref
        if nr is not None and nr[0] <= r <= nr[2] and nr[1] <= c <= nr[3]:
            return raw  # follows the new master
        if _LINE_REF.search(move.text):
            raise WorkbookError(
                f"{self.e.file}: sheet {self.e.sheet!r} cell {cell_name(r, c)} shares the "
                f"formula of {cell_name(move.row, move.col)}, which is being replaced by its "
                "result, and its whole-row or whole-column references cannot be moved "
                "safely; let sheetvol replace every cell filled from that formula, or type the "
                f"formula into {cell_name(r, c)} again.")

        text = escape_text(shift_formula(move.text, r - move.row, c - move.col)).encode()
        p = self.pat.prefix
        attrs = _SHARED_ATTRS.sub(b"", fm[1])
        if nr is None and (r, c) != (move.bottom, move.right):
            move.new_ref = (r, c, move.bottom, move.right)
            if c == move.left or r == move.bottom:  # no cell of the group can fall outside
                move.done = True
                self._refresh_ranges()
            ref = f"{cell_name(r, c)}:{cell_name(move.bottom, move.right)}".encode()
            f = (b"<" + p + b'f t="shared" ref="' + ref + b'" si="' + move.si + b'"' + attrs
                 + b">" + text + b"</" + p + b"f>")
        else:  # outside the new group, or a group of one: a plain formula
            if nr is None:
                move.new_ref = (r, c, r, c)
                move.done = True
                self._refresh_ranges()
            f = b"<" + p + b"f" + attrs + b">" + text + b"</" + p + b"f>"
        return raw[: fm.start()] + f + raw[fm.end():]

    def _guard_error(self, r: int, c: int) -> None:
        label = next((lab for col, a, b, lab in self.e.guards if col == c and a <= r <= b), "")
        raise WorkbookError(
            f"{self.e.file}: sheet {self.e.sheet!r} cell {cell_name(r, c)} is not empty, so the "
            f"result of {label} cannot spill into it; clear the cells below the formula.")


def formula_result_cell(cm: re.Match[bytes] | None, pat: Patterns, value: object,
                        where: str) -> bytes:
    """An existing formula cell with its stored result replaced (the ``<f>`` kept)."""

    fm = pat.f.search(cm[3]) if cm is not None and cm[3] else None
    if cm is None or fm is None:
        raise WorkbookError(f"{where} holds no formula, so no result can be stored in it.")
    attrs = _T_ATTR.sub(b"", cm[1])
    p = pat.prefix
    t = b""
    v = b""
    if isinstance(value, CellError):
        t, v = b' t="e"', escape_text(str(value)).encode()
    elif isinstance(value, (bool, np.bool_)):
        t, v = b' t="b"', b"1" if value else b"0"
    elif isinstance(value, (int, float, np.integer, np.floating)):
        x = float(value)
        if math.isfinite(x):
            v = number_text(x).encode()
    elif value is not None:
        t, v = b' t="str"', escape_text(str(value)).encode()
    vxml = b"<" + p + b"v>" + v + b"</" + p + b"v>" if v or t else b""
    return b"<" + p + b"c" + attrs + t + b">" + fm[0] + vxml + b"</" + p + b"c>"


_S_WHOLE = re.compile(rb"""\s+s\s*=\s*(["'])(\d+)\1""")


def _style_if_none(attrs: bytes, style: int) -> bytes:
    """Cell attributes with style ``style`` when they have none (or style 0)."""
    ms = _S_WHOLE.search(attrs)
    if not style or (ms is not None and ms[2] != b"0"):
        return attrs
    if ms is not None:
        attrs = attrs[: ms.start()] + attrs[ms.end():]
    return attrs + f' s="{style}"'.encode()


def _onto_blank(raw: bytes, new_xml: str, pat: Patterns) -> bytes:
    """A new value cell put where a blank cell was: the blank's own style wins."""
    head_end = raw.find(b">")
    attrs = raw[len(pat.cell_start) : head_end].rstrip(b"/").rstrip()
    mnew = re.match(r'<[^>]*?c r="[^"]*"(?: s="(\d+)")?( t="\w+")?>', new_xml)
    if mnew is None:  # not one of ours: nothing to merge
        return new_xml.encode()
    attrs = _style_if_none(_FORMULA_CELL_ATTRS.sub(b"", attrs), int(mnew[1] or 0))
    return (b"<" + pat.prefix + b"c" + attrs + (mnew[2] or "").encode() + b">"
            + new_xml[mnew.end():].encode())


def plain_value_cell(cm: re.Match[bytes] | None, pat: Patterns, value: object,
                     style: int | None, where: str) -> tuple[bytes, re.Match[bytes]]:
    """An existing formula cell turned into a plain value, and the ``<f>`` it lost.

    The cell keeps its attributes (position, style) except the value type and metadata;
    ``style`` applies only when the cell has no style of its own. None, NaN and inf
    leave the cell without a value.
    """

    fm = pat.f.search(cm[3]) if cm is not None and cm[3] else None
    if cm is None or fm is None:
        raise WorkbookError(f"{where} holds no formula, so it cannot be replaced by its result.")
    attrs = _style_if_none(_FORMULA_CELL_ATTRS.sub(b"", cm[1]).rstrip(b"/").rstrip(), style or 0)
    p = pat.prefix
    t = body = b""
    if isinstance(value, CellError):
        t, body = b' t="e"', b"<" + p + b"v>" + escape_text(str(value)).encode()
    elif isinstance(value, (bool, np.bool_)):
        t, body = b' t="b"', b"<" + p + b"v>" + (b"1" if value else b"0")
    elif isinstance(value, (int, float, np.integer, np.floating)):
        x = float(value)
        if math.isfinite(x):
            body = b"<" + p + b"v>" + number_text(x).encode()
    elif value is not None:
        text = str(value)
        space = b' xml:space="preserve"' if text != text.strip() or "\n" in text else b""
        t = b' t="inlineStr"'
        body = (b"<" + p + b"is><" + p + b"t" + space + b">" + escape_text(text).encode()
                + b"</" + p + b"t></" + p + b"is>")
        return b"<" + p + b"c" + attrs + t + b">" + body + b"</" + p + b"c>", fm
    if not body:
        return b"<" + p + b"c" + attrs + b"/>", fm
    return b"<" + p + b"c" + attrs + t + b">" + body + b"</" + p + b"v></" + p + b"c>", fm


def formula_info(fm: re.Match[bytes]) -> tuple[str, str | None, bytes | None, str | None]:
    """(kind, ref, si, text) of an ``<f>`` match: kind is "normal", "array", "shared"..."""
    ft, mref, msi = _F_T.search(fm[1]), _F_REF.search(fm[1]), _F_SI.search(fm[1])
    from sheetvol.workbook._sheetxml import unescape

    return ((ft[1].decode() if ft else "normal"),
            mref[1].decode().replace("$", "") if mref else None,
            msi[1] if msi else None,
            unescape(fm[2]) if fm[2] is not None else None)


def array_anchor_cell(cm: re.Match[bytes] | None, pat: Patterns, ref: str, formula: str,
                      first: float, style: int | None) -> tuple[bytes, str | None]:
    """The anchor of a spilled column, and the old array ``ref`` if it had one."""
    p = pat.prefix
    old_ref = None
    keep_style = b""
    if cm is not None:
        fm = pat.f.search(cm[3] or b"")
        if fm is not None:
            ft = _F_T.search(fm[1])
            mref = _F_REF.search(fm[1])
            if ft and ft[1] == b"array" and mref:
                old_ref = mref[1].decode().replace("$", "")
        ms = _S_ATTR.search(cm[1])
        if ms:
            keep_style = b' s="' + ms[1] + b'"'
    s = f' s="{style}"'.encode() if style else keep_style
    v = b""
    if isinstance(first, float) and math.isfinite(first):
        v = b"<" + p + b"v>" + number_text(first).encode() + b"</" + p + b"v>"
    cellref = ref.split(":")[0].encode()
    return (b"<" + p + b'c r="' + cellref + b'"' + s + b"><" + p + b'f t="array" ref="'
            + ref.encode() + b'">' + escape_text(formula).encode() + b"</" + p + b"f>" + v
            + b"</" + p + b"c>"), old_ref
