"""Opening workbooks safely and reading cells (sheetvol.workbook.package).

Inputs are real .xlsx files made by xlsxwriter (an outside writer) or packages edited
by hand where a producer's variant is needed (prefixed namespaces, cells without
``r``, rich and phonetic text). Expected values are the ones written, spelled out in
each test, and where useful cross-checked with openpyxl (an outside reader).
"""

from __future__ import annotations

import re
import zipfile
from pathlib import Path

import numpy as np
import pytest

from sheetvol.workbook import CellError, Package, WorkbookError
from sheetvol.workbook.package import shift_formula

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")


def make_book(path: Path, date_1904: bool = False) -> Path:
    wb = xlsxwriter.Workbook(str(path), {"date_1904": date_1904})
    ws = wb.add_worksheet("Prices")
    ws.write_row(0, 0, ["Date", "Close", "Mixed"])
    for i in range(5):
        ws.write_number(i + 1, 0, 45000 + i)
        ws.write_number(i + 1, 1, 100.25 + i)
    ws.write_string(1, 2, "text & <more>")
    ws.write_boolean(2, 2, True)
    ws.write_formula(3, 2, "=NA()", None, "#N/A")
    ws.write_formula(4, 2, '="a"&"b"', None, "ab")
    ws.write_formula(5, 2, "=B2*2", None, 200.5)
    ws.write_string(6, 2, "keep &lt; as typed")  # stored as &amp;lt; (shared string)
    ws.write_formula(7, 1, "=SV_ATR(B2:B6,14)", None, 1.5)
    ws.write_formula(8, 1, "=_xludf.SV_BANDS(B2:B6,20,2)", None, 2.5)
    ws.write_array_formula("D2:D4", "{=SV_SPREAD(B2:B4)}", None, 7)
    ws.add_table("F1:G3", {"name": "Small", "columns": [{"header": "k"}, {"header": "v"}]})
    wb.add_worksheet("Other")
    chart = wb.add_chartsheet("ChartTab")
    ch = wb.add_chart({"type": "line"})
    ch.add_series({"values": "=Prices!$B$2:$B$6"})
    chart.set_chart(ch)
    wb.close()
    return path


def replace_part(path: Path, name: str, data: bytes, out: Path | None = None) -> Path:
    """A copy of the package with one part's content replaced (or added)."""
    out = out or path
    with zipfile.ZipFile(path) as zf:
        items = [(i, zf.read(i)) for i in zf.infolist()]
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zout:
        done = False
        for info, content in items:
            if info.filename == name:
                content, done = data, True
            zout.writestr(info.filename, content)
        if not done:
            zout.writestr(name, data)
    return out


def sheet_part(path: Path, name: str = "xl/worksheets/sheet1.xml") -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read(name)


# -- structure --------------------------------------------------------------------------
def test_sheets_kinds_and_lookup(tmp_path: Path) -> None:
    pkg = Package.open(make_book(tmp_path / "b.xlsx"))
    assert [(s.name, s.kind) for s in pkg.sheets] == [
        ("Prices", "worksheet"), ("Other", "worksheet"), ("ChartTab", "chartsheet")]
    assert pkg.sheet("prices").part == "xl/worksheets/sheet1.xml"
    assert pkg.date1904 is False and pkg.is_macro_enabled is False
    with pytest.raises(WorkbookError, match=r"no sheet 'Nope'.*'Prices', 'Other', 'ChartTab'"):
        pkg.sheet("Nope")
    with pytest.raises(WorkbookError, match=r"chartsheet"):
        pkg.read_grid("ChartTab")


def test_date1904_flag(tmp_path: Path) -> None:
    pkg = Package.open(make_book(tmp_path / "b.xlsx", date_1904=True))
    assert pkg.date1904 is True


# -- values -----------------------------------------------------------------------------
def test_read_grid_value_types(tmp_path: Path) -> None:
    pkg = Package.open(make_book(tmp_path / "b.xlsx"))
    g = pkg.read_grid("Prices")
    assert g.rows[1] == {1: "Date", 2: "Close", 3: "Mixed", 6: "k", 7: "v"}
    assert g.rows[2][3] == "text & <more>"  # shared string with escapes
    assert g.rows[3][3] is True
    assert g.rows[4][3] == CellError("#N/A") and isinstance(g.rows[4][3], CellError)
    assert g.rows[5][3] == "ab"  # t="str" formula result
    assert g.rows[6][3] == 200.5  # number formula result
    assert g.rows[7][3] == "keep &lt; as typed"  # entities decoded once, not twice
    assert g.rows[8][2] == 1.5
    assert g.max_row == 9 and g.max_col == 7
    assert pkg.read_grid("Prices", max_rows=2).max_row == 2


