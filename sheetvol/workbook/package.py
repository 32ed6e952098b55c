"""Opening an .xlsx/.xlsm package safely and reading cells from it.

``Package.open`` checks the file (encrypted, not a zip, zip-bomb sizes, entity tricks)
and reads the workbook part: sheet names and parts, the 1904 date flag, macros.
Cells are read by scanning the sheet XML as bytes (see ``_sheetxml``), which is fast
enough for the largest sheets; nothing here ever opens or runs a macro.
"""

from __future__ import annotations

import hashlib
import os
import posixpath
import re
import weakref
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO
from xml.etree.ElementTree import Element

import numpy as np

from sheetvol.functions.grid import MAX_COL, MAX_ROW
from sheetvol.workbook import _safety
from sheetvol.workbook._safety import Limits, local, parse_xml, read_part
from sheetvol.workbook._sheetxml import (
    ATTR_R_CELL,
    CellReader,
    CellTextError,
    Patterns,
    RowCursor,
    SheetStream,
    beyond_sheet,
    col_index,
    col_letters,
    iter_cells,
    parse_ref,
    shift_formula,
    unescape_ooxml,
)
from sheetvol.workbook.errors import CellError, WorkbookError

# Built-in number formats by id, as ECMA-376 Part 1 (18.8.30) lists them.
_BUILTIN_CODES = {0: "General", 1: "0", 2: "0.00", 3: "#,##0", 4: "#,##0.00", 9: "0%",
                  10: "0.00%", 11: "0.00E+00", 12: "# ?/?", 13: "# ??/??", 14: "mm-dd-yy",
                  15: "d-mmm-yy", 16: "d-mmm", 17: "mmm-yy", 18: "h:mm AM/PM",
                  19: "h:mm:ss AM/PM", 20: "h:mm", 21: "h:mm:ss", 22: "m/d/yy h:mm",
                  45: "mm:ss", 46: "[h]:mm:ss", 47: "mmss.0", 48: "##0.0E+0", 49: "@"}

NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
NS_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
MACRO_TYPES = ("macroEnabled", "vbaProject")
_SV = re.compile(rb"(?i)\bSV_")
# sheets read whole are kept for the write that follows while their XML comes to at
# most this size together (about 300,000 rows of OHLC): the write then does not inflate
# them again; beyond it they are inflated again, so that memory stays bounded
KEPT_MAX = 96 << 20
_COL = re.compile(rb"<(?:[A-Za-z_][\w.\-]*:)?col(?=[\s>/])([^>]*)>")
_HIDDEN = re.compile(rb"""\shidden\s*=\s*["'](?:1|true)["']""")
_MERGE = re.compile(rb"""<(?:[A-Za-z_][\w.\-]*:)?mergeCell\s[^>]*?ref\s*=\s*["']([^"']*)["']""")
_MIN = re.compile(rb"""\smin\s*=\s*["'](\d+)["']""")
_MAX = re.compile(rb"""\smax\s*=\s*["'](\d+)["']""")


@dataclass(frozen=True)
class SheetInfo:
    """A sheet as listed in ``xl/workbook.xml``: tab name, part path, kind."""

    name: str
    part: str
    kind: str
    sheet_id: int = 0  # sheetId in workbook.xml (calcChain entries refer to it)


@dataclass
class Grid:
    """All cells of a sheet: row -> column -> value (1-based)."""

    rows: dict[int, dict[int, object]]
    max_row: int
    max_col: int


@dataclass
class Column:
    """One column: ``numbers[i]`` is row ``first_row + i`` (NaN where not a number).

    ``other`` holds the non-numeric values (text, bool, CellError) by row; absent
    cells are in neither.
    """

    numbers: np.ndarray
    other: dict[int, object]
    first_row: int


@dataclass
class FormulaCell:
    """A cell whose formula mentions a sheetvol function (``SV_...``).

    ``formula`` is the text as stored, without the leading ``=``. For a cell that
    shares the formula of another (filled down in the spreadsheet program), the text is
    the shared formula moved to this cell's position.
    """

    sheet: str
    row: int
    col: int
    formula: str
    array_ref: str | None


@dataclass
class TableInfo:
    """A spreadsheet table: ``ref`` like ``"A1:F300"``; ``header_row`` 0 when it has none."""

    name: str
    ref: str
    header_row: int
    columns: list[str]
    part: str = ""
    display_name: str = ""
    top: int = 0
    left: int = 0
    bottom: int = 0
    right: int = 0


