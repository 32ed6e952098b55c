"""Writing into a package (sheetvol.workbook.writer).

Each test writes a real workbook (made by xlsxwriter, or edited by hand for producer
variants) and reads the result back with openpyxl, an outside reader, or checks the
XML against the rules of ECMA-376 Part 1 section 18.3 (rows ascending, cells in column
order within a row, array formulas with a ref).
"""

from __future__ import annotations

import datetime as dt
import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
from test_package import prefixed, replace_part

from sheetvol.workbook import (
    CellResult,
    LineChart,
    NewColumn,
    NewSheet,
    Package,
    SpillResult,
    Styled,
    WorkbookError,
    write_package,
)
from sheetvol.workbook._sheetxml import col_index

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")


def book(path: Path, rows: int = 8) -> Path:
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["Date", "Close", "Vol"])
    for i in range(rows):
        ws.write_number(i + 1, 0, 45000 + i)
        ws.write_number(i + 1, 1, 100 + i * 0.5)
        ws.write_number(i + 1, 2, 1000 + i)
    ws.write_formula(rows + 2, 1, "=SV_ATR(B2:B9,3)", None, 0)
    ws.write_formula(rows + 3, 1, "=SV_NAME(B2)", None, "")
    ws.write_number(rows + 3, 4, 42)  # an obstacle in column E
    wb.add_worksheet("Notes")
    wb.close()
    return path


def sheet_xml(path: Path, part: str = "xl/worksheets/sheet1.xml") -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read(part)


def check_order(xml: bytes) -> None:
    """Rows ascending by r; cells ascending by column within each row (ECMA-376 18.3.1)."""
    rows = re.findall(rb'<row r="(\d+)"[^>]*?(?:/>|>(.*?)</row>)', xml, re.S)
    numbers = [int(r) for r, _ in rows]
    assert numbers == sorted(numbers) and len(set(numbers)) == len(numbers)
    for r, inner in rows:
        cols = [col_index(c) for c, rr in re.findall(rb'<c r="([A-Z]+)(\d+)"', inner)]
        assert cols == sorted(cols) and len(set(cols)) == len(cols), r
        assert all(rr == r for _, rr in re.findall(rb'<c r="([A-Z]+)(\d+)"', inner))


def test_new_column_bit_for_bit(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx", rows=8)
    # doubles across many binades plus edge values: repr() is the shortest text that
    # reads back to the same double (Python docs, float.__repr__; David Gay's algorithm)
    rng = np.random.default_rng(0)
    values = rng.standard_normal(8) * 10.0 ** rng.integers(-300, 300, 8)
    values[[0, 3]] = [5e-324, -0.0]
    values[5] = np.nan  # -> no cell
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [NewColumn(
        "Data", col=4, header_row=1, header="σ 3 <close> & co", first_row=2, values=values,
        number_format="0.000000", width=14.0)])
    ws = openpyxl.load_workbook(out)["Data"]
    assert ws["D1"].value == "σ 3 <close> & co"
    assert ws["D1"].font.b is True
    for i, v in enumerate(values):
        got = ws.cell(2 + i, 4).value
        if np.isnan(v):
            assert got is None
        else:
            assert np.float64(got).view(np.int64) == np.float64(v).view(np.int64)
            assert ws.cell(2 + i, 4).number_format == "0.000000"
    assert ws.column_dimensions["D"].width == 14.0
    assert ws["A2"].value == 45000 and ws["C9"].value == 1007  # old cells intact
    xml = sheet_xml(out)
    assert b'<dimension ref="A1:E12"/>' in xml
    check_order(xml)


def test_columns_between_existing_and_missing_rows(tmp_path: Path) -> None:
    """New cells land in column order inside rows and create missing rows in order."""
    src = book(tmp_path / "in.xlsx", rows=3)
    out = tmp_path / "out.xlsx"
    # Data has rows 1-4, 6 and 7; column D gets rows 2-15. Notes is an empty sheet.
    values = np.arange(14, dtype=float) + 0.25
    edits = [NewColumn("Data", 4, 1, "x", 2, values, "0.00"),
             NewColumn("Notes", 2, 3, "y", 4, np.array([1.5, np.nan, 2.5]), "0.0")]
    write_package(Package.open(src), out, edits)
    check_order(sheet_xml(out))
    check_order(sheet_xml(out, "xl/worksheets/sheet2.xml"))
    wb = openpyxl.load_workbook(out)
    assert [wb["Data"].cell(r, 4).value for r in range(2, 16)] == values.tolist()
    assert wb["Data"]["B6"].value == "=SV_ATR(B2:B9,3)"  # rows that existed keep their cells
    assert wb["Notes"]["B3"].value == "y" and wb["Notes"]["B4"].value == 1.5
    assert wb["Notes"]["B5"].value is None and wb["Notes"]["B6"].value == 2.5


