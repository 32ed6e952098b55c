"""True range, ATR and ATR percent against TA-Lib, pandas and hand-worked bars."""

from __future__ import annotations

import doctest
import math

import numpy as np
import pandas as pd
import pytest
import talib
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol.core import ranges
from sheetvol.core.ranges import atr_percent, average_true_range, true_range
from sheetvol.functions import registry


def random_bars(n: int, seed: int = 0, start: float = 100.0):
    """Invented OHLC bars: a geometric random walk with overnight gaps and wicks."""
    rng = np.random.default_rng(seed)
    close = start * np.exp(np.cumsum(rng.normal(0, 0.01, n)))
    open_ = np.r_[start, close[:-1]] * np.exp(rng.normal(0, 0.004, n))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.005, n)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.005, n)))
    return open_, high, low, close


# Hand-worked bars (values chosen here, true ranges worked out by hand):
#   bar 0: H 10.0 L 9.0 C 9.5, no previous close        -> H-L = 1.0 (or blank)
#   bar 1: H 12.0 L 11.0 C 11.8, prev C 9.5 (gap up)     -> |H-pC| = 2.5 beats H-L 1.0, |L-pC| 1.5
#   bar 2: H 10.0 L 9.2 C 9.4, prev C 11.8 (gap down)    -> |L-pC| = 2.6 beats H-L 0.8, |H-pC| 1.8
#   bar 3: H 9.9 L 9.0 C 9.5, prev C 9.4 (inside)        -> H-L = 0.9 beats 0.5 and 0.4
HAND_H = [10.0, 12.0, 10.0, 9.9]
HAND_L = [9.0, 11.0, 9.2, 9.0]
HAND_C = [9.5, 11.8, 9.4, 9.5]
HAND_TR = [1.0, 2.5, 2.6, 0.9]


def test_true_range_hand_worked_including_gaps():
    np.testing.assert_allclose(true_range(HAND_H, HAND_L, HAND_C), HAND_TR, rtol=1e-14)
    blank = true_range(HAND_H, HAND_L, HAND_C, first_bar="blank")
    assert math.isnan(blank[0])
    np.testing.assert_allclose(blank[1:], HAND_TR[1:], rtol=1e-14)


def test_atr_hand_worked_three_smoothings():
    # Hand-worked, period 3: seed = (1.0 + 2.5 + 2.6) / 3 on bar 2.
    seed = (1.0 + 2.5 + 2.6) / 3
    wilder = average_true_range(HAND_H, HAND_L, HAND_C, 3)
    np.testing.assert_allclose(wilder[2:], [seed, (2 * seed + 0.9) / 3], rtol=1e-14)
    simple = average_true_range(HAND_H, HAND_L, HAND_C, 3, smoothing="simple")
    np.testing.assert_allclose(simple[2:], [seed, (2.5 + 2.6 + 0.9) / 3], rtol=1e-14)
    expo = average_true_range(HAND_H, HAND_L, HAND_C, 3, smoothing="exponential")
    np.testing.assert_allclose(expo[2:], [seed, 0.5 * seed + 0.5 * 0.9], rtol=1e-14)
    for out in (wilder, simple, expo):
        assert np.isnan(out[:2]).all()
    # first_bar="blank": the first window is bars 1..3, so only one value.
    blank = average_true_range(HAND_H, HAND_L, HAND_C, 3, first_bar="blank")
    assert np.isnan(blank[:3]).all()
    assert blank[3] == pytest.approx((2.5 + 2.6 + 0.9) / 3, rel=1e-14)


def test_constant_prices_give_exactly_zero_range_and_atr():
    flat = np.full(30, 42.5)
    assert (true_range(flat, flat, flat) == 0.0).all()
    for smoothing in ("wilder", "simple", "exponential"):
        atr = average_true_range(flat, flat, flat, 14, smoothing)
        assert np.isnan(atr[:13]).all() and (atr[13:] == 0.0).all()