@dataclass
class Package:
    """An .xlsx/.xlsm opened safely (zip-bomb limits, no XML entities, encrypted refused).

    Use :meth:`open`. Every read goes through the one file handle opened there, so a
    file replaced at the path meanwhile is never mixed in; :meth:`check_unchanged` says
    whether the path still holds that file, and :meth:`close` lets the handle go.

    Examples
    --------
    >>> pkg = Package.open("prices.xlsx")            # doctest: +SKIP
    >>> pkg.read_columns("Prices", [2, 5], first_row=2)  # doctest: +SKIP
    """

    path: Path
    sheets: list[SheetInfo] = field(default_factory=list)
    date1904: bool = False
    is_macro_enabled: bool = False
    limits: Limits = field(default_factory=Limits, repr=False)
    workbook_part: str = "xl/workbook.xml"
    _shared: list[str] | None = field(default=None, repr=False)
    _shared_loaded: bool = field(default=False, repr=False)
    _fh: IO[bytes] | None = field(default=None, repr=False)
    _stat: tuple[int, ...] = field(default=(), repr=False)
    # typed sheetvol formulas by sheet part, noted by any pass that read the whole sheet
    _formulas: dict[str, list[FormulaCell]] = field(default_factory=dict, repr=False)
    # each sheet part's head (everything before the cells), kept by the first pass over it
    _heads: dict[str, bytes] = field(default_factory=dict, repr=False)
    # each sheet part's tail (everything after the cells: merged blocks and the rest)
    _tails: dict[str, bytes] = field(default_factory=dict, repr=False)
    # sheet part -> its XML in pieces, kept by read_columns while they fit in KEPT_MAX
    # bytes together: a write of that sheet then does not inflate it again
    _kept: dict[str, list[bytes]] = field(default_factory=dict, repr=False)

    @classmethod
    def open(cls, path: str | Path, *, max_total: int | None = None,
             max_ratio: float | None = None) -> Package:
        """Open ``path`` after the safety checks.

        Parameters
        ----------
        path : str or Path
            The .xlsx or .xlsm file.
        max_total : int, optional
            Cap on the total inflated size of all parts in bytes (default 2 GiB).
        max_ratio : float, optional
            Cap on a part's inflated/stored size ratio (default 200; parts under 1 MiB
            are not checked).

        Returns
        -------
        Package

        Raises
        ------
        WorkbookError
            Encrypted, not a zip, damaged, a possible zip bomb, XML with a DOCTYPE, or
            not a spreadsheet.
        """
        path = Path(path)
        limits = Limits(
            max_total=_safety.DEFAULT_MAX_TOTAL if max_total is None else max_total,
            max_ratio=_safety.DEFAULT_MAX_RATIO if max_ratio is None else max_ratio,
        )
        fh = _safety.open_file(path)
        pkg = cls(path=path, limits=limits, _fh=fh, _stat=_identity(os.fstat(fh.fileno())))
        weakref.finalize(pkg, fh.close)  # a Package dropped without close() lets go too
        try:
            with pkg._zip() as zf:
                _safety.check_package(zf, path.name, limits)
                pkg._read_structure(zf)
        except BaseException:
            pkg.close()
            raise
        return pkg

    def close(self) -> None:
        """Let the file handle go (reads after this reopen the path)."""
        self._kept.clear()
        if self._fh is not None:
            self._fh.close()
            self._fh = None

    def __enter__(self) -> Package:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def check_unchanged(self) -> None:
        """Refuse when the file at the path is no longer the one opened (replaced, edited).

        Raises
        ------
        WorkbookError
            The path was replaced, removed or written to since :meth:`open`.
        """
        if not self._stat:
            return
        try:
            now = _identity(os.stat(self.path))
        except OSError:
            now = ()
        if now != self._stat:
            raise changed_during_fill(self.path.name)

    def sha256(self) -> str:
        """SHA-256 of the file as opened (read through the held handle)."""
        digest = hashlib.sha256()
        if self._fh is None:
            with open(self.path, "rb") as fh:
                for block in iter(lambda: fh.read(1 << 20), b""):
                    digest.update(block)
            return digest.hexdigest()
        self._fh.seek(0)
        read = self._fh.read
        for block in iter(lambda: read(1 << 20), b""):
            digest.update(block)
        return digest.hexdigest()

    def copy_to(self, dest: Path) -> None:
        """Write the file as opened to ``dest`` (which must not exist yet), keeping its
        permissions and times as a copy by the file manager would."""
        own = self._fh is None
        fh = open(self.path, "rb") if own else self._fh
        assert fh is not None
        try:
            with open(dest, "xb") as out:
                try:
                    fh.seek(0)
                    for block in iter(lambda: fh.read(1 << 20), b""):
                        out.write(block)
                except BaseException:
                    out.close()
                    dest.unlink(missing_ok=True)  # no half backup that looks whole
                    raise
            st = os.fstat(fh.fileno())
        finally:
            if own:
                fh.close()
        try:
            os.chmod(dest, st.st_mode & 0o777)
            os.utime(dest, ns=(st.st_atime_ns, st.st_mtime_ns))
        except OSError:
            pass  # a backup with today's time is still a backup

    # -- structure -------------------------------------------------------------------
    def _zip(self) -> zipfile.ZipFile:
        if self._fh is None:
            return _safety.open_zip(self.path, self.limits)
        return _safety.open_zip(self._fh, self.limits, self.path.name)

    def _xml(self, zf: zipfile.ZipFile, part: str) -> Element:
        return parse_xml(read_part(zf, part, self.path.name, self.limits), part,
                         self.path.name)

    def _read_structure(self, zf: zipfile.ZipFile) -> None:
        name = self.path.name
        names = set(zf.namelist())
        if "[Content_Types].xml" not in names:
            raise WorkbookError(
                f"{name} is a zip file but not a workbook (no [Content_Types].xml).")
        types = self._xml(zf, "[Content_Types].xml")
        root_rels = self.rels(zf, "") if "_rels/.rels" in names else {}
        wb_part = next((t for t, k in root_rels.values() if k == "officeDocument"),
                       "xl/workbook.xml")
        if wb_part not in names:
            raise WorkbookError(f"{name} is a zip file but not a spreadsheet workbook "
                                "(no workbook part); it may be a document of another kind.")
        self.workbook_part = wb_part
        wb = self._xml(zf, wb_part)
        for el in wb.iter():
            if local(el.tag) == "workbookPr":
                self.date1904 = el.get("date1904", "0").lower() in ("1", "true")
        rels = self.rels(zf, wb_part)
        sheets = []
        for el in wb.iter():
            if local(el.tag) != "sheet":
                continue
            rid = el.get(f"{{{NS_REL}}}id") or next(
                (v for k, v in el.attrib.items() if local(k) == "id"), "")
            target, kind = rels.get(rid, ("", "missing"))
            try:
                sheet_id = int(el.get("sheetId", "0"))
            except ValueError:
                sheet_id = 0
            sheets.append(SheetInfo(name=el.get("name", ""), part=target, kind=kind,
                                    sheet_id=sheet_id))
        self.sheets = sheets
        ctypes = " ".join(el.get("ContentType", "") for el in types)
        self.is_macro_enabled = ("xl/vbaProject.bin" in names
                                 or any(k in ctypes for k in MACRO_TYPES))

    def rels(self, zf: zipfile.ZipFile, part: str) -> dict[str, tuple[str, str]]:
        """Relationships of ``part``: id -> (target part path, kind such as "worksheet")."""
        folder, base = posixpath.split(part)
        rels_part = posixpath.join(folder, "_rels", base + ".rels")
        if rels_part not in zf.namelist():
            return {}
        out = {}
        for el in self._xml(zf, rels_part):
            if el.get("TargetMode") == "External":
                continue
            target = el.get("Target", "")
            if target.startswith("/"):
                full = target[1:]
            else:
                full = posixpath.normpath(posixpath.join(folder, target))
            out[el.get("Id", "")] = (full, el.get("Type", "").rpartition("/")[2])
        return out

    def sheet(self, name: str) -> SheetInfo:
        """The sheet called ``name`` (case-insensitive).

        Parameters
        ----------
        name : str
            Tab name.

        Returns
        -------
        SheetInfo

        Raises
        ------
        WorkbookError
            No such sheet; the message lists the sheet names.
        """
        for info in self.sheets:
            if info.name == name:
                return info
        for info in self.sheets:
            if info.name.casefold() == name.casefold():
                return info
        listed = ", ".join(repr(s.name) for s in self.sheets)
        raise WorkbookError(f"{self.path.name} has no sheet {name!r}; its sheets are {listed}.")

    def _worksheet(self, name: str) -> SheetInfo:
        info = self.sheet(name)
        if info.kind != "worksheet":
            raise WorkbookError(f"{self.path.name}: sheet {info.name!r} is a {info.kind}, "
                                "not a worksheet with cells.")
        return info

    def shared_strings(self, zf: zipfile.ZipFile | None = None) -> list[str] | None:
        """The shared-string table (loaded once), or None when the workbook has none."""
        if self._shared_loaded:
            return self._shared
        own = zf is None
        zf = zf or self._zip()
        try:
            rels = self.rels(zf, self.workbook_part)
            part = next((t for t, k in rels.values() if k == "sharedStrings"), None)
            shared = None
            if part and part in zf.namelist():
                root = self._xml(zf, part)
                shared = []
                for si in root:
                    texts = []
                    for el in si.iter():
                        tag = local(el.tag)
                        if tag == "rPh":
                            # phonetic runs are hints, not text; their <t> children are skipped
                            el.clear()
                        elif tag == "t" and el.text:
                            texts.append(el.text)
                    # the parser has decoded entities; only OOXML's _xHHHH_ escapes remain
                    shared.append(unescape_ooxml("".join(texts)) if texts else "")
        finally:
            if own:
                zf.close()
        self._shared, self._shared_loaded = shared, True
        return shared

    # -- cells -----------------------------------------------------------------------
    def _stream(self, zf: zipfile.ZipFile, info: SheetInfo, ahead: bool = False
                ) -> SheetStream:
        if info.part not in zf.NameToInfo:
            raise WorkbookError(f"{self.path.name}: the part of sheet {info.name!r} "
                                f"({info.part}) is missing; the workbook is damaged.")
        fh = _safety.open_part(zf, info.part, self.path.name, self.limits)
        stream = SheetStream(fh, info.part, self.path.name, ahead=ahead)
        self._heads.setdefault(info.part, stream.head)
        return stream

    def hidden_columns(self, sheet: str) -> set[int]:
        """Columns the sheet's ``<cols>`` block hides (1-based).

        Parameters
        ----------
        sheet : str
            Sheet name.

        Returns
        -------
        set of int
        """
        info = self._worksheet(sheet)
        if info.part not in self._heads:  # usually read already, with the header rows
            with self._zip() as zf:
                self._stream(zf, info)
        head = self._heads[info.part]
        out: set[int] = set()
        for m in _COL.finditer(head):
            attrs = m[1]
            if not _HIDDEN.search(attrs):
                continue
            lo, hi = _MIN.search(attrs), _MAX.search(attrs)
            if lo and hi:
                out.update(range(int(lo[1]), min(int(hi[1]), MAX_COL) + 1))
        return out

    def merged_blocks(self, sheet: str) -> list[tuple[int, int, int, int]]:
        """The sheet's merged cells as blocks (top, left, bottom, right), 1-based.

        A spreadsheet shows only a merged block's top-left cell, so a column under
        one is not free to write into. Read from the part after the cells, kept by
        any whole pass over the sheet (:meth:`read_columns`, :meth:`read_grid` of the
        whole sheet, the formula scan); streamed here when none has run.

        Parameters
        ----------
        sheet : str
            Sheet name.

        Returns
        -------
        list of tuple of int
        """
        info = self._worksheet(sheet)
        if info.part not in self._tails:
            with self._zip() as zf:
                stream = self._stream(zf, info)
                for _ in stream.body():
                    pass
                self._tails[info.part] = stream.tail
        out = []
        for m in _MERGE.finditer(self._tails[info.part]):
            try:
                top, left, bottom, right = parse_ref(m[1].decode("ascii", "replace"))
            except ValueError:
                continue  # not a block: it merges nothing a program would show
            # a block reaching past the sheet's edge (a damaged reference) ends there
            out.append((top, min(left, MAX_COL), min(bottom, MAX_ROW), min(right, MAX_COL)))
        return out

    def read_grid(self, sheet: str, max_rows: int | None = None) -> Grid:
        """All cells of a sheet (up to row ``max_rows``), for header detection and small sheets.

        Parameters
        ----------
        sheet : str
            Sheet name.
        max_rows : int, optional
            Last row to read.

        Returns
        -------
        Grid
            Values are float, str, bool, CellError; formula cells give their stored result.
        """
        info = self._worksheet(sheet)
        rows: dict[int, dict[int, object]] = {}
        max_row = max_col = 0
        with self._zip() as zf:
            stream = self._stream(zf, info)
            reader = CellReader(stream.pat, self.shared_strings(zf))
            for r, c, attrs, inner in iter_cells(stream, max_rows):
                value = self._value(reader, info, r, c, attrs, inner)
                if value is None:
                    continue
                rows.setdefault(r, {})[c] = value
                max_row = max(max_row, r)
                max_col = max(max_col, c)
        if max_rows is None:  # the whole part was read: its tail is complete
            self._tails[info.part] = stream.tail
        return Grid(rows=rows, max_row=max_row, max_col=max_col)

    def _value(self, reader: CellReader, info: SheetInfo, r: int, c: int, attrs: bytes,
               inner: bytes | None) -> object:
        """A cell's value; text that is not XML character data is refused by cell."""
        try:
            return reader.value(attrs, inner)
        except CellTextError as exc:
            raise self._bad_text(info, r, c, exc) from None

    def _bad_text_of(self, info: SheetInfo) -> Callable[[int, int, Exception], WorkbookError]:
        """The refusal of damaged cell text on this sheet, for a reader that knows the cell."""
        return lambda r, c, exc: self._bad_text(info, r, c, exc)

    def _bad_text(self, info: SheetInfo, r: int, c: int, exc: Exception) -> WorkbookError:
        return WorkbookError(f'{self.path.name}, sheet "{info.name}", cell {col_letters(c)}{r}: '
                             f"the cell holds {exc}; the file is damaged. Fix or clear the "
                             "cell in your spreadsheet program.")

    def read_columns(self, sheet: str, cols: list[int], first_row: int = 1) -> dict[int, Column]:
        """Only the asked columns, rows ``first_row`` to the last row with a cell in any of them.

        Parameters
        ----------
        sheet : str
            Sheet name.
        cols : list of int
            1-based column numbers.
        first_row : int
            First row to read.

        Returns
        -------
        dict of int to Column
            All columns have the same length, so index i is the same row in each.

        Notes
        -----
        The sheet's XML is kept until :meth:`close` while the sheets kept come to at
        most :data:`KEPT_MAX` bytes, so that :func:`write_package` does not inflate it
        again.
        """
        info = self._worksheet(sheet)
        wanted = set(cols)
        for c in wanted:
            if not 1 <= c <= MAX_COL:
                raise WorkbookError(f"{self.path.name}: column {c} is outside the sheet.")
        self._kept.pop(info.part, None)
        pieces: dict[int, list[tuple[np.ndarray, np.ndarray]]] = {c: [] for c in wanted}
        other: dict[int, dict[int, object]] = {c: {} for c in wanted}
        last = first_row - 1
        with self._zip() as zf:
            stream = self._stream(zf, info, ahead=True)
            pat = stream.pat
            reader = CellReader(pat, self.shared_strings(zf))
            wanted_letters = {col_letters(c).encode(): c for c in wanted}
            p = re.escape(pat.prefix)
            alt = b"|".join(sorted(wanted_letters))
            # plain number cells of the wanted columns, converted by numpy in bulk ...
            simple = re.compile(rb"<" + p + rb'c r="(' + alt + rb')(\d+)"(?: s="\d+")?><' + p
                                + rb"v>([^<]*)</" + p + rb"v></" + p + rb"c>")
            # ... and every other cell of those columns, one by one
            rest = re.compile(rb"<" + p + rb'c r="(' + alt + rb')(\d+)"(?!(?: s="\d+")?><' + p
                              + rb"v>[^<]*</" + p + rb"v></" + p + rb"c>)([^>]*?)(?:/>|>(.*?)</"
                              + p + rb"c>)", re.S)
            r_first = b"<" + pat.prefix + b'c r="'
            c_any = b"<" + pat.prefix + b"c"
            # the typed-formula scan rides along, so the sheet is inflated once for both
            scan = FormulaScan(info.name, pat, self._bad_text_of(info),
                               (self.path.name, info.part))
            # row numbers carried across chunks, for rows and cells that omit ``r``
            cursor = RowCursor(pat, self.path.name, info.part)
            room = KEPT_MAX - sum(zf.getinfo(part).file_size for part in self._kept)
            kept = [stream.head] if zf.getinfo(info.part).file_size <= room else None
            for chunk in stream.body():
                if kept is not None:
                    kept.append(chunk)
                scan.feed(chunk)
                # split, not findall: the groups come as three flat lists (no tuple per
                # cell), and the other cells of those columns are looked for in what the
                # plain ones leave (a cell never holds another, so each lies whole
                # between two plain ones; the joint cannot start a tag)
                parts = simple.split(chunk)
                lts, rws, vts = parts[1::4], parts[2::4], parts[3::4]
                rest_of = b"\0".join(parts[::4]) if lts else chunk
                # every "<c" starting a cell with r first? Counted in what the plain cells
                # leave: each of them is one "<c" with r first. (Rich text runs such as
                # <color> also count, and merely send the chunk down the general path.)
                if rest_of.count(r_first) == rest_of.count(c_any):
                    others = rest.findall(rest_of)
                    if lts:
                        got = _bulk_numbers(lts, rws, vts, wanted_letters, first_row)
                        if got is not None and any(int(rows_.max()) > MAX_ROW
                                                   for _, rows_, _ in got):
                            lt, row = next((lt, row) for lt, row in zip(lts, rws, strict=True)
                                           if int(row) > MAX_ROW)
                            raise beyond_sheet(self.path.name, info.part, (lt + row).decode())
                        if got is None:  # some text that numpy cannot read: one by one
                            others = [(lt, row, b"", b"<v>" + v + b"</v>")
                                      for lt, row, v in zip(lts, rws, vts, strict=True)] + others
                        else:
                            for c, rows_, vals in got:
                                pieces[c].append((rows_, vals))
                                last = max(last, int(rows_[-1]))
                    if not cursor.skip(chunk):  # the last row has no r: walk the rows
                        for _ in cursor.cells(chunk):
                            pass
                else:  # some cell without r as its first attribute: the general scan
                    others = [x for x in _cells_general(chunk, cursor)
                              if x[0] in wanted_letters]
                for letters, row, attrs, cinner in others:
                    r = int(row)
                    if r > MAX_ROW:
                        raise beyond_sheet(self.path.name, info.part,
                                           (letters + row).decode())
                    if r < first_row or not cinner:
                        continue
                    c = wanted_letters[letters]
                    value = self._value(reader, info, r, c, attrs, cinner)
                    if value is None:
                        continue
                    if isinstance(value, float):
                        pieces[c].append((np.array([r]), np.array([value])))
                    else:
                        other[c][r] = value
                    last = max(last, r)
            if kept is not None:  # read to its end: its size and checksum were checked
                self._kept[info.part] = [*kept, stream.tail]
        self._formulas[info.part] = scan.found
        self._tails[info.part] = stream.tail
        n = max(last - first_row + 1, 0)
        out = {}
        for c in cols:
            numbers = np.full(n, np.nan)
            for rows_, vals in pieces[c]:
                numbers[rows_ - first_row] = vals
            out[c] = Column(numbers=numbers, other=other[c], first_row=first_row)
        return out

    def _kept_xml(self, part: str) -> list[bytes] | None:
        """The pieces of a sheet part's XML kept by the last :meth:`read_columns`, if any."""
        return self._kept.get(part)

    def named_cell(self, name: str) -> tuple[str, int, int] | None:
        """The single cell a workbook-level defined name points at: (sheet, row, col).

        Parameters
        ----------
        name : str
            The defined name, compared ignoring case.

        Returns
        -------
        tuple or None
            None when no workbook-level name matches or it is not one cell.
        """
        with self._zip() as zf:
            wb = self._xml(zf, self.workbook_part)
        for el in wb.iter():
            if (local(el.tag) == "definedName" and el.get("localSheetId") is None
                    and el.get("name", "").casefold() == name.casefold()):
                m = re.fullmatch(r"'?((?:[^']|'')+?)'?!\$?([A-Z]{1,3})\$?(\d+)",
                                 (el.text or "").strip())
                if m:
                    return m[1].replace("''", "'"), int(m[3]), col_index(m[2].encode())
        return None

    def number_format(self, sheet: str, row: int, col: int) -> str:
        """The number format code of one cell ("General" when it has none).

        Built-in ids are given by the codes ECMA-376 Part 1 (18.8.30) lists for them
        (14 is ``mm-dd-yy``). Meant for a few cells (a log's first date): the sheet
        part is read whole.

        Parameters
        ----------
        sheet : str
            Sheet name.
        row, col : int
            The cell (1-based).

        Returns
        -------
        str
        """
        info = self._worksheet(sheet)
        ref = f"{col_letters(col)}{row}".encode()
        with self._zip() as zf:
            data = read_part(zf, info.part, self.path.name)
            m = re.search(rb'<(?:[\w.-]+:)?c\s[^>]*?\br="' + ref + rb'"[^>]*>', data)
            style = re.search(rb'\bs="(\d+)"', m[0]) if m else None
            if style is None:
                return "General"
            part = next((t for t, k in self.rels(zf, self.workbook_part).values()
                         if k == "styles"), None)
            if part is None or part not in zf.namelist():
                return "General"
            root = self._xml(zf, part)
        xfs = [el for block in root if local(block.tag) == "cellXfs" for el in block]
        index = int(style[1])
        if index >= len(xfs):
            return "General"
        fmt_id = int(xfs[index].get("numFmtId", "0"))
        for block in root:
            if local(block.tag) == "numFmts":
                for el in block:
                    if el.get("numFmtId") == str(fmt_id):
                        return el.get("formatCode", "General")
        return _BUILTIN_CODES.get(fmt_id, "General")

    def read_range(
        self, sheet: str, top: int, left: int, bottom: int, right: int
    ) -> list[list[object]]:
        """Values of a block (1-based, inclusive), row-major, None for absent cells.

        Parameters
        ----------
        sheet : str
            Sheet name.
        top, left, bottom, right : int
            Corners of the block.

        Returns
        -------
        list of list
            Formula cells give their stored result.
        """
        info = self._worksheet(sheet)
        out: list[list[object]] = [[None] * (right - left + 1) for _ in range(bottom - top + 1)]
        with self._zip() as zf:
            stream = self._stream(zf, info)
            reader = CellReader(stream.pat, self.shared_strings(zf))
            for r, c, attrs, inner in iter_cells(stream, bottom):
                if r >= top and left <= c <= right:
                    out[r - top][c - left] = self._value(reader, info, r, c, attrs, inner)
        return out

    def formula_cells(self, sheets: list[str] | None = None) -> list[FormulaCell]:
        """Every worksheet cell whose formula text mentions a sheetvol function (``SV_``).

        A sheet already read whole by :meth:`read_columns` is not read again: that pass
        noted its formulas.

        Parameters
        ----------
        sheets : list of str, optional
            Only these sheets (default: every worksheet).

        Returns
        -------
        list of FormulaCell
            In sheet order, then row and column order.
        """
        wanted = None if sheets is None else {self.sheet(s).part for s in sheets}
        out: list[FormulaCell] = []
        with self._zip() as zf:
            for info in self.sheets:
                if info.kind != "worksheet" or (wanted is not None and info.part not in wanted):
                    continue
                if info.part not in self._formulas:
                    if info.part not in zf.namelist():
                        continue
                    stream = self._stream(zf, info, ahead=True)
                    scan = FormulaScan(info.name, stream.pat, self._bad_text_of(info),
                                       (self.path.name, info.part))
                    for chunk in stream.body():
                        scan.feed(chunk)
                    self._formulas[info.part] = scan.found
                    self._tails[info.part] = stream.tail
                out.extend(self._formulas[info.part])
        return out

    def tables(self, sheet: str) -> list[TableInfo]:
        """Spreadsheet tables on a sheet.

        Parameters
        ----------
        sheet : str
            Sheet name.

        Returns
        -------
        list of TableInfo
        """
        info = self._worksheet(sheet)
        out = []
        with self._zip() as zf:
            for target, kind in self.rels(zf, info.part).values():
                if kind != "table" or target not in zf.namelist():
                    continue
                root = self._xml(zf, target)
                ref = root.get("ref", "")
                try:
                    top, left, bottom, right = parse_ref(ref)
                except ValueError:
                    continue
                header = top if root.get("headerRowCount", "1") != "0" else 0
                names = [el.get("name", "") for el in root.iter()
                         if local(el.tag) == "tableColumn"]
                out.append(TableInfo(name=root.get("name", ""), ref=ref, header_row=header,
                                     columns=names, part=target,
                                     display_name=root.get("displayName", ""),
                                     top=top, left=left, bottom=bottom, right=right))
        return out