def test_read_columns_matches_openpyxl(tmp_path: Path) -> None:
    path = make_book(tmp_path / "b.xlsx")
    cols = Package.open(path).read_columns("Prices", [1, 2, 3], first_row=2)
    ws = openpyxl.load_workbook(path, data_only=True)["Prices"]
    last = 9  # the last row with a cell in one of the asked columns
    for c, col in cols.items():
        assert col.first_row == 2 and len(col.numbers) == last - 1
        for r in range(2, last + 1):
            v = ws.cell(r, c).value
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                assert col.numbers[r - 2] == v
            else:
                assert np.isnan(col.numbers[r - 2])
    assert cols[3].other == {2: "text & <more>", 3: True, 4: "#N/A", 5: "ab",
                             7: "keep &lt; as typed"}
    assert cols[3].numbers[6 - 2] == 200.5


def test_read_range_and_tables(tmp_path: Path) -> None:
    pkg = Package.open(make_book(tmp_path / "b.xlsx"))
    assert pkg.read_range("Prices", 1, 1, 3, 2) == [["Date", "Close"], [45000.0, 100.25],
                                                   [45001.0, 101.25]]
    assert pkg.read_range("Prices", 10, 10, 11, 10) == [[None], [None]]
    (t,) = pkg.tables("Prices")
    assert (t.name, t.ref, t.header_row, t.columns) == ("Small", "F1:G3", 1, ["k", "v"])
    assert pkg.tables("Other") == []


def test_formula_cells(tmp_path: Path) -> None:
    pkg = Package.open(make_book(tmp_path / "b.xlsx"))
    got = {(f.row, f.col): (f.formula, f.array_ref) for f in pkg.formula_cells()}
    assert got == {(8, 2): ("SV_ATR(B2:B6,14)", None),
                   (9, 2): ("_xludf.SV_BANDS(B2:B6,20,2)", None),
                   (2, 4): ("SV_SPREAD(B2:B4)", "D2:D4")}


def test_shared_formula_children_are_moved(tmp_path: Path) -> None:
    """A formula filled down is stored once (t="shared"); children get it moved
    (ECMA-376 Part 1, 18.3.1.40: relative references shift with the cell)."""
    path = make_book(tmp_path / "b.xlsx")
    xml = sheet_part(path).replace(
        b'<row r="1" ', b'<row r="20"><c r="E20"><f t="shared" ref="E20:E22" si="0">'
        b'SV_X(B2:B6,$A$1,"B2")</f><v>1</v></c></row><row r="21"><c r="E21"><f t="shared" '
        b'si="0"/><v>2</v></c></row><row r="1" ', 1)
    # keep rows ascending: move the two new rows to the end of sheetData
    head, _, rest = xml.partition(b'<row r="20">')
    new_rows, _, rest = (b'<row r="20">' + rest).partition(b'<row r="1" ')
    body, _, tail = (b'<row r="1" ' + rest).partition(b"</sheetData>")
    replace_part(path, "xl/worksheets/sheet1.xml", head + body + new_rows + b"</sheetData>" + tail)
    got = {(f.row, f.col): f.formula for f in Package.open(path).formula_cells()}
    assert got[(20, 5)] == 'SV_X(B2:B6,$A$1,"B2")'
    assert got[(21, 5)] == 'SV_X(B3:B7,$A$1,"B2")'


def test_shift_formula_hand_worked() -> None:
    # moved 2 rows down, 1 column right: relative parts move, $-fixed parts stay
    assert shift_formula("SUM(A1:B2)+$C$3+C$4+$D5", 2, 1) == "SUM(B3:C4)+$C$3+D$4+$D7"
    assert shift_formula("'My Sheet'!A1+Other!B2", 1, 0) == "'My Sheet'!A2+Other!B3"
    assert shift_formula('LOG10(A1)&"A1"', 1, 0) == 'LOG10(A2)&"A1"'


