"""A real spreadsheet program opens what the package layer writes (LibreOffice, headless).

LibreOffice exits 0 even when it had to repair or drop content, so the test does not
trust the exit code: it converts the written workbook to a fresh .xlsx with
``soffice --headless --convert-to xlsx`` (LibreOffice's own writer) and compares the
content read back with openpyxl against the values that were written.
"""

from __future__ import annotations

import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
from test_nothing_lost import N, build_rich, new_columns
from test_package import replace_part

from sheetvol.workbook import (
    CellResult,
    LineChart,
    NewSheet,
    Package,
    SpillResult,
    ValueResult,
    write_package,
)

openpyxl = pytest.importorskip("openpyxl")
pytestmark = pytest.mark.slow  # the `libreoffice` fixture skips, saying why, without it


def part(path: Path, name: str) -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read(name)


def test_libreoffice_reads_what_was_written(tmp_path: Path, libreoffice) -> None:
    built = tmp_path / "built.xlsx"
    build_rich(built, tmp_path)
    # xlsxwriter asks for a full recalculation on load; files saved by a spreadsheet
    # program do not. Remove the flag, as such a program's save would (LibreOffice 7.4.7
    # keeps stored results either way, measured; programs that honour the flag do not).
    src = replace_part(built, "xl/workbook.xml",
                       part(built, "xl/workbook.xml").replace(b' fullCalcOnLoad="1"', b""),
                       tmp_path / "rich.xlsx")
    pkg = Package.open(src)
    formula_row = next(f.row for f in pkg.formula_cells() if f.sheet == "Summary")
    cols = new_columns(np.random.default_rng(21))
    spill_values = np.array([0.5, np.nan, 1e-9, 123456.789])
    edits = [*cols,
             NewSheet("sheetvol notes", [["Item", "Value"], ["rows", float(N)]]),
             CellResult("Summary", formula_row, 1, 2.0 / 3.0),
             SpillResult("Summary", 20, 1, "SV_SERIES(Prices!E2:E5)", spill_values),
             NewSheet("charts", [["charts"]]),
             LineChart("Prices", "close and new", 1, [5, cols[0].col], 2, N + 1, "charts", "A3"),
             LineChart("Prices", "on the data", 1, [5], 2, N + 1, "Prices", "M3")]
    out = tmp_path / "filled.xlsx"
    write_package(pkg, out, edits)

    converted = libreoffice(out)
    back = openpyxl.load_workbook(converted, data_only=True)
    assert back.sheetnames[-2:] == ["sheetvol notes", "charts"]
    assert back["sheetvol notes"]["A2"].value == "rows"
    assert back["sheetvol notes"]["B2"].value == N
    ws = back["Prices"]
    for nc in cols:
        assert ws.cell(1, nc.col).value == nc.header
        for i, v in enumerate(nc.values):
            got = ws.cell(nc.first_row + i, nc.col).value
            if np.isnan(v):
                assert got is None
            else:
                # LibreOffice 7.4 saves numbers with 15 significant digits (measured
                # here), so its copy can differ from ours after the 15th digit
                assert got == pytest.approx(v, rel=1e-14, abs=0)
    # the original columns survived LibreOffice's reading of our file
    orig = openpyxl.load_workbook(src, data_only=True)["Prices"]
    for r in range(1, N + 2):
        for c in range(1, 7):
            want = orig.cell(r, c).value
            if isinstance(want, float):
                want = pytest.approx(want, rel=1e-14, abs=0)
            assert ws.cell(r, c).value == want
    summary = back["Summary"]
    assert summary.cell(formula_row, 1).value == pytest.approx(2.0 / 3.0, rel=1e-14)
    # both charts survive with their data ranges
    with zipfile.ZipFile(converted) as zf:
        charts = [zf.read(n) for n in zf.namelist() if n.startswith("xl/charts/chart")]
    refs = {f for c in charts for f in re.findall(rb"<c:f>([^<]*)</c:f>", c)}
    assert f"Prices!$E$2:$E${N + 1}".encode() in refs
    assert f"Prices!$G$2:$G${N + 1}".encode() in refs
    assert sum(b"<c:lineChart>" in c for c in charts) >= 2
    # LibreOffice (7.4, measured here) recomputes array formulas on load, whatever the
    # stored results, so without the add-in the spilled column shows #NAME?; the formula
    # and its range survive its re-save.
    formulas = openpyxl.load_workbook(converted)["Summary"]
    anchor = formulas.cell(20, 1).value
    assert anchor.ref == "A20:A23" and anchor.text.upper() == "=SV_SERIES(PRICES!E2:E5)"