def changed_during_fill(name: str) -> WorkbookError:
    """The refusal of an input that another program replaced or saved meanwhile."""
    return WorkbookError(f"{name} changed during the fill (another program replaced or saved "
                         "it); nothing was written. Run the fill again once the file is settled.")


def _identity(st: os.stat_result) -> tuple[int, ...]:
    """What tells one file at a path from another: device, inode, size, modified time."""
    return (st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns)


class FormulaScan:
    """Finds the cells of one sheet whose formula mentions a sheetvol function.

    Fed the body chunks in order (:meth:`feed`), by its own pass or riding along with
    another reading pass; chunks without a formula, or without a sheetvol name and no
    shared formula to follow, are passed over unparsed.
    """

    def __init__(self, sheet: str, pat: Patterns,
                 bad_text: Callable[[int, int, Exception], WorkbookError],
                 where: tuple[str, str] = ("", "")) -> None:
        self.sheet = sheet
        self.bad_text = bad_text  # damaged cell text: the refusal naming the cell
        self.cursor = RowCursor(pat, *where)  # (file, part): named by a row beyond the sheet
        self.reader = CellReader(pat, None)
        self.f_tag = b"<" + pat.prefix + b"f"
        self.masters: dict[str, tuple[int, int, str]] = {}
        self.found: list[FormulaCell] = []

    def feed(self, chunk: bytes) -> None:
        """Note the sheetvol formulas of the next chunk."""
        # (no "f" at all, the usual case, is found at memchr speed; "<f" is not)
        if (b"f" not in chunk or self.f_tag not in chunk
                or (not self.masters and not _SV.search(chunk))) and self.cursor.skip(chunk):
            return
        masters = self.masters
        for r, c, _attrs, inner in self.cursor.cells(chunk):
            if not inner or (b"<f" not in inner and b":f" not in inner):
                continue
            try:
                got = self.reader.formula(inner)
            except CellTextError as exc:
                raise self.bad_text(r, c, exc) from None
            if got is None:
                continue
            _raw, text, fattrs = got
            kind = fattrs.get("t", "normal")
            if kind == "shared" and "si" in fattrs:
                if text and _SV.search(text.encode()):
                    masters[fattrs["si"]] = (r, c, text)
                elif fattrs["si"] in masters:
                    mr_, mc_, mtext = masters[fattrs["si"]]
                    text = shift_formula(mtext, r - mr_, c - mc_)
            if not text or not _SV.search(text.encode()):
                continue
            array_ref = fattrs.get("ref") if kind == "array" else None
            self.found.append(FormulaCell(sheet=self.sheet, row=r, col=c,
                                          formula=text.lstrip("="), array_ref=array_ref))


