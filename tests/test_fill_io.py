"""The fill's input and output path: what it loads, how often it inflates a sheet, and
that its speed-ups leave what it writes unchanged."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

xlsxwriter = pytest.importorskip("xlsxwriter")

ROOT = Path(__file__).resolve().parent.parent


def price_book(path: Path, rows: int = 60, text_dates: bool = False) -> Path:
    """A small export: Date, High, Low, Close; dates as date cells or as text."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    date_fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    close = 100 + np.cumsum(np.random.default_rng(5).normal(0, 1, rows))
    for i in range(rows):
        if text_dates:
            ws.write_string(i + 1, 0, f"2025-{1 + i // 28:02d}-{1 + i % 28:02d}")
        else:
            ws.write_number(i + 1, 0, 45658 + i, date_fmt)
        ws.write_row(i + 1, 1, [close[i] + 1, close[i] - 1, close[i]])
    wb.close()
    return path


def loaded_after_fill(src: Path, out: Path) -> list[str]:
    """Heavy libraries in ``sys.modules`` after a fill run in a fresh interpreter."""
    code = ("import sys\n"
            "from pathlib import Path\n"
            "from sheetvol.fill.job import FillOptions, fill_file\n"
            f"fill_file({str(src)!r}, FillOptions(output=Path({str(out)!r})))\n"
            "print(' '.join(m for m in ('pandas', 'openpyxl', 'xlsxwriter') "
            "if m in sys.modules))\n")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT, check=True)
    return proc.stdout.split()


def test_a_fill_of_dated_prices_does_not_load_pandas(tmp_path):
    # pandas costs about 0.3 s to import; prices with date cells never need it
    src = price_book(tmp_path / "prices.xlsx")
    assert loaded_after_fill(src, tmp_path / "out.xlsx") == []
    assert (tmp_path / "out.xlsx").is_file()


def test_text_dates_still_load_pandas_when_they_need_it(tmp_path):
    # the stand-in imports pandas on first use, and text dates parse as before
    import datetime as dt

    from sheetvol.fill.job import FillOptions, fill_file

    src = price_book(tmp_path / "prices.xlsx", text_dates=True)
    assert loaded_after_fill(src, tmp_path / "out.xlsx") == ["pandas"]
    report = fill_file(src, FillOptions(output=tmp_path / "again.xlsx"))
    # day numbers of the 1900 date system count from 1899-12-30 (Python's datetime)
    first = (dt.date(2025, 1, 1) - dt.date(1899, 12, 30)).days
    assert report.sheets[0].table.dates[:2].tolist() == [first, first + 1]


