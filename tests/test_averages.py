"""Moving averages against TA-Lib (test-only), pandas, plain loops and hand-worked values."""

from __future__ import annotations

import doctest
import math

import numpy as np
import pandas as pd
import pytest
import talib

from sheetvol.core import averages
from sheetvol.core.averages import linear_recurrence, moving_average
from sheetvol.functions import registry

KINDS = ("simple", "exponential", "wilder", "linear")


def loop_recursive(x, alpha, period, seed):
    """Plain Python recursion m_t = m_{t-1} + alpha (x_t - m_{t-1}) (the oracle)."""
    out = [math.nan] * len(x)
    if seed == "average":
        m = math.fsum(x[:period]) / period
        out[period - 1] = m
        start = period
    else:
        m = x[0]
        start = 1
    for t in range(start, len(x)):
        m = m + alpha * (x[t] - m)
        if t >= period - 1:
            out[t] = m
    return np.array(out)


def assert_close(got, want, rtol):
    assert np.array_equal(np.isnan(got), np.isnan(want))
    ok = ~np.isnan(want)
    np.testing.assert_allclose(got[ok], want[ok], rtol=rtol, atol=0)


# -- hand-worked -------------------------------------------------------------------------------
X5 = [2.0, 4.0, 6.0, 10.0, 4.0]


def test_hand_worked_period_3():
    nan = math.nan
    # simple: (2+4+6)/3 = 4, (4+6+10)/3 = 20/3, (6+10+4)/3 = 20/3
    assert_close(moving_average(X5, 3), np.array([nan, nan, 4, 20 / 3, 20 / 3]), 1e-15)
    # exponential, alpha = 2/(3+1) = 0.5, seeded with 4: 4 + 0.5*(10-4) = 7; 7 + 0.5*(4-7) = 5.5
    assert_close(moving_average(X5, 3, "exponential"), np.array([nan, nan, 4, 7, 5.5]), 1e-15)
    # Wilder, alpha = 1/3, seeded with 4: 4 + (10-4)/3 = 6; 6 + (4-6)/3 = 16/3
    assert_close(moving_average(X5, 3, "wilder"), np.array([nan, nan, 4, 6, 16 / 3]), 1e-15)
    # linear, weights 1, 2, 3 over 6: (2+8+18)/6, (4+12+30)/6, (6+20+12)/6
    assert_close(moving_average(X5, 3, "linear"),
                 np.array([nan, nan, 28 / 6, 46 / 6, 38 / 6]), 1e-15)
    # exponential seeded with the first value: 2, 3, 4.5, 7.25, 5.625; first two hidden
    assert_close(moving_average(X5, 3, "exponential", seed="first"),
                 np.array([nan, nan, 4.5, 7.25, 5.625]), 1e-15)


def test_period_one_is_the_series_itself():
    for kind in KINDS:
        np.testing.assert_allclose(moving_average(X5, 1, kind), X5, rtol=1e-15)


# -- TA-Lib (test-only reference) and pandas ---------------------------------------------
@pytest.mark.parametrize("period", [2, 5, 14, 50, 200])
def test_simple_equals_talib_sma_and_pandas(walk, period):
    x = walk(3000, start=1000.0, seed=period)
    got = moving_average(x, period)
    assert_close(got, talib.SMA(x, period), 1e-11)  # TA-Lib keeps a running sum: 1e-11
    assert_close(got, pd.Series(x).rolling(period).mean().to_numpy(), 1e-11)


@pytest.mark.parametrize("period", [2, 5, 14, 50, 200])
def test_exponential_equals_talib_ema_with_average_seed(walk, period):
    # TA-Lib seeds its EMA with the simple average of the first N values: exact match
    # apart from rounding order.
    x = walk(3000, start=1000.0, seed=period)
    assert_close(moving_average(x, period, "exponential"), talib.EMA(x, period), 1e-12)


@pytest.mark.parametrize("period", [2, 14, 200])
def test_linear_equals_talib_wma(walk, period):
    x = walk(3000, start=1000.0, seed=period)
    assert_close(moving_average(x, period, "linear"), talib.WMA(x, period), 1e-12)


@pytest.mark.parametrize("period", [3, 14, 100])
@pytest.mark.parametrize("seed", ["average", "first"])
def test_recursive_kinds_equal_plain_loop_and_pandas_ewm(walk, period, seed):
    x = walk(2000, seed=period)
    for kind, alpha in (("exponential", 2 / (period + 1)), ("wilder", 1 / period)):
        got = moving_average(x, period, kind, seed=seed)
        assert_close(got, loop_recursive(x, alpha, period, seed), 1e-12)  # plain loop
        if seed == "first":  # pandas' ewm(adjust=False) starts from the first value
            want = pd.Series(x).ewm(alpha=alpha, adjust=False).mean().to_numpy(copy=True)
            want[: period - 1] = np.nan
            assert_close(got, want, 1e-12)


