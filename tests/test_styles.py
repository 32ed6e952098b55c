"""The styles part of workbooks other programs write (sheetvol.workbook._styles).

Each case is the smallest styles part that shows a shape some producer writes, put into
a real workbook in tmp_path; the fill runs on it and the result is checked with outside
readers: Python's own XML parser (well-formed, the schema order of ECMA-376 Part 1,
18.8.39) and openpyxl (which font each cell shows).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import pytest
from test_package import replace_part

from sheetvol.fill.job import fill_file
from sheetvol.workbook import WorkbookError

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
ORDER = ["numFmts", "fonts", "fills", "borders", "cellStyleXfs", "cellXfs", "cellStyles",
         "dxfs", "tableStyles", "colors", "extLst"]
FONTS = ('<fonts count="1"><font><sz val="10"/><name val="Arial"/></font></fonts>')
FILLS = ('<fills count="2"><fill><patternFill patternType="none"/></fill>'
         '<fill><patternFill patternType="gray125"/></fill></fills>')
BORDERS = '<borders count="1"><border/></borders>'
STYLE_XFS = '<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/>' \
            "</cellStyleXfs>"
CELL_XFS = '<cellXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>' \
           "</cellXfs>"
STYLES = '<cellStyles count="1"><cellStyle name="Normal" xfId="0" builtinId="0"/></cellStyles>'


def price_book(path: Path, n: int = 40) -> Path:
    """A price sheet without any cell style of its own (every cell uses xf 0)."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    for i in range(n):
        ws.write_row(i + 1, 0, [45000 + i, 101 + i % 3, 99 - i % 2, 100 + (i % 5) * 0.5])
    wb.close()
    return path


def styles_of(path: Path) -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read("xl/styles.xml")


def root(body: str, prefix: str = "") -> str:
    p = f"{prefix}:" if prefix else ""
    xmlns = f'xmlns:{prefix}="{MAIN}"' if prefix else f'xmlns="{MAIN}"'
    if prefix:  # every element of the part carries the prefix
        import re

        body = re.sub(r"<(/?)([A-Za-z]+)(?=[\s/>])", rf"<\1{p}\2", body)
    return f'<?xml version="1.0" encoding="UTF-8"?>\n<{p}styleSheet {xmlns}>{body}</{p}styleSheet>'


CASES = {
    # a self-closing root that ends with a newline (the splice once landed inside its tag)
    "self-closing root": f'<?xml version="1.0"?>\n<styleSheet xmlns="{MAIN}"/>\n',
    "self-closing root, whitespace inside the tag": f'<styleSheet xmlns="{MAIN}" \n />\n\n  ',
    "no numFmts, trailing whitespace": root(FONTS + FILLS + BORDERS + STYLE_XFS + CELL_XFS
                                            + STYLES) + "\n  \n",
    "no fonts": root(FILLS + BORDERS + STYLE_XFS + CELL_XFS + STYLES),
    "no cellXfs": root(FONTS + FILLS + BORDERS + STYLE_XFS + STYLES),
    "no cellStyleXfs": root(FONTS + FILLS + BORDERS + CELL_XFS + STYLES),
    "no cellXfs, no cellStyleXfs, no fonts": root(FILLS + BORDERS),
    "namespace prefix on the root": root(FONTS + FILLS + BORDERS + STYLE_XFS + CELL_XFS
                                         + STYLES, prefix="x"),
    "a comment holding a tag": root("<!-- <fonts><font><b/></font></fonts> -->" + FONTS
                                    + FILLS + BORDERS + STYLE_XFS + CELL_XFS + STYLES),
}


@pytest.mark.parametrize("case", list(CASES))
def test_styles_part_from_another_program_stays_well_formed(tmp_path, case):
    src = replace_part(price_book(tmp_path / "p.xlsx"), "xl/styles.xml", CASES[case].encode())
    # the font plain cells show: the part's own, else the one spreadsheet programs assume
    font = ("Arial", 10) if "Arial" in CASES[case] else ("Calibri", 11)
    report = fill_file(src)
    data = styles_of(report.output)
    tree = ET.fromstring(data)  # Python's XML parser: raises on a part that is not well-formed
    assert tree.tag == f"{{{MAIN}}}styleSheet"
    names = [child.tag.split("}")[1] for child in tree]
    assert names == sorted(names, key=ORDER.index), names  # schema order (18.8.39)
    for block in tree:  # every count says how many entries follow
        if "count" in block.attrib:
            assert int(block.attrib["count"]) == len(block), block.tag
    wb = openpyxl.load_workbook(report.output)
    ws = wb["Prices"]
    # the cells that were there keep their look: nothing turned bold
    assert not ws["A1"].font.b and not ws["D2"].font.b
    assert (ws["D2"].font.name, ws["D2"].font.sz) == font
    # a new header cell is bold, in the workbook's own default font
    new_header = ws.cell(1, 5)
    assert new_header.value == report.written[0].spec.header
    assert new_header.font.b
    assert (new_header.font.name, new_header.font.sz) == font


def test_header_font_is_the_default_font_named_by_xf_zero(tmp_path):
    # The default font is the one the plain cells use (xf 0 points at font 1 here), not
    # simply the first font of the list.
    fonts = ('<fonts count="2"><font><sz val="14"/><name val="Courier New"/></font>'
             '<font><sz val="9"/><name val="Verdana"/></font></fonts>')
    xfs = ('<cellXfs count="1"><xf numFmtId="0" fontId="1" fillId="0" borderId="0" xfId="0"/>'
           "</cellXfs>")
    part = root(fonts + FILLS + BORDERS + STYLE_XFS + xfs + STYLES)
    src = replace_part(price_book(tmp_path / "p.xlsx"), "xl/styles.xml", part.encode())
    report = fill_file(src)
    ws = openpyxl.load_workbook(report.output)["Prices"]
    assert (ws["D2"].font.name, ws["D2"].font.sz) == ("Verdana", 9)  # openpyxl's reading
    assert (ws.cell(1, 5).font.name, ws.cell(1, 5).font.sz, ws.cell(1, 5).font.b) == (
        "Verdana", 9, True)
    notes = openpyxl.load_workbook(report.output)["sheetvol notes"]
    assert (notes["A1"].font.name, notes["A1"].font.b) == ("Verdana", True)


def test_a_styles_part_that_is_not_xml_is_refused_by_name(tmp_path):
    src = replace_part(price_book(tmp_path / "p.xlsx"), "xl/styles.xml",
                       b"<styleSheet><fonts></styleSheet>")
    with pytest.raises(WorkbookError, match=r"p\.xlsx: xl/styles\.xml: .*not one well-formed"):
        fill_file(src)


@pytest.mark.parametrize("case", ["self-closing root", "no fonts", "namespace prefix on the root"])
def test_libreoffice_opens_the_result_with_bold_new_headers_only(tmp_path, libreoffice, case):
    src = replace_part(price_book(tmp_path / "p.xlsx"), "xl/styles.xml", CASES[case].encode())
    report = fill_file(src)
    resaved = libreoffice(report.output)  # LibreOffice as the reader a colleague would use
    ws = openpyxl.load_workbook(resaved)["Prices"]
    # D3 is bar 2: 100 + (1 % 5) * 0.5 = 100.5, as price_book writes it
    assert ws["D3"].value == 100.5 and not ws["D1"].font.b and not ws["D3"].font.b
    assert ws.cell(1, 5).value == report.written[0].spec.header and ws.cell(1, 5).font.b