def test_inline_rich_phonetic_and_positions(tmp_path: Path) -> None:
    """Producer variants: inline rich text with phonetic runs, attributes in another
    order and single quotes, cells and rows without r, self-closing rows and cells."""
    path = make_book(tmp_path / "b.xlsx")
    xml = sheet_part(path)
    body = (b"<sheetData>"
            b"<row r='1'><c t='inlineStr' r='A1'><is><r><rPr><b/><color rgb='FFFF0000'/></rPr>"
            b"<t>Clo</t></r><r><t xml:space='preserve'>se </t></r><rPh sb='0' eb='1'><t>x</t>"
            b"</rPh></is></c><c s='0' r='B1'/></row>"
            b"<row><c><v>1.5</v></c><c><v>2.5</v></c><c r='E2'><v>-3e-7</v></c></row>"
            b'<row r="4"/>'
            b'<row r="5" spans="1:2"><c r="B5" t="b"><v>0</v></c></row>'
            b"</sheetData>")
    xml = re.sub(rb"<sheetData>.*</sheetData>", body, xml, flags=re.S)
    replace_part(path, "xl/worksheets/sheet1.xml", xml)
    g = Package.open(path).read_grid("Prices")
    assert g.rows == {1: {1: "Close "}, 2: {1: 1.5, 2: 2.5, 5: -3e-7}, 5: {2: False}}
    cols = Package.open(path).read_columns("Prices", [1, 2, 5], first_row=1)
    assert cols[1].other == {1: "Close "}
    assert list(cols[2].numbers[1:2]) == [2.5] and cols[5].numbers[1] == -3e-7
    assert cols[2].other == {5: False}


def prefixed(xml: bytes) -> bytes:
    """The same worksheet with the main namespace bound to prefix x: (as some producers do)."""
    xml = xml.replace(b'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"',
                      b'xmlns:x="http://schemas.openxmlformats.org/spreadsheetml/2006/main"')
    return re.sub(rb"<(/?)([A-Za-z]+)(?=[\s/>])", rb"<\1x:\2", xml)


def test_prefixed_namespace_read(tmp_path: Path) -> None:
    path = make_book(tmp_path / "b.xlsx")
    replace_part(path, "xl/worksheets/sheet1.xml", prefixed(sheet_part(path)))
    assert b"<x:c r=" in sheet_part(path)
    pkg = Package.open(path)
    g = pkg.read_grid("Prices")
    assert g.rows[2] == {1: 45000.0, 2: 100.25, 3: "text & <more>", 4: 7.0}
    assert pkg.read_columns("Prices", [2], 2)[2].numbers[:5].tolist() == [
        100.25, 101.25, 102.25, 103.25, 104.25]
    assert any(f.formula == "SV_ATR(B2:B6,14)" for f in pkg.formula_cells())
    # openpyxl (outside reader) sees the same cells in the hand-made file
    assert openpyxl.load_workbook(path)["Prices"]["B2"].value == 100.25


# -- safety -----------------------------------------------------------------------------
def test_refuses_zip_bomb_by_ratio(tmp_path: Path) -> None:
    """A part of 64 MiB of zeros deflates about 1000:1 (a classic bomb shape)."""
    path = make_book(tmp_path / "b.xlsx")
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("xl/media/huge.bin", bytes(64 * 1024 * 1024))
    with pytest.raises(WorkbookError, match=r"xl/media/huge.bin expands \d+ times.*zip bomb"):
        Package.open(path)


def test_refuses_zip_bomb_by_total_size(tmp_path: Path) -> None:
    path = make_book(tmp_path / "b.xlsx")
    with pytest.raises(WorkbookError, match=r"possible zip bomb"):
        Package.open(path, max_total=10_000)
    assert Package.open(path).sheets  # the default limits accept it


def test_refuses_lying_sizes(tmp_path: Path) -> None:
    """A central directory that understates a part's size: inflating stops as soon as
    the output passes the stated size, and the refusal says so."""
    path = make_book(tmp_path / "b.xlsx")
    data = path.read_bytes()
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo("xl/worksheets/sheet1.xml")
    # patch the uncompressed size field (offset 24) of its central directory entry
    name = info.filename.encode()
    pos = data.find(b"PK\x01\x02")
    while data[pos + 46 : pos + 46 + len(name)] != name:
        pos = data.find(b"PK\x01\x02", pos + 4)
    patched = data[: pos + 24] + (100).to_bytes(4, "little") + data[pos + 28 :]
    path.write_bytes(patched)
    with pytest.raises(WorkbookError, match=r"sheet1.xml inflates to more than the 100 bytes"):
        Package.open(path).read_grid("Prices")


