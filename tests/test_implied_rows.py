"""Rows and cells that omit their reference keep their place across the reader's chunks.

A sheet part may leave out ``r`` on ``<row>`` and ``<c>``: each row is then the one after the
previous, each cell the one right of the previous (ECMA-376 Part 1, 18.3.1.73 and
18.3.1.4: both attributes are optional). The price reader reads a sheet in chunks of
several MiB; the row number must carry from one chunk to the next.
"""

from __future__ import annotations

import zipfile
from pathlib import Path

import numpy as np
from openpyxl import Workbook

from sheetvol.workbook import Package
from sheetvol.workbook._sheetxml import CHUNK

ROWS = 200_000  # about 11 MiB of sheet XML: more than one chunk


def _book_without_references(path: Path) -> np.ndarray:
    wb = Workbook()
    wb.active.title = "Prices"
    wb.active.append(["Date", "Close"])
    wb.save(path)
    close = np.round(100 + np.cumsum(np.random.default_rng(5).normal(0, 1, ROWS)), 4)
    rows = "".join(f'<row><c><v>{45000 + i}</v></c><c><v>{c!r}</v></c></row>'
                   for i, c in enumerate(close.tolist()))
    header = '<row><c t="inlineStr"><is><t>Date</t></is></c><c t="inlineStr"><is><t>Close' \
             '</t></is></c></row>'
    xml = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>'
           '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
           f"<sheetData>{header}{rows}</sheetData></worksheet>").encode()
    assert len(xml) > CHUNK
    src = path.with_suffix(".tmp.xlsx")
    path.rename(src)
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = xml if info.filename == "xl/worksheets/sheet1.xml" else zin.read(info)
            zout.writestr(info.filename, data)
    src.unlink()
    return close


def test_implied_rows_are_read_in_place_across_chunks(tmp_path):
    path = tmp_path / "implied.xlsx"
    close = _book_without_references(path)
    pkg = Package.open(path)
    got = pkg.read_columns("Prices", [1, 2], first_row=2)
    assert len(got[2].numbers) == ROWS
    # row k + 2 of the sheet holds bar k: the numbers as written, none shifted
    np.testing.assert_array_equal(got[2].numbers, close)
    np.testing.assert_array_equal(got[1].numbers, 45000 + np.arange(ROWS))
