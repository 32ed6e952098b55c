"""Cost of a worksheet function call through xlwings' classic call path, end to end.

Run ``python -m benches.addin`` (``--rows`` to change the size). There is no
spreadsheet program here: xlwings' own open-source UDF module
(``xlwings.udfs.call_udf``, with its argument and result conversion) runs
with the Windows COM layer replaced by fakes that hand over what that layer
hands over (:func:`classic_call_path`): a range as a tuple of row tuples,
None for blank cells, floats, pywin32 datetimes. Three parts are timed
separately, then the whole ``call_udf``:

* read: xlwings turning each argument into what the function receives;
* compute: the generated function (sheetvol's cleaning in numpy, the cut of
  trailing blank rows, the kernel, building the result rows);
* write: xlwings turning the result into what goes back to COM.

Not included, because it happens outside Python: Excel's side and pywin32's
marshalling of the values between Excel and Python.

Budget: a whole-column-form call on 100,000 rows under 50 ms, median, read +
compute + write; verdicts are printed for an exact 100,000-row range and for
whole-column references (``C:C``: 1,048,576 cells, 100,000 of them prices), 50 ms
per whole-column argument (a call given three reads three times the cells). A
floor line shows what visiting one whole column's row tuples once costs in C.
Target for the per-cell forms (``_LAST``, ``_ON``) on 300 bars: under 30
microseconds a call; a numpy call timed in the same run shows how loaded the
machine is.
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import datetime as dt
import importlib
import operator
import statistics
import sys
import time
import types
from collections.abc import Callable, Iterator
from typing import Any

import numpy as np

BUDGET_MS = 50.0
SHEET_ROWS = 1_048_576  # rows of a worksheet: what a whole-column reference holds
MISSING = -2147352572  # DISP_E_PARAMNOTFOUND: what VBA passes for an omitted Optional
VT_ERROR = 10  # VARENUM value of an error variant
CLASSIC_MODULE = "sheetvol_classic_udfs"


class ComRange:
    """A range argument as pywin32 hands it over: ``value`` is what ``Range.Value`` gives."""

    def __init__(self, value: Any) -> None:
        self.value = value


class ComVariant:
    """Shaped like pywin32's ``win32com.client.VARIANT``: a type code and a value."""

    def __init__(self, vt: int, value: Any) -> None:
        self.varianttype = vt
        self.value = value


class _RangeImpl:
    """xlwings' Windows Range implementation, reduced to what reading a UDF argument uses."""

    max_cells_per_read = None

    def __init__(self, xl: Any = None) -> None:
        self.xl = xl
        app = types.SimpleNamespace(engine=None, pid=0)
        self.sheet = types.SimpleNamespace(book=types.SimpleNamespace(app=app))

    @property
    def raw_value(self) -> Any:
        return None if self.xl is None else self.xl.value


@contextlib.contextmanager
def classic_call_path() -> Iterator[types.SimpleNamespace]:
    """xlwings' classic UDF module importable and callable here, COM replaced by fakes.

    Yields a namespace with ``call(name, *args)`` (the function run by
    ``xlwings.udfs.call_udf``, omitted trailing arguments passed as VBA's
    "missing" marker), ``udfs`` (xlwings' module) and ``module`` (the
    registered sheetvol functions). Everything it puts into ``sys.modules``
    is taken out again on exit.
    """
    import xlwings

    from sheetvol import addin

    names = ("pythoncom", "pywintypes", "win32com", "win32com.client", "xlwings._xlwindows",
             "xlwings.com_server", "xlwings.udfs", CLASSIC_MODULE)
    saved = {n: sys.modules.get(n) for n in names}
    saved_attr = getattr(xlwings, "_xlwindows", None)
    saved_engine = xlwings.engines.engines_by_name.get("excel")
    stubs = {n: types.ModuleType(n) for n in names[:6]}
    stubs["pythoncom"].CoInitialize = lambda: None  # type: ignore[attr-defined]
    stubs["pythoncom"].VT_ERROR = VT_ERROR  # type: ignore[attr-defined]
    stubs["win32com.client"].Dispatch = lambda *a, **k: None  # type: ignore[attr-defined]
    stubs["win32com.client"].VARIANT = ComVariant  # type: ignore[attr-defined]
    stubs["win32com"].client = stubs["win32com.client"]  # type: ignore[attr-defined]
    win = stubs["xlwings._xlwindows"]
    win.Range = _RangeImpl  # type: ignore[attr-defined]
    win.is_range_instance = lambda a: isinstance(a, ComRange)  # type: ignore[attr-defined]
    win.BOOK_CALLER = None  # type: ignore[attr-defined]
    loop = asyncio.new_event_loop()
    stubs["xlwings.com_server"].loop = loop  # type: ignore[attr-defined]
    try:
        sys.modules.update(stubs)
        sys.modules.pop("xlwings.udfs", None)
        xlwings._xlwindows = win  # type: ignore[attr-defined]
        # The desktop engine's entry (its cleaning and writing are not used by raw conversion).
        xlwings.engines.engines_by_name["excel"] = types.SimpleNamespace(name="excel",
                                                                         type="desktop")
        udfs = importlib.import_module("xlwings.udfs")
        module = types.ModuleType(CLASSIC_MODULE)
        module.__file__ = addin.__file__
        module.__dict__.update(addin.make_udfs((udfs.xlfunc, udfs.xlarg, udfs.xlret),
                                               runtime="classic"))
        sys.modules[CLASSIC_MODULE] = module

        def call(name: str, *args: Any) -> Any:
            n = len(module.__dict__[name].__xlfunc__["args"])
            return udfs.call_udf(CLASSIC_MODULE, name, (*args, *[MISSING] * (n - len(args))))

        yield types.SimpleNamespace(call=call, udfs=udfs, module=module)
    finally:
        loop.close()
        for n, mod in saved.items():
            if mod is None:
                sys.modules.pop(n, None)
            else:
                sys.modules[n] = mod
        if saved_attr is None:
            with contextlib.suppress(AttributeError):
                del xlwings._xlwindows  # type: ignore[attr-defined]
        else:
            xlwings._xlwindows = saved_attr  # type: ignore[attr-defined]
        if saved_engine is None:
            xlwings.engines.engines_by_name.pop("excel", None)
        else:
            xlwings.engines.engines_by_name["excel"] = saved_engine