def test_refuses_doctype_and_entities(tmp_path: Path) -> None:
    path = make_book(tmp_path / "b.xlsx")
    with zipfile.ZipFile(path) as zf:
        wb = zf.read("xl/workbook.xml")
    bomb = wb.replace(b"?>\n", b'?>\n<!DOCTYPE lol [<!ENTITY a "aaaaaaaaaa">'
                      b'<!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">]>\n', 1)
    evil = replace_part(path, "xl/workbook.xml", bomb, tmp_path / "evil.xlsx")
    with pytest.raises(WorkbookError, match=r"DOCTYPE/ENTITY.*unsafe XML"):
        Package.open(evil)
    # in a sheet part, which is scanned as bytes rather than parsed
    sheet = sheet_part(path).replace(b"?>\n", b'?>\n<!DOCTYPE x [<!ENTITY e SYSTEM '
                                     b'"file:///etc/passwd">]>\n', 1)
    evil2 = replace_part(path, "xl/worksheets/sheet1.xml", sheet, tmp_path / "evil2.xlsx")
    with pytest.raises(WorkbookError, match=r"sheet1.xml declares a DOCTYPE/ENTITY"):
        Package.open(evil2)  # refused when opened, as every XML part is checked then


def test_refuses_encrypted(tmp_path: Path) -> None:
    """Encrypted workbooks are OLE compound files (MS-OFFCRYPTO); their signature is
    D0 CF 11 E0 A1 B1 1A E1 (MS-CFB 2.2)."""
    path = tmp_path / "locked.xlsx"
    path.write_bytes(bytes.fromhex("D0CF11E0A1B11AE1") + bytes(504))
    with pytest.raises(WorkbookError, match=r"locked.xlsx is password-protected.*unprotected"):
        Package.open(path)


def test_refuses_text_and_other_zips(tmp_path: Path) -> None:
    text = tmp_path / "notes.xlsx"
    text.write_text("Date,Close\n2024-01-02,100\n")
    with pytest.raises(WorkbookError, match=r"notes.xlsx is not an .xlsx workbook"):
        Package.open(text)
    other = tmp_path / "other.xlsx"
    with zipfile.ZipFile(other, "w") as zf:
        zf.writestr("hello.txt", "hi")
    with pytest.raises(WorkbookError, match=r"not a workbook"):
        Package.open(other)
    truncated = tmp_path / "cut.xlsx"
    truncated.write_bytes(make_book(tmp_path / "b.xlsx").read_bytes()[:2000])
    with pytest.raises(WorkbookError, match=r"cut.xlsx is not an .xlsx workbook"):
        Package.open(truncated)
    with pytest.raises(WorkbookError, match=r"file not found"):
        Package.open(tmp_path / "missing.xlsx")


def test_macros_are_only_flagged(tmp_path: Path) -> None:
    """An .xlsm part is never opened: a vbaProject.bin that is not even OLE still opens."""
    path = make_book(tmp_path / "b.xlsx")
    xlsm = replace_part(path, "xl/vbaProject.bin", b"not parsed", tmp_path / "m.xlsm")
    assert Package.open(xlsm).is_macro_enabled is True


def test_real_sheet_xml_passes_the_ratio_limit(tmp_path: Path) -> None:
    """A 60,000-row sheet part (several MB, far above the 1 MiB floor of the ratio check)
    opens with the default limits and reads back exactly."""
    path = make_book(tmp_path / "b.xlsx")
    values = np.random.default_rng(2).normal(100, 5, 60_000)
    rows = "".join(f'<row r="{i + 2}"><c r="B{i + 2}"><v>{v!r}</v></c></row>'
                   for i, v in enumerate(values.tolist())).encode()
    xml = re.sub(rb"<sheetData>.*</sheetData>", b"<sheetData>" + rows + b"</sheetData>",
                 sheet_part(path), flags=re.S)
    replace_part(path, "xl/worksheets/sheet1.xml", xml)
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo("xl/worksheets/sheet1.xml")
    assert info.file_size > 1024 * 1024
    got = Package.open(path).read_columns("Prices", [2], first_row=2)[2].numbers
    assert np.array_equal(got, values)
