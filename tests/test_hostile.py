"""Hostile files and faults: no traceback, no hang, no data lost (issue 13).

Inputs are real packages: a price workbook written by xlsxwriter (an outside writer),
then edited as bytes or re-zipped entry by entry with :func:`raw_zip` where the case
needs a zip no ordinary library writes (a lying size, deflate64, an encryption flag,
a duplicate or escaping entry name). Every failure must reach the user as one line
naming the file, with exit status 1, and a batch must go on to the next file.
"""

from __future__ import annotations

import os
import re
import shutil
import struct
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from sheetvol.cli import main
from sheetvol.fill import job
from sheetvol.fill.job import FillOptions, fill_file
from sheetvol.fill.recipe import default_specs
from sheetvol.workbook import Package, WorkbookError

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")

ROOT = Path(__file__).resolve().parent.parent
SHEET = "xl/worksheets/sheet1.xml"
NS_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
N_BARS = 30


def price_book(path: Path, extra_header: str | None = None) -> Path:
    """Date/Open/High/Low/Close on sheet "Prices"; ``extra_header`` heads column G with
    the user's own formulas below it."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
    ws.write_row(0, 0, ["Date", "Open", "High", "Low", "Close"])
    rng = np.random.default_rng(3)
    close = 100 + np.cumsum(rng.normal(0, 1, N_BARS))
    for i in range(N_BARS):
        c = round(float(close[i]), 2)
        ws.write_number(i + 1, 0, 45293 + i, fmt)
        ws.write_row(i + 1, 1, [c - 0.2, c + 1.0, c - 1.0, c])
    if extra_header is not None:
        ws.write_string(0, 6, extra_header)
        ws.write_comment(0, 6, "my own column, keep it")
        for i in range(N_BARS):
            ws.write_formula(i + 1, 6, f"=E{i + 2}*2", None, 2.0)
    wb.close()
    return path


# -- a zip writer for packages no ordinary library writes ---------------------------------
@dataclass
class Entry:
    name: str
    raw: bytes  # the stored (compressed) bytes
    size: int  # the inflated size the headers declare
    crc: int
    method: int = zipfile.ZIP_DEFLATED
    flags: int = 0


def deflated(name: str, data: bytes) -> Entry:
    co = zlib.compressobj(6, zlib.DEFLATED, -15)
    return Entry(name, co.compress(data) + co.flush(), len(data), zlib.crc32(data))


def raw_zip(path: Path, entries: list[Entry]) -> Path:
    """Local headers, data, central directory and end record, as the zip format lays
    them out (APPNOTE.TXT 4.3), with whatever the entries claim."""
    out, central = bytearray(), bytearray()
    for e in entries:
        name = e.name.encode()
        offset = len(out)
        out += struct.pack("<4sHHHHHIIIHH", b"PK\x03\x04", 20, e.flags, e.method, 0, 0x21,
                           e.crc, len(e.raw), e.size, len(name), 0) + name + e.raw
        central += struct.pack("<4sHHHHHHIIIHHHHHII", b"PK\x01\x02", 20, 20, e.flags,
                               e.method, 0, 0x21, e.crc, len(e.raw), e.size, len(name), 0, 0,
                               0, 0, 0, offset) + name
    start = len(out)
    out += central + struct.pack("<4sHHHHIIH", b"PK\x05\x06", 0, 0, len(entries),
                                 len(entries), len(central), start, 0)
    path.write_bytes(bytes(out))
    return path


def entries_of(book: Path) -> list[Entry]:
    with zipfile.ZipFile(book) as zf:
        return [deflated(i.filename, zf.read(i)) for i in zf.infolist()]


def repack(book: Path, out: Path, change: dict[str, Entry | None] | None = None,
           add: list[Entry] | None = None) -> Path:
    """``book`` re-zipped: entries in ``change`` replaced (None drops one), ``add`` appended."""
    change = change or {}
    entries = []
    for e in entries_of(book):
        if e.name in change:
            if change[e.name] is not None:
                entries.append(change[e.name])
        else:
            entries.append(e)
    return raw_zip(out, entries + (add or []))


def edit_part(book: Path, out: Path, part: str, edit) -> Path:
    with zipfile.ZipFile(book) as zf:
        data = zf.read(part)
    return repack(book, out, {part: deflated(part, edit(data))})


def with_cell(book: Path, out: Path, row: int, cell_xml: bytes) -> Path:
    """Put ``cell_xml`` at the end of row ``row`` of the price sheet."""
    def edit(data: bytes) -> bytes:
        m = re.search(rb'<row r="%d"[^>]*>.*?(</row>)' % row, data, re.S)
        assert m is not None
        return data[: m.start(1)] + cell_xml + data[m.start(1):]
    return edit_part(book, out, SHEET, edit)


def with_row(book: Path, out: Path, row_xml: bytes) -> Path:
    """Append a row to the price sheet's data."""
    return edit_part(book, out, SHEET, lambda d: d.replace(b"</sheetData>",
                                                           row_xml + b"</sheetData>"))


def run_cli(args: list[str], capsys) -> tuple[int, str, str]:
    rc = main(args)
    got = capsys.readouterr()
    return rc, got.out, got.err


def error_lines(err: str) -> list[str]:
    return [line for line in err.splitlines() if line.startswith("sheetvol: error")]