def _inputs(rows: int, seed: int = 7) -> dict[str, Any]:
    """Invented prices as COM hands them over: whole columns and exact ranges."""
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, rows)))
    high = close * (1 + np.abs(rng.normal(0, 0.004, rows)))
    low = close * (1 - np.abs(rng.normal(0, 0.004, rows)))

    blank = None  # a name, so that every row below is its own tuple, as COM makes them

    def cells(a: np.ndarray, name: str) -> tuple[tuple[Any], ...]:
        out: list[tuple[Any]] = [(name,)]  # the header in row 1
        out += [(x,) for x in a.tolist()]
        for i in range(1, rows, 997):  # a few blank cells, as real exports have
            out[i] = (blank,)
        return tuple(out)

    start = dt.datetime(1990, 1, 1, tzinfo=dt.timezone.utc)
    tail = tuple((blank,) for _ in range(max(0, SHEET_ROWS - rows - 1)))
    out: dict[str, Any] = {}
    for name, a in (("high", high), ("low", low), ("close", close)):
        col = cells(a, name)
        out[name] = ComRange(col)
        out[name + ":whole"] = ComRange(col + tail)
    out["dates"] = ComRange((("date",), *((start + dt.timedelta(days=i),)
                                          for i in range(rows))))
    out["last_date"] = start + dt.timedelta(days=rows - 10)
    return out


def _time(call: Callable[[], Any], repeat: int) -> tuple[float, float]:
    samples = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        call()
        samples.append((time.perf_counter() - t0) * 1000)
    return min(samples), statistics.median(samples)


def _parts(path: types.SimpleNamespace, name: str, args: tuple[Any, ...],
           repeat: int) -> dict[str, tuple[float, float]]:
    """Median and best of read, compute and write, and of the whole call_udf."""
    from xlwings import conversion

    udf = path.module.__dict__[name]
    info = udf.__xlfunc__
    n = len(info["args"])
    padded = (*args, *[MISSING] * (n - len(args)))
    win = sys.modules["xlwings._xlwindows"]
    from xlwings import Range

    def read() -> list[Any]:  # as call_udf does it
        out = []
        for a, arg_info in zip(padded, info["args"], strict=True):
            if isinstance(a, int) and a == MISSING:
                out.append(arg_info.get("optional"))
            elif win.is_range_instance(a):
                out.append(conversion.read(Range(impl=win.Range(xl=a)), None,
                                           arg_info["options"]))
            else:
                out.append(conversion.read(None, a, arg_info["options"]))
        return out

    given = read()
    result = udf(*given)
    return {
        "read": _time(read, repeat),
        "compute": _time(lambda: udf(*given), repeat),
        "write": _time(lambda: conversion.write(result, None, info["ret"]["options"]), repeat),
        "whole call_udf": _time(lambda: path.call(name, *args), repeat),
    }


