"""Benchmark of ``sheetvol fill`` against the input/output floors (not a timed test).

Builds OHLC workbooks (7 columns: date, open, high, low, close, volume, a text column;
invented random-walk prices) and measures, each in its own process so that peak memory
(``ru_maxrss``) is its own, in the same run:

- **fill**: ``fill_file`` on the workbook, the whole job of ``sheetvol fill`` (header
  detection, reading, the default columns, the notes sheet, writing), timed inside
  the process;
- **read floor**: python-calamine (a compiled reader) reading every cell of the price
  sheet;
- **write floor**: re-zipping the fill's output at zlib level 1 (the level the fill
  uses for the sheets it rewrites): inflating and deflating every part;
- **small fill, whole process**: ``python -m sheetvol fill`` on a 500-row workbook,
  wall time from start to exit (median of 5, bytecode cached as in an installed
  package).

Then one line per target says met / not met with the figures. Run from the repository
root: ``python -m benches.fill_io`` (sizes with ``--rows``, several fills per size
with ``--repeat``: the verdict then takes the median). python-calamine is a test-only
dependency (the ``test`` extra).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
import zipfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve()
ROOT = HERE.parents[1]
HEADERS = ["Date", "Open", "High", "Low", "Close", "Volume", "Note"]
BIG, MID, SMALL = 1_048_576, 100_000, 500
# the targets of the fill (issue "The fill: close to the I/O floor")
FLOOR_RATIO = 1.25  # fill time / (read floor + write floor) at BIG rows
PEAK_MB = 1024.0  # peak memory at BIG rows
MID_SECONDS = 1.5  # fill time at MID rows
SMALL_SECONDS = 0.3  # whole process at SMALL rows
SMALL_RUNS = 5


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


def run_fill(src: str, dst: str) -> dict:
    """The whole fill job, as ``sheetvol fill`` runs it."""
    sys.path.insert(0, str(ROOT))
    from sheetvol.fill.job import FillOptions, fill_file

    t0, c0 = time.perf_counter(), time.thread_time()
    fill_file(src, FillOptions(output=Path(dst)))
    # the main thread's CPU seconds: the helper threads (inflating, deflating) run
    # beside it, so on a busy machine this is the steadier measure of the fill's own work
    return {"total_s": time.perf_counter() - t0, "main_cpu_s": time.thread_time() - c0}


def run_read_floor(src: str, dst: str) -> dict:
    """python-calamine reading every cell of the price sheet."""
    from python_calamine import CalamineWorkbook

    t0 = time.perf_counter()
    rows = CalamineWorkbook.from_path(src).get_sheet_by_name("Prices").to_python()
    return {"total_s": time.perf_counter() - t0, "rows": len(rows)}


def run_write_floor(src: str, dst: str) -> dict:
    """Re-zip ``src`` (here: the fill's output) at zlib level 1."""
    t0 = time.perf_counter()
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(
            dst, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as zout:
        for info in zin.infolist():
            with zin.open(info) as r, zout.open(info.filename, "w", force_zip64=True) as w:
                while data := r.read(1 << 23):
                    w.write(data)
    return {"total_s": time.perf_counter() - t0}


def child(kind: str, src: str, dst: str) -> None:
    import resource

    fn = {"fill": run_fill, "read": run_read_floor, "write": run_write_floor}[kind]
    before = resource.getrusage(resource.RUSAGE_SELF)
    out = fn(src, dst)
    usage = resource.getrusage(resource.RUSAGE_SELF)
    out["peak_mb"] = usage.ru_maxrss / 1024
    # CPU seconds of all threads: on a busy machine wall time stretches, this does less
    out["cpu_s"] = (usage.ru_utime + usage.ru_stime) - (before.ru_utime + before.ru_stime)
    print(json.dumps(out))


def child_env(cache: Path) -> dict[str, str]:
    """The environment of measured processes: bytecode cached (as after an install)."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPYCACHEPREFIX"] = str(cache)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")]).rstrip(
        os.pathsep)
    return env


def measure(kind: str, src: Path, dst: Path, env: dict[str, str]) -> dict:
    proc = subprocess.run([sys.executable, str(HERE), "--child", kind, str(src), str(dst)],
                          capture_output=True, text=True, env=env, cwd=ROOT)
    if proc.returncode:
        raise SystemExit(f"{kind} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def whole_process(src: Path, dst: Path, env: dict[str, str], runs: int
                  ) -> tuple[list[float], list[float]]:
    """Wall and CPU times of ``python -m sheetvol fill`` from start to exit."""
    import resource

    cmd = [sys.executable, "-m", "sheetvol", "fill", str(src), "-o", str(dst)]
    subprocess.run(cmd, env=env, cwd=ROOT, capture_output=True, check=True)  # warm the cache
    walls, cpus = [], []
    for _ in range(runs):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        subprocess.run(cmd, env=env, cwd=ROOT, capture_output=True, check=True)
        walls.append(time.perf_counter() - t0)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpus.append(after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime)
    return walls, cpus


def machine() -> str:
    """CPU model, cores, caches (from lscpu), Python and load: printed with every run."""
    info: dict[str, str] = {}
    try:
        out = subprocess.run(["lscpu"], capture_output=True, text=True, check=True).stdout
        for line in out.splitlines():
            key, _, value = line.partition(":")
            info[key.strip()] = value.strip()
    except (OSError, subprocess.CalledProcessError):
        pass
    caches = ", ".join(f"{k.split()[0]} {info[k]}" for k in ("L2 cache", "L3 cache")
                       if k in info)
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    return (f"{info.get('Model name', platform.processor() or 'unknown CPU')}, "
            f"{os.cpu_count()} cores, {caches}; Python {platform.python_version()}; "
            f"load average {load}")


def verdict(ok: bool, text: str) -> str:
    return f"  {'met    ' if ok else 'NOT MET'}  {text}"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", nargs="*", type=int, default=[MID, BIG],
                    help="sheet rows of the filled workbooks (default: 100000 1048576)")
    ap.add_argument("--small-runs", type=int, default=SMALL_RUNS)
    ap.add_argument("--repeat", type=int, default=1,
                    help="fills per size, each in its own process; the median is shown")
    ap.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        child(*args.child)
        return 0
    print(f"machine: {machine()}", flush=True)
    lines = []
    with tempfile.TemporaryDirectory(prefix="sv-bench-") as d:
        folder = Path(d)
        env = child_env(folder / "pycache")
        small = build(folder / "small.xlsx", SMALL + 1)
        times, cpus = whole_process(small, folder / "small-out.xlsx", env, args.small_runs)
        mid_small = statistics.median(times)
        print(f"{SMALL:>9} rows: whole process {mid_small:.3f} s wall, "
              f"{statistics.median(cpus):.3f} s CPU (medians of {len(times)}; wall: "
              f"{', '.join(f'{t:.3f}' for t in times)})", flush=True)
        lines.append(verdict(mid_small < SMALL_SECONDS, f"{SMALL}-row fill, whole process, "
                             f"under {SMALL_SECONDS} s: {mid_small:.3f} s"))
        print(f"{'rows':>9} {'file':>6} {'fill':>7} {'peak':>8} {'read floor':>11} "
              f"{'write floor':>12} {'fill / floors':>14}   CPU s: fill (main thread), read, write")
        for rows in sorted(set(args.rows)):
            src = build(folder / f"ohlc{rows}.xlsx", rows)
            out = folder / "out.xlsx"
            fills = sorted((measure("fill", src, out, env) for _ in range(args.repeat)),
                           key=lambda x: x["total_s"])
            fill = fills[len(fills) // 2]  # the median (the upper one of an even count)
            if len(fills) > 1:
                walls = ", ".join(f"{x['total_s']:.2f}" for x in fills)
                print(f"{rows:>9} rows: fills of {walls} s wall; the median below", flush=True)
            read = measure("read", src, folder / "unused", env)
            write = measure("write", out, folder / "rezip.xlsx", env)
            floors = read["total_s"] + write["total_s"]
            ratio = fill["total_s"] / floors
            print(f"{rows:>9} {src.stat().st_size / 1e6:>4.0f}MB {fill['total_s']:>6.2f}s "
                  f"{fill['peak_mb']:>6.0f}MB {read['total_s']:>10.2f}s {write['total_s']:>11.2f}s "
                  f"{ratio:>13.2f}x   {fill['cpu_s']:.2f} ({fill['main_cpu_s']:.2f}), "
                  f"{read['cpu_s']:.2f}, "
                  f"{write['cpu_s']:.2f}", flush=True)
            if rows == BIG:
                lines.append(verdict(ratio <= FLOOR_RATIO, (
                    f"{BIG}-row fill within {FLOOR_RATIO}x of read floor + write floor: "
                    f"{ratio:.2f}x ({fill['total_s']:.1f} s vs {read['total_s']:.1f} + "
                    f"{write['total_s']:.1f} s)")))
                lines.append(verdict(fill["peak_mb"] < PEAK_MB, (
                    f"{BIG}-row fill peak memory under {PEAK_MB:.0f} MB: "
                    f"{fill['peak_mb']:.0f} MB")))
            if rows == MID:
                lines.append(verdict(fill["total_s"] < MID_SECONDS, (
                    f"{MID}-row fill under {MID_SECONDS} s: {fill['total_s']:.2f} s")))
    print("targets (wall time):")
    print("\n".join(lines))
    load = os.getloadavg()[0]
    if load > (os.cpu_count() or 1):
        print(f"  (the machine was busy: load average {load:.1f} on {os.cpu_count()} cores, "
              "so wall times are stretched; compare the CPU seconds)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