# -- tracebacks and aborted batches -----------------------------------------------------
HOSTILE_CELLS = {
    # invalid UTF-8 bytes in an inline string and in a formula's text result
    "bad-utf8-inline": (3, b'<c r="G3" t="inlineStr"><is><t>ok\xff\xfe</t></is></c>', "G3"),
    "bad-utf8-str": (4, b'<c r="G4" t="str"><f>"x"</f><v>\xc3\x28</v></c>', "G4"),
    # a character reference beyond Unicode (U+10FFFF is the last code point)
    "char-ref-beyond": (5, b'<c r="G5" t="str"><f>"x"</f><v>&#x110000;</v></c>', "G5"),
    # a numeric character reference too large for any integer type
    # invalid UTF-8 inside a typed sheetvol formula's text
    "bad-utf8-formula": (7, b'<c r="G7"><f>SV_ATR(B2:B9,"\xff")</f><v>1</v></c>', "G7"),
    "char-ref-huge": (6, b'<c r="G6" t="inlineStr"><is><t>&#' + b"9" * 40 + b";</t></is></c>",
                      "G6"),
}


@pytest.mark.parametrize("case", sorted(HOSTILE_CELLS))
def test_hostile_cell_text_is_one_line_and_the_batch_goes_on(tmp_path, capsys, case):
    row, xml, ref = HOSTILE_CELLS[case]
    base = price_book(tmp_path / "base.xlsx")
    bad = with_cell(base, tmp_path / "bad.xlsx", row, xml)
    good = price_book(tmp_path / "good.xlsx")
    rc, _, err = run_cli(["fill", str(bad), str(good), "-q"], capsys)
    assert rc == 1
    lines = error_lines(err)
    assert len(lines) == 1, err
    assert "bad.xlsx" in lines[0] and ref in lines[0] and '"Prices"' in lines[0], lines[0]
    assert "Traceback" not in err
    assert (tmp_path / "good-filled.xlsx").exists()  # the batch went on
    assert not (tmp_path / "bad-filled.xlsx").exists()


