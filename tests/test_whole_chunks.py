"""Chunks of plain rows edited in one go write the bytes of the row-by-row loop.

The row editor takes a chunk of plain rows (each ``<row r="N"`` right after the previous
``</row>``, the new cells right of the existing ones) as a whole; any other chunk goes
row by row. These tests write the same edits both ways, over sheets that mix plain rows
with every kind of row the whole-chunk path must leave to the loop, in chunks of a few
rows so that many chunk boundaries fall among them, and compare the sheet part byte for
byte; openpyxl (an outside reader) checks that the cells are where the edit put them.
"""

from __future__ import annotations

import zipfile
from pathlib import Path

import numpy as np
import pytest
from test_package import prefixed, replace_part

from sheetvol.workbook import NewColumn, Package, SpillResult, _rowedit, write_package, writer

openpyxl = pytest.importorskip("openpyxl")

SHEET = "xl/worksheets/sheet1.xml"
HEAD = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet xmlns="http://'
        b'schemas.openxmlformats.org/spreadsheetml/2006/main"><dimension ref="A1:C{last}"/>'
        b"<sheetData>")
TAIL = b"</sheetData></worksheet>"


def plain_row(r: int, extra: bytes = b"") -> bytes:
    return (f'<row r="{r}" spans="1:3"{extra.decode()}><c r="A{r}" s="1"><v>{45000 + r}</v></c>'
            f'<c r="B{r}"><v>{100 + r * 0.25!r}</v></c><c r="C{r}" t="inlineStr"><is><t>n{r}'
            f"</t></is></c></row>").encode()


def odd_row(r: int, kind: int) -> bytes:
    """Rows the whole-chunk path must take as the loop does (or leave to it)."""
    row = plain_row(r)
    return [
        row.replace(b' spans="1:3"', b""),  # no spans
        row.replace(b' spans="1:3"', b' spans="1:3" ht="20" customHeight="1"'),
        row.replace(b' spans="1:3"', b' ht="20" spans="1:3"'),  # spans not first
        row.replace(b' spans="1:3"', b" spans='1:3'"),  # other quotes
        row.replace(b"<row r=", b"<row  r="),  # two spaces
        row + b"\n",  # whitespace after the row
        f'<row r="{r}" spans="1:3"/>'.encode(),  # empty, self-closing
        f'<row r="{r}" spans="1:3"></row>'.encode(),  # empty
        row.replace(f'<c r="C{r}"'.encode(), b"<c"),  # a cell without r
        row.replace(f'<c r="A{r}" s="1">'.encode(), f'<c s="1" r="A{r}">'.encode()),
        row.replace(b"<t>", b"<r><rPr><color rgb='FF0000'/></rPr><t>").replace(
            b"</t>", b"</t></r>"),  # rich text in the last cell
        row.replace(b"</row>", f'<c r="G{r}"><v>1</v></c></row>'.encode()),  # right of E
        row.replace(f'<c r="B{r}">'.encode(), f'<c r="B{r}" s="0">'.encode()),
        f'<row r="{r}" spans="1:3"><c r="A{r}"/></row>'.encode(),
        f'<row r="{r:03d}" spans="1:3"><c r="A{r}"><v>1</v></c></row>'.encode(),
        f'<row r="{r}" spans="1:3"><c><v>1</v></c><c t="b"><v>1</v></c></row>'.encode(),
    ][kind]


def sheet(rows: int, seed: int, odd: float, gaps: float = 0.02) -> bytes:
    rng = np.random.default_rng(seed)
    body = [b'<row r="1"><c r="A1" t="inlineStr"><is><t>Date</t></is></c></row>']
    r = 2
    while r <= rows:
        if rng.random() < gaps:
            r += int(rng.integers(1, 4))  # rows missing: new rows go between
        if rng.random() < odd:
            body.append(odd_row(r, int(rng.integers(0, 16))))
        else:
            body.append(plain_row(r))
        r += 1
    return HEAD.replace(b"{last}", str(r).encode()) + b"".join(body) + TAIL


def book(path: Path, xml: bytes) -> Path:
    wb = openpyxl.Workbook()
    wb.active.title = "Prices"
    wb.save(path)
    return replace_part(path, SHEET, xml)


