"""Typed formulas replaced by their results as plain values (ValueResult) and the
``calc_on_load`` option of write_package.

Inputs are real workbooks written by openpyxl or xlsxwriter (outside writers); shared
formulas, which neither writes, are put in by hand in the form ECMA-376 Part 1,
18.3.1.40 (``f``) gives them: the master carries ``t="shared" ref=.. si=..`` and the
text, each other cell of the group only ``t="shared" si=..``. Results are read back
with openpyxl (an outside reader, which moves shared formulas to each cell itself) and
the XML is parsed with the standard library.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import numpy as np
import pytest
from test_nothing_lost import build_rich, parts
from test_package import replace_part
from test_writer import check_order, with_calc_chain

from sheetvol.workbook import (
    CellError,
    NewColumn,
    Package,
    SpillResult,
    ValueResult,
    WorkbookError,
    write_package,
)

openpyxl = pytest.importorskip("openpyxl")
xlsxwriter = pytest.importorskip("xlsxwriter")

NS = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
ROWS = 39  # data rows 2..40


def typed_book(path: Path) -> Path:
    """openpyxl workbook: prices, a typed cell formula (D2), a typed column formula (F2),
    an ordinary formula (G2), a styled blank in the column below F2, a second sheet."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["High", "Low", "Close", "ATR", None, "Deviation", "Sum"])
    rng = np.random.default_rng(7)
    close = 100 + np.cumsum(rng.normal(0, 1, ROWS))
    for i, c in enumerate(close.tolist(), start=2):
        ws.cell(i, 1, c + 1.0)
        ws.cell(i, 2, c - 1.0)
        ws.cell(i, 3, c)
    ws["D2"] = f"=SV_ATR_LAST(A2:A{ROWS + 1},B2:B{ROWS + 1},C2:C{ROWS + 1},14)"
    ws["D2"].number_format = "0.0000"
    ws["F2"] = f"=SV_DEVIATION(C2:C{ROWS + 1},14)"
    ws["F2"].number_format = "0.00%"
    ws["F10"].number_format = "0.000"  # formatted beforehand, still blank
    ws["G2"] = f"=SUM(C2:C{ROWS + 1})"
    other = wb.create_sheet("Other")
    other["A1"] = "=Data!D2*2"
    wb.save(path)
    return path


def xml_of(path: Path, name: str = "xl/worksheets/sheet1.xml") -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read(name)


def formula_cells_in(sheet: bytes) -> set[str]:
    """Cell names holding an <f> element, by parsing the sheet XML."""
    root = ET.fromstring(sheet)
    return {c.get("r") for c in root.iter(NS + "c") if c.find(NS + "f") is not None}


def chain_entries(chain: bytes) -> list[tuple[int, str]]:
    """(sheet index, cell) of each calcChain entry; ``i`` carries over to the following
    entries when left out (ECMA-376 Part 1, 18.6.1)."""
    out = []
    current = 0
    for c in ET.fromstring(chain).iter(NS + "c"):
        current = int(c.get("i", current))
        out.append((current, c.get("r")))
    return out


def cells_of(sheet: bytes) -> list[bytes]:
    """Cell elements of a sheet, self-closing ones included."""
    body = sheet.split(b"<sheetData>")[1].split(b"</sheetData>")[0]
    return re.findall(rb"<c [^>]*?(?:/>|>.*?</c>)", body, re.S)


def calc_pr(path: Path) -> dict[str, str] | None:
    """Attributes of <calcPr> in workbook.xml (None when it has none)."""
    el = ET.fromstring(xml_of(path, "xl/workbook.xml")).find(NS + "calcPr")
    return None if el is None else dict(el.attrib)


def bits(x: float) -> int:
    return int(np.float64(x).view(np.int64))


