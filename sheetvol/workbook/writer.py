"""Writing edits into a copy of a package, losing nothing.

Every part of the input goes to the output in the same zip order with the same content;
only the parts an edit needs are rewritten, and those by splicing text, never by a
load-and-save through a spreadsheet object model:

- the edited worksheets (new cells spliced into their rows, streamed in chunks;
  ``dimension`` grown; ``<cols>`` widths for new columns),
- ``xl/styles.xml`` (number formats, a bold header font and cell styles appended;
  existing indices never move),
- table parts whose table a new column joins,
- ``[Content_Types].xml``, ``xl/workbook.xml`` and its relationships only when a sheet
  or chart is added (new parts go at the end of the zip), ``xl/workbook.xml`` also when
  ``calc_on_load`` changes its ``<calcPr>``,
- ``xl/calcChain.xml`` only when formula cells go: a :class:`ValueResult` turns a
  formula into its value and ``NewColumn(replace=True)`` drops whatever its column
  held; a chain entry for a cell without a formula makes a spreadsheet program offer a
  repair. A chain left empty goes, with its relationship and content type.

``<calcPr fullCalcOnLoad="1">`` (xlsxwriter and openpyxl write it) asks a spreadsheet
program to recalculate every formula on opening (ECMA-376 Part 1, 18.2.2); one that
does so without the add-in shows errors instead of the results stored in sheetvol's
formulas (LibreOffice 7.4.7 was measured to keep stored results regardless).
``calc_on_load=False`` removes that one attribute (nothing else in ``workbook.xml``
changes); by default the part is left as it is. ``docProps/app.xml`` (the sheet titles
some programs show in file properties) is not updated for new sheets;
spreadsheet programs rebuild it on save.
"""

from __future__ import annotations

import datetime as dt
import math
import os
import re
import tempfile
import zipfile
from collections.abc import Callable
from contextlib import nullcontext
from pathlib import Path

import numpy as np

from sheetvol.functions.grid import MAX_COL, MAX_ROW
from sheetvol.workbook._chart import (
    CT_CHART,
    CT_DRAWING,
    REL_CHART,
    REL_DRAWING,
    add_anchors,
    anchor_xml,
    chart_xml,
    drawing_xml,
    insert_drawing,
    rel_prefix_of,
)
from sheetvol.workbook._rowedit import (
    ColumnRun,
    RowEditor,
    SharedMove,
    SheetEdits,
    array_anchor_cell,
    formula_info,
    formula_result_cell,
    plain_value_cell,
    text_cell,
)
from sheetvol.workbook._safety import open_part, read_part, read_xml_part
from sheetvol.workbook._sheetparts import (
    add_print_titles,
    edit_head,
    new_sheet_xml,
    set_first_attr,
)
from sheetvol.workbook._sheetxml import (
    CHUNK,
    Patterns,
    Pieces,
    SheetStream,
    cell_name,
    col_index,
    col_letters,
    escape_text,
    parse_ref,
    unescape,
)
from sheetvol.workbook._styles import StyleBook, minimal_styles
from sheetvol.workbook._zipcopy import (
    WriteBehind,
    clone_info,
    raw_copy,
    set_level,
    unlink_quietly,
    write_entry,
)
from sheetvol.workbook.edits import (
    CellResult,
    LineChart,
    NewColumn,
    NewSheet,
    SpillResult,
    ValueResult,
)
from sheetvol.workbook.errors import WorkbookError
from sheetvol.workbook.package import NS_PKG_REL, NS_REL, Package, SheetInfo, TableInfo

# zlib level for rewritten sheets: level 1 deflates sheet XML about 4x faster than the
# default 6 for a part about 20% larger (measured, see docs/performance.md).
SHEET_LEVEL = 1
SMALL_LEVEL = 6
SHEETVOL_PART = "xl/worksheets/sheetvol"
CT_WORKSHEET = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
# a style number on a cell, a row (s=) or a column (style=)
_STYLE_NUMBER = re.compile(
    rb"""<(?:[\w.\-]+:)?(?:c|row|col)\s[^>]*?\b(?:s|style)\s*=\s*["'](\d{1,9})["']""")
CT_STYLES = "application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"
REL_WORKSHEET = NS_REL + "/worksheet"
REL_STYLES = NS_REL + "/styles"
_BAD_SHEET_CHARS = set("[]:*?/\\")


