"""Nothing lost: writing into a feature-rich workbook changes only what sheetvol adds.

The model is XlsxWriter's own test suite, which compares files part by part with an
explicit list of what may differ. Here the input is built with xlsxwriter (an outside
writer) with sheets, formulas with stored results, styles, number formats, merged
cells, defined names, data validation, conditional formats including extended data
bars, comments with a box size, a chart, an image, sparklines, a text box, ignored
errors, a table and frozen panes; the output must keep every part not in the allow
list byte for byte (decompressed), every original cell element unchanged, and the
numbers written must read back bit for bit with openpyxl (an outside reader).
"""

from __future__ import annotations

import re
import struct
import zipfile
import zlib
from pathlib import Path

import numpy as np
import pytest

from sheetvol.workbook import NewColumn, NewSheet, Package, write_package

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")

N = 60  # data rows


def tiny_png() -> bytes:
    """A 1x1 red PNG, built from the PNG specification's chunk layout."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))

    ihdr = struct.pack(">IIBBBBB", 1, 1, 8, 2, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr)
            + chunk(b"IDAT", zlib.compress(b"\x00\xff\x00\x00")) + chunk(b"IEND", b""))


def vba_project(tmp: Path) -> tuple[Path, bool]:
    """A vbaProject.bin: the real one inside xlwings' quickstart .xlsm when installed,
    else a dummy part (the package layer never opens it, it only copies it)."""
    out = tmp / "vbaProject.bin"
    try:
        import xlwings

        book = Path(xlwings.__file__).parent / "quickstart.xlsm"
        with zipfile.ZipFile(book) as zf:
            out.write_bytes(zf.read("xl/vbaProject.bin"))
        return out, True
    except (ImportError, OSError, KeyError):
        out.write_bytes(b"dummy vba project, never executed " * 20)
        return out, False


def build_rich(path: Path, tmp: Path, macros: bool = False) -> None:
    """A workbook with many features an openpyxl load+save is known to drop or change."""
    wb = xlsxwriter.Workbook(str(path))
    if macros:
        wb.add_vba_project(str(vba_project(tmp)[0]))
    bold = wb.add_format({"bold": True, "bg_color": "#DDEEFF"})
    date = wb.add_format({"num_format": "dd mmm yyyy"})
    price = wb.add_format({"num_format": "#,##0.0000"})
    ws = wb.add_worksheet("Prices")
    ws.write_row(0, 0, ["Date", "Open", "High", "Low", "Close", "Note"], bold)
    rng = np.random.default_rng(3)
    close = 100 + np.cumsum(rng.normal(0, 1, N))
    for i in range(N):
        r = i + 1
        ws.write_number(r, 0, 45000 + i, date)
        ws.write_number(r, 1, float(close[i] - 0.3), price)
        ws.write_number(r, 2, float(close[i] + 1.1), price)
        ws.write_number(r, 3, float(close[i] - 1.2), price)
        ws.write_number(r, 4, float(close[i]), price)
        ws.write_string(r, 5, f"row {r}")
    ws.add_table(0, 0, N, 5, {"name": "PriceTable", "columns": [
        {"header": h} for h in ["Date", "Open", "High", "Low", "Close", "Note"]]})
    ws.freeze_panes(1, 0)
    ws.set_column(0, 0, 14)
    ws.conditional_format(1, 4, N, 4, {"type": "data_bar", "data_bar_2010": True,
                                        "bar_solid": True, "bar_negative_color": "#FF0000"})
    ws.conditional_format(1, 2, N, 2, {"type": "cell", "criteria": ">", "value": 100,
                                        "format": bold})
    ws.data_validation(1, 1, N, 1, {"validate": "decimal", "criteria": ">", "value": 0})
    ws.write_comment(1, 4, "checked against the broker statement",
                     {"x_scale": 2.5, "y_scale": 1.5, "font_size": 12})
    ws.ignore_errors({"number_stored_as_text": "F2:F10"})
    ws.add_sparkline(1, 14, {"range": "Prices!B2:E2", "markers": True})

    summary = wb.add_worksheet("Summary")
    summary.merge_range("A1:D1", "Summary of the invented prices", bold)
    summary.write_formula("A3", f"=AVERAGE(Prices!E2:E{N + 1})", None, float(close.mean()))
    summary.write_formula("A4", f"=MAX(Prices!C2:C{N + 1})", None, float((close + 1.1).max()))
    summary.write_formula("A5", '=IF(A3>0,"up","down")', None, "up")
    summary.write_formula("A6", "=SV_ATR(Prices!C2:C61,Prices!D2:D61,Prices!E2:E61,14)",
                          None, 1.2345)
    summary.write_formula("A7", "=1/0", None, "#DIV/0!")
    summary.write_string("B3", "shared text")
    summary.write_string("B4", "shared text")
    summary.insert_textbox("F3", "a text box note", {"width": 300, "height": 80})
    image = tmp / "dot.png"
    image.write_bytes(tiny_png())
    summary.insert_image("F10", str(image), {"x_scale": 20, "y_scale": 20})
    chart = wb.add_chart({"type": "line"})
    chart.add_series({"values": f"=Prices!$E$2:$E${N + 1}",
                      "categories": f"=Prices!$A$2:$A${N + 1}", "name": "Close"})
    summary.insert_chart("B12", chart)
    wb.define_name("CloseRange", f"=Prices!$E$2:$E${N + 1}")
    wb.define_name("Summary!LocalName", "=Summary!$A$3")
    wb.close()


def parts(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as zf:
        return {i.filename: zf.read(i) for i in zf.infolist()}


def order(path: Path) -> list[str]:
    with zipfile.ZipFile(path) as zf:
        return zf.namelist()


_CELL = re.compile(rb"<c[\s>].*?(?:</c>|/>)", re.S)


def cells_of(xml: bytes) -> list[bytes]:
    """Cell elements: '<c ...>...</c>' (these test sheets write no self-closing cells)."""
    body = xml.split(b"<sheetData>")[1].split(b"</sheetData>")[0]
    return re.findall(rb"<c [^>]*>.*?</c>", body, re.S)


def new_columns(rng: np.random.Generator) -> list[NewColumn]:
    """4 columns of random doubles over many binades, with NaN gaps (blank cells)."""
    out = []
    for j, fmt in enumerate(["0.00", "0.0000", "0.00%", "0.000E+00"]):
        values = rng.standard_normal(N) * 10.0 ** rng.integers(-12, 12, N)
        values[:j + 2] = np.nan  # warm-up rows stay blank
        out.append(NewColumn("Prices", col=7 + j, header_row=1, header=f"new {j}",
                             first_row=2, values=values, number_format=fmt, width=12.5))
    return out


ALLOWED = {
    "xl/worksheets/sheet1.xml",  # the sheet written into
    "xl/styles.xml",  # formats appended
    "[Content_Types].xml", "xl/workbook.xml", "xl/_rels/workbook.xml.rels",  # new sheet
}


def check_appended(before: bytes, after: bytes, what: str) -> None:
    """``after`` is ``before`` with elements inserted: its tags and texts, in order, are
    all still there (only ``count`` attributes may change)."""
    def tokens(xml: bytes) -> list[bytes]:
        return re.findall(rb"<[^>]*>|[^<]+", re.sub(rb' count="\d+"', b"", xml))

    old, new = tokens(before), tokens(after)
    i = 0
    for tok in old:
        i = new.index(tok, i) + 1  # ValueError: an original tag is gone or moved
    assert len(new) > len(old), what


@pytest.mark.parametrize("macros", [False, True], ids=["xlsx", "xlsm"])
def test_every_other_part_unchanged(tmp_path: Path, macros: bool) -> None:
    src = tmp_path / ("rich.xlsm" if macros else "rich.xlsx")
    build_rich(src, tmp_path, macros)
    out = tmp_path / ("out.xlsm" if macros else "out.xlsx")
    rng = np.random.default_rng(11)
    cols = new_columns(rng)
    before_bytes = src.read_bytes()
    pkg = Package.open(src)
    assert pkg.is_macro_enabled is macros
    write_package(pkg, out, [*cols, NewSheet("sheetvol notes", [["title", "value"],
                                                                 ["rows", 60.0]])])
    assert src.read_bytes() == before_bytes, "the input must never be touched"

    a, b = parts(src), parts(out)
    table = next(n for n in a if n.startswith("xl/tables/"))
    allowed = ALLOWED | {table}
    added = set(b) - set(a)
    assert set(a) <= set(b)
    assert added == {"xl/worksheets/sheetvol1.xml"}
    # zip order kept; the new part goes last
    assert order(out)[: len(a)] == order(src)
    for name, data in a.items():
        if name not in allowed:
            assert b[name] == data, f"{name} changed"
    # and they were copied as stored (same compressed size and CRC), not re-deflated
    with zipfile.ZipFile(src) as za, zipfile.ZipFile(out) as zb:
        for name in set(a) - allowed:
            ia, ib = za.getinfo(name), zb.getinfo(name)
            assert (ia.compress_size, ia.CRC, ia.compress_type) == (
                ib.compress_size, ib.CRC, ib.compress_type), name
        assert zb.testzip() is None  # every entry's CRC checks out
    if macros:
        assert b["xl/vbaProject.bin"] == a["xl/vbaProject.bin"]
    # sharedStrings, drawings, comments (with their box size), charts, media: untouched
    assert any(n.startswith("xl/drawings/") for n in a)
    assert any(n.startswith("xl/media/") for n in a)
    assert any(n.startswith("xl/comments") for n in a)

    # In the edited sheet: every original cell element is still there, byte for byte,
    # and all that follows sheetData (merge, conditional formats, data validation,
    # ignored errors, drawing, table parts, the extLst with sparklines and data bars)
    # is unchanged.
    sa, sb = a["xl/worksheets/sheet1.xml"], b["xl/worksheets/sheet1.xml"]
    kept = set(cells_of(sb))
    for cell in cells_of(sa):
        assert cell in kept, cell
    assert sa.split(b"</sheetData>")[1] == sb.split(b"</sheetData>")[1]
    assert b"x14:sparklineGroups" in sb and b"x14:dataBar" in sb
    assert b"<pane " in sb and sa[sa.index(b"<sheetViews"): sa.index(b"</sheetViews>")] in sb
    # appended, never moved: the original bytes of these parts are a subsequence
    for name in ["xl/styles.xml", "[Content_Types].xml", "xl/workbook.xml",
                 "xl/_rels/workbook.xml.rels"]:
        check_appended(a[name], b[name], name)
    # existing cell styles keep their indices: old cellXfs entries are a prefix
    xfs = [re.search(rb"<cellXfs[^>]*>(.*?)</cellXfs>", x, re.S)[1] for x in (a["xl/styles.xml"],
                                                                            b["xl/styles.xml"])]
    assert xfs[1].startswith(xfs[0])

    # Read back with openpyxl (outside reader): numbers bit for bit, NaN -> blank,
    # headers, table grown, the new sheet there, old formulas and values intact.
    wb = openpyxl.load_workbook(out)
    ws = wb["Prices"]
    for nc in cols:
        assert ws.cell(1, nc.col).value == nc.header
        for i, v in enumerate(nc.values):
            got = ws.cell(nc.first_row + i, nc.col).value
            if np.isnan(v):
                assert got is None
            else:
                assert np.float64(got).view(np.int64) == np.float64(v).view(np.int64)
        first = nc.first_row + int(np.flatnonzero(~np.isnan(nc.values))[0])
        assert ws.cell(first, nc.col).number_format == nc.number_format
    tab = ws.tables["PriceTable"]
    assert tab.ref == f"A1:J{N + 1}"
    assert [c.name for c in tab.tableColumns][-4:] == [c.header for c in cols]
    assert wb.sheetnames == ["Summary", "Prices", "sheetvol notes"] or \
        wb.sheetnames == ["Prices", "Summary", "sheetvol notes"]
    assert wb["sheetvol notes"]["A2"].value == "rows"
    assert wb["Summary"]["A6"].value.startswith("=SV_ATR(")
    assert ws.freeze_panes == "A2"
    # stored formula results survive (a reader without recalculation sees them)
    got = Package.open(out).read_range("Summary", 3, 1, 7, 1)
    assert got[0][0] == pytest.approx(float(np.mean(100 + np.cumsum(
        np.random.default_rng(3).normal(0, 1, N)))))
    assert got[2][0] == "up" and got[3][0] == 1.2345 and got[4][0] == "#DIV/0!"


def test_rerun_replaces_columns_and_sheet(tmp_path: Path) -> None:
    """Filling the output again replaces the earlier columns and notes (no duplicates)."""
    src = tmp_path / "rich.xlsx"
    build_rich(src, tmp_path)
    first, second = tmp_path / "a.xlsx", tmp_path / "b.xlsx"
    rng = np.random.default_rng(5)

    def words(texts: list[object]) -> NewColumn:  # a text column right of the numbers
        return NewColumn("Prices", col=11, header_row=1, header="outcome", first_row=2,
                         values=np.array(texts, dtype=object), number_format="General")

    write_package(Package.open(src), first,
                  [*new_columns(rng), words(["stop hit", "open", 1.5]),
                   NewSheet("sheetvol notes", [["title"], ["first"]])])
    cols = new_columns(rng)
    cols[0].values[10] = np.nan  # a value that was there becomes blank
    write_package(Package.open(first), second,
                  [*cols, words([None, "target & <trail>"]),
                   NewSheet("sheetvol notes", [["title"], ["second"]])])
    wb = openpyxl.load_workbook(second)
    ws = wb["Prices"]
    assert ws.max_column == 11
    assert ws.cell(12, 7).value is None
    assert ws.cell(13, 7).value == cols[0].values[11]
    assert [ws.cell(r, 11).value for r in range(1, 5)] == ["outcome", None, "target & <trail>",
                                                           None]
    assert wb.sheetnames.count("sheetvol notes") == 1
    assert wb["sheetvol notes"]["A2"].value == "second"
    assert len(ws.tables["PriceTable"].tableColumns) == 11
    # styles are reused, not appended again
    assert parts(second)["xl/styles.xml"] == parts(first)["xl/styles.xml"]