def test_insert_left_of_existing_cells(tmp_path: Path) -> None:
    """Writing into column B when A and C are used keeps A, B, C order in every row."""
    src = book(tmp_path / "in.xlsx", rows=4)
    out = tmp_path / "out.xlsx"
    edit = NewColumn("Data", 2, 1, "new B", 2, np.array([7.0, 8.0, np.nan, 9.0]), "0.0")
    write_package(Package.open(src), out, [edit])
    check_order(sheet_xml(out))
    ws = openpyxl.load_workbook(out)["Data"]
    assert [ws.cell(r, 2).value for r in range(1, 6)] == ["new B", 7.0, 8.0, None, 9.0]
    assert [ws.cell(r, 3).value for r in range(2, 6)] == [1000, 1001, 1002, 1003]
    # replace=True dropped the old Close values in B from the header row down,
    # including the formulas below (they were in column B)
    assert ws["B7"].value is None


# Text for a new column: XML's five escapes (&, <, > and quotes; W3C XML 1.0, 2.4), outer
# spaces (kept only with xml:space="preserve", XML 1.0 2.10) and non-ASCII text.
TEXTS = ["stop hit", ' a < b & "c" > d ', "σ × 2 — naïve", "tab\there"]


def text_column() -> np.ndarray:
    """Rows 2-10 of column D: text, numbers and each kind of blank (NaN, None, "")."""
    return np.array([TEXTS[0], 1.25, np.nan, None, "", TEXTS[1], TEXTS[2], 7, TEXTS[3]],
                    dtype=object)


def check_text_column(ws) -> None:
    want = [TEXTS[0], 1.25, None, None, None, TEXTS[1], TEXTS[2], 7, TEXTS[3]]
    assert [ws.cell(r, 4).value for r in range(2, 11)] == want


def test_text_in_new_column(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx", rows=4)  # E8 holds 42: row 8 gets D before it
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [NewColumn("Data", 4, 1, "Result", 2, text_column(),
                                                     "0.00", width=20.0)])
    xml = sheet_xml(out)
    check_order(xml)
    ws = openpyxl.load_workbook(out)["Data"]
    check_text_column(ws)
    assert ws["D2"].number_format == ws["D3"].number_format == "0.00"
    assert ws["E8"].value == 42 and ws["B7"].value == "=SV_ATR(B2:B9,3)"
    for r in (4, 5, 6):  # NaN, None and "" give no cell at all
        assert f'r="D{r}"'.encode() not in xml
    assert (b'<t xml:space="preserve"> a &lt; b &amp; &quot;c&quot; &gt; d </t>'
            in xml)
    assert "<t>σ × 2 — naïve</t>".encode() in xml
    # a list works too; a second write replaces text by numbers (and back)
    again = tmp_path / "again.xlsx"
    write_package(Package.open(out), again, [NewColumn("Data", 4, 1, "R", 2, [0.5, "x"], "0.0")])
    ws = openpyxl.load_workbook(again)["Data"]
    assert [ws.cell(r, 4).value for r in range(1, 11)] == ["R", 0.5, "x"] + [None] * 7
    # anything else is refused, naming the column and the row
    bad = np.array([1.0, dt.date(2024, 4, 11)], dtype=object)
    with pytest.raises(WorkbookError, match=r"column D \('Result'\): the value for row 3 is "
                                            r"date"):
        write_package(Package.open(src), tmp_path / "x.xlsx",
                      [NewColumn("Data", 4, 1, "Result", 2, bad, "0.00")])


@pytest.mark.slow
def test_text_in_new_column_through_libreoffice(tmp_path: Path, libreoffice) -> None:
    """LibreOffice re-saves the text cells with the same text (its own writer, read back)."""
    src = book(tmp_path / "in.xlsx", rows=4)
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [NewColumn("Data", 4, 1, "Result", 2, text_column(),
                                                     "0.00")])
    ws = openpyxl.load_workbook(libreoffice(out))["Data"]
    check_text_column(ws)
    assert ws["D1"].value == "Result" and ws["E8"].value == 42


