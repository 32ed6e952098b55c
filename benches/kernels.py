"""Benchmark the kernels against reference libraries in one run: ``python -m benches.kernels``.

Every kernel is timed (best of ``--repeat`` runs) on the same synthetic OHLC
random walk as a reference computed in the same process: TA-Lib where it has
the function (optional; reported as "not installed" when absent), pandas
otherwise. Each kernel runs at two periods to show that its cost does not grow
with the period. An accuracy section compares the rolling deviation of
sheetvol, TA-Lib and pandas with exact arithmetic (Python's ``statistics``) on
sampled windows of long walks near 100 and near 1e7.

A targets section then prints one verdict line per target of the recursive
kernels and the dispersion (met / not met, with the ratio measured in this run):
cost per bar at the large size within 1.25x of the small size (``--scaling``),
within 6x of TA-Lib (4x for the dispersion) at ``--bars``. Their accuracy is
asserted against TA-Lib, plain Python loops and exact sums: the run stops with
an error if it is off. The speed verdicts depend on the machine and its load and
do not change the exit code.
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


CLOCKS = {"cpu": time.process_time, "wall": time.perf_counter}


def best_ms(fns: list[Callable[[], Any]], repeat: int, clock: str = "cpu") -> list[float]:
    """Best time of each function over ``repeat`` rounds, in milliseconds.

    The functions take turns within each round, so a busy machine slows them alike
    and the ratios stay fair. ``clock="cpu"`` (the default) counts the processor time
    of this process (``time.process_time``: user and system, page faults included),
    which on a shared machine leaves out the time other jobs hold the core; every
    kernel and reference here runs on one thread, so on a free core it equals the
    wall time. ``clock="wall"`` counts elapsed time.
    """
    tick = CLOCKS[clock]
    best = [math.inf] * len(fns)
    for _ in range(repeat):
        for i, fn in enumerate(fns):
            start = tick()
            fn()
            best[i] = min(best[i], tick() - start)
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


# -- targets of the recursive kernels and the dispersion ---------------------------------
SCALING_LIMIT = 1.25  # ns per bar at the large size over ns per bar at the small size
RECURSION_LIMIT = 6.0  # our time over TA-Lib's, recursive kernels
DISPERSION_LIMIT = 4.0  # our time over TA-Lib's STDDEV
RECURSION_ACCURACY = 1e-13  # worst relative difference from TA-Lib or a plain loop
DISPERSION_ACCURACY = 1e-14  # worst relative error against exact sums


@dataclass(frozen=True)
class Target:
    """A kernel held to a target, with the TA-Lib computation it is compared with."""

    name: str
    ours: Callable[[Bars], Any]
    ref_name: str
    ref: Callable[[Bars], Any]
    limit: float
    columns: tuple[str, ...] = ("close",)  # what it reads
    outputs: int = 1  # how many arrays of n values it returns


_STREAM_STEP = 65_536  # values per step of the floor pass: its output stays in the cache


def memory_floor(b: Bars, columns: tuple[str, ...], outputs: int) -> list[np.ndarray]:
    """The least any kernel of these columns does: read each once, write fresh outputs.

    ``outputs`` new arrays of n values (what the kernel returns), each the sum of the
    columns, made step by step so every column is read from memory once. Its cost per
    bar grows with n by what the memory (and the first touch of new arrays) adds
    when the data no longer fits in the cache, whatever the kernel computes.

    Examples
    --------
    >>> b = synthetic_bars(1000)
    >>> [o.shape for o in memory_floor(b, ("high", "low"), 2)]
    [(1000,), (1000,)]
    >>> bool(np.allclose(memory_floor(b, ("high", "low"), 1)[0], b["high"] + b["low"]))
    True
    """
    n = len(b[columns[0]])
    out = [np.empty(n) for _ in range(outputs)]
    for s in range(0, n, _STREAM_STEP):
        e = min(s + _STREAM_STEP, n)
        first = out[0][s:e]
        np.copyto(first, b[columns[0]][s:e])
        for c in columns[1:]:
            np.add(first, b[c][s:e], out=first)
        for o in out[1:]:
            np.copyto(o[s:e], first)
    return out


def _pieces(result: Any) -> list[np.ndarray]:
    return list(result) if isinstance(result, tuple) else [result]


def targets(ta: Any) -> list[Target]:
    """The kernels of the targets; each reference is TA-Lib doing the same work."""
    from sheetvol.core.bands import atr_bands
    from sheetvol.core.ranges import average_true_range

    hlc = ("high", "low", "close")

    def ta_exp_dispersion(b: Bars) -> np.ndarray:
        # Deviation about the EMA from TA-Lib's pieces: var + (window mean - EMA)^2.
        c = b["close"]
        gap = ta.SMA(c, 14) - ta.EMA(c, 14)
        return np.sqrt(ta.STDDEV(c, 14, 1) ** 2 + gap * gap)

    def ta_atr_bands(b: Bars) -> tuple[np.ndarray, ...]:
        middle = ta.EMA(b["close"], 20)
        atr = ta.ATR(*(b[k] for k in hlc), 10)
        return middle, middle + 2.0 * atr, middle - 2.0 * atr

    return [
        Target("EMA, period 14", lambda b: moving_average(b["close"], 14, "exponential"),
               "talib.EMA(14)", lambda b: ta.EMA(b["close"], 14), RECURSION_LIMIT),
        # Wilder's alpha 1/N is TA-Lib's EMA alpha 2/(M+1) with M = 2N - 1.
        Target("Wilder average, period 14", lambda b: moving_average(b["close"], 14, "wilder"),
               "talib.EMA(27)", lambda b: ta.EMA(b["close"], 27), RECURSION_LIMIT),
        Target("ATR, period 14", lambda b: average_true_range(*(b[k] for k in hlc), 14),
               "talib.ATR(14)", lambda b: ta.ATR(*(b[k] for k in hlc), 14), RECURSION_LIMIT,
               columns=hlc),
        Target("dispersion about the EMA, 14",
               lambda b: dispersion(b["close"], 14, "exponential"),
               "talib STDDEV, SMA, EMA", ta_exp_dispersion, RECURSION_LIMIT),
        Target("ATR bands (20, 2, 10)", lambda b: atr_bands(*(b[k] for k in hlc)),
               "talib EMA + ATR", ta_atr_bands, RECURSION_LIMIT, hlc, 3),
        Target("dispersion simple, period 14", lambda b: dispersion(b["close"], 14),
               "talib.STDDEV(14)", lambda b: ta.STDDEV(b["close"], 14, 1), DISPERSION_LIMIT),
        Target("dispersion simple, period 200", lambda b: dispersion(b["close"], 200),
               "talib.STDDEV(200)", lambda b: ta.STDDEV(b["close"], 200, 1), DISPERSION_LIMIT),
    ]


def _loop_average(x: np.ndarray, alpha: float, period: int) -> np.ndarray:
    """Plain Python m += alpha (x - m), seeded with the exact mean of the first N."""
    out = [math.nan] * len(x)
    m = math.fsum(x[:period].tolist()) / period
    out[period - 1] = m
    for t, value in enumerate(x[period:].tolist(), start=period):
        m = m + alpha * (value - m)
        out[t] = m
    return np.array(out)


def _worst(got: np.ndarray, want: np.ndarray, skip: int = 0) -> float:
    got, want = got[skip:], want[skip:]
    ok = np.isfinite(want) & (want != 0)
    if not np.array_equal(np.isfinite(got), np.isfinite(want)):
        return math.inf
    return float(np.max(np.abs(got[ok] - want[ok]) / np.abs(want[ok])))


def target_accuracy(data: Bars, ta: Any) -> list[tuple[str, str, float, float]]:
    """Worst relative differences of the target kernels from outside references.

    Returns rows of (kernel, reference, worst, limit). TA-Lib's EMA and ATR are plain
    loops in C; the Wilder average is checked against a plain Python loop; the
    dispersions against two passes with exact sums (``math.fsum``) on sampled windows
    (about the window mean, and about our EMA for the one about the EMA).
    """
    from sheetvol.core.bands import atr_bands
    from sheetvol.core.ranges import average_true_range

    c = data["close"]
    hlc = [data[k] for k in ("high", "low", "close")]
    n = len(c)
    rows = [
        ("EMA, period 14", "talib.EMA",
         _worst(moving_average(c, 14, "exponential"), ta.EMA(c, 14)), RECURSION_ACCURACY),
        ("Wilder average, period 14", "plain Python loop",
         _worst(moving_average(c, 14, "wilder"), _loop_average(c, 1 / 14, 14)),
         RECURSION_ACCURACY),
        # TA-Lib's ATR leaves the first bar out, as first_bar="blank" does.
        ("ATR, period 14", "talib.ATR",
         _worst(average_true_range(*hlc, 14, first_bar="blank"), ta.ATR(*hlc, 14)),
         RECURSION_ACCURACY),
    ]
    # ATR bands: after the seeding transient of the default first bar (1e-3 of the
    # start-up difference is left after 100 bars at period 10).
    middle, upper, lower = atr_bands(*hlc)
    ta_middle, ta_atr = ta.EMA(c, 20), ta.ATR(*hlc, 10)
    rows.append(("ATR bands (20, 2, 10)", "talib EMA, ATR",
                 max(_worst(middle, ta_middle, 400), _worst(upper, ta_middle + 2.0 * ta_atr, 400),
                     _worst(lower, ta_middle - 2.0 * ta_atr, 400)),
                 RECURSION_ACCURACY))
    rng = np.random.default_rng(5)
    # The centre of the second is the EMA (checked above): the check is of the window sums.
    ema = moving_average(c, 14, "exponential")
    for name, average, level in (("dispersion simple, period 14", "simple", None),
                                 ("dispersion about the EMA, 14", "exponential", ema)):
        got = dispersion(c, 14, average)
        worst = 0.0
        for t in rng.integers(n - max(n // 10, 14), n, 200):
            window = c[t - 13 : t + 1]
            centre = math.fsum(window.tolist()) / 14 if level is None else level[t]
            exact = math.sqrt(math.fsum(((window - centre) ** 2).tolist()) / 14)
            worst = max(worst, abs(got[t] - exact) / exact)
        rows.append((name, "two passes, math.fsum", worst, DISPERSION_ACCURACY))
    return rows


def run_targets(bars: int, repeat: int, scaling: tuple[int, int], clock: str = "cpu") -> None:
    """Print one verdict line per target and assert the accuracy of the target kernels."""
    ta = _talib()
    if ta is None:
        print("targets: TA-Lib is not installed, no verdicts (pip install ta-lib)")
        return
    small, large = scaling
    print()
    print(f"Targets ({clock} time; {repeat} rounds, each timing {bars:,} bars twice, "
          f"{small:,} five times and {large:,} once; best kept; ratios from this run):")
    data = synthetic_bars(bars)
    failures = []
    for name, ref_name, worst, limit in target_accuracy(data, ta):
        ok = worst <= limit
        print(f"  accuracy  {name:<30} worst rel. diff {worst:8.1e} from {ref_name:<22} "
              f"(limit {limit:.0e}): {'met' if ok else 'NOT MET'}")
        if not ok:
            failures.append(name)
    sets = [(data, 2), (synthetic_bars(small, seed=2), 5), (synthetic_bars(large, seed=3), 1)]
    for tgt in targets(ta):
        # The sizes take turns round after round, so a change of load hits them alike;
        # within a round each size runs a few times in a row (its steady state: the
        # first call after another size pays for memory the allocator gave back).
        best = [math.inf] * 9
        for _ in range(repeat):
            times = []
            for d, runs in sets:
                times += best_ms([lambda t=tgt, d=d: t.ours(d), lambda t=tgt, d=d: t.ref(d),
                                  lambda t=tgt, d=d: memory_floor(d, t.columns, t.outputs)],
                                 runs, clock)
            best = [min(a, b) for a, b in zip(best, times, strict=True)]
        ours, ref, _, mine_s, ref_s, floor_s, mine_l, ref_l, floor_l = best
        ratio = ours / ref
        verdict = "met" if ratio <= tgt.limit else "NOT MET"
        print(f"  speed     {tgt.name:<30} {ours:8.2f} ms vs {tgt.ref_name} {ref:7.2f} ms: "
              f"{ratio:4.1f}x (target {tgt.limit:g}x): {verdict}")
        small_ns, large_ns = mine_s * 1e6 / small, mine_l * 1e6 / large
        grow = large_ns / small_ns
        ref_grow = (ref_l / large) / (ref_s / small)
        verdict = "met" if grow <= SCALING_LIMIT else "NOT MET"
        print(f"  scaling   {tgt.name:<30} {small_ns:6.2f} -> {large_ns:6.2f} "
              f"ns/bar: {grow:4.2f}x (target {SCALING_LIMIT}x; TA-Lib {ref_grow:4.2f}x): "
              f"{verdict}")
        # What memory alone adds per bar at the large size (reading the columns once and
        # writing the outputs fresh), and our growth if that were all that grew.
        added = floor_l * 1e6 / large - floor_s * 1e6 / small
        reachable = (small_ns + added) / small_ns
        beyond = (large_ns - small_ns) - added
        print(f"  floor     {tgt.name:<30} read {len(tgt.columns)}, write {tgt.outputs} fresh: "
              f"{floor_s * 1e6 / small:5.2f} -> {floor_l * 1e6 / large:5.2f} ns/bar "
              f"({added:+.2f}); ours with only that added {reachable:4.2f}x; "
              f"ours adds {beyond:+5.2f} ns/bar more")
    if failures:
        raise AssertionError(f"accuracy target not met: {', '.join(failures)}")


# -- fixed cost on short inputs: what a per-cell worksheet call pays -------------------------
SHORT_BARS = 300
SHORT_LIMIT_US = 30.0  # the per-cell forms' target; a kernel is one part of such a call
SHORT_CALLS = 200  # calls per timing


def short_kernels(ta: Any) -> list[tuple[str, Callable[[Bars], Any], str, Callable | None]]:
    """The target kernels (at their usual periods) and a few more, each with TA-Lib's work."""
    bands, est = _optional("bands"), _optional("estimators")
    out: list[tuple[str, Callable[[Bars], Any], str, Callable | None]] = [
        (t.name, t.ours, t.ref_name, t.ref) for t in targets(ta) if "200" not in t.name]
    out += [
        ("Bollinger Bands (20, 2)", lambda b: bands.deviation_bands(b["close"], 20),
         "talib.BBANDS(20)", lambda b: ta.BBANDS(b["close"], 20, 2.0, 2.0, 0)),
        ("close-to-close, 20", lambda b: est.close_to_close(b["close"], 20),
         "talib.STDDEV of log returns", lambda b: ta.STDDEV(np.diff(np.log(b["close"])), 20, 1)),
        ("Yang-Zhang, 20", lambda b: est.yang_zhang(*(b[k] for k in b), 20), "-", None),
    ]
    return out


