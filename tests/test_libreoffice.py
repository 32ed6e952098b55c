"""A real spreadsheet program opens what the package layer writes (LibreOffice, headless).

LibreOffice exits 0 even when it had to repair or drop content, so the test does not
trust the exit code: it converts the written workbook to a fresh .xlsx with
``soffice --headless --convert-to xlsx`` (LibreOffice's own writer) and compares the
content read back with openpyxl against the values that were written.
"""

from __future__ import annotations

import re
import shutil
import subprocess
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
    write_package,
)

openpyxl = pytest.importorskip("openpyxl")
SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")
pytestmark = [
    pytest.mark.skipif(SOFFICE is None, reason="LibreOffice (soffice) is not installed; "
                       ".ci/run installs it"),
    pytest.mark.slow,
]


def part(path: Path, name: str) -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read(name)


def convert(path: Path, tmp: Path) -> Path:
    """LibreOffice's re-save of ``path`` as .xlsx, with a throw-away user profile."""
    out_dir = tmp / "lo"
    out_dir.mkdir(exist_ok=True)
    profile = (tmp / "lo-profile").as_uri()
    subprocess.run([SOFFICE, f"-env:UserInstallation={profile}", "--headless", "--norestore",
                    "--convert-to", "xlsx", "--outdir", str(out_dir), str(path)],
                   check=True, capture_output=True, timeout=120)
    got = out_dir / path.name.replace(".xlsm", ".xlsx")
    assert got.exists(), "LibreOffice wrote nothing"
    return got


def test_libreoffice_reads_what_was_written(tmp_path: Path) -> None:
    built = tmp_path / "built.xlsx"
    build_rich(built, tmp_path)
    # xlsxwriter asks for a full recalculation on load (it stores no computed results);
    # files saved by a spreadsheet program do not, and with it LibreOffice recomputes the
    # add-in formulas to #NAME?. Remove the flag, as such a program's save would.
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

    converted = convert(out, tmp_path)
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