def write_package(
    pkg: Package,
    out_path: str | Path,
    edits: list,
    *,
    progress: Callable[[int], None] | None = None,
    compresslevel: int = SHEET_LEVEL,
    calc_on_load: bool | None = None,
) -> None:
    """Write a copy of ``pkg`` with only ``edits`` applied.

    Every other part stays byte for byte the same (decompressed content), in the same
    zip order. Numbers are written with ``repr`` so they read back bit for bit. A new
    column joins a spreadsheet table when the table's header row is ``header_row`` and
    the column is adjacent to (or already inside) the table.

    Parameters
    ----------
    pkg : Package
        The opened input workbook; it is never modified.
    out_path : str or Path
        Output file; written to a temporary file in the same folder, then renamed over
        ``out_path`` (atomic), so no half-written file is ever left behind.
    edits : list
        :class:`NewColumn`, :class:`CellResult`, :class:`SpillResult`,
        :class:`ValueResult`, :class:`NewSheet`, :class:`LineChart`.
    progress : callable, optional
        Called with the number of sheet rows processed since the previous call (pass a
        ``tqdm`` bar's ``update``).
    compresslevel : int
        zlib level for the rewritten sheets (1 fastest, 9 smallest).
    calc_on_load : bool or None
        ``False`` removes ``fullCalcOnLoad`` from ``<calcPr>`` in ``workbook.xml``, so
        a spreadsheet program opening the copy shows the stored results rather than
        recalculating sheetvol's formulas (errors without the add-in); ``True`` sets
        ``fullCalcOnLoad="1"`` (every formula recalculated on opening); ``None`` (the
        default) leaves ``workbook.xml`` as it is.

    Raises
    ------
    WorkbookError
        An unknown sheet, a target cell that is not empty, a bad sheet name, etc.

    Examples
    --------
    >>> import numpy as np
    >>> pkg = Package.open("prices.xlsx")                         # doctest: +SKIP
    >>> col = NewColumn("Prices", col=8, header_row=1, header="ATR 14", first_row=2,
    ...                 values=np.array([np.nan, 1.25, 1.5]), number_format="0.00")
    >>> write_package(pkg, "prices-filled.xlsx", [col])          # doctest: +SKIP
    """
    out_path = Path(out_path)
    with pkg._zip() as zin:
        job = _Job(pkg, zin, edits, compresslevel)
        job.prepare()
        if calc_on_load is not None:
            job.calc_on_load(calc_on_load)
        tmp = job.write(out_path, progress)
    try:
        pkg.check_unchanged()  # values from the file as opened go only over that file
    except WorkbookError:
        unlink_quietly(tmp)
        raise
    if out_path.resolve() == pkg.path.resolve():
        pkg.close()  # some systems cannot replace a file that is still open
    # renamed once the input is closed, so writing over the input itself also works
    try:
        os.replace(tmp, out_path)
    except OSError as exc:
        unlink_quietly(tmp)
        raise WorkbookError(f"cannot write {out_path}: {exc.strerror}.") from None


