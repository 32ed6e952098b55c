"""Trade levels (sheetvol.core.levels): ticks, stops, targets, R and trailing stops.

Every expected value is worked by hand in the comments beside it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol.core import levels
from sheetvol.core.levels import r_multiple, stop_price, target_price, trailing_stop
from sheetvol.functions import registry


# -- ticks -------------------------------------------------------------------------------------
def test_levels_round_to_the_tick_against_the_trade():
    # Hand-worked, quarter-point ticks: entry 2,170.5, volatility 6.29.
    # Long stop 2,170.5 - 12.58 = 2,157.92 -> away from entry (down) 2,157.75;
    # long target 2,170.5 + 18.87 = 2,189.37 -> toward entry (down) 2,189.25.
    # Short stop 2,183.08 -> away (up) 2,183.25; short target 2,151.63 -> toward (up) 2,151.75.
    assert stop_price(2170.5, 6.29, 2, "long", 0.25) == 2157.75
    assert target_price(2170.5, 6.29, 3, "long", 0.25) == 2189.25
    assert stop_price(2170.5, 6.29, 2, "short", 0.25) == 2183.25
    assert target_price(2170.5, 6.29, 3, "short", 0.25) == 2151.75
    # Tick 0 (the default) leaves the level alone.
    assert stop_price(2170.5, 6.29, 2, "long") == pytest.approx(2157.92, abs=1e-9)
    # Vectors of sides and ticks: 100 - 2 x 1.1 = 97.8 -> 97.5 (tick 0.5); 50 + 2.2 = 52.2 on
    # 1-point ticks -> 53.
    assert stop_price([100.0, 50.0], [1.1, 1.1], 2, ["long", "short"], [0.5, 1]).tolist() == [
        97.5, 53.0]


def test_tick_rounding_ignores_float_noise():
    # In floats 1.16059 / 0.00001 = 116058.99999999999 and 0.3 / 0.1 = 2.9999999999999996:
    # a plain floor would move these prices, already on the tick, down a whole tick.
    assert math.floor(1.16059 / 0.00001) == 116058 and math.floor(0.3 / 0.1) == 2
    assert levels.to_tick(1.16059, 0.00001, "long") == 1.16059
    assert levels.to_tick(0.3, 0.1, "long") == 0.3
    # 0.1 + 0.2 = 0.30000000000000004: a plain ceiling would give 0.4.
    assert levels.to_tick(0.1 + 0.2, 0.1, "short") == 0.3
    assert levels.to_tick(2157.75, 0.25, "long") == 2157.75
    assert levels.to_tick(2157.75, 0.25, "short") == 2157.75
    # Results carry the tick's decimals: 10,160 ticks of 0.01 is 101.6, not 101.60000000000001.
    assert 10160 * 0.01 != 101.6 and levels.to_tick(101.6, 0.01, "long") == 101.6
    # A real distance is still rounded: 1.160594 -> 1.16059 (long), 1.16060 (short).
    assert levels.to_tick(1.160594, 0.00001, "long") == 1.16059
    assert levels.to_tick(1.160594, 0.00001, "short") == 1.1606


def test_trailing_stop_rounds_away_from_the_price():
    # As in the unrounded example but volatility 1.1, multiple 2 (2.2 away), tick 0.5:
    # long: 100 - 2.2 = 97.8 -> 97.5; 103 - 2.2 = 100.8 -> 100.5; then held at 100.5.
    got = trailing_stop([100, 103, 101], [99, 101, 99], [100, 102, 100], [1.1] * 3, 0, 100.0,
                        "long", 2, tick=0.5)
    assert got.tolist() == [97.5, 100.5, 100.5]
    # short: 100 + 2.2 = 102.2 -> 102.5; the low 101 does not beat the entry (102.5 holds);
    # the low 99 does: 99 + 2.2 = 101.2 -> up to 101.5.
    got = trailing_stop([100, 103, 101], [99, 101, 99], [100, 102, 100], [1.1] * 3, 0, 100.0,
                        "short", 2, tick=0.5)
    assert got.tolist() == [102.5, 102.5, 101.5]


def test_worksheet_levels_take_a_tick_at_the_end():
    # Same hand-worked levels as above through the registry (tick is the last argument).
    assert registry.get("SV_STOP")(2170.5, 6.29, 2, "long", 0.25) == 2157.75
    assert registry.get("SV_TARGET")(2170.5, 6.29, 3, "short", 0.25) == 2151.75
    assert [p.name for p in registry.get("SV_TRAIL").params][-1] == "tick"
    # SV_TRAIL: the unrounded level 99 (see test_trail_worksheet_function_with_constant_ranges)
    # on ticks of 0.4:
    # 99 / 0.4 = 247.5 -> 247 ticks = 98.8.
    close = np.array([99.0, 99.5, 100.0, 101.0, 102.0, 101.5])
    f = registry.get("SV_TRAIL")
    assert f(np.arange(1.0, 7.0), close + 1, close - 1, close, 3.0, 100.0, "long", 2, 3,
             "atr", 0.4) == 98.8


# -- stop, target, R ---------------------------------------------------------------------------
def test_stop_and_target_sit_on_the_correct_side():
    # Long: stop below, target above; short mirrored. 2 x 1.5 = 3 and 3 x 1.5 = 4.5.
    assert stop_price(100.0, 1.5, 2, "long") == 97.0
    assert target_price(100.0, 1.5, 3, "long") == 104.5
    assert stop_price(100.0, 1.5, 2, "short") == 103.0
    assert target_price(100.0, 1.5, 3, "short") == 95.5
    for word in ("BUY", " Long ", "buy"):
        assert stop_price(100.0, 1.5, 2, word) == 97.0
    for word in ("SELL", "Short"):
        assert stop_price(100.0, 1.5, 2, word) == 103.0
    with pytest.raises(ValueError, match="side must be long, short, buy or sell"):
        stop_price(100.0, 1.5, 2, "flat")
    both = stop_price(np.array([100.0, 100.0]), np.array([1.5, 1.5]), 2, ["long", "sell"])
    assert both.tolist() == [97.0, 103.0]


def test_worksheet_forms_validate_and_call_the_same_kernels():
    assert registry.get("SV_STOP")(100.0, 1.5, 2, "Sell") == 103.0
    assert registry.get("SV_TARGET")(100.0, 1.5, None, "long") == 104.5  # blank -> default 3
    assert registry.get("SV_RMULTIPLE")(100.0, 98.0, 106.0, "long") == 3.0
    with pytest.raises(registry.ArgumentError, match="SV_STOP: side must be one of"):
        registry.get("SV_STOP")(100.0, 1.5, 2, "flat")


def test_default_multiples_are_common_practice():
    # Common practice, no source: stops 1 to 2 volatility units from entry; we default
    # to a stop 2 units and a target 3 units away (a target of 1.5 R).
    assert registry.get("SV_STOP").param("multiple").default == 2.0
    assert registry.get("SV_TARGET").param("multiple").default == 3.0
    assert r_multiple(100.0, stop_price(100.0, 1.0), target_price(100.0, 1.0)) == 1.5


def test_r_multiple_by_hand():
    # Long 100, stop 98 (1 R = 2): 106 is +3 R, 97 is -1.5 R.
    assert r_multiple(100.0, 98.0, 106.0, "long") == 3.0
    assert r_multiple(100.0, 98.0, 97.0, "long") == -1.5
    # Short 100, stop 102: 103 is -1.5 R, 96 is +2 R.
    assert r_multiple(100.0, 102.0, 103.0, "short") == -1.5
    assert r_multiple(100.0, 102.0, 96.0, "sell") == 2.0
    assert math.isnan(r_multiple(100.0, 100.0, 96.0))


# -- trailing stop -----------------------------------------------------------------------------
def test_trailing_stop_long_by_hand():
    high = [100.0, 110.0, 102.0, 105.0, 104.0, 103.0]
    low = [98.0, 99.0, 100.0, 103.0, 101.0, 101.0]
    close = [99.0, 100.0, 101.5, 104.5, 102.0, 102.0]
    vol = [1.0, 1.0, 1.0, 1.0, 3.0, 1.0]
    t = trailing_stop(high, low, close, vol, 1, 100.0, "long", 2)
    assert math.isnan(t[0])  # before entry
    # Entry bar: entry 100 - 2 x 1 = 98. Its high of 110 came before the entry (at the close).
    # Bar 2: best 102 -> 100. Bar 3: best 105 -> 103. Bar 4: volatility 3 -> 105 - 6 = 99,
    # looser than 103, so the stop stays at 103. Bar 5: 105 - 2 = 103.
    assert t[1:].tolist() == [98.0, 100.0, 103.0, 103.0, 103.0]


def test_trailing_stop_short_by_hand_and_gaps():
    high = [51.0, 50.5, 49.0, np.nan, 48.5]
    low = [49.0, 49.5, 47.0, 46.0, 47.5]
    close = [50.0, 50.0, 47.5, 46.5, 48.0]
    vol = [0.5, 0.5, 0.5, 0.5, 1.0]
    t = trailing_stop(high, low, close, vol, 0, 50.0, "sell", 2)
    # Entry 50 + 2 x 0.5 = 51. Bar 1: best low min(50, 49.5) = 49.5 -> 50.5.
    # Bar 2: 47 -> 48. Bar 3 has no high: skipped, stop stays 48. Bar 4: 47 + 2 = 49,
    # looser than 48 for a short, so 48 stays.
    assert t.tolist() == [51.0, 50.5, 48.0, 48.0, 48.0]


@settings(max_examples=60, deadline=None)
@given(
    steps=st.lists(st.floats(-3, 3), min_size=2, max_size=60),
    spreads=st.lists(st.floats(0, 2), min_size=60, max_size=60),
    vols=st.lists(st.floats(0.01, 5), min_size=60, max_size=60),
    entry_at=st.integers(0, 59),
    side=st.sampled_from(["long", "short"]),
    multiple=st.floats(0.5, 4),
)
def test_trailing_stop_never_loosens(steps, spreads, vols, entry_at, side, multiple):
    close = 100.0 + np.cumsum(steps)
    n = len(close)
    spread = np.array(spreads[:n])
    high, low = close + spread, close - spread
    vol = np.array(vols[:n])
    entry_at = min(entry_at, n - 1)
    t = trailing_stop(high, low, close, vol, entry_at, float(close[entry_at]), side, multiple)
    assert np.isnan(t[:entry_at]).all()
    sign = 1.0 if side == "long" else -1.0
    assert t[entry_at] == pytest.approx(close[entry_at] - sign * multiple * vol[entry_at])
    steps_taken = np.diff(sign * t[entry_at:])
    assert (steps_taken >= 0).all()
    # On a tick grid: never loosens, each level a whole number of ticks, never tighter than
    # the unrounded level and less than one tick looser.
    r = trailing_stop(high, low, close, vol, entry_at, float(close[entry_at]), side, multiple,
                      tick=0.25)
    assert (np.diff(sign * r[entry_at:]) >= 0).all()
    assert np.allclose(r[entry_at:] / 0.25, np.round(r[entry_at:] / 0.25), rtol=0, atol=1e-6)
    gap = sign * (t[entry_at:] - r[entry_at:])
    assert (gap >= -1e-9).all() and (gap < 0.25 + 1e-9).all()



# -- rounding at the extremes (issue 8) -----------------------------------------------------------
def test_tick_rounding_beyond_half_a_billion_ticks_is_never_tighter():
    # A tolerance relative to the tick count (1e-9 of it) called every price beyond about
    # 5e8 ticks "on a tick" and rounded it to the nearest one. By hand:
    # 1,234,567.8915 is 1,234,567,891.5 ticks of 0.001: a long rounds down to .891.
    assert levels.to_tick(1234567.8915, 0.001, "long") == 1234567.891
    assert levels.to_tick(1234567.8915, 0.001, "short") == 1234567.892
    # 12,000,000 + 3 x 0.002 = 12,000,000.006 -> toward entry on 0.01 ticks: 12,000,000.00.
    assert target_price(12_000_000.0, 0.002, 3, "long", 0.01) == 12_000_000.0
    # 12,000,000 - 0.006 = 11,999,999.994 -> away from entry (down): 11,999,999.99.
    assert stop_price(12_000_000.0, 0.002, 3, "long", 0.01) == 11_999_999.99


TICKS = [(m, e) for m in (1, 2, 5, 25) for e in range(-8, 4)]


@st.composite
def price_on_a_tick_grid(draw):
    """A tick from 1e-8 to 2,500 and a whole count of ticks keeping the price within 1e12.

    Counts stay within 1e12 too: a hundredth of a tick is then some 80 float steps of the
    count, so the price as a float still tells it from the tick (beyond about 1e13 ticks it
    no longer can, whatever the rounding rule).
    """
    from decimal import Decimal

    mantissa, exponent = draw(st.sampled_from(TICKS))
    tick = Decimal(mantissa) * Decimal(10) ** exponent
    count = draw(st.integers(1, min(10**12, max(1, int(Decimal(10) ** 12 / tick) - 1))))
    return tick, count


@settings(max_examples=300, deadline=None)
@given(grid=price_on_a_tick_grid(), fraction=st.integers(1, 99),
       side=st.sampled_from(["long", "short"]))
def test_levels_are_never_tighter_at_any_magnitude(grid, fraction, side):
    # A price `fraction` hundredths of a tick past a whole number of ticks, for ticks from
    # 1e-8 to 2,500 and prices up to 1e12 (the decimal price is exact in Decimal; the float
    # is its nearest). A long level must round down to `count` ticks and a short one up to
    # `count + 1`: never tighter, never a whole tick too far.
    from decimal import Decimal

    tick, count = grid
    price = (Decimal(count) + Decimal(fraction) / 100) * tick
    got = levels.to_tick(float(price), float(tick), side)
    want = count if side == "long" else count + 1
    assert got == float(Decimal(want) * tick), (price, tick, side, got)
    # A price already on a tick stays there, whatever the float noise of its division.
    on = float(Decimal(count) * tick)
    assert levels.to_tick(on, float(tick), side) == on
    # Through the level functions: a long stop computed at `price` (entry - 1 x volatility)
    # rounds away from entry, a long target toward it; both to the same tick below.
    entry = float(price) + 1.0
    if side == "long" and entry - 1.0 == float(price):
        assert stop_price(entry, 1.0, 1.0, "long", float(tick)) == float(Decimal(count) * tick)