def test_first_seed_converges_to_average_seed(walk):
    # Documented: the start-up weight (1 - alpha)^t dies away.
    x = walk(800, seed=1)
    a = moving_average(x, 10, "wilder")
    f = moving_average(x, 10, "wilder", seed="first")
    assert abs(a[20] - f[20]) > 1e-6  # still different early on
    np.testing.assert_allclose(a[-1], f[-1], rtol=1e-12)


@pytest.mark.parametrize("n", [1, 31, 32, 33, 64, 1025, 40_000])
@pytest.mark.parametrize("r", [0.0, 1 / 3, 0.9, 0.999, 1.0])
def test_blocked_recurrence_equals_plain_loop(n, r):
    # Blocks of 32, carries solved recursively (three levels at 40,000): plain loop oracle.
    u = np.random.default_rng(n).normal(0.0, 1.0, n)
    want, acc = [], 0.0
    for value in u:
        acc = r * acc + value
        want.append(acc)
    np.testing.assert_allclose(linear_recurrence(u, r), want, rtol=1e-11, atol=1e-11)


# -- accuracy on long series ---------------------------------------------------------------
def test_million_bars_near_1e7_simple_and_linear_stay_exact(long_walk_1e7):
    # Oracle: math.fsum over the window (correctly rounded); no drift after 1e6 bars.
    x = long_walk_1e7
    period = 20
    sma = moving_average(x, period)
    wma = moving_average(x, period, "linear")
    w = np.arange(1, period + 1, dtype=float)
    for t in np.random.default_rng(3).integers(len(x) - 10_000, len(x), 25):
        window = x[t - period + 1 : t + 1]
        assert sma[t] == pytest.approx(math.fsum(window) / period, rel=1e-15)
        assert wma[t] == pytest.approx(math.fsum(window * w) / w.sum(), rel=1e-15)


# -- gaps, warm-up, options ------------------------------------------------------------------------
@pytest.mark.parametrize("kind", KINDS)
def test_gap_is_skipped_not_poisoning(walk, kind):
    x = walk(200, seed=5)
    holed = x.copy()
    holed[[30, 31, 120]] = [np.nan, np.inf, np.nan]
    got = moving_average(holed, 10, kind)
    usable = np.isfinite(holed)
    assert np.isnan(got[~usable]).all()
    assert np.isfinite(got[40:][usable[40:]]).all()  # the rest of the series is fine
    # Same as running on the series with the gap rows removed.
    np.testing.assert_array_equal(got[usable], moving_average(holed[usable], 10, kind))


@pytest.mark.parametrize("kind", KINDS)
def test_warm_up_rows_are_nan_never_zero(kind):
    got = moving_average(np.arange(1.0, 31.0), 14, kind)
    assert np.isnan(got[:13]).all() and np.isfinite(got[13:]).all()
    assert np.isnan(moving_average([1.0, 2.0], 14, kind)).all()
    assert len(moving_average([], 14, kind)) == 0


def test_bad_options_raise_clear_errors():
    with pytest.raises(ValueError, match=r'kind must be one of "simple", .*got \'triangular\''):
        moving_average(X5, 3, "triangular")
    with pytest.raises(ValueError, match=r"seed must be one of \"average\", \"first\""):
        moving_average(X5, 3, "exponential", seed="zero")
    for bad in (0, 2.5, "3"):
        with pytest.raises(ValueError, match="period must be a whole number"):
            moving_average(X5, bad)


def test_registry_function_calls_the_kernel():
    x = np.linspace(100.0, 120.0, 50) + np.sin(np.arange(50))
    func = registry.get("SV_AVERAGE")
    np.testing.assert_array_equal(func(x.tolist(), 20, "Exponential"),
                                  moving_average(x, 20, "exponential"))
    np.testing.assert_array_equal(func.compute({"prices": x, "period": 5, "kind": "linear"}),
                                  moving_average(x, 5, "linear"))


def test_docstring_examples():
    assert doctest.testmod(averages).failed == 0


def test_choice_lists_by_family():
    # Window averages first (simple, linear), then the recursive ones (exponential, Wilder);
    # the registry and the ATR smoothing use the same order.
    from sheetvol.core import averages, ranges
    from sheetvol.functions import registry
    assert averages.KINDS == ("simple", "linear", "exponential", "wilder")
    assert averages.KINDS == averages.WINDOW_KINDS + averages.RECURSIVE_KINDS
    assert ranges.SMOOTHING == ("simple", "exponential", "wilder")
    assert registry.get("SV_AVERAGE").param("kind").choices is averages.KINDS
    assert registry.get("SV_DEVIATION").param("average").choices is averages.KINDS
    assert registry.get("SV_ATR").param("smoothing").choices is ranges.SMOOTHING
    # Defaults unchanged.
    assert registry.get("SV_AVERAGE").param("kind").default == "simple"
    assert registry.get("SV_ATR").param("smoothing").default == "wilder"
    assert registry.get("SV_PRICE").param("basis").default == "typical"