class _Job:
    """One write: collects what changes, then streams the new package."""

    def __init__(self, pkg: Package, zin: zipfile.ZipFile, edits: list, level: int) -> None:
        self.pkg = pkg
        self.zin = zin
        self.file = pkg.path.name
        self.level = level
        self.names = zin.namelist()
        self.replaced: dict[str, bytes] = {}
        self.removed: set[str] = set()
        self.added: dict[str, bytes] = {}
        self.sheet_edits: dict[str, list] = {}
        self.new_sheets: list[NewSheet] = []
        self.charts: list[LineChart] = []
        for edit in edits:
            if isinstance(edit, (NewColumn, CellResult, SpillResult, ValueResult)):
                info = pkg._worksheet(edit.sheet)
                self.sheet_edits.setdefault(info.part, []).append(edit)
            elif isinstance(edit, NewSheet):
                self.new_sheets.append(edit)
            elif isinstance(edit, LineChart):
                self.charts.append(edit)
            else:
                raise TypeError(f"not a workbook edit: {edit!r}")
        self.new_sheet_parts: dict[str, str] = {}  # casefolded name -> part written here
        self.sheet_drawing: dict[str, str] = {}  # streamed sheet part -> drawing rel id
        self.styles: StyleBook | None = None
        self.styles_part: str | None = None
        self.wb_rels = pkg.rels(zin, pkg.workbook_part)

    # -- small parts -------------------------------------------------------------------
    def part(self, name: str) -> bytes:
        if name in self.replaced:
            return self.replaced[name]
        if name in self.added:
            return self.added[name]
        return read_xml_part(self.zin, name, self.file)  # edited as text: UTF-8 checked

    def style_book(self) -> StyleBook:
        if self.styles is None:
            part = next((t for t, k in self.wb_rels.values() if k == "styles"), None)
            if part is None or part not in self.names:
                # No styles part: the cells' style numbers mean no style, so the new part
                # starts with that many plain styles and the fill's own come after them.
                data = minimal_styles(self._style_numbers_used())
                if part is None:
                    part = "xl/styles.xml"
                    self.add_part(part, data, CT_STYLES, REL_STYLES, "styles.xml")
                else:  # related but missing: the part goes where the relationship points
                    self.added[part] = data
                    if f'PartName="/{part}"' not in self.part("[Content_Types].xml").decode(
                            "utf-8", "replace"):
                        self._content_type(part, CT_STYLES)
                self.styles = StyleBook(data)
            else:
                data = self.part(part)  # a refusal here already names the file and part
                try:
                    self.styles = StyleBook(data)
                except WorkbookError as exc:
                    raise WorkbookError(f"{self.file}: {part}: {exc}; open the workbook in its "
                                        "spreadsheet program and save it again") from None
            self.styles_part = part
        return self.styles

    def _style_numbers_used(self) -> int:
        """One more than the highest style number a cell, row or column uses (0: none)."""
        top = -1
        for info in self.pkg.sheets:
            if info.part in self.names:
                for m in _STYLE_NUMBER.finditer(self.part(info.part)):
                    top = max(top, int(m[1]))
        return top + 1

    def number_style(self, code: str | None) -> int:
        if not code:
            return 0
        book = self.style_book()
        return book.xf(book.number_format_id(code))

    def cell_style(self, code: str, bold: bool = False) -> int:
        """Style index for number format ``code``, bold or not (appended when new)."""
        book = self.style_book()
        return book.xf(book.number_format_id(code), book.bold_font_id() if bold else 0)

    def header_style(self) -> int:
        book = self.style_book()
        return book.xf(0, book.bold_font_id())

    def add_part(self, part: str, data: bytes, ctype: str, rel_type: str, target: str) -> str:
        """Add a part related from the workbook; returns the new relationship id."""
        self.added[part] = data
        self._content_type(part, ctype)
        return self._workbook_rel(rel_type, target)

    def _content_type(self, part: str, ctype: str) -> None:
        text = self.part("[Content_Types].xml").decode("utf-8")
        m = re.search(r"</([\w.\-]+:)?Types>", text)
        if not m:
            raise WorkbookError(f"{self.file}: [Content_Types].xml is damaged.")
        p = m[1] or ""
        entry = f'<{p}Override PartName="/{part}" ContentType="{ctype}"/>'
        self.replaced["[Content_Types].xml"] = (text[: m.start()] + entry
                                                + text[m.start():]).encode("utf-8")

    def _workbook_rel(self, rel_type: str, target: str) -> str:
        return self.append_rel(self.pkg.workbook_part, rel_type, target)

    def has_part(self, name: str) -> bool:
        return name in self.added or name in self.replaced or name in self.names

    def unique_part(self, pattern: str) -> str:
        k = 1
        while self.has_part(pattern.format(k)):
            k += 1
        return pattern.format(k)

    def append_rel(self, source: str, rel_type: str, target: str) -> str:
        """Add a relationship from part ``source`` (creating its .rels); return its id."""
        folder, base = source.rsplit("/", 1) if "/" in source else ("", source)
        rels_part = f"{folder}/_rels/{base}.rels" if folder else f"_rels/{base}.rels"
        if self.has_part(rels_part):
            text = self.part(rels_part).decode("utf-8")
        else:
            text = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships '
                    f'xmlns="{NS_PKG_REL}"></Relationships>')
        used = set(re.findall(r'Id\s*=\s*["\']([^"\']+)', text))
        k = 1
        while f"rId{k}" in used:
            k += 1
        rid = f"rId{k}"
        m = re.search(r"</([\w.\-]+:)?Relationships>", text)
        if not m:
            raise WorkbookError(f"{self.file}: {rels_part} is damaged.")
        p = m[1] or ""
        entry = f'<{p}Relationship Id="{rid}" Type="{rel_type}" Target="{target}"/>'
        data = (text[: m.start()] + entry + text[m.start():]).encode("utf-8")
        if rels_part in self.names:
            self.replaced[rels_part] = data
        else:
            self.added[rels_part] = data
        return rid

    # -- preparing ---------------------------------------------------------------------
    def prepare(self) -> None:
        for part, edits in self.sheet_edits.items():
            self._tables(part, [e for e in edits if isinstance(e, NewColumn)])
        for sheet in self.new_sheets:
            self._new_sheet(sheet)
        if self.new_sheets:
            self._print_titles()
        if self.charts:
            self._charts()
        self._calc_chain()
        # styles used by sheet edits are resolved now so the styles part is final
        self.sheet_styles: dict[int, tuple[int, int]] = {}
        for edits in self.sheet_edits.values():
            for e in edits:
                if isinstance(e, NewColumn):
                    self.sheet_styles[id(e)] = (self.number_style(e.number_format),
                                                self.header_style())
                elif isinstance(e, (SpillResult, ValueResult)):
                    self.sheet_styles[id(e)] = (self.number_style(e.number_format), 0)
        if self.styles is not None and self.styles.changed and self.styles_part:
            data = self.styles.finish()
            if self.styles_part in self.added:
                self.added[self.styles_part] = data
            else:
                self.replaced[self.styles_part] = data

    def _tables(self, part: str, columns: list[NewColumn]) -> None:
        if not columns:
            return
        info = next(s for s in self.pkg.sheets if s.part == part)
        tables = self.pkg.tables(info.name)
        for nc in sorted(columns, key=lambda c: c.col):
            for table in tables:
                if table.header_row != nc.header_row or table.header_row == 0:
                    continue
                if table.left <= nc.col <= table.right or nc.col == table.right + 1:
                    self._table_column(table, nc)

    def _table_column(self, table: TableInfo, nc: NewColumn) -> None:
        text = self.part(table.part).decode("utf-8")
        index = nc.col - table.left
        names = [n.casefold() for i, n in enumerate(table.columns) if i != index]
        if nc.header.casefold() in names:
            raise WorkbookError(
                f"{self.file}: table {table.display_name or table.name!r} already has a "
                f"column named {nc.header!r}; a table needs distinct column names.")
        name = escape_text(nc.header.replace("\n", " "))
        cols = list(re.finditer(r"<([\w.\-]+:)?tableColumn(?=[\s>/])([^>]*?)(/>|>.*?</\1?"
                                r"tableColumn>)", text, re.S))
        if index < len(table.columns):  # already inside (an earlier fill): rename
            if table.columns[index] == nc.header or index >= len(cols):
                return
            m = cols[index]
            new = re.sub(r'\sname\s*=\s*(["\']).*?\1', f' name="{name}"', m[0], count=1)
            text = text[: m.start()] + new + text[m.end():]
            table.columns[index] = nc.header
        else:
            all_cols = "".join(c[0] for c in cols)
            ids = [int(x) for x in re.findall(r'\sid\s*=\s*["\'](\d+)', all_cols)]
            p = (cols[-1][1] if cols else "") or ""
            entry = f'<{p}tableColumn id="{max(ids, default=0) + 1}" name="{name}"/>'
            end = re.search(r"</([\w.\-]+:)?tableColumns>", text)
            if end is None:
                raise WorkbookError(f"{self.file}: table part {table.part} is damaged.")
            text = text[: end.start()] + entry + text[end.start():]
            mc = re.search(r"<([\w.\-]+:)?tableColumns(?=[\s>])([^>]*)>", text)
            if mc:
                attrs = re.sub(r'\s+count\s*=\s*["\']\d*["\']', "", mc[2])
                attrs += f' count="{len(cols) + 1}"'
                text = text[: mc.start()] + f"<{mc[1] or ''}tableColumns{attrs}>" + text[mc.end():]
            table.right += 1
            table.columns.append(nc.header)
            new_ref = (f"{col_letters(table.left)}{table.top}:"
                       f"{col_letters(table.right)}{table.bottom}")
            text = set_first_attr(text, "table", "ref", new_ref)
            ma = re.search(r"<([\w.\-]+:)?autoFilter(?=[\s>/])[^>]*?\sref\s*=\s*[\"']([^\"']+)",
                           text)
            if ma:
                top, left, bottom, _right = parse_ref(ma[2])
                af = f"{col_letters(left)}{top}:{col_letters(table.right)}{bottom}"
                text = text[: ma.start(2)] + af + text[ma.end(2):]
            table.ref = new_ref
        self.replaced[table.part] = text.encode("utf-8")

    def _new_sheet(self, ns: NewSheet) -> None:
        name = ns.name
        if (not name or len(name) > 31 or set(name) & _BAD_SHEET_CHARS
                or name.startswith("'") or name.endswith("'")):
            raise WorkbookError(f"{name!r} cannot be a sheet name (1-31 characters, none of "
                                "[ ] : * ? / \\, no quote at either end).")
        hdr = self.header_style()
        xml = new_sheet_xml(ns, hdr, self.cell_style, self.pkg.date1904)
        existing = next((s for s in self.pkg.sheets if s.name.casefold() == name.casefold()), None)
        if existing is not None:
            if not self._is_ours(existing, ns):
                raise WorkbookError(
                    f"{self.file} already has a sheet named {existing.name!r} that sheetvol did "
                    "not write, and sheetvol writes its own sheet under that name; rename "
                    "that sheet (or move it to another workbook) and run again.")
            self.replaced[existing.part] = xml
            self.new_sheet_parts[name.casefold()] = existing.part
            return
        k = 1
        while f"{SHEETVOL_PART}{k}.xml" in self.names or f"{SHEETVOL_PART}{k}.xml" in self.added:
            k += 1
        part = f"{SHEETVOL_PART}{k}.xml"
        folder = self.pkg.workbook_part.rsplit("/", 1)[0]
        target = part[len(folder) + 1:] if part.startswith(folder + "/") else "/" + part
        rid = self.add_part(part, xml, CT_WORKSHEET, REL_WORKSHEET, target)
        self.new_sheet_parts[name.casefold()] = part
        self._workbook_sheet(name, rid)

    def _charts(self) -> None:
        """Chart parts, a drawing per anchor sheet, and the sheet's ``<drawing>``."""
        by_anchor: dict[str, list[LineChart]] = {}
        for ch in self.charts:
            data = self.pkg._worksheet(ch.sheet)
            _check_cell(self.file, data.name, ch.last_row, max([ch.x_col, *ch.series_cols]))
            if not ch.series_cols or ch.first_row > ch.last_row or ch.first_row < 1:
                raise WorkbookError(f"{self.file}: chart {ch.title!r} has no data to draw.")
            try:
                parse_ref(ch.anchor_cell)
            except ValueError:
                raise WorkbookError(f"{self.file}: chart {ch.title!r}: {ch.anchor_cell!r} is not "
                                    "a cell.") from None
            part = self.new_sheet_parts.get(ch.anchor_sheet.casefold())
            if part is None:
                part = self.pkg._worksheet(ch.anchor_sheet).part
            by_anchor.setdefault(part, []).append(ch)
        for part, charts in by_anchor.items():
            self._chart_drawing(part, charts)

    def _chart_drawing(self, sheet_part: str, charts: list[LineChart]) -> None:
        ours = sheet_part in self.added or sheet_part in self.replaced
        existing = None
        if not ours and sheet_part in self.names:
            existing = next((t for t, k in self.pkg.rels(self.zin, sheet_part).values()
                             if k == "drawing" and t in self.names), None)
        if existing is not None:
            drawing_part = existing
            text = self.part(drawing_part)
            ids = [int(x) for x in re.findall(rb'cNvPr[^>]*?\sid\s*=\s*["\'](\d+)', text)]
            next_id = max(ids, default=1) + 1
        else:
            drawing_part = self.unique_part("xl/drawings/drawing{}.xml")
            next_id = 2
        anchors = []
        for i, ch in enumerate(charts):
            chart_part = self.unique_part("xl/charts/chart{}.xml")
            self.added[chart_part] = chart_xml(ch, date_axis=False)
            self._content_type(chart_part, CT_CHART)
            target = "../charts/" + chart_part.rsplit("/")[-1]
            rid = self.append_rel(drawing_part, REL_CHART, target)
            anchors.append(anchor_xml(ch.anchor_cell, rid, next_id + i))
        if existing is not None:
            self.replaced[drawing_part] = add_anchors(self.part(drawing_part), anchors)
            return
        self.added[drawing_part] = drawing_xml(anchors)
        self._content_type(drawing_part, CT_DRAWING)
        rid = self.append_rel(sheet_part, REL_DRAWING,
                              "../drawings/" + drawing_part.rsplit("/")[-1])
        if ours:
            xml = self.part(sheet_part)
            new = insert_drawing(xml, b"", rel_prefix_of(xml[:2000]) or "", rid)
            (self.added if sheet_part in self.added else self.replaced)[sheet_part] = new
        elif sheet_part in self.sheet_edits:
            self.sheet_drawing[sheet_part] = rid  # put in while the sheet streams
        else:
            xml = self.part(sheet_part)
            cut = xml.rfind(b"sheetData>")
            cut = cut + len(b"sheetData>") if cut >= 0 else 0
            m = re.search(rb"<([A-Za-z_][\w.\-]*:)?worksheet[\s>]", xml)
            prefix = (m[1] or b"") if m else b""
            self.replaced[sheet_part] = xml[:cut] + insert_drawing(
                xml[cut:], prefix, rel_prefix_of(xml[: xml.find(b">", m.end()) if m else 0]), rid)

    def _calc_chain(self) -> None:
        """Drop calculation-chain entries of formula cells that edits remove.

        A chain entry pointing at a cell that no longer holds a formula makes a
        spreadsheet program offer to repair the file. ``NewColumn(replace=True)`` removes
        cells and :class:`ValueResult` turns a formula (and the cells below it) into
        values; CellResult and SpillResult keep their formulas.
        """
        part = next((t for t, k in self.wb_rels.values() if k == "calcChain"), None)
        if part is None or part not in self.names:
            return
        # sheetId -> (col, from_row, to_row) whose formula cells go
        drops: dict[int, list[tuple[int, int, float]]] = {}
        for sheet_part, edits in self.sheet_edits.items():
            info = next(s for s in self.pkg.sheets if s.part == sheet_part)
            for e in edits:
                if isinstance(e, NewColumn) and e.replace:
                    drops.setdefault(info.sheet_id, []).append((e.col, e.header_row, math.inf))
                elif isinstance(e, ValueResult):
                    n = len(_value_parts(e.values)[1]) + 1
                    drops.setdefault(info.sheet_id, []).append((e.col, e.row, e.row + n - 1))
        if not drops:
            return
        text = self.part(part).decode("utf-8")
        entries = list(re.finditer(r"<([\w.\-]+:)?c(?=[\s/>])([^>]*?)(?:/>|>\s*</\1?c>)",
                                   text))
        kept: list[str] = []
        current: int | None = None
        previous: int | None = None
        for m in entries:
            mi = re.search(r"""(?:^|\s)i\s*=\s*["'](\d+)["']""", m[2])
            if mi:
                current = int(mi[1])
            mr = re.search(r"""(?:^|\s)r\s*=\s*["']([A-Z]{1,3})(\d+)["']""", m[2])
            if mr and current in drops:
                col, row = col_index(mr[1].encode()), int(mr[2])
                if any(col == c and r0 <= row <= r1 for c, r0, r1 in drops[current]):
                    continue
            element = m[0]
            if not mi and current is not None and current != previous:
                # the entry inherited its sheet from one that is gone: say it
                cut = len(m[1] or "") + 2
                element = element[:cut] + f' i="{current}"' + element[cut:]
            kept.append(element)
            previous = current
        if len(kept) == len(entries):
            return
        if kept:
            new = text[: entries[0].start()] + "".join(kept) + text[entries[-1].end():]
            self.replaced[part] = new.encode("utf-8")
            return
        # nothing left: the part goes, with its relationship and content type
        self.removed.add(part)
        folder, base = self.pkg.workbook_part.rsplit("/", 1)
        rels_part = f"{folder}/_rels/{base}.rels"
        rels = self.part(rels_part).decode("utf-8")
        rels = re.sub(r"<([\w.\-]+:)?Relationship\b[^>]*?/calcChain[\"'][^>]*?/>", "", rels)
        self.replaced[rels_part] = rels.encode("utf-8")
        types = self.part("[Content_Types].xml").decode("utf-8")
        types = re.sub(r"<([\w.\-]+:)?Override\b[^>]*?PartName=[\"']/" + re.escape(part)
                       + r"[\"'][^>]*?/>", "", types)
        self.replaced["[Content_Types].xml"] = types.encode("utf-8")

    def calc_on_load(self, on: bool) -> None:
        """Remove (``on`` False) or set ``fullCalcOnLoad`` on ``<calcPr>`` in workbook.xml.

        Edited as bytes: the rest of the part stays as it was, byte for byte.
        """
        part = self.pkg.workbook_part
        xml = self.part(part)
        m = re.search(rb"<([\w.\-]+:)?calcPr(?=[\s/>])[^>]*>", xml)
        attr = re.compile(rb"""\s+fullCalcOnLoad\s*=\s*(["'])[^"']*\1""")
        if m is not None:
            tag = attr.sub(b"", m[0])
            if on:
                cut = len(tag) - (2 if tag.endswith(b"/>") else 1)
                tag = tag[:cut] + b' fullCalcOnLoad="1"' + tag[cut:]
            new = xml[: m.start()] + tag + xml[m.end():]
        elif on:
            new = _insert_calc_pr(xml, self.file)
        else:
            return
        if new != xml:
            self.replaced[part] = new

    def _is_ours(self, info: SheetInfo, ns: NewSheet) -> bool:
        """Written by sheetvol: our part name, or the same title in A1."""
        if info.part.startswith(SHEETVOL_PART):
            return True
        if info.kind != "worksheet" or not ns.rows or not ns.rows[0]:
            return False
        a1 = self.pkg.read_range(info.name, 1, 1, 1, 1)[0][0]
        return a1 is not None and str(a1) == str(ns.rows[0][0])

    def _print_titles(self) -> None:
        """Row 1 of each new sheet repeated on every printed page."""
        part = self.pkg.workbook_part
        text = self.part(part).decode("utf-8")
        names = [unescape(m[1].encode()).casefold() for m in re.finditer(
            r"<(?:[\w.\-]+:)?sheet\b[^>]*?\sname\s*=\s*[\"']([^\"']*)", text)]
        new = text
        for ns in self.new_sheets:
            if ns.name.casefold() in names:
                new = add_print_titles(new, names.index(ns.name.casefold()), ns.name)
        if new != text:
            self.replaced[part] = new.encode("utf-8")

    def _workbook_sheet(self, name: str, rid: str) -> None:
        part = self.pkg.workbook_part
        text = self.part(part).decode("utf-8")
        root = re.search(r"<([\w.\-]+:)?workbook(?=[\s>])[^>]*>", text)
        if root is None:
            raise WorkbookError(f"{self.file}: {part} is damaged.")
        p = root[1] or ""
        mr = re.search(r'xmlns:([\w.\-]+)\s*=\s*["\']' + re.escape(NS_REL) + "[\"']", root[0])
        rel_attr = f'{mr[1]}:id="{rid}"' if mr else f'xmlns:sv_r="{NS_REL}" sv_r:id="{rid}"'
        ids = [int(x) for x in re.findall(r'sheetId\s*=\s*["\'](\d+)', text)]
        entry = (f'<{p}sheet name="{escape_text(name)}" sheetId="{max(ids, default=0) + 1}" '
                 f"{rel_attr}/>")
        m = re.search(rf"</{re.escape(p)}sheets>", text)
        if m is None:
            raise WorkbookError(f"{self.file}: {part} has no sheet list; it is damaged.")
        self.replaced[part] = (text[: m.start()] + entry + text[m.start():]).encode("utf-8")

    # -- writing -----------------------------------------------------------------------
    def write(self, out_path: Path, progress: Callable[[int], None] | None) -> str:
        """Write the new package to a temporary file next to ``out_path``; return its path."""
        folder = out_path.parent if str(out_path.parent) else Path(".")
        if not folder.is_dir():
            raise WorkbookError(f"cannot write {out_path}: folder {folder} does not exist.")
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{out_path.name}.", suffix=".part")
        os.close(fd)
        try:
            with zipfile.ZipFile(tmp, "w", allowZip64=True) as zout:
                for info in self.zin.infolist():
                    name = info.filename
                    if name in self.removed:
                        continue
                    if name in self.sheet_edits:
                        self._write_sheet(zout, info, progress)
                    elif name in self.replaced:
                        write_entry(zout, clone_info(info), self.replaced[name], SMALL_LEVEL)
                    elif not raw_copy(zout, self.zin, info):
                        write_entry(zout, clone_info(info), read_part(self.zin, name, self.file),
                                    SMALL_LEVEL)
                now = dt.datetime.now().timetuple()[:6]
                for name, data in self.added.items():
                    zi = zipfile.ZipInfo(name, date_time=now)
                    zi.compress_type = zipfile.ZIP_DEFLATED
                    write_entry(zout, zi, data, SMALL_LEVEL)
            try:
                os.chmod(tmp, os.stat(self.pkg.path).st_mode & 0o777)
            except OSError:
                pass
        except BaseException:
            unlink_quietly(tmp)
            raise
        return tmp

    def _write_sheet(self, zout: zipfile.ZipFile, info: zipfile.ZipInfo,
                     progress: Callable[[int], None] | None) -> None:
        sheet = next(s for s in self.pkg.sheets if s.part == info.filename)
        # the XML its reading pass kept (inflated through the safe part reader, size and
        # checksum checked), else the part itself, inflated ahead in a second thread
        kept = self.pkg._kept_xml(info.filename)
        with (open_part(self.zin, info.filename, self.file) if kept is None
              else nullcontext(Pieces(kept))) as fh:
            stream = SheetStream(fh, info.filename, self.file, ahead=kept is None, chunk=CHUNK)
            edits = self._sheet_edits(sheet, stream)
            editor = RowEditor(edits, stream.pat)
            edits.on_change = editor._refresh_ranges
            head = edit_head(stream, edits, self._widths(sheet))
            zi = clone_info(info)
            zi.compress_type = zipfile.ZIP_DEFLATED
            set_level(zi, self.level)
            with (zout.open(zi, "w", force_zip64=info.file_size > 1 << 30) as out,
                  WriteBehind(out) as w):
                w.write(head)
                for piece in editor.process(stream.body(), progress):
                    w.write(piece)
                tail = stream.tail
                rid = self.sheet_drawing.get(info.filename)
                if rid:
                    root_end = stream.head.find(b">", stream.head.find(b"worksheet"))
                    tail = insert_drawing(tail, stream.prefix,
                                          rel_prefix_of(stream.head[:root_end]), rid)
                w.write(tail)

    def _widths(self, sheet: SheetInfo) -> dict[int, float]:
        return {e.col: float(e.width) for e in self.sheet_edits[sheet.part]
                if isinstance(e, NewColumn) and e.width}

    def _sheet_edits(self, sheet: SheetInfo, stream: SheetStream) -> SheetEdits:
        p = stream.prefix.decode()
        pat = stream.pat
        se = SheetEdits(file=self.file, sheet=sheet.name, prefix=p)
        for e in self.sheet_edits[sheet.part]:
            if isinstance(e, NewColumn):
                _check_cell(self.file, sheet.name, e.header_row, e.col)
                values, texts = column_values(
                    e.values, f"{self.file}: sheet {sheet.name!r} column {col_letters(e.col)} "
                    f"({e.header!r})", e.first_row)
                _check_cell(self.file, sheet.name, e.first_row + max(len(values), 1) - 1, e.col)
                if e.first_row <= e.header_row:
                    raise WorkbookError(
                        f"{self.file}: sheet {sheet.name!r} column {col_letters(e.col)}: values "
                        f"start on row {e.first_row}, not below the header on row "
                        f"{e.header_row}.")
                num_style, hdr_style = self.sheet_styles[id(e)]
                se.claim(e.header_row, e.col, f"header {e.header!r}")
                for run in se.runs:
                    if run.col == e.col:
                        raise WorkbookError(
                            f"{self.file}: sheet {sheet.name!r} column {col_letters(e.col)} "
                            "is written twice; give each result its own column.")
                se.points[(e.header_row, e.col)] = (
                    text_cell(cell_name(e.header_row, e.col), e.header, hdr_style, p), e.replace)
                run = ColumnRun(col=e.col, first_row=e.first_row, values=values.tolist(),
                                style=num_style, replace_from=e.header_row if e.replace else None)
                if texts:
                    run.texts = {e.first_row + i: text_cell(cell_name(e.first_row + i, e.col),
                                                            t, num_style, p)
                                 for i, t in texts.items()}
                se.runs.append(run)
            elif isinstance(e, CellResult):
                _check_cell(self.file, sheet.name, e.row, e.col)
                se.claim(e.row, e.col, "a formula result")
                where = f"{self.file}: sheet {sheet.name!r} cell {cell_name(e.row, e.col)}"
                se.modifiers[(e.row, e.col)] = _result_fn(pat, e.value, where)
            elif isinstance(e, SpillResult):
                self._spill(se, sheet, e, pat)
            elif isinstance(e, ValueResult):
                self._value_result(se, sheet, e, pat)
        return se

    def _value_result(self, se: SheetEdits, sheet: SheetInfo, e: ValueResult,
                      pat: Patterns) -> None:
        """A formula cell (and the blank cells below it) replaced by plain values."""
        first, below = _value_parts(e.values)
        n = len(below) + 1
        _check_cell(self.file, sheet.name, e.row, e.col)
        _check_cell(self.file, sheet.name, e.row + n - 1, e.col)
        se.claim(e.row, e.col, "a formula result")
        style = self.sheet_styles[id(e)][0]
        cell = cell_name(e.row, e.col)
        where = f"{self.file}: sheet {sheet.name!r} cell {cell}"

        def anchor(cm: re.Match[bytes] | None) -> bytes:
            xml, fm = plain_value_cell(cm, pat, first, style, where)
            kind, ref, si, text = formula_info(fm)
            if ref is None or kind not in ("array", "shared"):
                return xml
            top, left, bottom, right = parse_ref(ref)
            if kind == "array" and (left, right) != (e.col, e.col):
                raise WorkbookError(f"{where} holds an array formula over {ref}; sheetvol "
                                    "replaces only a formula of one column by its values.")
            if kind == "array" and bottom > e.row:
                se.drops.append((e.col, e.row + 1, bottom))  # its own earlier results
                se.on_change()
            elif kind == "shared" and si is not None and text and (bottom, right) != (
                    e.row, e.col):
                se.shared.append(SharedMove(si=si, text=text, row=e.row, col=e.col, top=top,
                                            left=left, bottom=bottom, right=right))
                se.on_change()
            return xml

        se.modifiers[(e.row, e.col)] = anchor
        self._below(se, sheet, e.row, e.col, below, style)

    def _spill(self, se: SheetEdits, sheet: SheetInfo, e: SpillResult, pat: Patterns) -> None:
        values = np.asarray(e.values, dtype=np.float64).ravel()
        n = max(len(values), 1)
        _check_cell(self.file, sheet.name, e.row + n - 1, e.col)
        se.claim(e.row, e.col, "a formula result")
        letters = col_letters(e.col)
        ref = f"{letters}{e.row}:{letters}{e.row + n - 1}"
        style = self.sheet_styles[id(e)][0]
        first = float(values[0]) if len(values) else math.nan

        def anchor(cm: re.Match[bytes] | None) -> bytes:
            xml, old_ref = array_anchor_cell(cm, pat, ref, e.formula.lstrip("="), first, style)
            if old_ref:
                _top, left, bottom, right = parse_ref(old_ref)
                if left <= e.col <= right and bottom > e.row:
                    se.drops.append((e.col, e.row + 1, bottom))
                    se.on_change()
            return xml

        se.modifiers[(e.row, e.col)] = anchor
        self._below(se, sheet, e.row, e.col, values[1:], style)

    def _below(self, se: SheetEdits, sheet: SheetInfo, row: int, col: int, below: np.ndarray,
               style: int) -> None:
        """Queue the results under a formula cell, refusing cells written twice and
        guarding the cells they cover against anything but blanks."""
        if not len(below):
            return
        last = row + len(below)
        for run in se.runs:
            if run.col == col and not (run.last_row < row + 1 or run.first_row > last + 1):
                raise WorkbookError(f"{self.file}: sheet {sheet.name!r} cells below "
                                    f"{cell_name(row, col)} are written twice.")
        se.runs.append(ColumnRun(col=col, first_row=row + 1, values=below.tolist(), style=style))
        se.guards.append((col, row + 1, last, f"the formula in {cell_name(row, col)}"))