def run_short(repeat: int, clock: str = "cpu") -> None:
    """Print the cost of one call at 300 bars, ours and TA-Lib's, with one verdict each."""
    ta = _talib()
    if ta is None:
        print("short inputs: TA-Lib is not installed, no comparison (pip install ta-lib)")
        return
    data = synthetic_bars(SHORT_BARS, seed=5)
    print()
    print(f"Fixed cost at {SHORT_BARS} bars ({clock} time per call, best of {repeat} rounds of "
          f"{SHORT_CALLS} calls; target {SHORT_LIMIT_US:g} us a call):")
    for name, ours, ref_name, ref in short_kernels(ta):
        fns = [lambda f=ours: [f(data) for _ in range(SHORT_CALLS)]]
        if ref is not None:
            fns.append(lambda f=ref: [f(data) for _ in range(SHORT_CALLS)])
        us = [ms * 1e3 / SHORT_CALLS for ms in best_ms(fns, repeat, clock)]
        versus = (f"{ref_name:<28} {us[1]:5.1f} us, {us[0] / us[1]:5.1f}x" if ref
                  else "no TA-Lib function")
        verdict = "met" if us[0] <= SHORT_LIMIT_US else "NOT met"
        print(f"  short     {name:<30} {us[0]:7.1f} us vs {versus}: {verdict}")


