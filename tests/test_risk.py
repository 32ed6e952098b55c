"""Trade-level kernels: stops, targets, sizes, trailing stops, outcome review and summary.

Every expected value is worked by hand in the comments beside it, or comes from the
published source named beside the check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol.core import risk
from sheetvol.core.risk import (
    position_size,
    r_multiple,
    review_trade,
    size_note,
    size_with_reason,
    stop_price,
    summarise_outcomes,
    target_price,
    trailing_stop,
)
from sheetvol.functions import registry


# -- sizing: published worked example ---------------------------------------------------------
def test_turtle_unit_heating_oil_example():
    # Source: The Original Turtle Trading Rules (published 2003; reprinted in C. Faith,
    # Way of the Turtle, 2007, appendix). Unit = 1% of account / (N x dollars per point).
    # Heating oil: N = 0.0141, 42,000 dollars per point, account 1,000,000:
    # 10,000 / (0.0141 x 42,000) = 10,000 / 592.2 = 16.88..., "so 16 contracts" (truncated).
    entry = 0.80
    res = size_with_reason(1_000_000, 0.01, entry, entry - 0.0141, point_value=42_000)
    assert 16.88 <= float(res.raw[0]) < 16.89
    assert res.quantity.tolist() == [16.0]
    assert res.note.tolist() == [""]
    # The worksheet function gives the same figure through the registry's validation.
    assert registry.get("SV_SIZE")(1_000_000, 0.01, entry, entry - 0.0141, 42_000, 1) == 16.0


# -- sizing: hand-worked ---------------------------------------------------------------------
def test_size_is_truncated_never_rounded_to_nearest():
    # 2,500 risk money / 3.6 stop distance = 694.44 -> 694; 2,500 / 3.55 = 704.2 -> 704.
    assert position_size(250_000, 0.01, 105.2, 101.6) == 694.0
    # A budget of 0.99 steps short of 17 must give 16, not 17: 16.99 units.
    assert position_size(1699, 0.01, 101.0, 100.0) == 16.0


def test_size_converts_the_loss_into_account_currency():
    # Hand-worked: account equity 200,000, risk 0.5% -> 1,000 of account currency.
    # Stop 2.0 points away, 1,000 instrument currency per point per contract, and
    # 0.0065 account currency per unit of instrument currency:
    # loss per contract = 2.0 x 1,000 x 0.0065 = 13 account currency -> 1,000 / 13 = 76.9 -> 76.
    assert position_size(200_000, 0.005, 150.0, 148.0, point_value=1000, fx_rate=0.0065) == 76.0
    # At 2.5 account units per instrument unit one contract loses 2 x 1,000 x 2.5 = 5,000,
    # more than the 1,000 budget: 0.2 of a contract, so nothing, with the reason.
    dear = position_size(200_000, 0.005, 150.0, 148.0, point_value=1000, fx_rate=2.5)
    assert dear == "SV_SIZE: risk budget buys 0.2 units, less than one lot of 1"


def test_float_noise_at_an_exact_multiple_does_not_lose_a_step():
    # 1,000 / (1.3 - 1.2) is 10,000 on paper but 9,999.99999999999 in floats:
    # a plain floor loses one unit.
    assert math.floor(1000 / (1.3 - 1.2)) == 9999
    assert position_size(100_000, 0.01, 1.3, 1.2) == 10_000.0
    # The tolerance is relative 1e-9: a real shortfall of one part in 10^6 still rounds down.
    assert position_size(100_000, 0.01, 1.3, 1.3 - 0.1 * (1 + 1e-6)) == 9999.0
    # Lot steps that are not whole numbers come back as clean multiples:
    # 30 / (1.0 x 100) = 0.3 units -> 3 steps of 0.1 = 0.3 (not 0.30000000000000004).
    assert position_size(3000, 0.01, 101.0, 100.0, point_value=100, lot_step=0.1) == 0.3


def test_size_limits_and_their_messages():
    # Hand-worked: 10,000 x 1% = 100 to risk, stop 10 away -> 10 units = 0.5 of a 20-unit lot.
    assert position_size(10_000, 0.01, 100.0, 90.0, lot_step=20) == (
        "SV_SIZE: risk budget buys 10 units, less than one lot of 20"
    )
    # The note counts units, not lots: 250,000 x 1% = 2,500 over a 3.04 stop = 822.37 units,
    # in lots of 1,000 -> zero; the note says 822 units (whole units, thousands separated).
    assert size_note(250_000, 0.01, 105.2, 102.16, lot_step=1000) == (
        "risk budget buys 822 units, less than one lot of 1,000")
    # 694 units (see above) against a minimum of 1,000: nothing, with the reason.
    assert position_size(250_000, 0.01, 105.2, 101.6, min_qty=1000) == (
        "SV_SIZE: size 694 is below the minimum 1000"
    )
    # Above the maximum: capped, the cell keeps a number and the note says why.
    assert position_size(250_000, 0.01, 105.2, 101.6, max_qty=500) == 500.0
    assert size_note(250_000, 0.01, 105.2, 101.6, max_qty=500) == (
        "size 694 capped at the maximum 500"
    )
    # A maximum that is not a whole number of lots is cut to the lot below it: 505 -> 500.
    res = size_with_reason(250_000, 0.01, 105.2, 101.6, lot_step=10, max_qty=505)
    assert res.quantity.tolist() == [500.0]
    assert position_size(250_000, 0.01, 105.2, 105.2).startswith("SV_SIZE: stop equals entry")
    assert size_note(250_000, 0.01, 105.2, 101.6) == ""


def test_size_is_vectorised_with_one_note_per_row():
    res = size_with_reason([250_000, 10_000, math.nan], 0.01, [105.2, 100.0, 1.0],
                           [101.6, 90.0, 0.9], lot_step=[1, 20, 1])
    assert res.quantity[:2].tolist() == [694.0, 0.0]
    assert math.isnan(res.quantity[2])
    assert res.note.tolist() == [
        "", "risk budget buys 10 units, less than one lot of 20", "missing input"]


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
    assert risk.to_tick(1.16059, 0.00001, "long") == 1.16059
    assert risk.to_tick(0.3, 0.1, "long") == 0.3
    # 0.1 + 0.2 = 0.30000000000000004: a plain ceiling would give 0.4.
    assert risk.to_tick(0.1 + 0.2, 0.1, "short") == 0.3
    assert risk.to_tick(2157.75, 0.25, "long") == risk.to_tick(2157.75, 0.25, "short") == 2157.75
    # Results carry the tick's decimals: 10,160 ticks of 0.01 is 101.6, not 101.60000000000001.
    assert 10160 * 0.01 != 101.6 and risk.to_tick(101.6, 0.01, "long") == 101.6
    # A real distance is still rounded: 1.160594 -> 1.16059 (long), 1.16060 (short).
    assert risk.to_tick(1.160594, 0.00001, "long") == 1.16059
    assert risk.to_tick(1.160594, 0.00001, "short") == 1.1606


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


# -- outcome review: hand-worked trades ---------------------------------------------------------
def _bars(rows):
    o, h, lo, c = (np.array(x, dtype=float) for x in zip(*rows, strict=True))
    return o, h, lo, c


def test_long_target_hit():
    # Long 100 at the close of bar 0; stop 98 (1 R = 2), target 106.
    o, h, lo, c = _bars([(100, 101, 99, 100), (100.5, 102, 99.5, 101.5), (101.5, 106.5, 101, 106)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    # Bar 1 touches neither; bar 2's high 106.5 reaches 106 from an open of 101.5: fill at 106.
    assert (r.result, r.exit_index, r.exit_price, r.r, r.bars) == ("target", 2, 106.0, 3.0, 2)
    # Lowest low 99.5 -> 0.5 against (0.25 R); best high counted up to the fill: 6 (3 R).
    assert (r.adverse, r.favourable, r.adverse_r, r.favourable_r) == (0.5, 6.0, 0.25, 3.0)


def test_short_stop_hit():
    # Short 50 at the close of bar 0; stop 52, target 44.
    o, h, lo, c = _bars([(50, 50.5, 49.5, 50), (50.2, 51, 49, 49.5), (49.6, 52.5, 49.4, 52.2)])
    r = review_trade(o, h, lo, c, 0, 50.0, "short", 52.0, 44.0)
    # Bar 2's high 52.5 reaches the stop 52 from an open of 49.6: filled at 52, -1 R.
    assert (r.result, r.exit_price, r.r, r.bars) == ("stop", 52.0, -1.0, 2)
    # Against: highs 51 and 52 (the exit bar counts only up to the fill) -> 2 (1 R);
    # for: lowest low 49 -> 1 (0.5 R).
    assert (r.adverse, r.favourable, r.adverse_r, r.favourable_r) == (2.0, 1.0, 1.0, 0.5)


def test_gap_through_the_stop_fills_at_the_open():
    # Long 100, stop 98, target 106. Bar 2 opens at 96.5, below the stop.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 100.8, 99, 99.2), (96.5, 97.5, 95, 97)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    # Filled at the open 96.5, not at 98: R = (96.5 - 100) / 2 = -1.75.
    assert (r.result, r.exit_price, r.r, r.bars) == ("stop", 96.5, -1.75, 2)
    # Out at the open: the rest of bar 2 (low 95, high 97.5) is not held.
    assert (r.adverse, r.favourable) == (3.5, pytest.approx(0.8))
    # The same for a short trade gapping up through its stop: short 100, stop 102, open 103.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (103, 104, 102.5, 103.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "sell", 102.0, 94.0)
    assert (r.result, r.exit_price, r.r) == ("stop", 103.0, -1.5)


def test_same_bar_stop_and_target_is_ambiguous():
    # Long 100, stop 98, target 106; bar 1 opens at 100 and spans 97 to 107: which came first
    # is unknown, so no exit price or R is guessed.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 107, 97, 101)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_index, r.bars) == ("ambiguous", 1, 1)
    assert math.isnan(r.exit_price) and math.isnan(r.r)
    # Excursions are cut at the levels: 2 against (1 R), 6 for (3 R).
    assert (r.adverse_r, r.favourable_r) == (1.0, 3.0)
    # When the bar opens beyond the target (106.5) the target came first: filled at the open.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (106.5, 107, 97, 101)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_price, r.r) == ("target", 106.5, 3.25)


def test_trade_still_open():
    # Long 100, stop 98, target 106; nothing reached; last close 103 -> a mark of +1.5 R.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 102, 99, 101), (101, 104, 100.5, 103)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_index, r.r, r.bars) == ("open", None, 1.5, 2)
    assert math.isnan(r.exit_price)
    assert (r.adverse, r.favourable) == (1.0, 4.0)


def test_trailing_stop_hit_after_a_run_up():
    # Long 100 at the close of bar 0, volatility 1, stop and trail at 2 units, target 110.
    o, h, lo, c = _bars([
        (99.5, 100.5, 99, 100),
        (100, 102, 99.8, 101.8),      # guarded by 98; trail set at close: 102 - 2 = 100
        (102, 105, 101.5, 104.5),     # guarded by 100; trail set at close: 105 - 2 = 103
        (104.4, 104.8, 102.5, 102.8),  # guarded by 103: low 102.5 reaches it, open 104.4 above
    ])
    vol = np.ones(4)
    trail = trailing_stop(h, lo, c, vol, 0, 100.0, "long", 2)
    assert trail.tolist() == [98.0, 100.0, 103.0, 103.0]
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 110.0, trail)
    # Filled at the trailing level 103: R = 3 / 2 = 1.5, three bars after entry.
    assert (r.result, r.exit_price, r.r, r.bars) == ("trail", 103.0, 1.5, 3)
    # Against: lowest low 99.8 -> 0.2 (0.1 R); for: highest high 105 -> 5 (2.5 R).
    assert r.adverse == pytest.approx(0.2) and r.adverse_r == pytest.approx(0.1)
    assert (r.favourable, r.favourable_r) == (5.0, 2.5)
    assert r.trail == 103.0
    # The same bars without a trailing stop: still open at the last close 102.8 (+1.4 R).
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 110.0)
    assert r.result == "open" and r.r == pytest.approx(1.4)


def test_logged_exit_ends_the_review():
    # Long 100, stop 98, target 106; the log says closed at 102.5 on bar 2.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 101, 99.5, 100.5),
                         (100.5, 103, 100, 102.5), (102.5, 107, 102, 106.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0, exit_index=2, exit_price=102.5)
    # Bar 3 would have reached the target, but the trade was already closed:
    # R = 2.5 / 2 = 1.25 over 2 bars; best high 103 -> 3 (1.5 R); lowest low 99.5 -> 0.5.
    assert (r.result, r.exit_index, r.exit_price, r.r, r.bars) == ("closed", 2, 102.5, 1.25, 2)
    assert (r.adverse, r.favourable_r) == (0.5, 1.5)
    # A stop reached before the logged exit is what the levels did.
    r = review_trade(o, h - 0.0, np.array([100, 97.5, 100, 102.0]), c, 0, 100.0, "long", 98.0,
                     106.0, exit_index=2, exit_price=102.5)
    assert (r.result, r.exit_price, r.bars) == ("stop", 98.0, 1)
    # An exit price without a date gives R only.
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0, exit_price=97.0)
    assert (r.result, r.r, r.bars) == ("closed", -1.5, None)


def test_blank_bars_are_skipped_by_the_review():
    # Long 100, stop 98, target 106; bar 1 is blank; bar 2 reaches the target.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (np.nan,) * 4, (101, 106.2, 100.5, 106)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_index, r.r, r.bars) == ("target", 2, 3.0, 2)


# -- worksheet forms with dates ------------------------------------------------------------------
def test_outcome_worksheet_fields():
    # The gap-through-the-stop trade with day numbers 45_000.. (any increasing numbers work).
    days = [45000.0, 45001.0, 45004.0]
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 100.8, 99, 99.2), (96.5, 97.5, 95, 97)])
    f = registry.get("SV_OUTCOME")
    args = (days, o, h, lo, c, 45000.0, 100.0, "long", 98.0, 106.0)
    assert f(*args) == "stop"
    assert f(*args, "exit_price") == 96.5
    assert f(*args, "exit_date") == 45004.0
    assert f(*args, "r") == -1.75
    assert f(*args, "bars") == 2.0
    assert f(*args, "adverse") == 3.5
    assert tuple(f.outputs) == risk.OUTCOME_FIELDS
    # An entry date between bars uses the last bar on or before it (a weekend, say).
    assert f(days, o, h, lo, c, 45000.9, 100.0, "long", 98.0, 106.0, "bars") == 2.0
    # Before the first bar: nothing to review.
    assert f(days, o, h, lo, c, 44999.0, 100.0, "long", 98.0, 106.0) == "open"
    assert math.isnan(f(days, o, h, lo, c, 44999.0, 100.0, "long", 98.0, 106.0, "r"))
    # A logged exit on day 45001 at 99.5: closed, R = -0.25.
    assert f(*args, "r", 0, 14, "atr", 45001.0, 99.5) == -0.25


def test_trail_worksheet_function_with_constant_ranges():
    # Every bar spans exactly 1 either side of its close and no close moves more than 1,
    # so every true range is 2 and the 3-bar ATR is 2 from bar 3 on. Long at 100 on day 3
    # (row 2): starts at 100 - 2 x 2 = 96; highs after entry 102, 103, 102.5 -> 103 - 4 = 99.
    close = np.array([99.0, 99.5, 100.0, 101.0, 102.0, 101.5])
    high, low = close + 1, close - 1
    days = np.arange(1.0, 7.0)
    f = registry.get("SV_TRAIL")
    assert f(days, high, low, close, 3.0, 100.0, "long", 2, 3) == 99.0
    # Short at 100 from the same day: lows after entry 100, 101, 100.5 -> best 100 -> 104.
    assert f(days, high, low, close, 3.0, 100.0, "short", 2, 3) == 104.0
    # Entry before the first bar: blank.
    assert math.isnan(f(days, high, low, close, 0.5, 100.0, "long", 2, 3))


# -- summary ---------------------------------------------------------------------------------------
def test_summary_by_hand():
    results = ["target", "stop", "stop", "closed", "open", "ambiguous", "trail", "stop"]
    r = [3.0, -1.0, -1.25, 0.5, 0.4, math.nan, 1.5, -1.0]
    open_risk = [0, 0, 0, 0, 600.0, 0, 0, 0]
    s = summarise_outcomes(results, r, open_risk, 120_000)
    # Finished: 3, -1, -1.25, 0.5, 1.5, -1 -> total 1.75, average 1.75 / 6, 3 winners of 6.
    assert s["trades"] == 8 and s["finished"] == 6
    assert s["total_r"] == pytest.approx(1.75)
    # One figure for the average R per finished trade (the expectancy), not two.
    assert s["expectancy"] == pytest.approx(1.75 / 6) and "average_r" not in s
    assert s["win_rate"] == 0.5
    assert s["losing_streak"] == 2  # -1, -1.25
    assert (s["stop"], s["target"], s["trail"], s["closed"], s["open"], s["ambiguous"]) == (
        3 / 8, 1 / 8, 1 / 8, 1 / 8, 1 / 8, 1 / 8)
    # 600 at risk on the open trade, of 120,000 equity.
    assert s["open_risk"] == 600.0 and s["open_risk_share"] == 0.005
    # Open and ambiguous trades neither count in nor break a losing streak.
    assert summarise_outcomes(["stop", "open", "ambiguous", "stop", "target"],
                              [-1, 0.2, math.nan, -1, 2])["losing_streak"] == 2


def test_outcome_worksheet_function_trails_on_the_tick():
    # Bars spanning exactly 1 either side of the close (as in the SV_TRAIL test above), so
    # ATR(3) is 2 through bar 6. Long at 100 on day 3, stop 96, target 110, trail 2 ATR:
    # highs after entry 102, 103, 102.5 -> the trail in force for bar 7 is 103 - 4 = 99,
    # or 98.8 on ticks of 0.4 (99 / 0.4 = 247.5 -> 247 ticks). Bar 7 opens at 100 and
    # its low 98.6 reaches the trail: exit at the trail, R = (exit - 100) / (100 - 96).
    close = np.array([99.0, 99.5, 100.0, 101.0, 102.0, 101.5, 99.6])
    opens = close.copy()
    opens[-1] = 100.0
    f = registry.get("SV_OUTCOME")
    args = dict(dates=np.arange(1.0, 8.0), open=opens, high=close + 1, low=close - 1,
                close=close, entry_date=3.0, entry_price=100.0, side="long", stop=96.0,
                target=110.0, trail_multiple=2, period=3)
    assert f(**args, field="result") == "trail"
    assert f(**args, field="exit_price") == 99.0
    assert f(**args, field="r") == pytest.approx(-0.25)
    assert f(**args, field="exit_price", tick=0.4) == pytest.approx(98.8)
    assert f(**args, field="r", tick=0.4) == pytest.approx(-0.3)