def columns(rows: int, seed: int) -> list[NewColumn]:
    rng = np.random.default_rng(seed + 100)
    a = rng.normal(100, 5, rows + 8)
    a[:13] = np.nan  # a warm-up: no new cells in the first rows
    a[rng.random(len(a)) < 0.05] = np.nan
    b = rng.normal(0, 1e-5, rows // 2).astype(object)  # repr's exponent style, some text
    b[rng.random(len(b)) < 0.03] = "stop"
    return [NewColumn("Prices", 4, 1, "ATR", 2, a, "0.00"),
            NewColumn("Prices", 5, 1, "Note", 40, b.tolist(), None)]


def write_both(tmp_path: Path, xml: bytes, cols: list[NewColumn], monkeypatch,
               chunk: int) -> tuple[bytes, bytes, list]:
    src = book(tmp_path / "in.xlsx", xml)
    monkeypatch.setattr(writer, "CHUNK", chunk)
    editors: list = []
    real = writer.RowEditor

    class Spy(real):  # type: ignore[misc, valid-type]
        def __init__(self, *args, **kwargs) -> None:
            super().__init__(*args, **kwargs)
            editors.append(self)

    monkeypatch.setattr(writer, "RowEditor", Spy)
    write_package(Package.open(src), tmp_path / "whole.xlsx", cols)
    monkeypatch.setattr(_rowedit.RowEditor, "_whole_chunk", lambda self, chunk, ni: None)
    write_package(Package.open(src), tmp_path / "rows.xlsx", cols)
    with zipfile.ZipFile(tmp_path / "whole.xlsx") as a, \
            zipfile.ZipFile(tmp_path / "rows.xlsx") as b:
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            if name != SHEET:
                assert a.read(name) == b.read(name), name
        return a.read(SHEET), b.read(SHEET), editors


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("odd", [0.0, 0.003, 0.05])
def test_whole_chunks_write_the_bytes_of_the_row_loop(tmp_path, monkeypatch, seed, odd):
    rows = 3000
    xml = sheet(rows, seed, odd)
    if seed % 2:
        xml = prefixed(xml)
    whole, by_row, _ = write_both(tmp_path, xml, columns(rows, seed), monkeypatch,
                                  chunk=int(np.random.default_rng(seed).integers(700, 9000)))
    assert whole == by_row


def test_plain_rows_are_edited_a_chunk_at_a_time(tmp_path, monkeypatch):
    rows = 20_000
    xml = sheet(rows, 1, 0.0)
    cols = columns(rows, 1)
    whole, by_row, editors = write_both(tmp_path, xml, cols, monkeypatch, chunk=1 << 14)
    assert whole == by_row
    editor = editors[0]  # the first write's: the second one goes row by row
    # the first chunk holds the header row (a new header goes there): row by row
    assert editor.chunks_by_row == 1 and editor.chunks_whole > 100
    # what an outside reader sees: the new numbers where they belong, the rest kept
    ws = openpyxl.load_workbook(tmp_path / "whole.xlsx", read_only=True)["Prices"]
    got = {r[0].row: (r[1].value, r[3].value) for r in ws.iter_rows(min_row=2, max_col=5)
           if r[0].value is not None}
    a = cols[0].values
    for r in (2, 14, 15, 500, 9999, rows):
        want = None if np.isnan(a[r - 2]) else a[r - 2]
        assert got[r] == (100 + r * 0.25, want), r


def test_cells_of_a_shrunk_spill_go_in_whole_chunks_too(tmp_path, monkeypatch):
    # an array formula in column B spilled over B40:B900 earlier; its new result is one
    # value, so the cells B41:B900 go, also in rows that take the whole-chunk path
    rows = 3000
    xml = sheet(rows, 2, 0.0, gaps=0.0)
    for r in range(40, 901):
        cell = f'<c r="B{r}"><v>{100 + r * 0.25!r}</v></c>'.encode()
        if r == 40:
            new = b'<c r="B40"><f t="array" ref="B40:B900">SV_SERIES(A2:A9)</f><v>1</v></c>'
        else:
            new = f'<c r="B{r}"><v>{r}</v></c>'.encode()
        assert cell in xml
        xml = xml.replace(cell, new)
    cols = [*columns(rows, 2), SpillResult("Prices", 40, 2, "SV_SERIES(A2:A9)", np.ones(1))]
    whole, by_row, editors = write_both(tmp_path, xml, cols, monkeypatch, chunk=1 << 12)
    assert whole == by_row
    assert editors[0].chunks_whole > 50
    ws = openpyxl.load_workbook(tmp_path / "whole.xlsx")["Prices"]
    assert (ws["B40"].value.ref, ws["B40"].value.text) == ("B40:B40", "=SV_SERIES(A2:A9)")
    assert [ws.cell(r, 2).value for r in (39, 41, 500, 900, 901)] == [
        100 + 39 * 0.25, None, None, None, 100 + 901 * 0.25]


def _fill_both_ways(src: Path, out: Path, monkeypatch) -> dict[str, tuple[bytes, bytes]]:
    """Each part of the output of ``sheetvol fill`` made with and without whole chunks."""
    from sheetvol.fill.job import FillOptions, fill_file

    got: dict[str, list[bytes]] = {}
    with monkeypatch.context() as m:
        m.setattr(writer, "CHUNK", 4096)
        for way in ("whole", "rows"):
            if way == "rows":
                m.setattr(_rowedit.RowEditor, "_whole_chunk", lambda self, chunk, ni: None)
            dst = out.with_name(f"{out.stem}-{way}.xlsx")
            fill_file(src, FillOptions(output=dst))
            with zipfile.ZipFile(dst) as zf:
                for name in zf.namelist():
                    got.setdefault(name, []).append(zf.read(name))
    return {name: (a, b) for name, (a, b) in got.items()}


@pytest.mark.parametrize("book_name", ["prices", "demo"])
def test_a_fill_and_a_second_fill_write_the_same_parts_either_way(tmp_path, monkeypatch,
                                                                 book_name):
    from test_fill_io import price_book

    if book_name == "prices":
        src = price_book(tmp_path / "prices.xlsx", rows=3000)
    else:
        src = Path(__file__).resolve().parents[1] / "workbooks" / "demo-desk.xlsx"
    first = tmp_path / "first.xlsx"
    for name, (whole, by_row) in _fill_both_ways(src, first, monkeypatch).items():
        if not name.startswith("xl/worksheets/sheetvol"):  # the notes: the time of the run
            assert whole == by_row, name
    # filling the filled book again replaces sheetvol's own columns: the checked rows
    second = tmp_path / "second.xlsx"
    refill = _fill_both_ways(first.with_name("first-whole.xlsx"), second, monkeypatch)
    for name, (whole, by_row) in refill.items():
        if not name.startswith("xl/worksheets/sheetvol"):
            assert whole == by_row, name