def column_values(values: object, where: str,
                  first_row: int = 1) -> tuple[np.ndarray, dict[int, str]]:
    """The numbers of a :class:`NewColumn` (NaN where no number) and its text by position.

    A numeric array (the usual, fast case) is only converted to float64. Otherwise each
    entry is looked at: text is kept as text (an empty string gives no cell), None and
    NaN give no cell, numbers are numbers; anything else is refused, naming ``where``.

    Examples
    --------
    >>> column_values(["stop hit", 1.5, None, ""], "x")
    (array([nan, 1.5, nan, nan]), {0: 'stop hit'})
    """
    if not isinstance(values, np.ndarray):
        as_array = np.asarray(values)  # a list of plain numbers takes the fast path too
        if as_array.dtype.kind in "fiub":
            values = as_array
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiub":
        return np.asarray(values, dtype=np.float64).ravel(), {}
    items = np.asarray(values, dtype=object).ravel()
    numbers = np.full(len(items), np.nan)
    texts: dict[int, str] = {}
    for i, v in enumerate(items.tolist()):
        if isinstance(v, str):
            if v:
                texts[i] = v
            continue
        if v is None:
            continue
        try:
            numbers[i] = float(v)
        except (TypeError, ValueError):
            if not _missing(v):
                raise WorkbookError(
                    f"{where}: the value for row {first_row + i} is {type(v).__name__} {v!r}; "
                    "a new column takes numbers, text or blanks (None/NaN).") from None
    return numbers, texts