def run(rows: int = 100_000, repeat: int = 7) -> dict[str, dict[str, tuple[float, float]]]:
    """Time the calls; return {label: {part: (best ms, median ms)}}.

    Examples
    --------
    >>> results = run(rows=2_000, repeat=1)
    >>> sorted(results["SV_DEVIATION whole column C:C"])
    ['compute', 'read', 'whole call_udf', 'write']
    """
    d = _inputs(rows)
    hlc = (d["high:whole"], d["low:whole"], d["close:whole"])
    cases: dict[str, tuple[str, tuple[Any, ...]]] = {
        "SV_DEVIATION whole column C:C": ("SV_DEVIATION", (d["close:whole"], 14.0)),
        "SV_BAND whole column C:C": ("SV_BAND", (d["close:whole"], "upper", 20.0, 2.0)),
        "SV_AVERAGE exponential, C:C": ("SV_AVERAGE", (d["close:whole"], 20.0, "exponential")),
        "SV_ATR whole columns (3)": ("SV_ATR", (*hlc, 14.0)),
        "SV_DEVIATION exact range": ("SV_DEVIATION", (d["close"], 14.0)),
        "SV_DEVIATION_LAST (window)": ("SV_DEVIATION_LAST", (d["close"], 14.0)),
        "SV_ATR_LAST Wilder (whole)": ("SV_ATR_LAST", (d["high"], d["low"], d["close"], 14.0)),
        "SV_DEVIATION_ON (window)": ("SV_DEVIATION_ON", (d["last_date"], d["dates"],
                                                         d["close"], 14.0)),
    }
    with classic_call_path() as path:
        return {label: _parts(path, name, args, repeat) for label, (name, args) in cases.items()}


def walk_floor(repeat: int = 7) -> float:
    """Median milliseconds to take the cells out of a whole column's row tuples once.

    The least a call does with a whole-column reference before any work of its
    own: every one of the 1,048,576 row tuples COM hands over is visited once,
    by C code (``list(map(itemgetter(0), rows))``).

    Examples
    --------
    >>> walk_floor(1) > 0
    True
    """
    rows = _inputs(1_000)["close:whole"].value
    take = operator.itemgetter(0)
    samples = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        list(map(take, rows))
        samples.append((time.perf_counter() - t0) * 1000)
    return statistics.median(samples)


def fill_down(rows: int = 2_000) -> dict[str, float]:
    """Seconds to compute a column of ``rows`` filled-down ``_LAST`` cells.

    Cell r passes the anchored range of rows 1..r. Which order a spreadsheet
    program calculates the cells in is its own business, so both orders are
    timed, for a window function (``SV_VOLRANK_LAST``, 252 readings) and a
    recursive one (``SV_AVERAGE_LAST`` exponential, 20 bars).
    """
    from sheetvol import addin

    close = [[v[0]] for v in _inputs(rows)["close"].value[1:]]
    calls: dict[str, Callable[[list[list[Any]]], Any]] = {
        "SV_VOLRANK_LAST (window)": lambda c: addin.UDFS["SV_VOLRANK_LAST"](c, 252),
        "SV_AVERAGE_LAST exponential": lambda c: addin.UDFS["SV_AVERAGE_LAST"](
            c, 20, "exponential"),
    }
    out = {}
    for name, call in calls.items():
        for order, sizes in (("top row first", range(1, rows + 1)),
                             ("bottom row first", range(rows, 0, -1))):
            t0 = time.perf_counter()
            for m in sizes:
                call(close[:m])
            out[f"{name}, {order}"] = time.perf_counter() - t0
    return out


def per_cell(bars: int = 300, repeat: int = 15, number: int = 200
             ) -> dict[str, tuple[float, float]]:
    """Microseconds per call of the per-cell forms on ``bars`` bars.

    Returns {label: (median CPU time, best wall time)} over ``repeat`` batches of
    ``number`` calls. CPU time (``time.process_time``) leaves out the time other
    jobs hold the core; the median is what a filled-down column pays per cell.
    The reference (a numpy standard deviation of 14 floats) is timed the same way
    in the same run, so the ratio to it shows how loaded the machine was.

    Examples
    --------
    >>> cost = per_cell(repeat=1, number=2)
    >>> sorted(cost)[0], all(cpu >= 0 and wall > 0 for cpu, wall in cost.values())
    ('SV_ATR_LAST Wilder', True)
    """
    from sheetvol.functions.calling import call_worksheet

    d = _inputs(bars)
    close = [[v[0]] for v in d["close"].value[1:]]
    high = [[v[0]] for v in d["high"].value[1:]]
    low = [[v[0]] for v in d["low"].value[1:]]
    dates = [[v[0]] for v in d["dates"].value[1:]]
    on = dates[-10][0]
    cases = {
        "SV_DEVIATION_LAST": lambda: call_worksheet("SV_DEVIATION_LAST", [close, 14]),
        "SV_ATR_LAST Wilder": lambda: call_worksheet("SV_ATR_LAST", [high, low, close, 14]),
        "SV_AVERAGE_LAST exponential": lambda: call_worksheet(
            "SV_AVERAGE_LAST", [close, 20, "exponential"]),
        "SV_DEVIATION_ON": lambda: call_worksheet("SV_DEVIATION_ON", [on, dates, close, 14]),
        "SV_ATR_ON Wilder": lambda: call_worksheet("SV_ATR_ON", [on, dates, high, low, close,
                                                                 14]),
    }
    ref = np.asarray([v[0] for v in close[-14:]], dtype=np.float64)
    cases[REFERENCE] = lambda: ref.std()  # how slow the machine is right now
    out = {}
    for label, call in cases.items():
        call()  # first-use imports are not the per-cell cost
        cpu, wall = [], []
        for _ in range(repeat):
            c0, t0 = time.process_time(), time.perf_counter()
            for _ in range(number):
                call()
            wall.append((time.perf_counter() - t0) / number * 1e6)
            cpu.append((time.process_time() - c0) / number * 1e6)
        out[label] = (statistics.median(cpu), min(wall))
    return out


