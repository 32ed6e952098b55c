"""A new one-sheet workbook written row by row (a CSV export's rows, for the fill).

The rows stream into the sheet part, so a long export is never held as XML in memory.
Only the parts every reader needs are written (ECMA-376 Part 1, 12.2 and 18.2): content
types, the package and workbook relationships, the workbook, the styles and the sheet.
"""

from __future__ import annotations

import datetime as dt
import math
import zipfile
from collections.abc import Iterable, Sequence
from pathlib import Path

from sheetvol.workbook._rowedit import text_cell, value_cell
from sheetvol.workbook._sheetparts import NS_MAIN, NS_REL
from sheetvol.workbook._sheetxml import cell_name, escape_text
from sheetvol.workbook._styles import MINIMAL_STYLES, StyleBook

__all__ = ["DATETIME_FORMAT", "DATE_FORMAT", "write_new_workbook"]

DATE_FORMAT = "yyyy-mm-dd"
DATETIME_FORMAT = "yyyy-mm-dd hh:mm"
_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_DOC_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_CT = "application/vnd.openxmlformats-officedocument.spreadsheetml"


def write_new_workbook(path: str | Path, sheet: str, rows: Iterable[Sequence[object]]) -> None:
    """Write ``rows`` (from row 1, column A) as the one sheet of a new workbook.

    Parameters
    ----------
    path : str or Path
        The ``.xlsx`` file to write.
    sheet : str
        The sheet's name (at most 31 characters, none of ``[]:*?/\\``).
    rows : iterable of sequences
        Cell values: str (text), int/float (numbers), date/datetime (dates, shown as
        ``yyyy-mm-dd``, or with the time when it is not midnight), None (no cell).

    Examples
    --------
    >>> import datetime as dt, tempfile, openpyxl
    >>> out = Path(tempfile.mkdtemp()) / "p.xlsx"
    >>> write_new_workbook(out, "Prices", [["Date", "Close"], [dt.date(2025, 3, 14), 101.5]])
    >>> ws = openpyxl.load_workbook(out)["Prices"]
    >>> ws["A2"].value, ws["A2"].number_format, ws["B2"].value
    (datetime.datetime(2025, 3, 14, 0, 0), 'yyyy-mm-dd', 101.5)
    """
    from sheetvol.functions.cells import datetime_to_serial

    book = StyleBook(MINIMAL_STYLES)
    date_style = book.xf(book.number_format_id(DATE_FORMAT))
    time_style = book.xf(book.number_format_id(DATETIME_FORMAT))
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("[Content_Types].xml", (
            '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
            '<Default Extension="rels" '
            'ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
            '<Default Extension="xml" ContentType="application/xml"/>'
            f'<Override PartName="/xl/workbook.xml" ContentType="{_CT}.sheet.main+xml"/>'
            f'<Override PartName="/xl/worksheets/sheet1.xml" '
            f'ContentType="{_CT}.worksheet+xml"/>'
            f'<Override PartName="/xl/styles.xml" ContentType="{_CT}.styles+xml"/></Types>'))
        zf.writestr("_rels/.rels", (
            '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            f'<Relationships xmlns="{_PKG_REL}"><Relationship Id="rId1" '
            f'Type="{_DOC_REL}/officeDocument" Target="xl/workbook.xml"/></Relationships>'))
        zf.writestr("xl/workbook.xml", (
            '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            f'<workbook xmlns="{NS_MAIN}" xmlns:r="{NS_REL}"><sheets>'
            f'<sheet name="{escape_text(sheet)}" sheetId="1" r:id="rId1"/></sheets></workbook>'))
        zf.writestr("xl/_rels/workbook.xml.rels", (
            '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            f'<Relationships xmlns="{_PKG_REL}">'
            f'<Relationship Id="rId1" Type="{_DOC_REL}/worksheet" Target="worksheets/sheet1.xml"/>'
            f'<Relationship Id="rId2" Type="{_DOC_REL}/styles" Target="styles.xml"/>'
            "</Relationships>"))
        zf.writestr("xl/styles.xml", book.finish())
        with zf.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as out:
            out.write(('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                       f'<worksheet xmlns="{NS_MAIN}" xmlns:r="{NS_REL}"><sheetData>'
                       ).encode())
            for r, row in enumerate(rows, start=1):
                cells = []
                for c, value in enumerate(row, start=1):
                    ref = cell_name(r, c)
                    if isinstance(value, str):
                        cells.append(text_cell(ref, value, None))
                    elif isinstance(value, (dt.date, dt.datetime)):
                        plain = not isinstance(value, dt.datetime) or value.time() == dt.time()
                        cells.append(value_cell(ref, datetime_to_serial(value),
                                                date_style if plain else time_style) or "")
                    elif value is not None and not (isinstance(value, float)
                                                    and not math.isfinite(value)):
                        cells.append(value_cell(ref, value, None) or "")
                if cells:
                    out.write(f'<row r="{r}">{"".join(cells)}</row>'.encode())
            out.write(b"</sheetData></worksheet>")