def test_true_range_equals_talib_trange_exactly():
    # Source: TA-Lib TRANGE (its first bar is blank). Same three differences and a max:
    # bit-for-bit equal.
    _, h, lo, c = random_bars(3000, seed=1)
    np.testing.assert_array_equal(true_range(h, lo, c, first_bar="blank"), talib.TRANGE(h, lo, c))


@pytest.mark.parametrize("period", [2, 5, 14, 50])
def test_atr_with_blank_first_bar_equals_talib_atr(period):
    # Source: TA-Lib ATR (Wilder, seeded with the mean of true ranges 2..N+1). The blank
    # rows are identical; values agree to 1e-14 relative (measured: at most 2e-15). Not
    # bit-for-bit: TA-Lib writes the step as (prev*(N-1)+TR)/N, our recursion runs through
    # pandas' ewm with weights (1-1/N) and 1/N, so the last bits may differ.
    _, h, lo, c = random_bars(3000, seed=period)
    ours = average_true_range(h, lo, c, period, first_bar="blank")
    ref = talib.ATR(h, lo, c, timeperiod=period)
    np.testing.assert_array_equal(np.isnan(ours), np.isnan(ref))
    np.testing.assert_allclose(ours, ref, rtol=1e-14)


@pytest.mark.parametrize("period", [5, 14, 50])
def test_default_atr_equals_talib_after_the_seeding_transient(period):
    # Source: TA-Lib ATR. Our default first bar uses H-L, so the seed differs; the gap
    # shrinks by (1 - 1/N) per bar: after 30*N bars it is below e^-30 ~ 1e-13 of the
    # start. Checked: differs at the start, equal to 1e-12 relative from bar 30*N.
    _, h, lo, c = random_bars(3000, seed=period + 100)
    ours = average_true_range(h, lo, c, period)
    ref = talib.ATR(h, lo, c, timeperiod=period)
    assert np.isfinite(ours[period - 1]) and np.isnan(ref[period - 1])
    assert ours[period] != pytest.approx(ref[period], rel=1e-6)
    np.testing.assert_allclose(ours[30 * period :], ref[30 * period :], rtol=1e-12)


def test_atr_percent_times_100_equals_talib_natr():
    # Source: TA-Lib NATR = 100 * ATR / close; ours is a fraction.
    _, h, lo, c = random_bars(2000, seed=9)
    ours = 100 * atr_percent(h, lo, c, 14, first_bar="blank")
    ref = talib.NATR(h, lo, c, timeperiod=14)
    np.testing.assert_array_equal(np.isnan(ours), np.isnan(ref))
    np.testing.assert_allclose(ours, ref, rtol=1e-13)


def test_atr_percent_refuses_a_close_of_zero_or_below_naming_the_bar():
    # Issue 8: a share of a close at or below 0 went negative or blank without a word.
    h, lo, c = [1.0, 1.0, 1.0], [-1.0, -1.0, -1.0], [0.5, 0.5, 0.0]
    with pytest.raises(ValueError, match="close is 0 on bar 3: ATR as a share of the close"):
        atr_percent(h, lo, c, 2)
    with pytest.raises(ValueError, match=r"close is -0\.5 on bar 2"):
        atr_percent(h, lo, [0.5, -0.5, 0.5], 2)
    # Hand-worked: true ranges 2, 2 (high 1, low -1) -> ATR(2) 2 over a close of 0.5.
    assert atr_percent(h, lo, [0.5, 0.5, 0.5], 2)[1] == pytest.approx(2.0 / 0.5)
    # ATR itself keeps working on negative prices (spreads): the range is a distance.
    atr = average_true_range([-1.0, -1.0], [-3.0, -3.0], [-2.0, -2.0], 2)
    assert math.isnan(atr[0]) and atr[1] == 2.0