REFERENCE = "reference: numpy std of 14 floats"


PER_CELL_BUDGET_US = 30.0


def main(argv: list[str] | None = None) -> int:
    """Print the parts and the verdicts; exit 1 when a whole-column call is over budget."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--fill-down", type=int, default=2_000, metavar="ROWS",
                        help="rows of the filled-down _LAST column to time (0 to skip)")
    ns = parser.parse_args(argv)
    results = run(ns.rows, ns.repeat)
    print(f"xlwings classic call path, {ns.rows:,} rows of prices, median (best) of "
          f"{ns.repeat}, ms:")
    width = max(map(len, results))
    print(f"  {'call':<{width}}  {'read':>15} {'compute':>15} {'write':>15} {'sum':>8}"
          f" {'call_udf':>9}")
    over = False
    for label, parts in results.items():
        total = sum(parts[p][1] for p in ("read", "compute", "write"))
        cells = " ".join(f"{parts[p][1]:7.2f} ({parts[p][0]:5.2f})"
                         for p in ("read", "compute", "write"))
        print(f"  {label:<{width}}  {cells} {total:8.2f} {parts['whole call_udf'][1]:9.2f}")
    walk = walk_floor(ns.repeat)
    print(f"floor: taking the cells out of one whole column's {SHEET_ROWS:,} row tuples "
          f"once, in C (list(map(itemgetter(0), rows))): median {walk:.1f} ms")
    # The budget is per whole-column reference read: a call given three of them walks
    # three times as many cells before any of its own work (see the floor line).
    for label, whole in (("SV_DEVIATION exact range", 0), ("SV_DEVIATION whole column C:C", 1),
                         ("SV_ATR whole columns (3)", 3)):
        parts = results[label]
        total = sum(parts[p][1] for p in ("read", "compute", "write"))
        budget = BUDGET_MS * max(whole, 1)
        met = total <= budget
        over = over or (not met and ns.rows <= 100_000)  # the budget is for 100,000 rows
        per = f" ({BUDGET_MS:.0f} ms per whole-column argument, {whole} here)" if whole > 1 else ""
        print(f"verdict: {label}, read + compute + write {total:.1f} ms, budget "
              f"{budget:.0f} ms{per}: {'met' if met else 'NOT met'} (x{total / budget:.2f})")
    cost = per_cell()
    ref = cost[REFERENCE][0]
    print("per-cell forms on 300 bars, microseconds per call: median CPU time of 15 x 200 "
          "calls, best wall time, ratio of the CPU time to the reference:")
    for label, (cpu, wall) in cost.items():
        print(f"  {label:<35} {cpu:8.1f} {wall:8.1f}   x{cpu / ref:5.1f}")
    for label, (us, _) in cost.items():
        if label == REFERENCE:
            continue
        print(f"verdict: per-cell {label}, median CPU {us:.0f} us, target "
              f"{PER_CELL_BUDGET_US:.0f} us: {'met' if us <= PER_CELL_BUDGET_US else 'NOT met'}"
              f" (x{us / PER_CELL_BUDGET_US:.2f}; reference {ref:.1f} us)")
    if ns.fill_down:
        print(f"a column of {ns.fill_down:,} filled-down _LAST cells (each over rows 1..r):")
        for label, seconds in fill_down(ns.fill_down).items():
            print(f"  {label:<50} {seconds:6.2f} s")
    return 1 if over else 0


if __name__ == "__main__":
    sys.exit(main())