def run(bars: int, repeat: int, periods: tuple[int, ...],
        scaling: tuple[int, int] | None = (100_000, 10_000_000), clock: str = "cpu") -> None:
    """Print the timing table, the accuracy table and the target verdicts."""
    data = synthetic_bars(bars)
    print(f"sheetvol benchmark: {bars:,} bars, best of {repeat} ({clock} time), "
          f"numpy {np.__version__}, "
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
            times = best_ms(fns, repeat, clock)
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
    if scaling is not None:
        run_targets(bars, repeat, scaling, clock)


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: ``python -m benches.kernels [--bars N] [--repeat K]``."""
    parser = argparse.ArgumentParser(prog="python -m benches.kernels", description=__doc__.split(
        "\n")[0])
    parser.add_argument("--bars", type=int, default=1_000_000, help="bars in the series")
    parser.add_argument("--repeat", type=int, default=5, help="runs per timing (best is kept)")
    parser.add_argument("--periods", type=int, nargs="+", default=[14, 200],
                        help="periods to time each windowed kernel at")
    parser.add_argument("--scaling", type=int, nargs=2, default=[100_000, 10_000_000],
                        metavar=("SMALL", "LARGE"),
                        help="series lengths whose cost per bar the scaling target compares")
    parser.add_argument("--clock", choices=sorted(CLOCKS), default="cpu",
                        help="processor time of this process (default) or elapsed time")
    parser.add_argument("--no-targets", action="store_true",
                        help="leave out the targets section (verdicts and accuracy asserts)")
    parser.add_argument("--short-only", action="store_true",
                        help=f"only the fixed cost at {SHORT_BARS} bars (a per-cell call's)")
    args = parser.parse_args(argv)
    if args.short_only:
        run_short(args.repeat, args.clock)
        return 0
    if args.bars < max(args.periods) + 2 or args.repeat < 1:
        parser.error("--bars must exceed the largest period and --repeat must be at least 1")
    if min(args.bars, *args.scaling) < 1000:
        parser.error("--bars and --scaling need at least 1000 bars (the targets use period 200)")
    scaling = None if args.no_targets else (args.scaling[0], args.scaling[1])
    run(args.bars, args.repeat, tuple(args.periods), scaling, args.clock)
    run_short(args.repeat, args.clock)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
