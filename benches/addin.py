"""Per-call cost of the add-in's worksheet functions on big ranges.

Run ``python -m benches.addin`` (``--rows`` to change the size). The
inputs are built the way xlwings hands a range to a function declared with
``ndim=2``: a list of one-element rows of floats (with a few blanks as None),
dates as datetimes. Only the Python time inside the generated function is
measured: argument conversion, the kernel and building the returned rows.
xlwings' own COM transfer is not included (there is no spreadsheet program
here). Budget: a whole-column call on 100,000 rows under 50 ms.
"""

from __future__ import annotations

import argparse
import datetime as dt
import statistics
import sys
import time
from collections.abc import Callable
from typing import Any

import numpy as np

BUDGET_MS = 50.0


def _inputs(rows: int, seed: int = 7) -> dict[str, Any]:
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, rows)))
    high = close * (1 + np.abs(rng.normal(0, 0.004, rows)))
    low = close * (1 - np.abs(rng.normal(0, 0.004, rows)))

    def cells(a: np.ndarray) -> list[list[Any]]:
        out: list[list[Any]] = [[x] for x in a.tolist()]
        for i in range(0, rows, 997):  # a few blank cells, as real exports have
            out[i] = [None]
        return out

    start = dt.datetime(1990, 1, 1)
    return {
        "high": cells(high), "low": cells(low), "close": cells(close),
        "dates": [[start + dt.timedelta(days=i)] for i in range(rows)],
        "last_date": start + dt.timedelta(days=rows - 10),
    }


def _time(call: Callable[[], Any], repeat: int) -> tuple[float, float]:
    samples = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        call()
        samples.append((time.perf_counter() - t0) * 1000)
    return min(samples), statistics.median(samples)


def run(rows: int = 100_000, repeat: int = 7) -> dict[str, tuple[float, float]]:
    """Time the add-in functions; return {label: (best ms, median ms)}.

    Examples
    --------
    >>> results = run(rows=2_000, repeat=1)
    >>> sorted(results)[0]
    'SV_ATR whole column (3 columns)'
    """
    from sheetvol import addin
    from sheetvol.functions import convert as _convert

    d = _inputs(rows)
    u = addin.UDFS
    hlc = (d["high"], d["low"], d["close"])
    cases: dict[str, Callable[[], Any]] = {
        "SV_DEVIATION whole column (1 column)": lambda: u["SV_DEVIATION"](d["close"], 14),
        "SV_AVERAGE exponential whole column": lambda: u["SV_AVERAGE"](
            d["close"], 20, "exponential"),
        "SV_ATR whole column (3 columns)": lambda: u["SV_ATR"](*hlc, 14),
        "SV_BAND whole column (1 column)": lambda: u["SV_BAND"](d["close"], "upper", 20, 2),
        # _LAST: window functions read the last bars only, recursive ones whole columns.
        "SV_DEVIATION_LAST (window: last 14 bars)": lambda: u["SV_DEVIATION_LAST"](
            d["close"], 14),
        "SV_ATR_LAST simple (window: last 15 bars)": lambda: u["SV_ATR_LAST"](
            *hlc, 14, "simple"),
        "SV_ATR_LAST Wilder (recursive: whole columns)": lambda: u["SV_ATR_LAST"](*hlc, 14),
        # _ON, a trade-log row: the dates are always read whole.
        "SV_DEVIATION_ON (window)": lambda: u["SV_DEVIATION_ON"](
            d["last_date"], d["dates"], d["close"], 14),
        "SV_ATR_ON Wilder (recursive)": lambda: u["SV_ATR_ON"](
            d["last_date"], d["dates"], *hlc, 14),
        "dates column alone (datetimes to day numbers)": lambda: _convert.day_numbers(
            d["dates"], func="SV_X_ON", param="dates"),
    }
    return {label: _time(call, repeat) for label, call in cases.items()}


def fill_down(rows: int = 2_000) -> dict[str, float]:
    """Seconds to compute a column of ``rows`` filled-down ``_LAST`` cells.

    Cell r passes the anchored range of rows 1..r. Which order a spreadsheet
    program calculates the cells in is its own business, so both orders are
    timed, for a window function (``SV_VOLRANK_LAST``, 252 readings) and a
    recursive one (``SV_AVERAGE_LAST`` exponential, 20 bars).
    """
    from sheetvol import addin

    close = _inputs(rows)["close"]
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


def main(argv: list[str] | None = None) -> int:
    """Print the per-call cost; exit 1 when a whole-column call is over budget."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--fill-down", type=int, default=2_000, metavar="ROWS",
                        help="rows of the filled-down _LAST column to time (0 to skip)")
    ns = parser.parse_args(argv)
    results = run(ns.rows, ns.repeat)
    print(f"add-in per-call Python time, {ns.rows:,} rows, best / median of {ns.repeat}; "
          f"ratio = median / the {BUDGET_MS:.0f} ms budget of a whole-column call:")
    width = max(map(len, results))
    over = False
    for label, (best, median) in results.items():
        ratio = median / BUDGET_MS
        flag = ""
        if "whole column" in label and ratio > 1 and ns.rows <= 100_000:
            flag, over = "  OVER budget", True
        print(f"  {label:<{width}}  {best:7.2f} ms / {median:7.2f} ms  x{ratio:5.2f}{flag}")
    if ns.fill_down:
        print(f"a column of {ns.fill_down:,} filled-down _LAST cells (each over rows 1..r):")
        for label, seconds in fill_down(ns.fill_down).items():
            print(f"  {label:<50} {seconds:6.2f} s")
    return 1 if over else 0


if __name__ == "__main__":
    sys.exit(main())
