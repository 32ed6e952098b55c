"""Benchmark of the package layer's fill path (not a timed test).

Builds OHLC workbooks of 100,000 and 1,048,576 rows (7 columns: date, open, high,
low, close, volume, a text column), then measures in separate processes, each with its
own peak memory (``ru_maxrss``):

- ``sheetvol``: ``Package.open`` + ``read_columns`` (5 columns) + ``write_package``
  with 4 new columns;
- ``openpyxl``: ``load_workbook`` + the same 4 columns written cell by cell + ``save``
  (the path the package layer replaces);
- ``rezip``: inflating and deflating every part, the floor for any rewrite.

The 1,048,576-row workbook is built from an xlsxwriter workbook whose sheet part is
replaced by generated XML of the same form (xlsxwriter itself needs minutes for it).

Run from the repository root: ``python -m benches.fill_io [rows ...]``
Options: ``--openpyxl-rows N`` measures openpyxl at N rows and scales linearly to the
larger sizes (it takes minutes and gigabytes at a million rows); ``--openpyxl-full``
measures it at every size.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
import zipfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve()
ROOT = HERE.parents[2]
HEADERS = ["Date", "Open", "High", "Low", "Close", "Volume", "Note"]


def build(path: Path, rows: int, seed: int = 7) -> Path:
    """An OHLC workbook of ``rows`` sheet rows: a header and ``rows - 1`` invented prices."""
    rows -= 1
    import xlsxwriter

    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    date_fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
    ws.write_row(0, 0, HEADERS)
    ws.write_number(1, 0, 40000, date_fmt)
    wb.close()
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, rows)))
    open_ = close * (1 + rng.normal(0, 0.002, rows))
    high = np.maximum(open_, close) * (1 + np.abs(rng.normal(0, 0.004, rows)))
    low = np.minimum(open_, close) * (1 - np.abs(rng.normal(0, 0.004, rows)))
    vol = rng.integers(1000, 100000, rows).tolist()
    # Python floats: their repr is the shortest round-trip text
    close, open_, high, low = close.tolist(), open_.tolist(), high.tolist(), low.tolist()
    tmp = path.with_suffix(".tmp")
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename != "xl/worksheets/sheet1.xml":
                zout.writestr(info, data)
                continue
            head, _, rest = data.partition(b"<sheetData>")
            _, _, tail = rest.partition(b"</sheetData>")
            head = head.replace(b'<dimension ref="A1:G2"/>',
                                f'<dimension ref="A1:G{rows + 1}"/>'.encode())
            first = rest[: rest.index(b"</row>") + 6]
            with zout.open(info.filename, "w", force_zip64=True) as w:
                w.write(head + b"<sheetData>" + first)
                step = 50_000
                for lo in range(0, rows, step):
                    hi = min(rows, lo + step)
                    w.write("".join(
                        f'<row r="{i + 2}" spans="1:7"><c r="A{i + 2}" s="1"><v>{40000 + i}</v></c>'
                        f'<c r="B{i + 2}"><v>{open_[i]!r}</v></c><c r="C{i + 2}"><v>{high[i]!r}</v>'
                        f'</c><c r="D{i + 2}"><v>{low[i]!r}</v></c><c r="E{i + 2}"><v>{close[i]!r}'
                        f'</v></c><c r="F{i + 2}"><v>{vol[i]}</v></c><c r="G{i + 2}" '
                        f't="inlineStr"><is><t>r{i}</t></is></c></row>'
                        for i in range(lo, hi)).encode())
                w.write(b"</sheetData>" + tail)
    os.replace(tmp, path)
    return path


def run_sheetvol(src: str, dst: str) -> dict:
    """The package-layer fill: read 5 columns, compute 4, write them."""
    sys.path.insert(0, str(ROOT))
    from sheetvol.workbook import NewColumn, Package, write_package

    t0 = time.perf_counter()
    pkg = Package.open(src)
    cols = pkg.read_columns("Prices", [1, 2, 3, 4, 5], first_row=2)
    t1 = time.perf_counter()
    high, low, close = cols[3].numbers, cols[4].numbers, cols[5].numbers
    rng = high - low
    edits = [
        NewColumn("Prices", 8, 1, "range", 2, rng, "0.0000", width=10),
        NewColumn("Prices", 9, 1, "mid", 2, (high + low) / 2, "0.00"),
        NewColumn("Prices", 10, 1, "ret", 2, np.r_[np.nan, np.diff(np.log(close))], "0.00%"),
        NewColumn("Prices", 11, 1, "x", 2, close * 1.5, "0.00"),
    ]
    write_package(pkg, dst, edits)
    t2 = time.perf_counter()
    return {"read_s": t1 - t0, "write_s": t2 - t1, "total_s": t2 - t0}


def run_openpyxl(src: str, dst: str) -> dict:
    """openpyxl load + the same 4 columns + save."""
    import openpyxl

    t0 = time.perf_counter()
    wb = openpyxl.load_workbook(src)
    ws = wb["Prices"]
    n = ws.max_row
    for j, name in enumerate(["range", "mid", "ret", "x"], start=8):
        ws.cell(1, j, name)
        for r in range(2, n + 1):
            ws.cell(r, j, r * 0.5)
    wb.save(dst)
    return {"total_s": time.perf_counter() - t0}


def run_rezip(src: str, dst: str) -> dict:
    """Inflate and deflate every part (default level)."""
    t0 = time.perf_counter()
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            zout.writestr(info.filename, zin.read(info))
    return {"total_s": time.perf_counter() - t0}


def child(kind: str, src: str, dst: str) -> None:
    import resource

    fn = {"sheetvol": run_sheetvol, "openpyxl": run_openpyxl, "rezip": run_rezip}[kind]
    out = fn(src, dst)
    out["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps(out))


def measure(kind: str, src: Path, dst: Path) -> dict:
    proc = subprocess.run([sys.executable, str(HERE), "--child", kind, str(src), str(dst)],
                          capture_output=True, text=True)
    if proc.returncode:
        raise SystemExit(f"{kind} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("rows", nargs="*", type=int, default=[100_000, 1_048_576])
    ap.add_argument("--openpyxl-rows", type=int, default=100_000)
    ap.add_argument("--openpyxl-full", action="store_true")
    ap.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(*args.child)
        return
    with tempfile.TemporaryDirectory(prefix="sv-bench-") as d:
        folder = Path(d)
        op_ref = None
        for rows in sorted(set(args.rows)):
            src = build(folder / f"ohlc{rows}.xlsx", rows)
            mb = src.stat().st_size / 1e6
            sv = measure("sheetvol", src, folder / "out-sv.xlsx")
            rz = measure("rezip", src, folder / "out-rz.xlsx")
            line = (f"{rows:>9} rows ({mb:.0f} MB): sheetvol {sv['total_s']:.1f} s "
                    f"(read {sv['read_s']:.1f} s, write {sv['write_s']:.1f} s), "
                    f"{sv['peak_mb']:.0f} MB peak; re-zip alone {rz['total_s']:.1f} s")
            if args.openpyxl_full or rows <= args.openpyxl_rows:
                op = measure("openpyxl", src, folder / "out-op.xlsx")
                op_ref = (rows, op)
                line += (f"; openpyxl load+save {op['total_s']:.1f} s, {op['peak_mb']:.0f} MB "
                         f"peak -> {op['total_s'] / sv['total_s']:.1f}x")
            elif op_ref is not None:
                scaled = op_ref[1]["total_s"] * rows / op_ref[0]
                line += (f"; openpyxl scaled from {op_ref[0]} rows ~{scaled:.0f} s "
                         f"-> ~{scaled / sv['total_s']:.1f}x")
            print(line, flush=True)


if __name__ == "__main__":
    main()