def _missing(value: object) -> bool:
    """pandas' NA and NaT (not equal to themselves, or not comparable at all)."""
    try:
        return bool(value != value)
    except (TypeError, ValueError):
        return True


def _value_parts(values: object) -> tuple[object, np.ndarray]:
    """(value of the anchor cell, float64 values of the cells below) of a ValueResult."""
    if isinstance(values, np.ndarray) and values.ndim == 0:
        values = values.item()
    if isinstance(values, (np.ndarray, list, tuple)):
        arr = np.asarray(values, dtype=np.float64).ravel()
        if not len(arr):
            return None, arr
        return float(arr[0]), arr[1:]
    if isinstance(values, np.generic):
        values = values.item()
    return values, np.empty(0)


# children of <workbook> that come after <calcPr> (ECMA-376 Part 1, 18.2.27 CT_Workbook)
_AFTER_CALC_PR = ("oleSize", "customWorkbookViews", "pivotCaches", "smartTagPr",
                  "smartTagTypes", "webPublishing", "fileRecoveryPr", "webPublishObjects",
                  "extLst")


def _insert_calc_pr(xml: bytes, file: str) -> bytes:
    """workbook.xml with ``<calcPr fullCalcOnLoad="1"/>`` put in its place."""
    root = re.search(rb"<([\w.\-]+:)?workbook(?=[\s>])", xml)
    if root is None:
        raise WorkbookError(f"{file}: xl/workbook.xml is damaged.")
    p = root[1] or b""
    at = None
    for name in _AFTER_CALC_PR:
        m = re.search(rb"<" + re.escape(p) + name.encode() + rb"(?=[\s/>])", xml)
        if m is not None and (at is None or m.start() < at):
            at = m.start()
    if at is None:
        at = xml.rfind(b"</" + p + b"workbook>")
        if at < 0:
            raise WorkbookError(f"{file}: xl/workbook.xml is damaged.")
    return xml[:at] + b"<" + p + b'calcPr fullCalcOnLoad="1"/>' + xml[at:]


def _result_fn(
    pat: Patterns, value: object, where: str
) -> Callable[[re.Match[bytes] | None], bytes]:
    return lambda cm: formula_result_cell(cm, pat, value, where)


def _check_cell(file: str, sheet: str, row: int, col: int) -> None:
    if not (1 <= row <= MAX_ROW and 1 <= col <= MAX_COL):
        raise WorkbookError(f"{file}: sheet {sheet!r}: row {row}, column {col} is outside the "
                            f"sheet (at most {MAX_ROW} rows and {MAX_COL} columns).")


__all__ = ["SHEET_LEVEL", "write_package"]
