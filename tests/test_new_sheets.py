"""The sheets the fill adds, as a colleague opens or prints them.

openpyxl (an outside reader) reads back the print set-up (ECMA-376 Part 1: ``pageSetup``
18.3.1.63, ``pageSetUpPr`` 18.3.1.65, the ``_xlnm.Print_Titles`` defined name 18.2.6)
and the column widths (in characters, 18.3.1.13).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from test_fill_sheets import add_prices

from sheetvol.fill.job import FillOptions, fill_file

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")
ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture
def filled(tmp_path):
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    wb.add_worksheet("About").write("A1", "invented prices")
    add_prices(wb, "Prices", n=60)
    wb.define_name("About!_xlnm.Print_Area", "=About!$A$1:$B$2")  # a name of the user's
    wb.close()
    return fill_file(src, FillOptions(chart=True))


def test_new_sheets_print_landscape_one_page_wide_with_the_header_row(filled):
    wb = openpyxl.load_workbook(filled.output)
    for name in ("sheetvol notes", "sheetvol charts"):
        ws = wb[name]
        assert ws.page_setup.orientation == "landscape", name
        assert (ws.page_setup.fitToWidth, ws.page_setup.fitToHeight) == (1, 0), name
        assert ws.sheet_properties.pageSetUpPr.fitToPage, name
        assert ws.print_title_rows == "$1:$1", name
    assert wb["About"].print_area == "'About'!$A$1:$B$2"  # the user's own name is kept


def test_refilling_keeps_one_print_title_per_sheet(filled, tmp_path):
    again = fill_file(filled.output, FillOptions(chart=True, output=tmp_path / "again.xlsx"))
    import zipfile

    with zipfile.ZipFile(again.output) as zf:
        text = zf.read("xl/workbook.xml").decode()
    assert text.count("_xlnm.Print_Titles") == 2
    ws = openpyxl.load_workbook(again.output)["sheetvol notes"]
    assert ws.print_title_rows == "$1:$1"


def test_notes_sheet_labels_are_not_clipped(tmp_path):
    # the demo desk: its notes hold the trade review's labels too
    report = fill_file(ROOT / "workbooks" / "demo-desk.xlsx",
                       FillOptions(output=tmp_path / "desk.xlsx"))
    ws = openpyxl.load_workbook(report.output)["sheetvol notes"]
    width = ws.column_dimensions["A"].width
    # a label with a value beside it must fit its column (text beside an empty cell may
    # run on into it, as spreadsheet programs show it)
    for row in ws.iter_rows():
        a, b = row[0].value, row[1].value if len(row) > 1 else None
        if a is not None and b is not None:
            assert len(str(a)) <= width, (a, width)
