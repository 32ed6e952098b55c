"""Trade review (sheetvol.core.review) and the worksheet outcome and trail forms.

Every expected value is worked by hand in the comments beside it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sheetvol.core import review as trade_review
from sheetvol.core.levels import trailing_stop
from sheetvol.core.review import review_trade, summarise_outcomes
from sheetvol.functions import registry


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
    assert tuple(f.outputs) == trade_review.OUTCOME_FIELDS
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


@pytest.mark.parametrize("module", ["core.levels", "core.sizing", "core.review", "core.bounds",
                                    "functions.worksheet"])
def test_docstring_examples_run(module):
    import doctest
    import importlib

    mod = importlib.import_module(f"sheetvol.{module}")
    assert doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE).failed == 0


# -- fills at prices that traded; logged exits on a bar that reaches a level (issue 8) ----------
def test_a_missing_open_fills_at_no_better_than_the_bars_range():
    # Long 100, stop 98, target 106; bar 2 has no open and its whole range (95..96) is below
    # the stop. Filling at 98 reported a price that never traded (-1 R). By hand: the best
    # price that traded on the bar is its high, 96 -> R = (96 - 100) / 2 = -2.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 100.8, 99, 99.2),
                         (np.nan, 96, 95, 95.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_price, r.r, r.bars) == ("stop", 96.0, -2.0, 2)
    assert r.flags == ("open_missing",)
    # Short 100, stop 102: bar 1 has no open and trades 103..104 -> filled at its low 103.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (np.nan, 104, 103, 103.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "short", 102.0, 94.0)
    assert (r.result, r.exit_price, r.r, r.flags) == ("stop", 103.0, -1.5, ("open_missing",))
    # A target gapped beyond with no open: the worst price that traded (long: the low 107),
    # still a price of the bar. By hand R = (107 - 100) / 2 = 3.5.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (np.nan, 108, 107, 107.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_price, r.r, r.flags) == ("target", 107.0, 3.5, ("open_missing",))
    # A missing open on a bar whose range holds the level: the level traded, fill there, but
    # the gap check could not be made, so the flag is kept.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (np.nan, 99, 97, 97.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    assert (r.result, r.exit_price, r.flags) == ("stop", 98.0, ("open_missing",))
    # With the open there, nothing is flagged.
    o[1] = 98.5
    assert review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0).flags == ()


def test_a_logged_exit_on_a_bar_that_reaches_the_stop_is_ambiguous():
    # Long 100, stop 98, target 106; the log says closed at 99 on bar 2, whose low 97.5
    # reaches the stop. Which came first is unknown: ambiguous (the stop no longer overrides
    # the log silently), with the log's exit kept in view: exit 99 on bar 2, R -0.5.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 101, 99.5, 100.5),
                         (100.5, 100.8, 97.5, 99)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0, exit_index=2, exit_price=99.0)
    assert (r.result, r.exit_index, r.exit_price, r.r, r.bars) == ("ambiguous", 2, 99.0, -0.5, 2)
    assert r.flags == ("exit_bar_reached_stop",)
    # Excursions on that bar stop at the stop level: adverse 100 - 98 = 2 at most.
    assert r.adverse == 2.0
    # The same with the target reached on the exit bar.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100.5, 106.5, 100.2, 105)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0, exit_index=1, exit_price=105.0)
    assert (r.result, r.exit_price, r.r, r.flags) == (
        "ambiguous", 105.0, 2.5, ("exit_bar_reached_target",))
    # A gap through the stop at the exit bar's open is not ambiguous: the stop filled first.
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (97, 97.8, 96.5, 97.5)])
    r = review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0, exit_index=1, exit_price=97.5)
    assert (r.result, r.exit_price, r.flags) == ("stop", 97.0, ())
    # The summary leaves such trades out of the finished ones, as it does ambiguous bars.
    s = summarise_outcomes(["ambiguous", "stop"], [-0.5, -1.0])
    assert s["finished"] == 1 and s["total_r"] == -1.0


def test_the_fills_row_note_says_when_the_open_was_missing_or_the_exit_bar_reached_a_level():
    import pandas as pd

    from sheetvol.core.review import REVIEW_FLAGS
    from sheetvol.fill.review import TradeSettings, review_log
    from sheetvol.functions.worksheet import REVIEW_FLAG_WORDS

    assert set(REVIEW_FLAG_WORDS) == set(REVIEW_FLAGS)
    # Bars with a true range of 2 each (high 11, low 9, close 10) -> ATR(3) 2 from bar 3; long
    # at 10 on the 4th bar: stop 10 - 2 x 2 = 6. Bar 5 has no open and trades 4..5, wholly
    # below the stop: filled at its high 5 (by hand R = (5 - 10) / 4 = -1.25).
    days = pd.date_range("2025-01-06", periods=5)
    bars = pd.DataFrame({"Open": [10.0] * 4 + [np.nan], "High": [11.0] * 4 + [5.0],
                         "Low": [9.0] * 4 + [4.0], "Close": [10.0] * 4 + [4.5]}, index=days)
    log = pd.DataFrame({"Date": [days[3]], "Instrument": ["KESTREL"], "Side": ["long"],
                        "Entry": [10.0], "Equity": [10_000.0]})
    settings = TradeSettings(options={"period": 3}, trail_multiple=0)
    row = review_log(log, {"KESTREL": bars}, settings).iloc[0]
    assert (row["Stop"], row["Result"], row["Exit price"], row["R"]) == (6.0, "stop", 5.0, -1.25)
    assert "open missing: filled at no better than the bar's range" in row["Note"]
    # A logged exit at 7 on bar 5, with the open there (7.5) and the low 4 reaching the stop.
    bars.loc[days[4], ["Open", "High"]] = [7.5, 8.0]
    log["Exit"], log["Exit date"] = [7.0], [days[4]]
    row = review_log(log, {"KESTREL": bars}, settings).iloc[0]
    assert (row["Result"], row["Exit price"], row["R"]) == ("ambiguous", 7.0, -0.75)
    assert "the logged exit's bar also reached the stop" in row["Note"]


def test_worksheet_trade_forms_take_the_fills_defaults_from_one_place():
    # Issue 8: SV_OUTCOME reviewed without a trailing stop while the fill trailed at 3 units,
    # so the template said "stop" where the fill said "trailing stop hit".
    from sheetvol.core import levels, sizing
    from sheetvol.fill.review import TradeSettings

    fill = TradeSettings()
    outcome, trail = registry.get("SV_OUTCOME"), registry.get("SV_TRAIL")
    assert outcome.param("trail_multiple").default == fill.trail_multiple == levels.TRAIL_MULTIPLE
    assert trail.param("multiple").default == fill.trail_multiple
    for f in (outcome, trail):
        assert f.param("period").default == fill.options["period"] == trade_review.PERIOD
        assert f.param("measure").default == fill.measure == trade_review.MEASURE
        assert f.param("measure").choices == trade_review.MEASURES
    assert registry.get("SV_STOP").param("multiple").default == fill.stop_multiple
    assert registry.get("SV_TARGET").param("multiple").default == fill.target_multiple
    assert fill.risk == sizing.RISK_SHARE
    assert registry.get("SV_STOP").param("side").choices == tuple(levels.SIDES)


def test_outcome_trail_field_is_the_trail_at_the_exit_as_the_fill_gives_it():
    # The bars of test_outcome_worksheet_function_trails_on_the_tick (by hand there): the
    # trail in force for bar 7 is 103 - 2 x 2 = 99 and bar 7 exits at it, so the trail at the
    # exit, the fill's Trail column, is 99.
    close = np.array([99.0, 99.5, 100.0, 101.0, 102.0, 101.5, 99.6])
    opens = close.copy()
    opens[-1] = 100.0
    f = registry.get("SV_OUTCOME")
    args = dict(dates=np.arange(1.0, 8.0), open=opens, high=close + 1, low=close - 1,
                close=close, entry_date=3.0, entry_price=100.0, side="long", stop=96.0,
                target=110.0, trail_multiple=2, period=3)
    assert f(**args, field="trail") == 99.0
    assert f(**args, field="result") == "trail"


def test_review_refuses_what_it_cannot_review():
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 99, 101, 100)])
    with pytest.raises(ValueError, match="high is below low on bar 2"):
        review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, 106.0)
    o, h, lo, c = _bars([(100, 100.5, 99.5, 100), (100, 101, 99, 100)])
    with pytest.raises(ValueError, match="stop must be a number, got nothing"):
        review_trade(o, h, lo, c, 0, 100.0, "long", math.nan, 106.0)
    # No target (NaN) is allowed: the trade is open after a bar that reached neither level.
    assert review_trade(o, h, lo, c, 0, 100.0, "long", 98.0, math.nan).result == "open"


def test_a_size_input_out_of_range_is_that_rows_size_note():
    # A log row with a negative equity used to size against it; now its own Size note says
    # why there is no size, and the other rows are sized as usual (hand-worked: ATR(3) = 2,
    # stop 10 - 4 = 6, 1% of 10,000 over a loss of 4 per unit = 25 units).
    import pandas as pd

    from sheetvol.fill.review import Instrument, TradeSettings, review_log

    days = pd.date_range("2025-01-06", periods=5)
    bars = pd.DataFrame({"High": [11.0] * 5, "Low": [9.0] * 5, "Close": [10.0] * 5}, index=days)
    log = pd.DataFrame({"Date": [days[3]] * 2, "Instrument": ["KESTREL"] * 2,
                        "Side": ["long"] * 2, "Entry": [10.0] * 2, "Equity": [-5.0, 10_000.0]})
    got = review_log(log, {"KESTREL": bars}, TradeSettings(
        options={"period": 3}, instruments={"KESTREL": Instrument(point_value=1.0)}))
    assert math.isnan(got["Size"][0])
    assert got["Size note"][0] == "size not computed: equity must be a number above 0, got -5"
    assert got["Size"][1] == 25.0