def formula_book(path: Path, rows: int = 40) -> Path:
    """Prices with typed sheetvol formulas: one on the price sheet right of the data far
    below the header, one on a second sheet, and a plain formula. Both sheetvol formulas
    read a small table on the second sheet, so evaluating them reads that sheet only."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    desk = wb.add_worksheet("Desk")
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    for i in range(rows):
        ws.write_number(i + 1, 0, 45658 + i)
        ws.write_row(i + 1, 1, [101.0 + i, 99.0 + i, 100.0 + i])
        if i < 19:
            desk.write_row(i + 1, 3, [51.0 + i, 49.0 + i, 50.0 + i])
    ws.write_formula(rows - 2, 5, "=SV_ATR_LAST(Desk!D2:D20,Desk!E2:E20,Desk!F2:F20,14)",
                     None, 0)
    ws.write_formula(3, 6, "=B2*2", None, 202)
    desk.write_formula(1, 1, "=SV_ATR_LAST(D2:D20,E2:E20,F2:F20,5)", None, 0)
    wb.close()
    return path


def opened_parts(monkeypatch) -> list[str]:
    """Names of the zip entries opened for reading from now on (a spy on the one place
    parts are opened, the safe part reader; it only records, the real function works)."""
    from sheetvol.workbook import _safety, writer

    seen: list[str] = []
    real = _safety.open_part

    def spy(zf, part, *args, **kwargs):
        seen.append(part if isinstance(part, str) else part.filename)
        return real(zf, part, *args, **kwargs)

    monkeypatch.setattr(_safety, "open_part", spy)
    monkeypatch.setattr(writer, "open_part", spy)
    return seen


def test_reading_columns_notes_the_typed_formulas(tmp_path, monkeypatch):
    from sheetvol.workbook import Package

    src = formula_book(tmp_path / "f.xlsx")
    pkg = Package.open(src)
    pkg.read_columns("Prices", [2, 3, 4], first_row=2)
    seen = opened_parts(monkeypatch)
    got = [(f.sheet, f.row, f.col, f.formula) for f in pkg.formula_cells()]
    # the cells written above, in sheet order then row order; B2*2 is no sheetvol formula
    assert got == [("Prices", 39, 6, "SV_ATR_LAST(Desk!D2:D20,Desk!E2:E20,Desk!F2:F20,14)"),
                   ("Desk", 2, 2, "SV_ATR_LAST(D2:D20,E2:E20,F2:F20,5)")]
    assert "xl/worksheets/sheet1.xml" not in seen  # noted by the reading pass
    assert "xl/worksheets/sheet2.xml" in seen  # never read whole before: scanned now
    assert pkg.formula_cells(["Desk"]) == pkg.formula_cells()[1:]


def test_a_fill_opens_the_price_sheet_three_times(tmp_path, monkeypatch):
    # the header rows (looking for a trade log, then for prices: the first chunk only),
    # one reading pass (prices and typed formulas); the writer takes the XML that pass
    # kept, so the sheet is inflated whole once
    from sheetvol.fill.job import FillOptions, fill_file

    src = formula_book(tmp_path / "f.xlsx")
    seen = opened_parts(monkeypatch)
    report = fill_file(src, FillOptions(output=tmp_path / "out.xlsx"))
    assert seen.count("xl/worksheets/sheet1.xml") == 3
    assert report.formulas_ok == 2
    # new columns go right of everything used near the top (the formula in G4)
    assert report.written[0].letter == "H"


def test_sheets_too_large_to_keep_are_inflated_again_with_the_same_result(tmp_path,
                                                                          monkeypatch):
    import zipfile

    from sheetvol.fill.job import FillOptions, fill_file
    from sheetvol.workbook import package

    src = formula_book(tmp_path / "f.xlsx")
    fill_file(src, FillOptions(output=tmp_path / "kept.xlsx"))
    monkeypatch.setattr(package, "KEPT_MAX", 0)
    seen = opened_parts(monkeypatch)
    fill_file(src, FillOptions(output=tmp_path / "again.xlsx"))
    assert seen.count("xl/worksheets/sheet1.xml") == 4  # the writer inflates it again
    with (zipfile.ZipFile(tmp_path / "kept.xlsx") as a,
          zipfile.ZipFile(tmp_path / "again.xlsx") as b):
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            if not name.startswith("xl/worksheets/sheetvol"):  # the notes: time of the run
                assert a.read(name) == b.read(name), name


hypothesis = pytest.importorskip("hypothesis")
st = hypothesis.strategies


@hypothesis.given(st.lists(st.floats(allow_nan=True, allow_infinity=True), max_size=50))
@hypothesis.settings(max_examples=300, deadline=None)
def test_number_texts_are_python_repr(values):
    # the writer's number text must stay exactly repr (the shortest round-trip text)
    from sheetvol.workbook._rowedit import repr_texts

    want = [repr(v) if v == v and abs(v) != float("inf") else "" for v in values]
    assert repr_texts(np.array(values, dtype=np.float64)) == want


def test_number_texts_are_python_repr_across_magnitudes():
    # every binary exponent, both signs, the subnormals and the edges of repr's two styles
    from sheetvol.workbook._rowedit import repr_texts

    rng = np.random.default_rng(11)
    bits = rng.integers(0, 2**63, 200_000, dtype=np.uint64) | (
        rng.integers(0, 2, 200_000, dtype=np.uint64) << np.uint64(63))
    values = bits.view(np.float64)
    edges = np.array([1e-4, np.nextafter(1e-4, 0), 1e16, np.nextafter(1e16, 0), 5e-324,
                      2.2250738585072014e-308, 1.7976931348623157e308, 0.1, 1.0, 0.0, -0.0])
    # one value per binary exponent, subnormals included (ldexp of a mantissa in [1, 2))
    sweep = np.ldexp(rng.uniform(1, 2, 2098), np.arange(-1074, 1024))
    values = np.concatenate([values, sweep, -sweep, edges, -edges])
    want = [repr(v) if np.isfinite(v) else "" for v in values.tolist()]
    assert repr_texts(values) == want


def test_write_behind_keeps_the_order_of_the_pieces():
    import io

    from sheetvol.workbook._zipcopy import WriteBehind

    buf = io.BytesIO()
    pieces = [f"<row r=\"{i}\"/>".encode() for i in range(1, 2001)]
    with WriteBehind(buf, depth=3) as w:
        for piece in pieces:
            w.write(piece)
    assert buf.getvalue() == b"".join(pieces)


def test_write_behind_reports_a_failed_write_in_the_callers_thread():
    from sheetvol.workbook._zipcopy import WriteBehind

    class Full:
        def write(self, data: bytes) -> int:
            raise OSError(28, "No space left on device")

    with pytest.raises(OSError, match="No space left"), WriteBehind(Full()) as w:
        for _ in range(10):
            w.write(b"<row/>")


def test_write_behind_lets_the_callers_error_through():
    import io

    from sheetvol.workbook._zipcopy import WriteBehind

    buf = io.BytesIO()
    with pytest.raises(ValueError, match="row loop"), WriteBehind(buf) as w:
        w.write(b"a")
        raise ValueError("row loop failed")
    assert buf.getvalue() == b"a"  # what was queued before the failure is written


def test_read_ahead_gives_the_same_chunks_and_stops_early(tmp_path):
    import io

    from sheetvol.workbook._sheetxml import ReadAhead

    data = bytes(range(256)) * 1000
    ahead = ReadAhead(io.BytesIO(data), 4096)
    got = [ahead.read(4096) for _ in range(3)]
    assert got == [data[:4096], data[4096:8192], data[8192:12288]]
    assert ahead.read(-1) == data[12288:]  # the rest, as a plain read(-1) gives it
    assert ahead.read(4096) == b""
    ahead.close()
    early = ReadAhead(io.BytesIO(data), 1024)
    assert early.read(1024) == data[:1024]
    early.close()  # the thread stops though most of the data was never asked for
    assert not early._thread.is_alive()


def test_read_ahead_hands_a_damaged_part_to_the_reader(tmp_path):
    # a sheet part whose deflated bytes are cut: the error names the file and the part
    import zipfile

    from sheetvol.workbook import Package, WorkbookError

    src = price_book(tmp_path / "prices.xlsx", rows=3000)
    bad = tmp_path / "bad.xlsx"
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(bad, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            zout.writestr(info, zin.read(info))
    raw = bytearray(bad.read_bytes())
    with zipfile.ZipFile(bad) as zf:
        info = zf.getinfo("xl/worksheets/sheet1.xml")
    # the local header is 30 bytes plus the name and extra field; spoil the deflate stream
    at = info.header_offset + 30 + len(info.filename) + len(info.extra) + info.compress_size // 2
    raw[at : at + 64] = b"\xff" * 64
    bad.write_bytes(bytes(raw))
    with pytest.raises(WorkbookError, match=r"bad\.xlsx.*sheet1\.xml"):
        Package.open(bad).read_columns("Prices", [4], first_row=2)


def test_fill_benchmark_runs_and_prints_a_verdict_per_target(capsys):
    # timings are printed, never asserted: they depend on the machine and its load
    pytest.importorskip("python_calamine")
    from benches import fill_io

    assert fill_io.main(["--rows", "2000", "--small-runs", "1"]) == 0
    out = capsys.readouterr().out
    assert "machine:" in out and "fill / floors" in out
    assert "500-row fill, whole process, under 0.3 s" in out


def test_a_write_that_fails_deep_in_the_sheet_leaves_no_thread_and_no_file(tmp_path,
                                                                           monkeypatch):
    import gc
    import threading

    from sheetvol.workbook import NewColumn, Package, WorkbookError, write_package
    from sheetvol.workbook._sheetxml import SheetStream

    # small chunks, so the failure comes while both helper threads are busy
    monkeypatch.setattr(SheetStream.__init__, "__defaults__", (4096, False))
    src = price_book(tmp_path / "prices.xlsx", rows=3000)
    # cells in column F only far down: a header in F2501 and a number in F2502
    write_package(Package.open(src), tmp_path / "marked.xlsx",
                  [NewColumn("Prices", 6, 2501, "mark", 2502, np.ones(1), "0")])
    out = tmp_path / "out.xlsx"
    with pytest.raises(WorkbookError, match="F2501 already holds a value"):
        write_package(Package.open(tmp_path / "marked.xlsx"), out,
                      [NewColumn("Prices", 6, 1, "mark", 2, np.ones(3000), "0",
                                 replace=False)])
    gc.collect()
    assert [t.name for t in threading.enumerate() if t.name.startswith("sheetvol")] == []
    assert not out.exists() and not list(tmp_path.glob(".out.xlsx.*"))


def rowedit_without_orjson(monkeypatch):
    """A fresh copy of the row editor module loaded while ``import orjson`` fails, as in
    an interpreter that lacks it (the add-in's in-Excel Python)."""
    import importlib.util

    from sheetvol.workbook import _rowedit

    monkeypatch.setitem(sys.modules, "orjson", None)  # None in sys.modules: ImportError
    spec = importlib.util.spec_from_file_location("rowedit_no_orjson", _rowedit.__file__)
    mod = importlib.util.module_from_spec(spec)
    monkeypatch.setitem(sys.modules, spec.name, mod)  # dataclasses look their module up
    spec.loader.exec_module(mod)
    assert mod.orjson is None
    return mod


def test_number_texts_without_orjson_are_the_same(monkeypatch):
    from sheetvol.workbook._rowedit import repr_texts

    plain = rowedit_without_orjson(monkeypatch)
    rng = np.random.default_rng(3)
    values = np.concatenate([rng.normal(100, 30, 5000), np.ldexp(1.5, np.arange(-1074, 1024)),
                             [np.nan, np.inf, -np.inf, 0.0, -0.0, 3e-05, 1e16]])
    # the reference is Python's own repr, "" where no cell goes
    want = [repr(v) if np.isfinite(v) else "" for v in values.tolist()]
    assert plain.repr_texts(values) == want == repr_texts(values)


def test_a_fill_without_orjson_writes_the_same_bytes(tmp_path, monkeypatch):
    import zipfile

    from sheetvol.fill.job import FillOptions, fill_file
    from sheetvol.workbook import _rowedit

    src = price_book(tmp_path / "prices.xlsx", rows=700)
    fill_file(src, FillOptions(output=tmp_path / "fast.xlsx"))
    plain = rowedit_without_orjson(monkeypatch)
    monkeypatch.setattr(_rowedit, "repr_texts", plain.repr_texts)
    fill_file(src, FillOptions(output=tmp_path / "plain.xlsx"))
    with (zipfile.ZipFile(tmp_path / "fast.xlsx") as a,
          zipfile.ZipFile(tmp_path / "plain.xlsx") as b):
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            assert a.read(name) == b.read(name), name


def test_new_cells_laid_out_by_block_are_the_cells_one_by_one(monkeypatch):
    # gaps, infinities, text cells, a column that starts and ends inside a block, a
    # namespace prefix, several blocks: each row's new cells are what one f-string per
    # cell with Python's repr of the number gives
    from sheetvol.workbook import _rowedit
    from sheetvol.workbook._rowedit import ColumnRun, RowEditor, SheetEdits
    from sheetvol.workbook._sheetxml import patterns

    monkeypatch.setattr(_rowedit, "BLOCK", 300)
    rng = np.random.default_rng(8)
    a = rng.normal(100, 5, 900)
    a[rng.random(900) < 0.1] = np.nan
    a[:14] = np.nan
    a[[50, 51]] = [np.inf, -np.inf]
    b = rng.normal(0, 1e-5, 460)  # small numbers: repr's exponent style
    c = rng.normal(1e6, 1, 900)
    texts = {r: f'<x:c r="J{r}" t="inlineStr"><x:is><x:t>note {r}</x:t></x:is></x:c>'
             for r in (5, 299, 300, 301, 640)}
    c[[r - 2 for r in texts]] = np.nan
    runs = [ColumnRun(10, 2, c.tolist(), 0, texts=texts), ColumnRun(8, 2, a.tolist(), 5),
            ColumnRun(9, 40, b.tolist(), 3)]
    editor = RowEditor(SheetEdits("f.xlsx", "Prices", runs=runs), patterns(b"x:"))
    for r in range(2, 1000):
        got = editor._block(r)[r - editor._blk_lo]
        want = []
        for run, s in ((runs[1], ' s="5"'), (runs[2], ' s="3"'), (runs[0], "")):
            if r in (run.texts or {}):
                want.append(run.texts[r])
            elif run.first_row <= r <= run.last_row and np.isfinite(run.values[r - run.first_row]):
                want.append(f'<x:c r="{run.letters}{r}"{s}><x:v>'
                            f'{run.values[r - run.first_row]!r}</x:v></x:c>')
        assert got == "".join(want).encode(), r


def test_read_columns_mixed_cells_agree_with_openpyxl(tmp_path):
    # plain numbers around formulas with stored results, shared and inline text, booleans,
    # errors and styled blanks in the columns read: each reaches the same place as
    # openpyxl reads it (an independent reader)
    import openpyxl

    from sheetvol.workbook import Package

    path = tmp_path / "mixed.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    bold = wb.add_format({"bold": True})
    rng = np.random.default_rng(4)
    for r in range(1, 3000):
        ws.write_row(r, 0, [f"n{r}", *rng.normal(100, 10, 3).tolist()])
        if r % 97 == 0:
            ws.write_formula(r, 2, f"=B{r + 1}*2", None, r * 0.5)
        if r % 131 == 0:
            ws.write_string(r, 1, f"text {r}")
        if r % 149 == 0:
            ws.write_boolean(r, 3, r % 2 == 0)
        if r % 173 == 0:
            ws.write_blank(r, 2, None, bold)
        if r % 211 == 0:
            ws.write_formula(r, 1, "=1/0", None, "#DIV/0!")
    wb.close()
    got = Package.open(path).read_columns("Prices", [2, 3, 4], first_row=2)
    sheet = openpyxl.load_workbook(path, data_only=True)["Prices"]
    for c in (2, 3, 4):
        values = [sheet.cell(r, c).value for r in range(2, 3001)]
        want = [v if isinstance(v, float) and not isinstance(v, bool) else np.nan
                for v in values]
        np.testing.assert_array_equal(got[c].numbers, want)
        assert sorted(got[c].other) == [r for r, v in enumerate(values, 2)
                                        if v is not None and not isinstance(v, float)]
