"""The gap policy, checked across every series kernel.

Policy (sheetvol.core._gaps): a bar is unusable when any input the kernel needs is
not finite. Its output row is NaN and the kernel runs on the usable bars as if the gap
rows were not there, so windows and recursions carry on. Reference for each check: the
same kernel run on the series with the gap rows removed (the compressed series), which
is what the policy says the result must equal. Warm-up rows are NaN, never 0.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pytest
import talib

from sheetvol.core.averages import moving_average
from sheetvol.core.bands import atr_bands, bandwidth, deviation_bands, envelope, percent_b
from sheetvol.core.dispersion import dispersion
from sheetvol.core.estimators import (
    close_to_close,
    garman_klass,
    parkinson,
    rogers_satchell,
    yang_zhang,
)
from sheetvol.core.ranges import atr_percent, average_true_range, true_range
from sheetvol.core.regime import deviation_to_atr, percentile_rank

N = 10  # period used throughout


@dataclass(frozen=True)
class Case:
    name: str
    call: Callable[[dict[str, np.ndarray]], object]
    inputs: tuple[str, ...]
    warmup: int  # NaN rows at the start on clean data


CASES: list[Case] = []
for kind in ("simple", "exponential", "wilder", "linear"):
    CASES.append(Case(f"moving_average-{kind}",
                      lambda d, k=kind: moving_average(d["close"], N, k), ("close",), N - 1))
    for divisor in ("population", "sample"):
        CASES.append(Case(f"dispersion-{kind}-{divisor}",
                          lambda d, k=kind, v=divisor: dispersion(d["close"], N, k, v),
                          ("close",), N - 1))
CASES += [
    Case("true_range", lambda d: true_range(d["high"], d["low"], d["close"]),
         ("high", "low", "close"), 0),
    Case("true_range-blank", lambda d: true_range(d["high"], d["low"], d["close"], "blank"),
         ("high", "low", "close"), 1),
]
for smoothing in ("wilder", "simple", "exponential"):
    CASES.append(Case(f"atr-{smoothing}",
                      lambda d, s=smoothing: average_true_range(
                          d["high"], d["low"], d["close"], N, s),
                      ("high", "low", "close"), N - 1))
CASES += [
    Case("atr-blank-first-bar",
         lambda d: average_true_range(d["high"], d["low"], d["close"], N, first_bar="blank"),
         ("high", "low", "close"), N),
    Case("atr_percent", lambda d: atr_percent(d["high"], d["low"], d["close"], N),
         ("high", "low", "close"), N - 1),
    Case("deviation_bands", lambda d: deviation_bands(d["close"], N, 2.0), ("close",), N - 1),
    Case("deviation_bands-linear-sample",
         lambda d: deviation_bands(d["close"], N, 1.5, "linear", "sample"), ("close",), N - 1),
    Case("percent_b", lambda d: percent_b(d["close"], N), ("close",), N - 1),
    Case("bandwidth", lambda d: bandwidth(d["close"], N), ("close",), N - 1),
    Case("atr_bands", lambda d: atr_bands(d["high"], d["low"], d["close"], N, 2.0, 5),
         ("high", "low", "close"), N - 1),
    Case("envelope", lambda d: envelope(d["close"], N, 3.0, "exponential"), ("close",), N - 1),
    Case("close_to_close", lambda d: close_to_close(d["close"], N), ("close",), N),
    Case("parkinson", lambda d: parkinson(d["high"], d["low"], N), ("high", "low"), N - 1),
    Case("garman_klass", lambda d: garman_klass(d["open"], d["high"], d["low"], d["close"], N),
         ("open", "high", "low", "close"), N - 1),
    Case("rogers_satchell",
         lambda d: rogers_satchell(d["open"], d["high"], d["low"], d["close"], N),
         ("open", "high", "low", "close"), N - 1),
    Case("yang_zhang", lambda d: yang_zhang(d["open"], d["high"], d["low"], d["close"], N),
         ("open", "high", "low", "close"), N),
    Case("percentile_rank", lambda d: percentile_rank(d["close"], N), ("close",), N - 1),
    Case("deviation_to_atr", lambda d: deviation_to_atr(d["high"], d["low"], d["close"], N),
         ("high", "low", "close"), N - 1),
]
IDS = [c.name for c in CASES]


def bars(n: int = 200, seed: int = 0) -> dict[str, np.ndarray]:
    """Invented OHLC bars (geometric random walk)."""
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, n)))
    open_ = np.r_[100.0, close[:-1]] * np.exp(rng.normal(0, 0.003, n))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.004, n)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.004, n)))
    return {"open": open_, "high": high, "low": low, "close": close}


def outputs(result) -> tuple[np.ndarray, ...]:
    return result if isinstance(result, tuple) else (result,)


def _check_against_compressed(case: Case, data: dict, gaps: np.ndarray) -> None:
    keep = ~gaps
    full = outputs(case.call(data))
    compressed = outputs(case.call({k: v[keep] for k, v in data.items()}))
    for got, want in zip(full, compressed, strict=True):
        assert len(got) == len(gaps)
        assert np.isnan(got[gaps]).all(), case.name
        np.testing.assert_array_equal(got[keep], want, err_msg=case.name)


@pytest.mark.parametrize("case", CASES, ids=IDS)
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_a_blank_in_the_middle_blanks_that_row_only(case, bad):
    # Each input column in turn gets one non-finite value on row 100.
    for column in case.inputs:
        data = bars()
        data[column] = data[column].copy()
        data[column][100] = bad
        gaps = np.zeros(200, dtype=bool)
        gaps[100] = True
        _check_against_compressed(case, data, gaps)
        # Later rows are real numbers again: the gap did not poison the rest.
        for out in outputs(case.call(data)):
            assert np.isfinite(out[101 + N :]).all(), case.name


@pytest.mark.parametrize("case", CASES, ids=IDS)
def test_scattered_and_leading_blanks(case):
    # Blanks at the top (an export with empty first rows), a run inside a window and
    # isolated ones in different columns.
    data = bars(seed=3)
    gaps = np.zeros(200, dtype=bool)
    spots = {0: case.inputs[0], 1: case.inputs[-1], 57: case.inputs[0],
             58: case.inputs[0], 59: case.inputs[-1], 131: case.inputs[len(case.inputs) // 2]}
    for row, column in spots.items():
        data[column] = data[column].copy()
        data[column][row] = np.nan
        gaps[row] = True
    _check_against_compressed(case, data, gaps)


@pytest.mark.parametrize("case", CASES, ids=IDS)
def test_warm_up_rows_are_nan_never_zero(case):
    # On clean data exactly `warmup` leading rows are NaN and the rest are numbers; on
    # constant prices (where many kernels read 0 once the window is full) the warm-up is
    # still NaN, not 0.
    for out in outputs(case.call(bars(seed=5))):
        assert np.isnan(out[: case.warmup]).all(), case.name
        assert np.isfinite(out[case.warmup :]).all(), case.name
    flat = {k: np.full(50, 25.0) for k in ("open", "high", "low", "close")}
    for out in outputs(case.call(flat)):
        assert np.isnan(out[: case.warmup]).all(), case.name


@pytest.mark.parametrize("case", CASES, ids=IDS)
def test_too_few_or_no_usable_bars_gives_all_nan(case):
    data = {k: np.full(30, np.nan) for k in ("open", "high", "low", "close")}
    for out in outputs(case.call(data)):
        assert len(out) == 30 and np.isnan(out).all()
    short = {k: v[: case.warmup] for k, v in bars(seed=6).items()}  # one bar short
    for out in outputs(case.call(short)):
        assert len(out) == case.warmup and np.isnan(out).all()
    empty = {k: np.empty(0) for k in ("open", "high", "low", "close")}
    for out in outputs(case.call(empty)):
        assert len(out) == 0


def test_talib_ema_is_poisoned_by_one_nan_and_ours_is_not():
    # Source: TA-Lib EMA, an example of the failure the policy avoids (one NaN in the
    # input turns every later output into NaN).
    c = bars()["close"].copy()
    c[100] = np.nan
    assert np.isnan(talib.EMA(c, N)[100:]).all()
    ours = moving_average(c, N, "exponential")
    assert np.isnan(ours[100]) and np.isfinite(ours[101:]).all()


def test_huge_finite_prices_are_not_gaps():
    # The gap check first sums each column; a sum that overflows to inf must not make
    # finite bars look like gaps. Hand-worked: the mean of 1e308 and 1e308 is 1e308,
    # of 1e308 and 5e307 is 7.5e307; nothing is blank.
    x = np.tile([1e308, 1e308, 5e307], 2000)  # long enough for the check by sums
    np.testing.assert_array_equal(moving_average(x, 2)[:3] / 1e307, [np.nan, 10.0, 7.5])
    assert np.isfinite(moving_average(x, 2)[1:]).all()
    x[1] = np.inf  # a real gap among huge values is still a gap
    got = moving_average(x, 1)
    assert np.isnan(got[1]) and got[2] == 5e307 and np.isfinite(np.delete(got, 1)).all()


def test_every_way_of_passing_columns_and_options_gives_the_same_result():
    # The wrapper splits positional and keyword calls itself; the reference is the
    # same kernel called positionally on the compressed series (the policy above).
    rng = np.random.default_rng(5)
    close = 100 + np.cumsum(rng.normal(0, 1, 40))
    high, low = close + 1.0, close - 1.0
    close_gap = close.copy()
    close_gap[7] = np.nan
    keep = np.isfinite(close_gap)
    want = average_true_range(high[keep], low[keep], close[keep], N, "simple")
    calls = [
        lambda: average_true_range(high, low, close_gap, N, "simple"),
        lambda: average_true_range(high, low, close_gap, N, smoothing="simple"),
        lambda: average_true_range(high, low, close=close_gap, period=N, smoothing="simple"),
        lambda: average_true_range(high=high, low=low, close=close_gap, period=N,
                                   smoothing="simple"),
        lambda: average_true_range(smoothing="simple", close=close_gap, low=low, high=high,
                                   period=N),
    ]
    for call in calls:
        got = call()
        assert np.isnan(got[7])
        np.testing.assert_array_equal(got[keep], want)
    # Wrong calls fail as Python's own calls do (TypeError), not with a wrong answer.
    with pytest.raises(TypeError):
        average_true_range(high, low, close, N, high=high)
    with pytest.raises(TypeError):
        average_true_range(high, low)
    extra = len(inspect.signature(average_true_range).parameters) - 3  # one too many
    with pytest.raises(TypeError):
        average_true_range(high, low, close, *([N] * (extra + 1)))
