"""Which sheets the fill takes for price sheets, and where its columns go.

A price sheet needs a date column and a close column with numbers below the header.
Other sheets (an item list with a "Price" column, a one-letter "c" header, a stray "C"
cell) are left alone with one line in the summary; they are an error only when the
user named them or when no sheet qualifies. Real workbooks in tmp_path (xlsxwriter
writes them, openpyxl reads the result back).
"""

from __future__ import annotations

import zipfile
from pathlib import Path

import pytest

from sheetvol.fill.job import USER_ERRORS, FillOptions, fill_file

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")


def add_prices(wb, name: str = "Prices", n: int = 40) -> None:
    ws = wb.add_worksheet(name)
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    for i in range(n):
        ws.write_row(i + 1, 0, [45000 + i, 101 + i % 3, 99 - i % 2, 100 + (i % 5) * 0.5])


def add_items(wb) -> None:
    """An ordinary list: "Price" beside "Item", as a spreadsheet table A1:C3."""
    ws = wb.add_worksheet("Items")
    ws.add_table("A1:C3", {"data": [["Bolt", 0.25, 4], ["Nut", 0.1, 9]],
                           "columns": [{"header": "Item"}, {"header": "Price"},
                                       {"header": "Qty"}]})


def add_letters(wb) -> None:
    """Columns headed a, b, c with numbers: "c" alone is not a close column."""
    ws = wb.add_worksheet("Letters")
    ws.write_row(0, 0, ["a", "b", "c"])
    for i in range(5):
        ws.write_row(i + 1, 0, [i, 2 * i, 3 * i])


def add_codes(wb) -> None:
    """A stray "C" cell: a code list whose values are letters."""
    ws = wb.add_worksheet("Codes")
    ws.write_column(0, 0, ["C", "A", "B", "D"])


def used_range(path: Path, sheet: str) -> tuple[str, int]:
    ws = openpyxl.load_workbook(path)[sheet]
    return ws.dimensions, ws.max_column


def table_ref(path: Path) -> str:
    with zipfile.ZipFile(path) as zf:
        name = next(n for n in zf.namelist() if n.startswith("xl/tables/"))
        text = zf.read(name).decode()
    import re

    return re.search(r'<table [^>]*\bref="([^"]+)"', text)[1]


def test_ordinary_sheets_before_the_price_sheet_are_left_alone(tmp_path):
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    add_items(wb)
    add_letters(wb)
    add_codes(wb)
    add_prices(wb)
    wb.close()
    report = fill_file(src)
    assert [s.sheet for s in report.sheets] == ["Prices"]
    out = report.output
    # the ordinary sheets are as they were: same used range, the table not widened
    assert used_range(out, "Items") == ("A1:C3", 3)
    assert table_ref(out) == "A1:C3"
    assert used_range(out, "Letters") == ("A1:C6", 3)
    assert used_range(out, "Codes") == ("A1:A4", 1)
    # one summary line names each skipped sheet and why
    lines = [ln for ln in report.summary() if "not price sheets" in ln]
    assert len(lines) == 1, report.summary()
    for name in ("Items", "Letters", "Codes"):
        assert f'"{name}"' in lines[0]
    assert "no date column" in lines[0]
    assert "--sheet" in lines[0]  # the way to say which sheet holds prices


def test_a_named_sheet_that_does_not_qualify_is_an_error(tmp_path):
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    add_items(wb)
    add_prices(wb)
    wb.close()
    with pytest.raises(USER_ERRORS, match=r'book\.xlsx, sheet "Items": .*no date column'):
        fill_file(src, FillOptions(sheets=("Items",)))


def test_no_sheet_qualifies_is_an_error_listing_the_sheets(tmp_path):
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    add_items(wb)
    add_codes(wb)
    wb.close()
    with pytest.raises(USER_ERRORS) as err:
        fill_file(src)
    text = str(err.value)
    assert "book.xlsx" in text and "'Items'" in text and "'Codes'" in text
    assert "date column" in text and "--sheet" in text