def test_simple_atr_equals_pandas_rolling_mean():
    # Source: pandas Series.rolling(N).mean() of TA-Lib's TRANGE (first bar = H-L here).
    _, h, lo, c = random_bars(2000, seed=3)
    tr = talib.TRANGE(h, lo, c)
    tr[0] = h[0] - lo[0]
    ref = pd.Series(tr).rolling(14).mean().to_numpy()
    np.testing.assert_allclose(average_true_range(h, lo, c, 14, "simple"), ref, rtol=1e-12)


@pytest.mark.parametrize("smoothing,alpha", [("wilder", 1 / 14), ("exponential", 2 / 15)])
def test_first_value_seed_equals_pandas_ewm(smoothing, alpha):
    # Source: pandas ewm(alpha, adjust=False) starts its recursion at the first value,
    # as seed="first" does; warm-up rows stay NaN in ours.
    _, h, lo, c = random_bars(1000, seed=4)
    tr = talib.TRANGE(h, lo, c)
    tr[0] = h[0] - lo[0]
    ref = pd.Series(tr).ewm(alpha=alpha, adjust=False).mean().to_numpy()
    ours = average_true_range(h, lo, c, 14, smoothing, seed="first")
    assert np.isnan(ours[:13]).all()
    np.testing.assert_allclose(ours[13:], ref[13:], rtol=1e-12)


def test_bad_options_are_refused():
    with pytest.raises(ValueError, match="first_bar"):
        true_range(HAND_H, HAND_L, HAND_C, first_bar="zero")
    with pytest.raises(ValueError, match="smoothing"):
        average_true_range(HAND_H, HAND_L, HAND_C, 3, smoothing="linearly")
    with pytest.raises(ValueError, match="period"):
        average_true_range(HAND_H, HAND_L, HAND_C, 0)


def test_registry_entries_call_these_kernels():
    _, h, lo, c = random_bars(100, seed=5)
    np.testing.assert_array_equal(
        registry.get("SV_ATR")(h, lo, c, 10), average_true_range(h, lo, c, 10)
    )
    np.testing.assert_array_equal(registry.get("SV_TRUERANGE")(h, lo, c), true_range(h, lo, c))
    np.testing.assert_array_equal(
        registry.get("SV_ATRPCT")(h, lo, c, 10, "simple"), atr_percent(h, lo, c, 10, "simple")
    )


# -- properties (hypothesis) ---------------------------------------------------------------
bars = st.integers(min_value=0, max_value=10_000)


@settings(max_examples=40, deadline=None)
@given(seed=bars, shift=st.floats(-1e4, 1e4), period=st.integers(2, 30),
       smoothing=st.sampled_from(["wilder", "simple", "exponential"]))
def test_atr_is_unchanged_by_shifting_all_prices(seed, shift, period, smoothing):
    _, h, lo, c = random_bars(80, seed=seed)
    base = average_true_range(h, lo, c, period, smoothing)
    moved = average_true_range(h + shift, lo + shift, c + shift, period, smoothing)
    # Each difference of shifted prices is off by at most a few ulps of the shifted level.
    np.testing.assert_allclose(moved, base, rtol=0, atol=1e-13 * (abs(shift) + 200))


@settings(max_examples=40, deadline=None)
@given(seed=bars, scale=st.floats(-1e3, 1e3).filter(lambda x: abs(x) > 1e-3),
       period=st.integers(2, 30))
def test_atr_scales_by_the_absolute_factor(seed, scale, period):
    _, h, lo, c = random_bars(80, seed=seed)
    base = average_true_range(h, lo, c, period)
    # A negative factor turns highs into lows.
    top, bottom = (h * scale, lo * scale) if scale > 0 else (lo * scale, h * scale)
    np.testing.assert_allclose(
        average_true_range(top, bottom, c * scale, period), abs(scale) * base, rtol=1e-12
    )


def test_docstring_examples():
    result = doctest.testmod(ranges)
    assert result.attempted > 0 and result.failed == 0
