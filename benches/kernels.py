"""Benchmark the kernels against reference libraries in one run: ``python -m benches.kernels``.

Every kernel is timed (best of ``--repeat`` runs) on the same synthetic OHLC
random walk as a reference computed in the same process: TA-Lib where it has
the function (optional; reported as "not installed" when absent), pandas
otherwise. Each kernel runs at two periods to show that its cost does not grow
with the period. An accuracy section compares the rolling deviation of
sheetvol, TA-Lib and pandas with exact arithmetic (Python's ``statistics``) on
sampled windows of long walks near 100 and near 1e7.
"""

from __future__ import annotations

import argparse
import importlib
import math
import statistics
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from sheetvol.core.averages import moving_average
from sheetvol.core.dispersion import dispersion
from sheetvol.core.prices import price_basis

Bars = dict[str, np.ndarray]


@dataclass(frozen=True)
class Case:
    """One timed kernel and its reference (``ref`` None: no reference)."""

    name: str
    ours: Callable[[Bars, int], Any]
    ref_name: str
    ref: Callable[[Bars, int], Any] | None
    periodic: bool = True


def synthetic_bars(n: int, seed: int = 1) -> Bars:
    """Invented OHLC bars: a geometric random walk near 100 with opens and wicks."""
    rng = np.random.default_rng(seed)
    close = 100.0 * np.exp(np.cumsum(rng.normal(0.0, 0.001, n)))
    open_ = np.r_[100.0, close[:-1]] * np.exp(rng.normal(0.0, 0.0003, n))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0.0, 0.0005, n)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0.0, 0.0005, n)))
    return {"open": open_, "high": high, "low": low, "close": close}


def _talib() -> Any:
    try:
        return importlib.import_module("talib")
    except ImportError:
        return None


def _optional(module: str) -> Any:
    try:
        return importlib.import_module(f"sheetvol.core.{module}")
    except ImportError:
        return None


def _pd_std(b: Bars, p: int) -> np.ndarray:
    return pd.Series(b["close"]).rolling(p).std(ddof=0).to_numpy()


def _pd_logret_std(b: Bars, p: int) -> np.ndarray:
    r = np.diff(np.log(b["close"]), prepend=np.nan)
    return pd.Series(r).rolling(p).std(ddof=1).to_numpy()


def cases() -> list[Case]:
    """All kernels with their references; modules not written yet are left out."""
    ta = _talib()

    def tal(name: str, fn: Callable[[Bars, int], Any]) -> tuple[str, Callable | None]:
        return (f"talib.{name}", fn) if ta is not None else (f"talib.{name} (not installed)", None)

    out = [
        Case("price_basis typical", lambda b, p: price_basis(b["open"], b["high"], b["low"],
                                                             b["close"], "typical"),
             *tal("TYPPRICE", lambda b, p: ta.TYPPRICE(b["high"], b["low"], b["close"])),
             periodic=False),
        Case("moving_average simple", lambda b, p: moving_average(b["close"], p),
             *tal("SMA", lambda b, p: ta.SMA(b["close"], p))),
        Case("moving_average exponential",
             lambda b, p: moving_average(b["close"], p, "exponential"),
             *tal("EMA", lambda b, p: ta.EMA(b["close"], p))),
        Case("moving_average wilder", lambda b, p: moving_average(b["close"], p, "wilder"),
             "pandas ewm(alpha=1/N)",
             lambda b, p: pd.Series(b["close"]).ewm(alpha=1 / p, adjust=False).mean().to_numpy()),
        Case("moving_average linear", lambda b, p: moving_average(b["close"], p, "linear"),
             *tal("WMA", lambda b, p: ta.WMA(b["close"], p))),
        Case("dispersion simple", lambda b, p: dispersion(b["close"], p),
             *tal("STDDEV", lambda b, p: ta.STDDEV(b["close"], p, 1))),
        Case("dispersion simple", lambda b, p: dispersion(b["close"], p),
             "pandas rolling std", _pd_std),
        Case("dispersion exponential", lambda b, p: dispersion(b["close"], p, "exponential"),
             "pandas rolling std", _pd_std),
    ]
    ranges = _optional("ranges")
    if ranges is not None:
        hlc = ("high", "low", "close")
        out += [
            Case("ranges.true_range", lambda b, p: ranges.true_range(*(b[k] for k in hlc)),
                 *tal("TRANGE", lambda b, p: ta.TRANGE(*(b[k] for k in hlc))), periodic=False),
            Case("ranges.average_true_range",
                 lambda b, p: ranges.average_true_range(*(b[k] for k in hlc), p),
                 *tal("ATR", lambda b, p: ta.ATR(*(b[k] for k in hlc), p))),
            Case("ranges.atr_percent", lambda b, p: ranges.atr_percent(*(b[k] for k in hlc), p),
                 *tal("NATR", lambda b, p: ta.NATR(*(b[k] for k in hlc), p))),
        ]
    bands = _optional("bands")
    if bands is not None:
        out.append(Case("bands.deviation_bands", lambda b, p: bands.deviation_bands(b["close"], p),
                        *tal("BBANDS", lambda b, p: ta.BBANDS(b["close"], p, 2.0, 2.0, 0))))
    est = _optional("estimators")
    if est is not None:
        ohlc = ("open", "high", "low", "close")
        out += [
            Case("estimators.close_to_close", lambda b, p: est.close_to_close(b["close"], p),
                 "pandas std of log returns", _pd_logret_std),
            Case("estimators.parkinson", lambda b, p: est.parkinson(b["high"], b["low"], p),
                 "pandas std of log returns", _pd_logret_std),
            Case("estimators.garman_klass",
                 lambda b, p: est.garman_klass(*(b[k] for k in ohlc), p),
                 "pandas std of log returns", _pd_logret_std),
            Case("estimators.rogers_satchell",
                 lambda b, p: est.rogers_satchell(*(b[k] for k in ohlc), p),
                 "pandas std of log returns", _pd_logret_std),
            Case("estimators.yang_zhang", lambda b, p: est.yang_zhang(*(b[k] for k in ohlc), p),
                 "pandas std of log returns", _pd_logret_std),
        ]
    regime = _optional("regime")
    if regime is not None:
        out.append(Case("regime.percentile_rank",
                        lambda b, p: regime.percentile_rank(b["close"], p),
                        "pandas rolling rank",
                        lambda b, p: pd.Series(b["close"]).rolling(p).rank(pct=True).to_numpy()))
    return out