def test_cell_and_column_become_values(tmp_path: Path) -> None:
    src = with_calc_chain(typed_book(tmp_path / "typed.xlsx"), tmp_path / "in.xlsx",
                          b'<c r="D2" i="1"/><c r="F2"/><c r="G2"/><c r="A1" i="2"/>')
    pkg = Package.open(src)
    assert {(f.row, f.col) for f in pkg.formula_cells()} == {(2, 4), (2, 6)}
    atr = 1.0 / 7.0
    rng = np.random.default_rng(8)
    dev = rng.standard_normal(ROWS) * 10.0 ** rng.integers(-200, 200, ROWS)
    dev[:13] = np.nan  # warm-up rows: the anchor F2 keeps its style and no value
    dev[[20, 30]] = [5e-324, -0.0]
    dev[25] = np.nan  # a gap inside the column: no cell
    out = tmp_path / "out.xlsx"
    write_package(pkg, out, [ValueResult("Data", 2, 4, atr),
                             ValueResult("Data", 2, 6, dev, number_format="0.0000")],
                  calc_on_load=False)

    # openpyxl (outside reader): the numbers bit for bit, no formulas left there
    ws = openpyxl.load_workbook(out)["Data"]
    assert bits(ws["D2"].value) == bits(atr)
    for i, v in enumerate(dev):
        got = ws.cell(2 + i, 6).value
        if np.isnan(v):
            assert got is None, 2 + i
        else:
            assert bits(got) == bits(v), 2 + i
    # styles: the anchors keep theirs, a blank below keeps its own, new cells get the
    # asked number format
    assert ws["D2"].number_format == "0.0000" and ws["F2"].number_format == "0.00%"
    assert ws["F10"].number_format == "0.000" and ws["F16"].number_format == "0.0000"
    assert ws["G2"].value == f"=SUM(C2:C{ROWS + 1})"  # other formulas untouched
    assert openpyxl.load_workbook(out)["Other"]["A1"].value == "=Data!D2*2"

    sheet = xml_of(out)
    check_order(sheet)
    assert formula_cells_in(sheet) == {"G2"}
    assert re.search(rb'<c r="F2" s="\d+"/>', sheet)  # kept, with its style, no value
    # every original cell element other than D2 and F2 is still there, byte for byte
    kept = set(cells_of(sheet))
    for cell in cells_of(xml_of(src)):
        name = re.match(rb'<c r="([A-Z]+\d+)"', cell)[1]
        if name not in (b"D2", b"F2", b"F10"):
            assert cell in kept, cell

    # calcChain: the entries of D2 and F2 went, each left entry names a formula cell
    chain = chain_entries(xml_of(out, "xl/calcChain.xml"))
    assert chain == [(1, "G2"), (2, "A1")]
    formulas = {1: formula_cells_in(sheet),
                2: formula_cells_in(xml_of(out, "xl/worksheets/sheet2.xml"))}
    assert all(cell in formulas[i] for i, cell in chain)

    # nothing else changed: other parts byte for byte, workbook.xml lost only the flag
    a, b = parts(src), parts(out)
    assert set(a) == set(b)
    changed = {n for n in a if a[n] != b[n]}
    assert changed == {"xl/worksheets/sheet1.xml", "xl/calcChain.xml", "xl/styles.xml",
                       "xl/workbook.xml"}
    assert b'fullCalcOnLoad="1"' in a["xl/workbook.xml"]
    assert b["xl/workbook.xml"] == a["xl/workbook.xml"].replace(b' fullCalcOnLoad="1"', b"")


def test_text_flags_errors_and_blanks(tmp_path: Path) -> None:
    src = typed_book(tmp_path / "in.xlsx")
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [ValueResult("Data", 2, 4, ' "q" & <b> '),
                                           ValueResult("Data", 2, 6, CellError("#N/A")),
                                           ValueResult("Data", 2, 7, True)])
    ws = openpyxl.load_workbook(out)["Data"]
    assert ws["D2"].value == ' "q" & <b> ' and ws["F2"].value == "#N/A"
    assert ws["G2"].value is True
    assert formula_cells_in(xml_of(out)) == set()
    for blank in (None, np.nan, np.array([np.nan])):
        write_package(Package.open(src), out, [ValueResult("Data", 2, 4, blank)])
        sheet = xml_of(out)
        assert re.search(rb'<c r="D2" s="\d+"/>', sheet), blank
        assert openpyxl.load_workbook(out)["Data"]["D2"].number_format == "0.0000"