def _cells_general(chunk: bytes, cursor: RowCursor
                   ) -> list[tuple[bytes, bytes, bytes, bytes | None]]:
    """(letters, row, attrs, inner) of every cell of a chunk, positions implied if needed.

    The cursor carries the row number from the chunks before, so a row without ``r``
    in this chunk is the one after the last row of the previous chunk.
    """
    out = []
    for r, c, attrs, inner in cursor.cells(chunk):
        mc = ATTR_R_CELL.search(attrs)
        out.append((mc[1] if mc else col_letters(c).encode(), str(r).encode(), attrs, inner))
    return out


def _bulk_numbers(
    letters: list[bytes], row_texts: list[bytes], value_texts: list[bytes],
    wanted: dict[bytes, int], first_row: int
) -> list[tuple[int, np.ndarray, np.ndarray]] | None:
    """(col, rows, values) arrays from the cells' letters, rows and value texts; None if
    some value text is unreadable."""
    n = len(value_texts)
    try:
        vals = np.fromiter(map(float, value_texts), np.float64, n)
    except ValueError:
        return None
    rows = np.fromiter(map(int, row_texts), np.int64, n)
    keep = rows >= first_row
    out = []
    if len(wanted) == 1:
        (c,) = wanted.values()
        if keep.any():
            out.append((c, rows[keep], vals[keep]))
        return out
    cols = np.fromiter(map(wanted.__getitem__, letters), np.int64, n)
    for c in wanted.values():
        m = (cols == c) & keep
        if m.any():
            out.append((c, rows[m], vals[m]))
    return out


__all__ = ["CellError", "Column", "FormulaCell", "Grid", "Package", "SheetInfo", "TableInfo",
           "WorkbookError", "changed_during_fill", "shift_formula"]