def best_ms(fns: list[Callable[[], Any]], repeat: int) -> list[float]:
    """Best wall time of each function over ``repeat`` rounds, in milliseconds.

    The functions take turns within each round, so a busy machine slows them alike
    and the ratios stay fair.
    """
    best = [math.inf] * len(fns)
    for _ in range(repeat):
        for i, fn in enumerate(fns):
            start = time.perf_counter()
            fn()
            best[i] = min(best[i], time.perf_counter() - start)
    return [b * 1e3 for b in best]


def accuracy(n: int, samples: int = 200) -> list[tuple[str, str, float]]:
    """Worst relative error against Python ``statistics.pstdev`` on sampled windows.

    Two walks of ``n`` bars: near 100 with moves of 1, and near 1e7 with moves of
    0.01 (the issue's cases); windows of 20 sampled from the last tenth.
    """
    rows = []
    ta = _talib()
    rng = np.random.default_rng(4)
    for label, start, step in (("near 100", 100.0, 1.0), ("near 1e7", 1e7, 0.01)):
        # Keep the level: a walk of 1e6 moves of 1 wanders ~1000, so start it higher.
        x = start + np.cumsum(rng.normal(0.0, step, n)) + (10 * step * math.sqrt(n)
                                                          if start < 1e3 else 0.0)
        period = 20
        ends = rng.integers(n - max(n // 10, period), n, samples)
        exact = np.array([statistics.pstdev(x[t - period + 1 : t + 1].tolist()) for t in ends])
        found = {"sheetvol dispersion": dispersion(x, period),
                 "pandas rolling std": pd.Series(x).rolling(period).std(ddof=0).to_numpy()}
        if ta is not None:
            found["talib.STDDEV"] = ta.STDDEV(x, period, 1)
        for name, values in found.items():
            rows.append((label, name, float(np.max(np.abs(values[ends] - exact) / exact))))
    return rows


def run(bars: int, repeat: int, periods: tuple[int, ...]) -> None:
    """Print the timing table and the accuracy table."""
    data = synthetic_bars(bars)
    print(f"sheetvol benchmark: {bars:,} bars, best of {repeat}, numpy {np.__version__}, "
          f"pandas {pd.__version__}, python {sys.version.split()[0]}")
    print()
    print(f"| {'kernel':<28} | {'period':>6} | {'ours ms':>8} | {'reference':<28} "
          f"| {'ref ms':>8} | {'ratio':>6} |")
    print(f"|{'-' * 30}|{'-' * 7}:|{'-' * 9}:|{'-' * 30}|{'-' * 9}:|{'-' * 7}:|")
    for case in cases():
        for period in periods if case.periodic else periods[:1]:
            fns = [lambda c=case, p=period: c.ours(data, p)]
            if case.ref is not None:
                fns.append(lambda c=case, p=period: c.ref(data, p))
            times = best_ms(fns, repeat)
            ours = times[0]
            if case.ref is None:
                ref_text, ratio_text = "-", "-"
            else:
                ref_text, ratio_text = f"{times[1]:8.2f}", f"{ours / times[1]:6.1f}"
            shown = str(period) if case.periodic else "-"
            print(f"| {case.name:<28} | {shown:>6} | {ours:8.2f} | {case.ref_name:<28} "
                  f"| {ref_text:>8} | {ratio_text:>6} |")
    print()
    print("Accuracy of a rolling population deviation (period 20) against Python's")
    print("statistics.pstdev (exact arithmetic), worst relative error on 200 sampled windows:")
    print()
    print(f"| {'series':<10} | {'method':<22} | {'worst rel. error':>16} |")
    print(f"|{'-' * 12}|{'-' * 24}|{'-' * 17}:|")
    for label, name, err in accuracy(bars):
        print(f"| {label:<10} | {name:<22} | {err:16.1e} |")


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: ``python -m benches.kernels [--bars N] [--repeat K]``."""
    parser = argparse.ArgumentParser(prog="python -m benches.kernels", description=__doc__.split(
        "\n")[0])
    parser.add_argument("--bars", type=int, default=1_000_000, help="bars in the series")
    parser.add_argument("--repeat", type=int, default=5, help="runs per timing (best is kept)")
    parser.add_argument("--periods", type=int, nargs="+", default=[14, 200],
                        help="periods to time each windowed kernel at")
    args = parser.parse_args(argv)
    if args.bars < max(args.periods) + 2 or args.repeat < 1:
        parser.error("--bars must exceed the largest period and --repeat must be at least 1")
    run(args.bars, args.repeat, tuple(args.periods))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