def test_csv_header_field_beyond_the_csv_module_limit(tmp_path, capsys):
    # the standard csv module refuses fields over 131,072 characters by default
    # (csv.field_size_limit()); such a header is no export's header
    bad = tmp_path / "bad.csv"
    bad.write_text("Date,Close," + "x" * 131_073 + "\n2024-01-02,100,1\n", encoding="utf-8")
    good = price_book(tmp_path / "good.xlsx")
    rc, _, err = run_cli(["fill", str(bad), str(good), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "bad.csv" in line and "line 1" in line, line
    assert (tmp_path / "good-filled.xlsx").exists()


def _csv_bars(n: int = 40) -> list[str]:
    return [f"2024-{1 + k // 28:02d}-{1 + k % 28:02d},{100 + k % 5},{101 + k % 5},{99 + k % 5},"
            f"{100.5 + k % 5}" for k in range(n)]


def test_csv_wider_than_a_worksheet_is_refused_by_line(tmp_path, capsys):
    # Found by a hand-made hostile CSV: 17,006 columns escaped as an unexpected failure.
    bad = tmp_path / "wide.csv"
    head = "Date,Open,High,Low,Close," + ",".join(f"c{i}" for i in range(17_001))
    bad.write_text("\n".join([head, *_csv_bars()]) + "\n", encoding="utf-8")
    good = price_book(tmp_path / "good.xlsx")
    rc, _, err = run_cli(["fill", str(bad), str(good), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "wide.csv" in line and "line 1" in line and "17,006" in line and "16,384" in line, line
    assert "unexpected" not in line
    assert (tmp_path / "good-filled.xlsx").exists()


def test_csv_with_carriage_returns_alone_reads_as_lines(tmp_path):
    # Old exports end lines with CR alone; the csv module reads them when given the text
    # without newline translation (its documented newline="" use).
    src = tmp_path / "cr.csv"
    src.write_bytes("\r".join(["Date,Open,High,Low,Close", *_csv_bars()]).encode() + b"\r")
    report = fill_file(src, FillOptions(output=tmp_path / "cr-filled.xlsx"))
    table = report.sheets[0].table
    assert table is not None and len(table.rows) == 40 and table.order == "oldest first"


@pytest.mark.parametrize("when", ["0001-01-01", "1899-12-30", "1850-06-01"])
def test_csv_date_before_1900_is_refused_naming_the_cell(tmp_path, when):
    # A worksheet's dates start on 1900-01-01: an earlier one cannot be stored as a date
    # (it was written as a negative or zero serial, shown as ##### or a bare time).
    src = tmp_path / "old.csv"
    bars = _csv_bars()
    bars[5] = when + bars[5][10:]
    src.write_text("\n".join(["Date,Open,High,Low,Close", *bars]) + "\n", encoding="utf-8")
    with pytest.raises(ValueError) as err:
        fill_file(src, FillOptions(output=tmp_path / "old-filled.xlsx"))
    assert "A7" in str(err.value) and when in str(err.value), str(err.value)
    assert not (tmp_path / "old-filled.xlsx").exists()


DAMAGED_VALUES = {
    # a shared-string index past the table: the header "Close" vanished, silently
    "shared-index-past-the-table": (rb'<c r="E1" t="s"><v>4</v></c>',
                                    b'<c r="E1" t="s"><v>999</v></c>', "E1"),
    "shared-index-not-a-number": (rb'<c r="E1" t="s"><v>4</v></c>',
                                  b'<c r="E1" t="s"><v>four</v></c>', "E1"),
    # a number cell whose value is not a number: a price read as a gap, silently
    "number-cell-with-text": (rb'<c r="E5"><v>[^<]*</v></c>', b'<c r="E5"><v>abc</v></c>',
                              "E5"),
    "number-cell-with-comma": (rb'<c r="C9"><v>[^<]*</v></c>', b'<c r="C9"><v>1,5</v></c>',
                               "C9"),
}


@pytest.mark.parametrize("case", sorted(DAMAGED_VALUES))
def test_a_cell_value_the_file_cannot_hold_is_refused_naming_the_cell(tmp_path, capsys, case):
    # Found by mutating workbooks: such cells were read as blank, so a header or a price
    # went missing without a word. Spreadsheet programs write neither.
    old, new, ref = DAMAGED_VALUES[case]
    base = price_book(tmp_path / "base.xlsx")
    bad = edit_part(base, tmp_path / "bad.xlsx", SHEET,
                    lambda d: re.sub(old, lambda _m: new, d, count=1))
    assert new in zipfile.ZipFile(bad).read(SHEET)
    good = price_book(tmp_path / "good.xlsx")
    rc, _, err = run_cli(["fill", str(bad), str(good), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "bad.xlsx" in line and f"cell {ref}" in line and '"Prices"' in line, line
    assert "damaged" in line, line
    assert (tmp_path / "good-filled.xlsx").exists()


@pytest.mark.parametrize(("old", "new", "where"), [
    # in a price row the fill edits (its output had the cell with two r attributes)
    (rb'<c r="E7">', b'<c r="e7">', "row 7"),
    (rb'<c r="B9">', b'<c r="B9x">', "row 9"),
    # in the header row, which is read to find the columns
    (rb'<c r="B1" t="s">', b'<c r="1B" t="s">', "row 1"),
])
def test_a_cell_reference_that_is_not_one_is_refused_naming_the_row(tmp_path, capsys, old, new,
                                                                    where):
    # Found by mutating workbooks: a cell whose r attribute is not an A1 reference was
    # taken for a cell without one; the row editor then added a second r attribute and
    # wrote a sheet no program can open.
    base = price_book(tmp_path / "base.xlsx")
    bad = edit_part(base, tmp_path / "bad.xlsx", SHEET, lambda d: d.replace(old, new, 1))
    assert new in zipfile.ZipFile(bad).read(SHEET)
    good = price_book(tmp_path / "good.xlsx")
    rc, _, err = run_cli(["fill", str(bad), str(good), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "bad.xlsx" in line and where in line and repr(new.split(b'"')[1].decode()) in line
    assert "damaged" in line, line
    assert not (tmp_path / "bad-filled.xlsx").exists()
    assert (tmp_path / "good-filled.xlsx").exists()


@pytest.mark.parametrize(("extra", "cell"), [
    (b'<mergeCells count="1"><mergeCell ref="F1:XFD1048576"/></mergeCells>', None),
    (b"", b'<c r="XFD3"><v>1</v></c>'),
    (b"", b'<c r="XFA1" t="inlineStr"><is><t>note</t></is></c>'),
])
def test_no_room_right_of_the_prices_is_refused_at_once(tmp_path, capsys, extra, cell):
    # A merged block or cells reaching the sheet's last column leave no room for the new
    # columns: one refusal naming the sheet, without reading the sheet again and again.
    base = price_book(tmp_path / "base.xlsx")
    bad = edit_part(base, tmp_path / "bad.xlsx", SHEET,
                    lambda d: d.replace(b"</sheetData>", b"</sheetData>" + extra))
    if cell:
        row = int(re.search(rb"\d+", cell[8:]).group())
        bad = with_cell(bad, tmp_path / "bad2.xlsx", row, cell)
        bad = bad.replace(bad.with_name("bad.xlsx"))
    start = time.perf_counter()
    rc, _, err = run_cli(["fill", str(bad), "-q"], capsys)
    assert rc == 1 and time.perf_counter() - start < 5
    (line,) = error_lines(err)
    assert '"Prices"' in line and "no room for 6 new columns" in line and "XFD" in line, line


def test_a_workbook_without_its_styles_part_keeps_how_its_cells_show(tmp_path):
    # Found by mutating workbooks and reading the outputs back: with the styles part gone,
    # the cells' style numbers (s="1" on the dates here) pointed into the styles the fill
    # made for its own columns, and whole columns of numbers read back as dates.
    base = price_book(tmp_path / "base.xlsx")
    bad = repack(base, tmp_path / "bad.xlsx", {"xl/styles.xml": None})
    before = openpyxl_cells(bad)
    report = fill_file(bad, FillOptions(output=tmp_path / "out.xlsx"))
    after = openpyxl_cells(report.output)
    changed = {k: (v, after[k]) for k, v in before.items() if after.get(k) != v}
    assert not changed, list(changed.items())[:3]
    assert isinstance(after["A2"], (int, float)) and after["F1"] == report.written[0].spec.header
    # Without a styles part a style number means nothing: every cell that was there
    # still shows as General (the dates' s="1" must not now name one of the fill's formats).
    import openpyxl

    ws = openpyxl.load_workbook(report.output)["Prices"]
    shown = {(ws[k].number_format, bool(ws[k].font.b)) for k in before}
    assert shown == {("General", False)}, shown
    # The relationship and content type the input had are used, not doubled.
    with zipfile.ZipFile(report.output) as zf:
        rels = zf.read("xl/_rels/workbook.xml.rels")
        types = zf.read("[Content_Types].xml")
    assert rels.count(b"/relationships/styles") == 1
    assert types.count(b'PartName="/xl/styles.xml"') == 1


def openpyxl_cells(book: Path) -> dict[str, object]:
    """Cell -> value of the price sheet as openpyxl reads it (its read-only reader, which
    takes a style number without a styles part as no style)."""
    import openpyxl

    wb = openpyxl.load_workbook(book, read_only=True)
    out = {c.coordinate: c.value for row in wb["Prices"].iter_rows() for c in row
           if getattr(c, "value", None) is not None}
    wb.close()
    return out


@pytest.mark.parametrize("serial", [b"-5", b"2958466", b"1e300"])
def test_a_date_cell_holding_a_day_number_no_worksheet_has_is_refused(tmp_path, capsys, serial):
    # Found while checking the date limits: a date cell holding -5 reached the summary's
    # date display and failed unexpectedly there.
    base = price_book(tmp_path / "base.xlsx")
    bad = edit_part(base, tmp_path / "bad.xlsx", SHEET,
                    lambda d: re.sub(rb'<c r="A5" s="1"><v>\d+</v>',
                                     b'<c r="A5" s="1"><v>' + serial + b"</v>", d))
    rc, _, err = run_cli(["fill", str(bad), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert '"Prices"' in line and "A5" in line and "not a date a worksheet can hold" in line, line
    assert "unexpected" not in line


def _docprops(book: Path) -> Entry:
    with zipfile.ZipFile(book) as zf:
        return deflated("docProps/app.xml", zf.read("docProps/app.xml"))


def test_deflate64_entry_is_refused_by_name(tmp_path, capsys):
    base = price_book(tmp_path / "base.xlsx")
    e = _docprops(base)
    e.method = 9  # deflate64 (APPNOTE.TXT 4.4.5): the standard library cannot inflate it
    bad = repack(base, tmp_path / "bad.xlsx", {"docProps/app.xml": e})
    good = price_book(tmp_path / "good.xlsx")
    rc, _, err = run_cli(["fill", str(bad), str(good), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "bad.xlsx" in line and "docProps/app.xml" in line and "deflate64" in line, line
    assert (tmp_path / "good-filled.xlsx").exists()


def test_encryption_flag_on_a_copied_part_is_refused(tmp_path, capsys):
    base = price_book(tmp_path / "base.xlsx")
    e = _docprops(base)
    e.flags |= 0x1  # general purpose bit 0: encrypted (APPNOTE.TXT 4.4.4)
    bad = repack(base, tmp_path / "bad.xlsx", {"docProps/app.xml": e})
    rc, _, err = run_cli(["fill", str(bad), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "bad.xlsx" in line and "docProps/app.xml" in line and "encrypt" in line, line


def test_ctrl_c_is_one_line(tmp_path, capsys, monkeypatch):
    good = price_book(tmp_path / "good.xlsx")

    def interrupted(*_a, **_k):
        raise KeyboardInterrupt

    monkeypatch.setattr(job, "compute_columns", interrupted)
    rc, _, err = run_cli(["fill", str(good), "-q"], capsys)
    assert rc == 1
    (line,) = err.strip().splitlines()
    assert "good.xlsx" in line and "interrupted" in line, line
    assert not (tmp_path / "good-filled.xlsx").exists()
    assert not list(tmp_path.glob(".*.part"))


def test_any_unexpected_failure_is_one_line_and_the_batch_goes_on(tmp_path, capsys,
                                                                   monkeypatch):
    first = price_book(tmp_path / "first.xlsx")
    second = price_book(tmp_path / "second.xlsx")
    real = job.compute_columns
    calls = []

    def broken_once(*a, **k):
        calls.append(1)
        if len(calls) == 1:
            raise RuntimeError("something nobody foresaw")
        return real(*a, **k)

    monkeypatch.setattr(job, "compute_columns", broken_once)
    rc, _, err = run_cli(["fill", str(first), str(second), "-q"], capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "first.xlsx" in line and "something nobody foresaw" in line, line
    assert "Traceback" not in err
    assert (tmp_path / "second-filled.xlsx").exists()


def test_real_command_prints_no_traceback(tmp_path):
    base = price_book(tmp_path / "base.xlsx")
    bad = with_cell(base, tmp_path / "bad.xlsx", 3, HOSTILE_CELLS["char-ref-huge"][1])
    got = subprocess.run([sys.executable, "-m", "sheetvol", "fill", str(bad), "-q"],
                         capture_output=True, text=True, cwd=ROOT, timeout=120,
                         env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert got.returncode == 1
    assert "Traceback" not in got.stderr and "bad.xlsx" in got.stderr, got.stderr


# -- resource exhaustion from small files -------------------------------------------------
@pytest.mark.parametrize(("row_xml", "ref"), [
    (b'<row r="4000000000"><c r="E4000000000"><v>1</v></c></row>', "E4000000000"),
    (b'<row r="1048577"><c r="E1048577"><v>1</v></c></row>', "E1048577"),
    (b'<row r="40"><c r="XFE40"><v>1</v></c></row>', "XFE40"),
])
def test_cells_beyond_the_sheet_are_refused_by_reference(tmp_path, row_xml, ref):
    base = price_book(tmp_path / "base.xlsx")
    bad = with_row(base, tmp_path / "bad.xlsx", row_xml)
    start = time.perf_counter()
    with pytest.raises(WorkbookError) as got:
        fill_file(bad)
    assert time.perf_counter() - start < 20
    message = str(got.value)
    assert "bad.xlsx" in message and ref in message and "1,048,576" in message, message


def test_last_row_of_the_sheet_is_read(tmp_path):
    # row 1,048,576 is the sheet's last row (the spreadsheet limit): a cell there is valid
    base = price_book(tmp_path / "base.xlsx")
    book = with_row(base, tmp_path / "edge.xlsx", b'<row r="1048576"><c r="H1048576"><v>7</v>'
                    b"</c></row>")
    pkg = Package.open(book)
    col = pkg.read_columns("Prices", [8], first_row=2)[8]
    assert col.numbers[1048576 - 2] == 7.0


def trade_book(path: Path) -> Path:
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    for i in range(N_BARS):
        ws.write_row(i + 1, 0, [45293 + i, 101 + i, 99 + i, 100 + i])
    log = wb.add_worksheet("Trades")
    log.write_row(0, 0, ["Date", "Instrument", "Side", "Entry"])
    log.write_row(1, 0, [45310, "Prices", "Long", 117.0])
    wb.close()
    return path


def test_trade_log_row_beyond_the_sheet_is_refused(tmp_path):
    base = trade_book(tmp_path / "base.xlsx")
    bad = edit_part(base, tmp_path / "bad.xlsx", "xl/worksheets/sheet2.xml",
                    lambda d: d.replace(b"</sheetData>", b'<row r="4000000000"><c r="A4000000000">'
                                        b"<v>45311</v></c></row></sheetData>"))
    start = time.perf_counter()
    with pytest.raises(WorkbookError, match=r"A4000000000"):
        fill_file(bad)
    assert time.perf_counter() - start < 20


def _bomb_entry(name: str, inflated_mb: int) -> Entry:
    """Zeros that inflate to ``inflated_mb`` MiB while the headers declare 512 bytes.

    A full flush resets the compressor, so one compressed MiB block repeated is a valid
    deflate stream (RFC 1951 3.2.3); an empty final block ends it.
    """
    co = zlib.compressobj(9, zlib.DEFLATED, -15)
    block = co.compress(b"\0" * (1 << 20)) + co.flush(zlib.Z_FULL_FLUSH)
    raw = block * inflated_mb + co.flush()
    return Entry(name, raw, 512, 0)


# The child's own peak (VmHWM, KiB): ru_maxrss would carry the forking test process's
# peak across exec on Linux, which depends on the tests run before.
BOMB_CHILD = """
import sys
from sheetvol.cli import main
rc = main(["fill", sys.argv[1], "-q"])
with open("/proc/self/status") as f:
    peak = next(line.split()[1] for line in f if line.startswith("VmHWM:"))
print("PEAK", peak)
sys.exit(rc)
"""


# The parts sheetvol inflates; a part it only copies is copied as stored, never inflated.
@pytest.mark.parametrize("part", [SHEET, "xl/workbook.xml", "xl/styles.xml"])
def test_lying_zip_bomb_stops_at_the_declared_size(tmp_path, part):
    base = price_book(tmp_path / "base.xlsx")
    bad = repack(base, tmp_path / "bad.xlsx", {part: _bomb_entry(part, 400)})
    got = subprocess.run([sys.executable, "-c", BOMB_CHILD, str(bad)], capture_output=True,
                         text=True, cwd=ROOT, timeout=120,
                         env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert got.returncode == 1, got.stderr
    assert "Traceback" not in got.stderr
    assert part in got.stderr and "512 bytes" in got.stderr and "zip bomb" in got.stderr, \
        got.stderr
    peak_kib = int(got.stdout.split("PEAK")[1])
    assert peak_kib < 300 * 1024  # the 400 MiB never sit in memory


# -- hostile content that passes through --------------------------------------------------
@pytest.mark.parametrize("name", ["../evil.xml", "/etc/evil.xml", "xl\\evil.xml",
                                  "xl/../../evil.xml", "C:/evil.xml"])
def test_escaping_entry_names_are_refused(tmp_path, name):
    base = price_book(tmp_path / "base.xlsx")
    bad = repack(base, tmp_path / "bad.xlsx", add=[deflated(name, b"<x/>")])
    with pytest.raises(WorkbookError) as got:
        Package.open(bad)
    assert "bad.xlsx" in str(got.value) and name in str(got.value)


def test_duplicate_entry_names_are_refused(tmp_path, recwarn):
    base = price_book(tmp_path / "base.xlsx")
    bad = repack(base, tmp_path / "bad.xlsx", add=[deflated("docProps/app.xml", b"<x/>")])
    with pytest.raises(WorkbookError, match=r"docProps/app.xml.*twice"):
        fill_file(bad)
    assert not [w for w in recwarn if "Duplicate" in str(w.message)]


@pytest.mark.parametrize("head", [
    b'<?xml version="1.0"?><!DOCTYPE x [<!ENTITY e SYSTEM "file:///etc/passwd">]>',
    b'<?xml version="1.0"?>' + b"<!-- " + b"pad " * 5000 + b"-->" + b"<!DOCTYPE x>",
])
@pytest.mark.parametrize("encoding", ["utf-8", "utf-16", "utf-16-le"])
def test_doctype_in_a_part_only_copied_is_refused(tmp_path, head, encoding):
    base = price_book(tmp_path / "base.xlsx")

    def edit(data: bytes) -> bytes:
        text = (head + data.split(b"?>", 1)[1]).decode("utf-8")
        return text.encode(encoding)  # "utf-16" writes a byte-order mark first

    bad = edit_part(base, tmp_path / "bad.xlsx", "docProps/core.xml", edit)
    with pytest.raises(WorkbookError, match=r"docProps/core.xml.*DOCTYPE"):
        fill_file(bad)
    assert not (tmp_path / "bad-filled.xlsx").exists()


# -- data lost ----------------------------------------------------------------------------
def _header_of(function: str) -> str:
    return next(s.header for s in default_specs() if s.function == function)


def test_users_column_headed_like_ours_is_never_overwritten(tmp_path):
    header = _header_of("SV_ATR")
    book = price_book(tmp_path / "mine.xlsx", extra_header=header)
    report = fill_file(book)
    assert report.replaced == 0
    wb = openpyxl.load_workbook(report.output)
    ws = wb["Prices"]
    # the user's formulas and note are where they were
    assert ws["G1"].value == header and ws["G1"].comment is not None
    assert [ws.cell(r, 7).value for r in (2, 31)] == ["=E2*2", "=E31*2"]
    # ours went beside it, and the summary says so
    atr = next(w for w in report.written if w.spec.function == "SV_ATR")
    assert atr.letter != "G"
    said = " ".join(report.summary())
    assert "G" in said and "not written by sheetvol" in said, said


def test_rerun_still_replaces_its_own_recorded_columns(tmp_path):
    book = price_book(tmp_path / "p.xlsx")
    first = fill_file(book)
    second = fill_file(first.output, FillOptions(output=tmp_path / "again.xlsx"))
    assert second.replaced == len(first.written)
    assert [w.letter for w in second.written] == [w.letter for w in first.written]


def _sha(path: Path) -> str:
    import hashlib

    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_in_place_never_overwrites_a_backup(tmp_path):
    book = price_book(tmp_path / "p.xlsx")
    original = _sha(book)
    mine = tmp_path / "q.bak.xlsx"
    first = fill_file(book, FillOptions(in_place=True))
    assert first.backup == tmp_path / "p.bak.xlsx" and _sha(first.backup) == original
    once = _sha(book)
    second = fill_file(book, FillOptions(in_place=True))
    assert second.backup is not None and second.backup != first.backup
    assert _sha(first.backup) == original  # the original is still kept
    assert _sha(second.backup) == once
    assert any(str(second.backup) in line for line in second.summary())
    # an unrelated backup of the user's is left alone
    q = price_book(tmp_path / "q.xlsx")
    mine.write_bytes(b"the user's own file")
    third = fill_file(q, FillOptions(in_place=True))
    assert mine.read_bytes() == b"the user's own file" and third.backup != mine


def test_input_replaced_during_the_fill_is_refused(tmp_path, monkeypatch):
    book = price_book(tmp_path / "p.xlsx")
    other = price_book(tmp_path / "other.xlsx")
    real = job.compute_columns

    def replace_then_compute(*a, **k):
        os.replace(other, book)  # as a sync client or an editor's save does
        return real(*a, **k)

    monkeypatch.setattr(job, "compute_columns", replace_then_compute)
    with pytest.raises(WorkbookError, match=r"p.xlsx changed during the fill"):
        fill_file(book)
    assert not (tmp_path / "p-filled.xlsx").exists()
    assert not list(tmp_path.glob(".*.part"))


def test_input_replaced_during_an_in_place_fill_is_kept(tmp_path, monkeypatch):
    book = price_book(tmp_path / "p.xlsx")
    newer = price_book(tmp_path / "newer.xlsx")
    saved = _sha(newer)
    real = job.compute_columns

    def replace_then_compute(*a, **k):
        os.replace(newer, book)
        return real(*a, **k)

    monkeypatch.setattr(job, "compute_columns", replace_then_compute)
    with pytest.raises(WorkbookError, match=r"changed during the fill"):
        fill_file(book, FillOptions(in_place=True))
    assert _sha(book) == saved  # the newer file at the path is not replaced


# -- messages that blame the wrong file ---------------------------------------------------
FULL_DISK_CHILD = """
import resource, signal, sys
from sheetvol.cli import main
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # writes then fail with EFBIG, as on a full disk
resource.setrlimit(resource.RLIMIT_FSIZE, (2000, 2000))
sys.exit(main(["fill", sys.argv[1], "-o", sys.argv[2], "-q"]))
"""


def test_output_that_cannot_be_written_names_the_output(tmp_path):
    book = price_book(tmp_path / "in.xlsx")
    out = tmp_path / "out" / "result.xlsx"
    out.parent.mkdir()
    got = subprocess.run([sys.executable, "-c", FULL_DISK_CHILD, str(book), str(out)],
                         capture_output=True, text=True, cwd=ROOT, timeout=120,
                         env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert got.returncode == 1
    (line,) = got.stderr.strip().splitlines()
    assert str(out) in line and "File too large" in line, line
    assert not list(out.parent.iterdir())  # no temporary file left behind


def test_read_only_output_folder_names_the_output(tmp_path, capsys):
    book = price_book(tmp_path / "in.xlsx")
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        if os.geteuid() != 0:
            rc, _, err = run_cli(["fill", str(book), "--out-dir", str(folder), "-q"], capsys)
        else:
            # root writes into read-only folders: run the command without the capabilities
            # that override file permissions (util-linux setpriv), so the folder binds it
            setpriv = shutil.which("setpriv")
            if setpriv is None:
                pytest.skip("running as root and setpriv (util-linux) is not installed")
            got = subprocess.run(
                [setpriv, "--inh-caps=-all", "--ambient-caps=-all",
                 "--bounding-set=-dac_override,-dac_read_search,-fowner", "--",
                 sys.executable, "-m", "sheetvol", "fill", str(book), "--out-dir", str(folder),
                 "-q"], capture_output=True, text=True, cwd=ROOT, timeout=120,
                env={**os.environ, "PYTHONPATH": str(ROOT)})
            rc, err = got.returncode, got.stderr
    finally:
        folder.chmod(0o755)
    assert rc == 1
    (line,) = error_lines(err)
    assert str(folder / "in-filled.xlsx") in line and "Permission denied" in line, line


def test_stale_part_files_of_our_own_are_cleaned_up(tmp_path):
    book = price_book(tmp_path / "p.xlsx")
    stale = tmp_path / ".p-filled.xlsx.k3j2h1x_.part"
    fresh = tmp_path / ".p-filled.xlsx.a9b8c7d6.part"
    theirs = tmp_path / ".p-filled.xlsx.notes.txt"
    other = tmp_path / ".q-filled.xlsx.k3j2h1x_.part.bak"
    for f in (stale, fresh, theirs, other):
        f.write_bytes(b"x" * 100)
    old = time.time() - 3600
    os.utime(stale, (old, old))
    os.utime(theirs, (old, old))
    os.utime(other, (old, old))
    future = time.time() + 3600  # written after this run started (another run's)
    os.utime(fresh, (future, future))
    report = fill_file(book)
    assert not stale.exists()
    assert fresh.exists() and theirs.exists() and other.exists()
    assert any(stale.name in line for line in report.summary())


def test_new_columns_in_hidden_columns_are_shown_or_said(tmp_path):
    path = tmp_path / "hid.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    ws.write_row(0, 0, ["Date", "Open", "High", "Low", "Close"])
    for i in range(N_BARS):
        ws.write_row(i + 1, 0, [45293 + i, 100.0 + i, 101.5 + i, 99.0 + i, 100.5 + i])
    ws.set_column("F:H", None, None, {"hidden": True})  # the user hid F:H
    wb.close()
    report = fill_file(path)
    hidden_cols = set()
    with zipfile.ZipFile(report.output) as zf:
        root = ET.fromstring(zf.read(SHEET))
    for col in root.iter(f"{{{NS_MAIN}}}col"):  # ECMA-376 18.3.1.13: min..max, hidden
        if col.get("hidden") in ("1", "true"):
            hidden_cols.update(range(int(col.get("min")), int(col.get("max")) + 1))
    from sheetvol.fill.locate import col_number

    hidden = [w.letter for w in report.written if col_number(w.letter) in hidden_cols]
    said = " ".join(report.summary())
    assert not hidden or (all(letter in said for letter in hidden) and "hidden" in said), said
    assert hidden_cols  # the user's hidden columns stay hidden, at least those not written


def test_users_trade_log_column_headed_like_ours_is_kept(tmp_path):
    path = tmp_path / "log.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    for i in range(N_BARS):
        ws.write_row(i + 1, 0, [45293 + i, 101 + i, 99 + i, 100 + i])
    log = wb.add_worksheet("Trades")
    log.write_row(0, 0, ["Date", "Instrument", "Side", "Entry", "R multiple"])
    log.write_row(1, 0, [45310, "Prices", "Long", 117.0, "my own figure"])
    wb.close()
    report = fill_file(path)
    out = openpyxl.load_workbook(report.output)["Trades"]
    assert out["E1"].value == "R multiple" and out["E2"].value == "my own figure"
    assert report.trades is not None
    assert all(letter != "E" for letter, _, _ in report.trades.written)
    said = " ".join(report.summary())
    assert "column E" in said and "not written by sheetvol" in said, said


def test_sheet_limits_are_stated_once():
    # 1,048,576 rows and 16,384 columns: one statement (sheetvol.functions.grid),
    # imported wherever a row or column number is checked
    from sheetvol.functions import grid

    assert (grid.MAX_ROW, grid.MAX_COL) == (2**20, 2**14)  # the .xlsx grid: XFD1048576
    literal = re.compile(r"(?<![\d,_])(1_?048_?576|16_?384)(?![\d,_])")
    found = []
    for path in sorted((ROOT / "sheetvol").rglob("*.py")):
        if path.name == "grid.py" or "core" in path.relative_to(ROOT).parts:
            continue  # the core knows no sheets: a 16384 there is a chunk size
        for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
            code = line.split("#", 1)[0]
            if literal.search(code) and '"""' not in code and not code.strip().startswith(">>>"):
                found.append(f"{path.relative_to(ROOT)}:{n}: {line.strip()}")
    assert not found, "\n".join(found)


def _fill_messages(path: Path, out: Path, capsys) -> tuple[int, str]:
    rc = main(["fill", str(path), "-q", "-o", str(out)])
    return rc, capsys.readouterr().err


@pytest.mark.parametrize(("part", "edit", "said"), [
    # a part the writer edits as text, with bytes that are not UTF-8
    ("xl/styles.xml", lambda d: d.replace(b"<fonts", b"<!--\xff--><fonts", 1), "not UTF-8"),
    # an XML declaration naming an encoding no codec knows
    ("xl/_rels/workbook.xml.rels", lambda d: d.replace(b"UTF-8", b"TF-8", 1), "TF-8"),
])
def test_damaged_small_parts_are_named(tmp_path, capsys, part, edit, said):
    base = price_book(tmp_path / "base.xlsx")
    bad = edit_part(base, tmp_path / "bad.xlsx", part, edit)
    rc, err = _fill_messages(bad, tmp_path / "out.xlsx", capsys)
    assert rc == 1
    (line,) = error_lines(err)
    assert "bad.xlsx" in line and part in line and said in line and "unexpected" not in line, \
        line


def test_mangled_parts_give_a_known_refusal_or_a_fill(tmp_path, capsys):
    """Seeded random edits of the parts the fill reads: every outcome is a fill or one
    line of a known refusal, never an unexpected failure."""
    import random

    base = trade_book(tmp_path / "base.xlsx")
    parts = [SHEET, "xl/worksheets/sheet2.xml", "xl/styles.xml", "xl/workbook.xml",
             "xl/sharedStrings.xml", "[Content_Types].xml", "xl/_rels/workbook.xml.rels"]
    inserts = [b"<", b">", b'"', b"&#x110000;", b"99999999999", b"</row>", b"<c>", b"\xff",
               b'r="0"', b"ZZZZ"]
    rng = random.Random(13)
    for k in range(24):
        part = parts[k % len(parts)]

        def mutate(data: bytes) -> bytes:
            b = bytearray(data)
            for _ in range(rng.randint(1, 4)):
                i = rng.randrange(len(b))
                op = rng.random()
                if op < 0.4:
                    b[i] = rng.randrange(256)
                elif op < 0.7:
                    del b[i:i + rng.randint(1, 20)]
                else:
                    b[i:i] = rng.choice(inserts)
            return bytes(b)

        bad = edit_part(base, tmp_path / f"m{k}.xlsx", part, mutate)
        rc, err = _fill_messages(bad, tmp_path / "out.xlsx", capsys)
        assert rc in (0, 1)
        assert "unexpected" not in err and "Traceback" not in err, (part, err)
        assert len(error_lines(err)) == rc, err


def test_fill_guide_lists_each_refusal():
    # the safety section names every refusal this file tests, with its reason
    text = (ROOT / "docs" / "fill.md").read_text(encoding="utf-8")
    section = text.split("## Safety: what the fill refuses, and why", 1)[1].split("\n## ", 1)[0]
    for phrase in ("password-protected", "zip bomb", "inflates beyond the size its zip entry "
                   "declares", "`..`", "backslashes", "the same entry name twice", "deflate64",
                   "encryption flag", "DOCTYPE", "1,048,576 rows, 16,384 columns",
                   "not UTF-8", "beyond Unicode", "131,072", "replaced or saved by another "
                   "program", "names the output path", "Ctrl-C"):
        assert phrase in section, phrase


FULL_DISK_IN_PLACE = """
import resource, signal, sys
from sheetvol.cli import main
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
resource.setrlimit(resource.RLIMIT_FSIZE, (2000, 2000))
sys.exit(main(["fill", sys.argv[1], "--in-place", "-q"]))
"""


def test_backup_that_cannot_be_written_leaves_nothing_behind(tmp_path):
    book = price_book(tmp_path / "in.xlsx")
    before = _sha(book)
    got = subprocess.run([sys.executable, "-c", FULL_DISK_IN_PLACE, str(book)],
                         capture_output=True, text=True, cwd=ROOT, timeout=120,
                         env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert got.returncode == 1
    (line,) = got.stderr.strip().splitlines()
    assert str(tmp_path / "in.bak.xlsx") in line and "File too large" in line, line
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.xlsx"]
    assert _sha(book) == before


def test_csv_input_replaced_during_the_fill_is_refused(tmp_path, monkeypatch):
    src = tmp_path / "p.csv"
    rows = ["Date,Open,High,Low,Close"] + [
        f"2024-01-{d:02d},{100 + d},{101 + d},{99 + d},{100.5 + d}" for d in range(1, 29)]
    src.write_text("\n".join(rows) + "\n", encoding="utf-8")
    real = job.compute_columns

    def replace_then_compute(*a, **k):
        src.write_text("Date,Close\n2024-02-01,1\n", encoding="utf-8")  # an editor's save
        return real(*a, **k)

    monkeypatch.setattr(job, "compute_columns", replace_then_compute)
    with pytest.raises(WorkbookError, match=r"p.csv changed during the fill"):
        fill_file(src)
    assert not (tmp_path / "p-filled.xlsx").exists()
