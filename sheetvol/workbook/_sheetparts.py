"""Small edits of worksheet XML outside the rows, and the XML of a new sheet.

``dimension`` and ``<cols>`` sit before ``<sheetData>``; they are edited as text so
everything else in the part stays byte for byte.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Callable

from sheetvol.workbook._rowedit import SheetEdits, text_cell, value_cell
from sheetvol.workbook._sheetxml import SheetStream, cell_name, col_letters, escape_text, parse_ref
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
    widths = fitted_widths(ns.rows, ns.widths or [])
    cols = "".join(f'<col min="{j}" max="{j}" width="{float(w)!r}" customWidth="1"/>'
                   for j, w in enumerate(widths, start=1) if w)
    cols = f"<cols>{cols}</cols>" if cols else ""
    return (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<worksheet xmlns="{NS_MAIN}" xmlns:r="{NS_REL}">'
        # printed landscape, one page wide, as many pages down as it takes (18.3.1.65)
        '<sheetPr><pageSetUpPr fitToPage="1"/></sheetPr>'
        f'<dimension ref="{dim}"/><sheetViews><sheetView workbookViewId="0"/></sheetViews>'
        f'<sheetFormatPr defaultRowHeight="15"/>{cols}<sheetData>{"".join(rows_xml)}</sheetData>'
        '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>'
        '<pageSetup orientation="landscape" fitToWidth="1" fitToHeight="0"/>'
        "</worksheet>"
    ).encode()


MAX_FITTED_WIDTH = 60.0  # characters; longer text wraps onto the next column's space anyway


def _shown(value: object) -> str:
    value = value.value if isinstance(value, Styled) else value
    if value is None or isinstance(value, (dt.date, dt.datetime)):
        return ""  # dates show in their (short) number format
    return value if isinstance(value, str) else str(value)


def fitted_widths(rows: list[list[object]], widths: list[float]) -> list[float]:
    """Column widths (characters) wide enough for text that has a value to its right.

    Text beside an empty cell runs on into it, as spreadsheet programs show it; text
    beside a value would be cut off, so its column is widened (up to
    ``MAX_FITTED_WIDTH``; the bold first row counts a tenth wider).

    Examples
    --------
    >>> fitted_widths([["Title"], ["Volatility measure", "ATR"], ["A long sentence alone"]],
    ...               [10])
    [20.0]
    """
    out = [float(w or 0) for w in widths]
    for i, row in enumerate(rows):
        for j, value in enumerate(row[:-1]):
            if _shown(row[j + 1]) == "":
                continue
            need = min(len(_shown(value)) * (1.1 if i == 0 else 1.0) + 2, MAX_FITTED_WIDTH)
            out.extend([0.0] * (j + 1 - len(out)))
            if need > out[j] and _shown(value):
                out[j] = round(need, 1)
    return out


def add_print_titles(workbook_xml: str, index: int, name: str) -> str:
    """Repeat row 1 of sheet number ``index`` (0-based) on every printed page.

    A ``_xlnm.Print_Titles`` defined name local to the sheet (ECMA-376 Part 1, 18.2.6);
    one the sheet already has is left as it is.

    Examples
    --------
    >>> print(add_print_titles('<workbook><sheets/><calcPr/></workbook>', 0, "Review"))
    <workbook><sheets/><definedNames><definedName name="_xlnm.Print_Titles" \
localSheetId="0">'Review'!$1:$1</definedName></definedNames><calcPr/></workbook>
    """
    root = re.search(r"<([\w.\-]+:)?workbook(?=[\s>])", workbook_xml)
    p = (root[1] if root else "") or ""
    for m in re.finditer(rf"<{re.escape(p)}definedName\b[^>]*>", workbook_xml):
        if ("_xlnm.Print_Titles" in m[0]
                and re.search(rf'localSheetId\s*=\s*["\']{index}["\']', m[0])):
            return workbook_xml
    quoted = "'" + name.replace("'", "''") + "'"
    entry = (f'<{p}definedName name="_xlnm.Print_Titles" localSheetId="{index}">'
             f"{escape_text(quoted)}!$1:$1</{p}definedName>")
    end = re.search(rf"</{re.escape(p)}definedNames>", workbook_xml)
    if end:
        return workbook_xml[:end.start()] + entry + workbook_xml[end.start():]
    block = f"<{p}definedNames>{entry}</{p}definedNames>"
    # definedNames follows sheets (and functionGroups, externalReferences): 18.2.27
    after = None
    for tag in ("externalReferences", "functionGroups", "sheets"):
        after = (re.search(rf"</{re.escape(p)}{tag}>", workbook_xml)
                 or re.search(rf"<{re.escape(p)}{tag}\b[^>]*/>", workbook_xml))
        if after:
            break
    if after is None:
        raise ValueError("workbook part without a sheet list")
    return workbook_xml[:after.end()] + block + workbook_xml[after.end():]