def test_libreoffice_shows_values_without_the_addin(tmp_path: Path, libreoffice) -> None:
    """Typed sheetvol formulas replaced by their values show as numbers in LibreOffice
    (which does not have the add-in), with or without the workbook's request for a full
    recalculation on opening; a result kept beside its formula (CellResult) survives in
    a copy written with calc_on_load=False from a workbook that had the request."""
    from test_value_results import ROWS, shared_book, typed_book

    book = typed_book(tmp_path / "typed.xlsx")  # openpyxl writes fullCalcOnLoad="1"
    assert b'fullCalcOnLoad="1"' in part(book, "xl/workbook.xml")
    wb = openpyxl.load_workbook(book)
    wb["Data"]["H2"] = f"=SV_DEVIATION_LAST(C2:C{ROWS + 1},14)"
    wb.save(book)
    rng = np.random.default_rng(9)
    dev = rng.standard_normal(ROWS) * 10.0 ** rng.integers(-12, 12, ROWS)
    dev[:13] = np.nan
    edits = [ValueResult("Data", 2, 4, 1.0 / 7.0), ValueResult("Data", 2, 6, dev, "0.0000"),
             CellResult("Data", 2, 8, 1.75)]
    kept, flagged = tmp_path / "kept.xlsx", tmp_path / "flagged.xlsx"
    write_package(Package.open(book), kept, edits, calc_on_load=False)
    write_package(Package.open(book), flagged, edits)  # fullCalcOnLoad="1" left in
    # a shared group whose master became a value; LibreOffice recalculates it on opening
    shared = tmp_path / "shared.xlsx"
    write_package(Package.open(shared_book(tmp_path)), shared,
                  [ValueResult("Data", 2, 4, 0.25), ValueResult("Data", 2, 5, 9.5)])

    lo_kept, lo_flagged, lo_shared = libreoffice(kept, flagged, shared)
    for path in (lo_kept, lo_flagged):
        ws = openpyxl.load_workbook(path, data_only=True)["Data"]
        # LibreOffice 7.4 saves 15 significant digits (measured), hence rel=1e-14
        assert ws["D2"].value == pytest.approx(1.0 / 7.0, rel=1e-14, abs=0)
        for i, v in enumerate(dev):
            got = ws.cell(2 + i, 6).value
            assert got is None if np.isnan(v) else got == pytest.approx(v, rel=1e-14, abs=0)
        formulas = openpyxl.load_workbook(path)["Data"]
        assert formulas["D2"].value == pytest.approx(1.0 / 7.0, rel=1e-14, abs=0)
        assert formulas["G2"].value == f"=SUM(C2:C{ROWS + 1})"
    assert openpyxl.load_workbook(lo_kept, data_only=True)["Data"]["H2"].value == 1.75
    # Measured with LibreOffice 7.4.7: it recomputes formula cells that have no stored
    # result (openpyxl stores none: its typed D2 and F2 read #NAME? after LibreOffice
    # opens the input as it is) but keeps stored results even with fullCalcOnLoad="1",
    # so H2 of the flagged copy is not checked here; the flag matters to programs that
    # honour it (ECMA-376 Part 1, 18.2.2 calcPr: a full calculation on load).

    # LibreOffice computed the group from its new masters: E3 = A3*2+$B$1 = 4.5*2+0.5,
    # E4 = 6*2+0.5, F2..F4 = (blank B)*2+0.5 (worked by hand from shared_book's data)
    ws = openpyxl.load_workbook(lo_shared, data_only=True)["Data"]
    assert [[ws.cell(r, c).value for c in (5, 6)] for r in (2, 3, 4)] == [
        [9.5, 0.5], [9.5, 0.5], [12.5, 0.5]]
    assert ws["D2"].value == 0.25
    formulas = openpyxl.load_workbook(lo_shared)["Data"]
    assert [formulas.cell(r, 4).value.upper() for r in (3, 11)] == [
        "=SV_ATR_LAST(A3:A12,3)", "=SV_ATR_LAST(A11:A20,3)"]