def test_refusals_name_the_cell(tmp_path: Path) -> None:
    src = typed_book(tmp_path / "in.xlsx")
    out = tmp_path / "out.xlsx"
    pkg = Package.open(src)
    with pytest.raises(WorkbookError, match=r"cell C2 holds no formula"):
        write_package(pkg, out, [ValueResult("Data", 2, 3, 1.0)])
    # a note typed below F2 is in the way of a column result (a styled blank is not)
    wb = openpyxl.load_workbook(src)
    wb["Data"]["F20"] = "note"
    wb.save(tmp_path / "note.xlsx")
    with pytest.raises(WorkbookError, match=r"cell F20 is not empty.*formula in F2"):
        write_package(Package.open(tmp_path / "note.xlsx"), tmp_path / "x.xlsx",
                      [ValueResult("Data", 2, 6, np.ones(ROWS))])
    with pytest.raises(WorkbookError, match=r"cell D2 is written twice"):
        write_package(pkg, tmp_path / "x.xlsx", [ValueResult("Data", 2, 4, 1.0),
                                                 ValueResult("Data", 2, 4, 2.0)])
    with pytest.raises(WorkbookError, match=r"below D2 are written twice"):
        write_package(pkg, tmp_path / "x.xlsx", [
            NewColumn("Data", 4, 1, "ATR", 3, np.ones(3), "0"),
            ValueResult("Data", 2, 4, np.ones(5))])
    assert not (tmp_path / "x.xlsx").exists()


def test_calc_chain_left_empty_goes(tmp_path: Path) -> None:
    src = with_calc_chain(typed_book(tmp_path / "typed.xlsx"), tmp_path / "in.xlsx",
                          b'<c r="D2" i="1"/>')
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [ValueResult("Data", 2, 4, 2.5)])
    with zipfile.ZipFile(out) as zf:
        assert "xl/calcChain.xml" not in zf.namelist()
        assert b"calcChain" not in zf.read("[Content_Types].xml")
        assert b"calcChain" not in zf.read("xl/_rels/workbook.xml.rels")
    assert openpyxl.load_workbook(out)["Data"]["D2"].value == 2.5


def shared_book(tmp: Path, name: str = "shared.xlsx") -> Path:
    """xlsxwriter workbook with two shared-formula groups put in by hand:
    D2:D11 from ``SV_ATR_LAST(A2:A11,3)`` (stored results 0.5) and the 2-D block E2:F4
    from ``A2*2+$B$1`` (no stored results). A2..A11 hold 3.0, 4.5, ..., 16.5; B1 0.5."""
    path = tmp / name
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    ws.write_number(0, 1, 0.5)
    for r in range(2, 12):
        ws.write_number(r - 1, 0, r * 1.5)
        ws.write_formula(r - 1, 3, "=SV_X()", None, 0.5)
    for r in range(2, 5):
        for c in (4, 5):
            ws.write_formula(r - 1, c, "=PLACEHOLDER()", None, 0)
    wb.close()
    xml = xml_of(path)

    def share(m: re.Match[bytes]) -> bytes:
        cell, value = m[1], m[2]
        if cell[:1] != b"D":
            value = b""  # no stored result: a program opening the file computes these
        if cell == b"D2":
            f = b'<f t="shared" ref="D2:D11" si="0">SV_ATR_LAST(A2:A11,3)</f>'
        elif cell == b"E2":
            f = b'<f t="shared" ref="E2:F4" si="1">A2*2+$B$1</f>'
        else:
            f = b'<f t="shared" si="' + (b"0" if cell[:1] == b"D" else b"1") + b'"/>'
        return b'<c r="' + cell + b'">' + f + value + b"</c>"

    xml = re.sub(rb'<c r="([D-F]\d+)"><f>[^<]*</f>(<v>[^<]*</v>)</c>', share, xml)
    return replace_part(path, "xl/worksheets/sheet1.xml", xml)