def test_a_close_column_of_text_does_not_qualify(tmp_path):
    # A Date and a Close header, but the Close column holds words (a form, not prices).
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Form")
    ws.write_row(0, 0, ["Date", "Close"])
    ws.write_row(1, 0, ["Monday", "early"])
    add_prices(wb)
    wb.close()
    report = fill_file(src)
    assert [s.sheet for s in report.sheets] == ["Prices"]
    line = next(ln for ln in report.summary() if "not price sheets" in ln)
    assert '"Form" (no numbers below the Close header)' in line


def test_a_note_column_right_of_the_table_is_kept_and_the_summary_says_where(tmp_path):
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Prices")
    data = [[45000 + i, 101 + i % 3, 99 - i % 2, 100 + (i % 5) * 0.5] for i in range(30)]
    ws.add_table("A1:D31", {"name": "Bars", "data": data,
                            "columns": [{"header": h} for h in ("Date", "High", "Low", "Close")]})
    ws.write("E1", "Note")
    ws.write("E5", "roll day")
    wb.close()
    report = fill_file(src)
    letters = [w.letter for w in report.written]
    assert letters[0] == "F"  # right of the note column, which keeps its cells
    ws = openpyxl.load_workbook(report.output)["Prices"]
    assert (ws["E1"].value, ws["E5"].value) == ("Note", "roll day")
    assert ws.tables["Bars"].ref == "A1:D31"  # the table is not stretched over the note
    text = "\n".join(report.summary())
    assert ('table "Bars" (A1:D31) ends at column D and column E holds other cells '
            "(E1 'Note')") in text
    assert f"went to {letters[0]}:{letters[-1]}, outside the table" in text


def test_a_user_sheet_with_our_sheet_name_gets_a_way_out_that_exists(tmp_path):
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    add_prices(wb)
    wb.add_worksheet("sheetvol notes").write("A1", "my own notes")
    wb.close()
    with pytest.raises(USER_ERRORS) as err:
        fill_file(src)
    text = str(err.value)
    assert "'sheetvol notes'" in text and "rename that sheet" in text
    assert "choose another name" not in text  # there is no option to choose one


def test_writing_over_a_value_names_the_real_option(tmp_path):
    import numpy as np

    from sheetvol.workbook import NewColumn, Package, WorkbookError, write_package

    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    add_prices(wb)
    wb.close()
    edit = NewColumn(sheet="Prices", col=4, header_row=1, header="Mine", first_row=2,
                     values=np.ones(3), number_format="General", replace=False)
    with pytest.raises(WorkbookError) as err:
        write_package(Package.open(src), tmp_path / "out.xlsx", [edit])
    text = str(err.value)
    assert "D1" in text or "D2" in text
    assert "allow replacing" not in text and "replace=True" in text


def test_a_sheet_without_dates_is_filled_when_named_with_its_close_column(tmp_path):
    # A closes-only export: the user names the sheet and the column, so it is taken, in row
    # order, and the summary says so.
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Closes")
    ws.write("A1", "Close")
    for i in range(30):
        ws.write(i + 1, 0, 100 + (i % 5) * 0.5)
    wb.close()
    with pytest.raises(USER_ERRORS, match="no date column"):
        fill_file(src, FillOptions(sheets=("Closes",)))
    report = fill_file(src, FillOptions(sheets=("Closes",), columns={"close": "A"}))
    assert [s.sheet for s in report.sheets] == ["Closes"]
    assert any("no date column: rows taken as oldest first" in w for w in report.warnings)


def test_merged_cells_right_of_the_prices_are_not_written_into(tmp_path):
    # Found by mutating workbooks: a merged block where the new columns would go (here a
    # comment box F2:H6 beside the bars) hid the values written under it, and the summary
    # said nothing. A spreadsheet shows only a merged block's top-left cell.
    src = tmp_path / "book.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    add_prices(wb)
    wb.worksheets()[0].merge_range("F2:H6", "desk comment: roll on the 14th")
    wb.close()
    report = fill_file(src)
    letters = [w.letter for w in report.written]
    assert letters[0] == "I", letters  # right of the merged block
    ws = openpyxl.load_workbook(report.output)["Prices"]
    assert [str(r) for r in ws.merged_cells.ranges] == ["F2:H6"]
    assert ws["F2"].value == "desk comment: roll on the 14th"
    assert ws["I1"].value == report.written[0].spec.header
    text = "\n".join(report.summary())
    assert f"columns written: {letters[0]} " in text
