"""Small edits of worksheet XML outside the rows, and the XML of a new sheet.

``dimension`` and ``<cols>`` sit before ``<sheetData>``; they are edited as text so
everything else in the part stays byte for byte.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Callable

from sheetvol.workbook._rowedit import SheetEdits, text_cell, value_cell
from sheetvol.workbook._sheetxml import SheetStream, cell_name, col_letters, parse_ref
from sheetvol.workbook.edits import NewSheet, Styled

NS_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"


def set_first_attr(text: str, element: str, attr: str, value: str) -> str:
    m = re.search(rf"<([\w.\-]+:)?{element}(?=[\s>])[^>]*>", text)
    if m is None:
        return text
    tag = m[0]
    new_tag, n = re.subn(rf'(\s{attr}\s*=\s*)(["\']).*?\2', rf'\g<1>"{value}"', tag, count=1)
    if not n:
        new_tag = tag[:-1] + f' {attr}="{value}">' if not tag.endswith("/>") else tag
    return text[: m.start()] + new_tag + text[m.end():]


def edit_head(stream: SheetStream, edits: SheetEdits, widths: dict[int, float]) -> bytes:
    """Grow ``dimension`` and add ``<col>`` widths in the part before ``<sheetData>``."""
    head = stream.head
    p = re.escape(stream.prefix)
    ext = edits.extent()
    if ext is not None:
        m = re.search(rb"<" + p + rb"dimension(?=[\s>/])[^>]*?\sref\s*=\s*[\"']([^\"']*)[\"']",
                      head)
        if m:
            try:
                top, left, bottom, right = parse_ref(m[1].decode())
            except ValueError:
                top, left, bottom, right = ext
            top, left = min(top, ext[0]), min(left, ext[1])
            bottom, right = max(bottom, ext[2]), max(right, ext[3])
            ref = f"{col_letters(left)}{top}:{col_letters(right)}{bottom}".encode()
            head = head[: m.start(1)] + ref + head[m.end(1):]
    if widths:
        head = edit_cols(head, stream.prefix, widths)
    return head


def edit_cols(head: bytes, prefix: bytes, widths: dict[int, float]) -> bytes:
    p = re.escape(prefix)
    pre = prefix.decode()
    m = re.search(rb"<" + p + rb"cols(?=[\s>/])[^>]*?(/>|>(.*?)</" + p + rb"cols>)", head, re.S)
    existing: list[tuple[int, int, bytes]] = []
    if m and m[2]:
        for cm in re.finditer(rb"<" + p + rb"col(?=[\s>/])[^>]*?(?:/>|>.*?</" + p + rb"col>)",
                              m[2], re.S):
            lo = re.search(rb"""\smin\s*=\s*["'](\d+)""", cm[0])
            hi = re.search(rb"""\smax\s*=\s*["'](\d+)""", cm[0])
            if lo and hi:
                existing.append((int(lo[1]), int(hi[1]), cm[0]))
            else:
                existing.append((0, 0, cm[0]))
    items = list(existing)
    for col, width in sorted(widths.items()):
        new = (f'<{pre}col min="{col}" max="{col}" width="{width!r}" customWidth="1"/>').encode()
        same = [i for i, (lo, hi, _) in enumerate(items) if lo == hi == col]
        if same:
            items[same[0]] = (col, col, new)
        elif not any(lo <= col <= hi for lo, hi, _ in items):
            items.append((col, col, new))
    items.sort(key=lambda x: x[0])
    body = b"".join(x for _, _, x in items)
    block = b"<" + prefix + b"cols>" + body + b"</" + prefix + b"cols>"
    if m:
        return head[: m.start()] + block + head[m.end():]
    ms = re.search(rb"<" + p + rb"sheetData(?=[\s>/])", head)
    at = ms.start() if ms else len(head)
    return head[:at] + block + head[at:]


def new_sheet_xml(ns: NewSheet, header_style: int,
                  style_of: Callable[[str, bool], int] | None = None,
                  date1904: bool = False) -> bytes:
    """A plain worksheet part for a :class:`NewSheet` (first row bold, inline strings).

    ``style_of(number_format, bold)`` gives the style index of a :class:`Styled` cell;
    a date inside one becomes a serial day number (``date1904``: the 1904 system).
    """
    rows_xml = []
    max_col = 0
    for i, row in enumerate(ns.rows, start=1):
        cells = []
        for j, value in enumerate(row, start=1):
            style = header_style if i == 1 else None
            ref = cell_name(i, j)
            if isinstance(value, Styled):
                if style_of is not None and value.number_format:
                    style = style_of(value.number_format, i == 1)
                value = value.value
                if isinstance(value, (dt.date, dt.datetime)):
                    from sheetvol.functions.cells import datetime_to_serial

                    value = datetime_to_serial(value, date1904=date1904)
            xml = value_cell(ref, value, style) if not isinstance(value, str) else text_cell(
                ref, value, style)
            if xml is None and isinstance(value, (dt.date, dt.datetime)):
                xml = text_cell(ref, value.isoformat(), style)
            if xml:
                cells.append(xml)
                max_col = max(max_col, j)
        if cells:
            rows_xml.append(f'<row r="{i}">{"".join(cells)}</row>')
    dim = f"A1:{cell_name(max(len(ns.rows), 1), max(max_col, 1))}"
    cols = ""
    if ns.widths:
        cols = "<cols>" + "".join(
            f'<col min="{j}" max="{j}" width="{float(w)!r}" customWidth="1"/>'
            for j, w in enumerate(ns.widths, start=1) if w) + "</cols>"
        if cols == "<cols></cols>":
            cols = ""
    return (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<worksheet xmlns="{NS_MAIN}" xmlns:r="{NS_REL}">'
        f'<dimension ref="{dim}"/><sheetViews><sheetView workbookViewId="0"/></sheetViews>'
        f'<sheetFormatPr defaultRowHeight="15"/>{cols}<sheetData>{"".join(rows_xml)}</sheetData>'
        '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>'
        "</worksheet>"
    ).encode()