def test_shared_master_hands_over_to_the_next_cell(tmp_path: Path) -> None:
    src = shared_book(tmp_path)
    out = tmp_path / "out.xlsx"
    # D2 (master) and D4 become values; E2 (master of a 2-D block) too
    write_package(Package.open(src), out, [ValueResult("Data", 2, 4, 0.25),
                                           ValueResult("Data", 4, 4, 0.75),
                                           ValueResult("Data", 2, 5, 9.5)])
    sheet = xml_of(out)
    check_order(sheet)
    assert b'<c r="D3"><f t="shared" ref="D3:D11" si="0">SV_ATR_LAST(A3:A12,3)</f>' in sheet
    assert b'<c r="F2"><f t="shared" ref="F2:F4" si="1">B2*2+$B$1</f>' in sheet
    # openpyxl moves each shared formula from its master itself; the texts expected are
    # worked by hand: relative references move by the cell's offset, $B$1 stays
    ws = openpyxl.load_workbook(out)["Data"]
    want_d = {r: f"=SV_ATR_LAST(A{r}:A{r + 9},3)" for r in range(3, 12)}
    want_d[2], want_d[4] = 0.25, 0.75
    assert {r: ws.cell(r, 4).value for r in range(2, 12)} == want_d
    assert [[ws.cell(r, c).value for c in (5, 6)] for r in range(2, 5)] == [
        [9.5, "=B2*2+$B$1"], ["=A3*2+$B$1", "=B3*2+$B$1"], ["=A4*2+$B$1", "=B4*2+$B$1"]]
    # the package layer's own reader finds the same sheetvol formulas
    found = {(f.row, f.col): f.formula for f in Package.open(out).formula_cells()}
    assert found == {(r, 4): want_d[r][1:] for r in range(3, 12) if r != 4}

    # every cell of a group converted: nothing to hand over, no formula left there
    every = [ValueResult("Data", r, 4, float(r)) for r in range(2, 12)]
    write_package(Package.open(src), out, every)
    assert formula_cells_in(xml_of(out)) == {f"{c}{r}" for c in "EF" for r in (2, 3, 4)}
    # the last but one converted: the last cell gets a plain formula of its own
    write_package(Package.open(src), out, every[:-1])
    assert formula_cells_in(xml_of(out)) >= {"D11"}
    assert b'<c r="D11"><f>SV_ATR_LAST(A11:A20,3)</f>' in xml_of(out)


def test_shared_master_with_whole_column_reference_refused(tmp_path: Path) -> None:
    src = shared_book(tmp_path)
    xml = xml_of(src).replace(b"SV_ATR_LAST(A2:A11,3)", b"SV_ATR_LAST(A:A,3)+A2")
    src = replace_part(src, "xl/worksheets/sheet1.xml", xml, tmp_path / "whole.xlsx")
    with pytest.raises(WorkbookError, match=r"cell D3 shares the formula of D2"):
        write_package(Package.open(src), tmp_path / "out.xlsx",
                      [ValueResult("Data", 2, 4, 1.0)])
    assert not (tmp_path / "out.xlsx").exists()