def test_new_sheet_number_formats(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx")
    out = tmp_path / "out.xlsx"
    rows = [["Item", Styled("Value", "@")],
            ["share", Styled(0.25, "0.0%")],
            ["R", Styled(0.3449368474971529, "0.00")],
            ["day", Styled(dt.date(2024, 4, 11), "yyyy-mm-dd")],
            ["money", Styled(1234.5, "#,##0.00")],
            ["plain", 3.5]]
    with zipfile.ZipFile(src) as zf:
        styles_before = zf.read("xl/styles.xml").decode()
    write_package(Package.open(src), out, [NewSheet("Review", rows)])
    ws = openpyxl.load_workbook(out)["Review"]
    got = [(ws.cell(r, 2).value, ws.cell(r, 2).number_format) for r in range(1, 7)]
    assert got == [("Value", "@"), (0.25, "0.0%"), (0.3449368474971529, "0.00"),
                   (dt.datetime(2024, 4, 11), "yyyy-mm-dd"), (1234.5, "#,##0.00"),
                   (3.5, "General")]
    assert ws["B1"].font.b is True and ws["B2"].font.b is not True
    # the date is the serial day number: 2024-01-01 is 45292 in the 1900 system
    # (ECMA-376 Part 1, 18.17.4.1), + 31 + 29 + 31 + 10 days = 45393
    assert b"<v>45393</v>" in sheet_xml(out, "xl/worksheets/sheetvol1.xml")
    with zipfile.ZipFile(out) as zf:
        styles = zf.read("xl/styles.xml").decode()
    xfs = re.compile(r"<cellXfs[^>]*>(.*?)</cellXfs>", re.S)
    assert xfs.search(styles)[1].startswith(xfs.search(styles_before)[1])  # nothing moved
    # writing the same sheet again reuses the styles appended the first time
    out2 = tmp_path / "out2.xlsx"
    write_package(Package.open(out), out2, [NewSheet("Review", rows)])
    with zipfile.ZipFile(out2) as zf:
        assert zf.read("xl/styles.xml").decode() == styles


def test_replace_false_refuses_to_overwrite(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx", rows=4)
    out = tmp_path / "out.xlsx"
    edit = NewColumn("Data", 3, 1, "again", 2, np.ones(4), "0", replace=False)
    with pytest.raises(WorkbookError, match=r"sheet 'Data' cell C1 already holds a value"):
        write_package(Package.open(src), out, [edit])
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == ["in.xlsx"]  # no temp file left


def test_cell_result_keeps_formula(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx", rows=8)
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [CellResult("Data", 11, 2, 1.0 / 3.0),
                                           CellResult("Data", 12, 2, 'text "q" & <b>')])
    wb = openpyxl.load_workbook(out)
    assert wb["Data"]["B11"].value == "=SV_ATR(B2:B9,3)"
    assert wb["Data"]["B12"].value == "=SV_NAME(B2)"
    values = openpyxl.load_workbook(out, data_only=True)["Data"]
    assert values["B11"].value == 1.0 / 3.0
    assert values["B12"].value == 'text "q" & <b>'
    assert b't="str"' in sheet_xml(out)
    with pytest.raises(WorkbookError, match=r"cell A2 holds no formula"):
        write_package(Package.open(src), tmp_path / "x.xlsx", [CellResult("Data", 2, 1, 1.0)])


def test_spill_result_and_obstacle(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx", rows=8)
    # put a formula at E2 that spills 4 values down: E2..E5 are free
    out = tmp_path / "out.xlsx"
    xml_src = sheet_xml(src)
    assert b'r="E2"' not in xml_src
    spill = SpillResult("Data", 2, 5, "SV_SERIES(B2:B9)", np.array([1.5, np.nan, 2.5, 3.5]),
                        number_format="0.00")
    write_package(Package.open(src), out, [spill])
    xml = sheet_xml(out)
    assert b'<f t="array" ref="E2:E5">SV_SERIES(B2:B9)</f><v>1.5</v>' in xml
    check_order(xml)
    ws = openpyxl.load_workbook(out, data_only=True)["Data"]
    assert [ws.cell(r, 5).value for r in range(2, 6)] == [1.5, None, 2.5, 3.5]
    # a longer spill runs into the number 42 at E12: refused, naming the cell
    long = SpillResult("Data", 2, 5, "SV_SERIES(B2:B9)", np.ones(12))
    with pytest.raises(WorkbookError, match=r"cell E12 is not empty.*formula in E2"):
        write_package(Package.open(out), tmp_path / "x.xlsx", [long])
    # a shorter spill over its own earlier result removes the leftover cells
    short = SpillResult("Data", 2, 5, "SV_SERIES(B2:B9)", np.array([9.0, 8.0]))
    out2 = tmp_path / "out2.xlsx"
    write_package(Package.open(out), out2, [short])
    ws = openpyxl.load_workbook(out2, data_only=True)["Data"]
    assert [ws.cell(r, 5).value for r in range(2, 6)] == [9.0, 8.0, None, None]
    assert b'ref="E2:E3"' in sheet_xml(out2)


def test_new_sheet_rules(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx")
    out = tmp_path / "out.xlsx"
    rows = [["Item", "Value"], ["rows", 8.0], ["flag", True], ["blank", None]]
    write_package(Package.open(src), out, [NewSheet("sheetvol notes", rows, widths=[20, 9])])
    wb = openpyxl.load_workbook(out)
    ws = wb["sheetvol notes"]
    assert [[c.value for c in r] for r in ws.iter_rows()] == [
        ["Item", "Value"], ["rows", 8], ["flag", True], ["blank", None]]
    assert ws["A1"].font.b is True and ws.column_dimensions["A"].width == 20
    with pytest.raises(WorkbookError, match=r"'Notes'.*did not write"):
        write_package(Package.open(src), tmp_path / "x.xlsx", [NewSheet("notes", rows)])
    with pytest.raises(WorkbookError, match="cannot be a sheet name"):
        write_package(Package.open(src), tmp_path / "x.xlsx", [NewSheet("a/b", rows)])


def test_unknown_sheet_and_atomic_output(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx")
    out = tmp_path / "out.xlsx"
    out.write_bytes(b"previous output")
    with pytest.raises(WorkbookError, match=r"no sheet 'Prices'; its sheets are 'Data', 'Notes'"):
        write_package(Package.open(src), out, [NewColumn("Prices", 4, 1, "h", 2, np.ones(3),
                                                         "0")])
    # a failure half-way through the sheet leaves the old output and no temp file
    bad = [NewColumn("Data", 4, 1, "h", 2, np.ones(3), "0"),
           SpillResult("Data", 2, 5, "SV_X()", np.ones(20))]
    with pytest.raises(WorkbookError, match="E12 is not empty"):
        write_package(Package.open(src), out, bad)
    assert out.read_bytes() == b"previous output"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.xlsx", "out.xlsx"]


def test_progress_reports_rows(tmp_path: Path) -> None:
    src = book(tmp_path / "in.xlsx", rows=50)
    seen: list[int] = []
    write_package(Package.open(src), tmp_path / "out.xlsx",
                  [NewColumn("Data", 4, 1, "h", 2, np.ones(50), "0")], progress=seen.append)
    assert sum(seen) == 54 and all(n > 0 for n in seen)  # up to the last row, row 54


def test_prefixed_sheet_write(tmp_path: Path) -> None:
    """A sheet whose main namespace carries a prefix gets prefixed new cells."""
    src = book(tmp_path / "in.xlsx", rows=4)
    pre = replace_part(src, "xl/worksheets/sheet1.xml", prefixed(sheet_xml(src)),
                       tmp_path / "prefixed.xlsx")
    out = tmp_path / "out.xlsx"
    write_package(Package.open(pre), out, [NewColumn("Data", 4, 1, "h", 2,
                                                     np.array([0.1, 0.2]), "0.0", width=9)])
    new = sheet_xml(out)
    assert b'<x:c r="D2" s=' in new and b"<x:cols>" in new and b"<c " not in new
    ws = openpyxl.load_workbook(out)["Data"]
    assert ws["D1"].value == "h" and ws["D2"].value == 0.1 and ws["D3"].value == 0.2


def test_line_charts(tmp_path: Path) -> None:
    """Charts on a new sheet, on the sheet being filled and on a sheet that already has a
    drawing (an image): openpyxl, an outside reader, finds each with its cell ranges."""
    src = tmp_path / "in.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["Date", "Close"])
    for i in range(30):
        ws.write_number(i + 1, 0, 45000 + i)
        ws.write_number(i + 1, 1, 100 + i)
    pics = wb.add_worksheet("Pictures")
    from test_nothing_lost import tiny_png

    (tmp_path / "dot.png").write_bytes(tiny_png())
    pics.insert_image("B2", str(tmp_path / "dot.png"))
    wb.close()
    out = tmp_path / "out.xlsx"
    edits = [NewColumn("Data", 3, 1, "double", 2, np.arange(30.0) * 2, "0"),
             NewSheet("Charts", [["charts"]]),
             LineChart("Data", "close & double", 1, [2, 3], 2, 31, "Charts", "A3"),
             LineChart("Data", "close", 1, [2], 2, 31, "Charts", "A25"),
             LineChart("Data", "on the data", 1, [2], 2, 31, "Data", "E2"),
             LineChart("Data", "beside the image", 1, [3], 2, 31, "Pictures", "D2")]
    write_package(Package.open(src), out, edits)
    book = openpyxl.load_workbook(out)
    assert [len(book[n]._charts) for n in ["Data", "Pictures", "Charts"]] == [1, 1, 2]
    # the image is still there, in the same drawing part as the new chart
    with zipfile.ZipFile(out) as zf:
        drawing = zf.read("xl/drawings/drawing1.xml")
        rels = zf.read("xl/drawings/_rels/drawing1.xml.rels")
    assert drawing.count(b"<xdr:pic>") == 1 and drawing.count(b"<xdr:graphicFrame") == 1
    assert b"../media/image1.png" in rels and b"../charts/chart" in rels
    chart = book["Charts"]._charts[0]
    refs = [(s.tx.strRef.f, s.cat.numRef.f, s.val.numRef.f) for s in chart.series]
    assert refs == [("'Data'!$B$1", "'Data'!$A$2:$A$31", "'Data'!$B$2:$B$31"),
                    ("'Data'!$C$1", "'Data'!$A$2:$A$31", "'Data'!$C$2:$C$31")]
    assert book["Data"]["C31"].value == 58


def test_write_over_the_input(tmp_path: Path) -> None:
    """In-place use: the output path may be the input itself (renamed after closing it)."""
    src = book(tmp_path / "in.xlsx", rows=4)
    write_package(Package.open(src), src, [NewColumn("Data", 4, 1, "h", 2, np.ones(4), "0")])
    ws = openpyxl.load_workbook(src)["Data"]
    assert ws["D1"].value == "h" and ws["D5"].value == 1 and ws["B2"].value == 100
    assert [p.name for p in tmp_path.iterdir()] == ["in.xlsx"]


def with_calc_chain(src: Path, out: Path, entries: bytes) -> Path:
    """Add an xl/calcChain.xml part (as Excel writes one) with its relationship and type."""
    with zipfile.ZipFile(src) as zf:
        items = [(i.filename, zf.read(i)) for i in zf.infolist()]
    chain = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<calcChain xmlns='
             b'"http://schemas.openxmlformats.org/spreadsheetml/2006/main">' + entries
             + b"</calcChain>")
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, data in items:
            if name == "[Content_Types].xml":
                data = data.replace(b"</Types>", b'<Override PartName="/xl/calcChain.xml" '
                                    b'ContentType="application/vnd.openxmlformats-officedocument'
                                    b'.spreadsheetml.calcChain+xml"/></Types>')
            if name == "xl/_rels/workbook.xml.rels":
                data = data.replace(b"</Relationships>", b'<Relationship Id="rId99" Type="http:'
                                    b"//schemas.openxmlformats.org/officeDocument/2006/"
                                    b'relationships/calcChain" Target="calcChain.xml"/>'
                                    b"</Relationships>")
            zf.writestr(name, data)
        zf.writestr("xl/calcChain.xml", chain)
    return out


def test_calc_chain_loses_removed_formulas(tmp_path: Path) -> None:
    """A replaced column that held formulas takes them out of xl/calcChain.xml too
    (ECMA-376 Part 1, 18.6: each chain entry names a formula cell; "i" carries over
    to the following entries)."""
    src = book(tmp_path / "in.xlsx", rows=4)  # formulas at B7 and B8 of sheet 1
    chained = with_calc_chain(src, tmp_path / "chain.xlsx",
                              b'<c r="B7" i="1"/><c r="B8"/><c r="C8"/><c r="A1" i="2"/>')
    out = tmp_path / "out.xlsx"
    write_package(Package.open(chained), out, [NewColumn("Data", 2, 1, "B", 2, np.ones(2), "0")])
    with zipfile.ZipFile(out) as zf:
        assert b'<calcChain xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'\
               b'<c i="1" r="C8"/><c r="A1" i="2"/></calcChain>' in zf.read("xl/calcChain.xml")
    # when no entry is left the part goes, with its relationship and content type
    only = with_calc_chain(src, tmp_path / "only.xlsx", b'<c r="B7" i="1"/><c r="B8"/>')
    write_package(Package.open(only), out, [NewColumn("Data", 2, 1, "B", 2, np.ones(2), "0")])
    with zipfile.ZipFile(out) as zf:
        assert "xl/calcChain.xml" not in zf.namelist()
        assert b"calcChain" not in zf.read("[Content_Types].xml")
        assert b"calcChain" not in zf.read("xl/_rels/workbook.xml.rels")
    assert openpyxl.load_workbook(out)["Data"]["B3"].value == 1
    # a column written elsewhere leaves the chain as it was
    write_package(Package.open(chained), out, [NewColumn("Data", 6, 1, "F", 2, np.ones(2), "0")])
    with zipfile.ZipFile(out) as zf, zipfile.ZipFile(chained) as zc:
        assert zf.read("xl/calcChain.xml") == zc.read("xl/calcChain.xml")


@pytest.mark.parametrize("seed", range(12))
def test_random_sparse_sheets_match_a_model(tmp_path: Path, seed: int) -> None:
    """Random sparse sheets and random columns: openpyxl (outside reader) sees exactly
    the cells of a plain dict model of the edit (drop the column from the header row
    down, then put the header and the finite values)."""
    rng = np.random.default_rng(seed)
    src = tmp_path / "in.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("S")
    for _ in range(int(rng.integers(5, 60))):
        r, c = int(rng.integers(1, 40)), int(rng.integers(1, 9))
        value: object = float(rng.normal()) if rng.random() < 0.7 else f"t{r}_{c}"
        ws.write(r - 1, c - 1, value)
    wb.close()
    # the model starts from what openpyxl reads in the input (xlsxwriter stores 16 digits)
    model = {(c.row, c.column): c.value for row in openpyxl.load_workbook(src)["S"].iter_rows()
             for c in row if c.value is not None}
    header_row = int(rng.integers(1, 5))
    cols = rng.choice(np.arange(1, 12), size=int(rng.integers(1, 4)), replace=False)
    edits = []
    for col in cols.tolist():
        first = header_row + 1
        values = rng.normal(size=int(rng.integers(1, 50)))
        values[rng.random(len(values)) < 0.3] = np.nan
        edits.append(NewColumn("S", col, header_row, f"h{col}", first, values, "0.00"))
        for key in [k for k in model if k[1] == col and k[0] >= header_row]:
            del model[key]
        model[(header_row, col)] = f"h{col}"
        for i, v in enumerate(values.tolist()):
            if not np.isnan(v):
                model[(first + i, col)] = v
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, edits)
    check_order(sheet_xml(out))
    got = {(c.row, c.column): c.value for row in openpyxl.load_workbook(out)["S"].iter_rows()
           for c in row if c.value is not None}
    assert got == model


def test_producer_variants_write(tmp_path: Path) -> None:
    """Rows and cells without r, attributes in another order with single quotes,
    self-closing rows and cells, spans: new cells still land where they belong."""
    src = book(tmp_path / "in.xlsx", rows=2)
    body = (b"<sheetData>"
            b"<row r='1' spans='1:3'><c t='inlineStr' r='A1'><is><t>a</t></is></c>"
            b"<c s='0' r='C1'><v>3</v></c></row>"
            b"<row><c><v>1.5</v></c><c/><c><v>3.5</v></c></row>"
            b'<row r="4"/>'
            b'<row spans="1:1" r="6"><c r="A6" s="0"/></row>'
            b"</sheetData>")
    xml = re.sub(rb"<sheetData>.*</sheetData>", body, sheet_xml(src), flags=re.S)
    odd = replace_part(src, "xl/worksheets/sheet1.xml", xml, tmp_path / "odd.xlsx")
    out = tmp_path / "out.xlsx"
    write_package(Package.open(odd), out, [
        NewColumn("Data", 2, 1, "B!", 2, np.array([7.0, 8.0, 9.0, np.nan, 10.0]), "0")])
    new = sheet_xml(out)
    check_order(new)
    assert b"spans" not in new  # both rows that had spans were edited: the hint goes
    ws = openpyxl.load_workbook(out)["Data"]
    got = {(c.row, c.column): c.value for row in ws.iter_rows() for c in row
           if c.value is not None}
    assert got == {(1, 1): "a", (1, 2): "B!", (1, 3): 3, (2, 1): 1.5, (2, 2): 7.0,
                   (2, 3): 3.5, (3, 2): 8.0, (4, 2): 9.0, (6, 2): 10.0}