def test_earlier_array_result_becomes_values(tmp_path: Path) -> None:
    """A column stored earlier as an array formula (SpillResult, or a dynamic array from
    a spreadsheet program, whose anchor carries ``cm``) turns into plain values; its
    old cells below go where the new column is shorter."""
    src = typed_book(tmp_path / "in.xlsx")
    first = tmp_path / "first.xlsx"
    write_package(Package.open(src), first, [
        SpillResult("Data", 2, 6, "SV_DEVIATION(C2:C40,14)", np.arange(6.0) + 0.5)])
    xml = xml_of(first).replace(b'<c r="F2"', b'<c r="F2" cm="1"')
    dyn = replace_part(first, "xl/worksheets/sheet1.xml", xml, tmp_path / "dyn.xlsx")
    assert Package.open(dyn).formula_cells()[-1].array_ref == "F2:F7"
    out = tmp_path / "out.xlsx"
    write_package(Package.open(dyn), out, [ValueResult("Data", 2, 6, np.array([1.5, 2.5]))])
    sheet = xml_of(out)
    assert formula_cells_in(sheet) == {"D2", "G2"} and b"cm=" not in sheet
    ws = openpyxl.load_workbook(out)["Data"]
    assert [ws.cell(r, 6).value for r in range(2, 9)] == [1.5, 2.5] + [None] * 5


def test_rich_workbook_loses_nothing(tmp_path: Path) -> None:
    """xlsxwriter's feature-rich workbook (see test_nothing_lost): turning the typed
    sheetvol formula Summary!A6 into its value changes that cell only."""
    src = tmp_path / "rich.xlsx"
    build_rich(src, tmp_path)
    pkg = Package.open(src)
    typed = next(f for f in pkg.formula_cells() if f.sheet == "Summary")
    part = pkg.sheet("Summary").part
    out = tmp_path / "out.xlsx"
    write_package(pkg, out, [ValueResult("Summary", typed.row, typed.col, 2.0 / 3.0)])
    a, b = parts(src), parts(out)
    assert [n for n in a if a[n] != b[n]] == [part] and set(a) == set(b)
    before, after = cells_of(a[part]), cells_of(b[part])
    name = f"A{typed.row}".encode()
    assert [c for c in before if not c.startswith(b'<c r="' + name + b'"')] == [
        c for c in after if not c.startswith(b'<c r="' + name + b'"')]
    assert a[part].split(b"</sheetData>")[1] == b[part].split(b"</sheetData>")[1]
    got = openpyxl.load_workbook(out)["Summary"].cell(typed.row, typed.col).value
    assert bits(got) == bits(2.0 / 3.0)


def test_calc_on_load_option(tmp_path: Path) -> None:
    src = tmp_path / "in.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    wb.add_worksheet("S").write_formula("A1", "=SV_X()", None, 1.5)
    wb.close()
    before = xml_of(src, "xl/workbook.xml")
    assert b'<calcPr calcId="124519" fullCalcOnLoad="1"/>' in before  # xlsxwriter's
    out = tmp_path / "out.xlsx"
    write_package(Package.open(src), out, [])
    assert xml_of(out, "xl/workbook.xml") == before  # None: as it was
    write_package(Package.open(src), out, [], calc_on_load=False)
    assert xml_of(out, "xl/workbook.xml") == before.replace(b' fullCalcOnLoad="1"', b"")
    assert calc_pr(out) == {"calcId": "124519"}
    again = tmp_path / "again.xlsx"
    write_package(Package.open(out), again, [], calc_on_load=True)
    assert xml_of(again, "xl/workbook.xml") == before
    # no calcPr at all: one is put in its place (before </workbook> here)
    bare = replace_part(src, "xl/workbook.xml", re.sub(rb"<calcPr[^>]*/>", b"", before),
                        tmp_path / "bare.xlsx")
    write_package(Package.open(bare), again, [], calc_on_load=True)
    assert calc_pr(again) == {"fullCalcOnLoad": "1"}
    assert xml_of(again, "xl/workbook.xml").endswith(b'<calcPr fullCalcOnLoad="1"/></workbook>')
    write_package(Package.open(bare), again, [], calc_on_load=False)
    assert xml_of(again, "xl/workbook.xml") == xml_of(bare, "xl/workbook.xml")

