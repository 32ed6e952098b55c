"""The trade-log API: per-trade levels, sizes and outcomes from a log and price bars.

Hand-worked logs use bars whose true range is 2 on every bar (high and low 1 either side
of the close, no close moving more than 1), so ATR is 2 whatever the smoothing.
"""

from __future__ import annotations

import dataclasses
import math
import statistics
import subprocess
import sys
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from sheetvol.core.review import RESULTS
from sheetvol.fill.review import (
    OUTPUT_COLUMNS,
    Instrument,
    TradeSettings,
    instruments_from_frame,
    review_log,
    summarise,
)

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "workbooks" / "demo-desk.xlsx"
ENTRY_COLUMNS = ["Volatility", "Bar date", "Stop", "Target", "Target R", "Size", "Size note"]


def _calm(closes, start="2025-01-06"):
    """Bars 1 either side of each close, dated on business days (true range 2 throughout)."""
    c = np.asarray(closes, dtype=float)
    return pd.DataFrame({"Open": c, "High": c + 1, "Low": c - 1, "Close": c},
                        index=pd.bdate_range(start, periods=len(c)))


def _with(frame, row, values):
    frame = frame.copy()
    frame.iloc[row, :4] = values
    return frame


def _hand_prices():
    # Rows 0-4: Mon 6 Jan to Fri 10 Jan 2025; row 5 Mon 13; row 6 Tue 14.
    alder = _calm([100.0, 100.5, 101.0, 100.5, 100.0, 0, 0])
    alder = _with(alder, 5, (100.0, 103.0, 99.0, 102.5))
    alder = _with(alder, 6, (102.5, 106.5, 102.0, 106.0))
    birch = _calm([100.0, 100.5, 101.0, 100.5, 100.0, 100.5, 0])
    birch = _with(birch, 6, (105.0, 106.0, 104.5, 105.5))  # opens with a gap up
    return {"ALDER": alder, "BIRCH": birch}


def _hand_log():
    return pd.DataFrame({
        "Date": pd.to_datetime(["2025-01-10", "2025-01-11", "2025-01-10", "2025-01-13"]),
        "Instrument": ["ALDER", "alder", "BIRCH", "BIRCH"],
        "Side": ["long", "Sell", "short", "BUY"],
        "Entry": [100.0, 100.0, 100.0, 100.5],
        "Exit": [np.nan] * 4,
        "Quantity": [np.nan, np.nan, np.nan, 10.0],
        "Equity": [10_000.0] * 4,
    })


HAND_SETTINGS = TradeSettings(
    options={"period": 3}, trail_multiple=0,
    instruments={"BIRCH": Instrument(point_value=5.0, fx_rate=1.2)},
)


def test_hand_worked_log():
    out = review_log(_hand_log(), _hand_prices(), HAND_SETTINGS)
    assert list(out.columns) == list(OUTPUT_COLUMNS)
    # Every entry: ATR 2 -> stop 2 x 2 = 4 away, target 3 x 2 = 6 away (1.5 R).
    assert out["Volatility"].tolist() == [2.0] * 4
    assert out["Stop"].tolist() == [96.0, 104.0, 104.0, 96.5]
    assert out["Target"].tolist() == [106.0, 94.0, 94.0, 106.5]
    assert out["Target R"].tolist() == [1.5] * 4
    # Trade 2 was entered on a Saturday: the Friday bar is the entry bar.
    assert out["Bar date"].tolist() == [pd.Timestamp("2025-01-10")] * 3 + [
        pd.Timestamp("2025-01-13")]
    # Size: 10,000 x 1% = 100 over a 4-point stop = 25 units; BIRCH at 5 a point and
    # 1.2 account units per instrument unit loses 4 x 5 x 1.2 = 24 a unit -> 4.17 -> 4.
    assert out["Size"].tolist() == [25.0, 25.0, 4.0, 4.0]
    # 1. ALDER long: Tuesday's high 106.5 reaches 106 from an open of 102.5 -> +1.5 R, 2 bars.
    # 2. ALDER short: Tuesday's high 106.5 reaches the stop 104 (open 102.5 below it) -> -1 R.
    # 3. BIRCH short: Tuesday opens at 105, beyond the stop 104 -> filled at 105, -1.25 R.
    # 4. BIRCH long from Monday at 100.5: Tuesday spans 104.5-106, inside 96.5-106.5 -> open,
    #    marked at the last close 105.5: +5 / 4 = +1.25 R.
    assert out["Result"].tolist() == ["target", "stop", "stop", "open"]
    assert out["Exit price"].tolist()[:3] == [106.0, 104.0, 105.0]
    assert out["R"].tolist() == [1.5, -1.0, -1.25, 1.25]
    assert out["Bars"].tolist() == [2, 2, 2, 1]
    assert out["Exit date"].tolist()[:3] == [pd.Timestamp("2025-01-14")] * 3
    assert pd.isna(out["Exit date"].iloc[3]) and math.isnan(out["Exit price"].iloc[3])
    # Open risk of trade 4: 10 units (the log's quantity) x (105.5 - 96.5) x 5 x 1.2 = 540.
    assert out["Open risk"].iloc[3] == pytest.approx(540.0)
    assert out["Open risk"].iloc[:3].isna().all()
    assert out["Note"].tolist() == [""] * 4

    s = summarise(out, _hand_log(), HAND_SETTINGS)
    # Finished R: 1.5, -1, -1.25 -> total -0.75, average -0.25, 1 win of 3, 2 losses in a row.
    assert s["Trades reviewed (log rows with an outcome)"] == 4 and s["Finished trades"] == 3
    assert s["Total R"] == pytest.approx(-0.75)
    assert s["Expectancy (average R per finished trade)"] == pytest.approx(-0.25)
    assert "Average R" not in s.index  # one row for the average R, not two
    assert s["Win rate"] == pytest.approx(1 / 3) and s["Largest losing streak"] == 2
    assert s["Stop hit (share)"] == 0.5 and s["Still open (share)"] == 0.25
    # 540 of the latest trade's equity, 10,000.
    assert s["Open risk (share of equity)"] == pytest.approx(0.054)


def test_logged_exit_and_other_header_spellings():
    log = pd.DataFrame({
        "trade date": ["2025-01-10", "2025-01-10"], "SYMBOL": ["ALDER", "ALDER"],
        "direction": ["long", "long"], "entry price": [100.0, 100.0],
        "exit price": [102.0, 99.0], "Exit Date": ["2025-01-13", None],
        "account equity": [10_000.0, 10_000.0],
    })
    both = review_log(log, _hand_prices(), HAND_SETTINGS)
    out = both.iloc[0]
    # Monday (high 103) does not reach 106; the log closes it there at 102: +2 / 4 = 0.5 R.
    assert (out["Result"], out["Exit price"], out["R"], out["Bars"]) == ("closed", 102.0, 0.5, 1)
    assert out["Favourable R"] == 0.75  # Monday's high 103 is 3 above entry
    # An exit price without its date: R only, (99 - 100) / 4 = -0.25, and a note saying so.
    out = both.iloc[1]
    assert (out["Result"], out["R"], out["Note"]) == (
        "closed", -0.25, "no exit date: R from the exit price only")
    assert pd.isna(out["Exit date"]) and math.isnan(out["Bars"])


def test_problems_become_notes_not_errors():
    log = pd.DataFrame({
        "Date": ["2025-01-10", "2025-01-10", "2025-01-01", "2025-01-07", "2025-01-10"],
        "Instrument": ["CEDAR", "ALDER", "ALDER", "ALDER", "ALDER"],
        "Side": ["long", "flat", "long", "long", "long"],
        "Entry": [100.0, 100.0, 100.0, 100.0, None],
        "Equity": [10_000.0] * 5,
    })
    out = review_log(log, _hand_prices(), HAND_SETTINGS)
    assert out["Note"].tolist()[:4] == [
        "no prices for instrument 'CEDAR'",
        "side must be long, short, buy or sell, got 'flat'",
        "no bar on or before the entry date",
        "no SV_ATR on the entry bar (too little history)",  # 2 bars, a 3-bar ATR needs 3
    ]
    assert out["Stop"].iloc[:4].isna().all() and out["Result"].iloc[:4].tolist() == [""] * 4
    # A blank entry price is the entry bar's close (entries are at the close).
    assert out["Stop"].iloc[4] == 96.0
    assert out["Note"].iloc[4] == "entry price taken from the entry bar's close"
    with pytest.raises(ValueError, match="trade log has no side column") as err:
        review_log(log.drop(columns="Side"), _hand_prices(), HAND_SETTINGS)
    # The message lists what was found and what is missing.
    assert 'date in "Date", instrument in "Instrument"' in str(err.value)
    assert "missing: side (side/direction)" in str(err.value)


def test_log_without_an_instrument_column():
    log = _hand_log().drop(columns="Instrument")
    # One set of prices: every trade is on it (ALDER's bars: the same levels as trade 1).
    one = review_log(log.iloc[:1], {"ALDER": _hand_prices()["ALDER"]}, HAND_SETTINGS)
    assert (one["Stop"].iloc[0], one["Result"].iloc[0], one["Note"].iloc[0]) == (
        96.0, "target", "")
    # Two: the log cannot say which, and the message names found and missing roles.
    with pytest.raises(ValueError, match="no instrument column") as err:
        review_log(log, _hand_prices(), HAND_SETTINGS)
    assert 'found: date in "Date", side in "Side", entry in "Entry"' in str(err.value)
    assert "missing: instrument (instrument/symbol/market/ticker)" in str(err.value)


def test_levels_on_the_tick_and_the_size_from_the_rounded_stop():
    # Hand-worked on the calm bars (ATR 2, so 4 to the stop and 6 to the target), ticks of
    # 0.25, entry 100.3: long stop 96.3 -> down 96.25, target 106.3 -> down 106.25;
    # short stop 104.3 -> up 104.5, target 94.3 -> up 94.5.
    # Size: 10,000 x 1% = 100 over the rounded distance: long 100 / 4.05 = 24.69 -> 24
    # (25 over the unrounded 4); short 100 / 4.2 = 23.8 -> 23.
    log = pd.DataFrame({"Date": pd.to_datetime(["2025-01-10"] * 2), "Instrument": ["ALDER"] * 2,
                        "Side": ["long", "short"], "Entry": [100.3, 100.3],
                        "Equity": [10_000.0] * 2})
    settings = TradeSettings(options={"period": 3}, trail_multiple=0,
                             instruments={"ALDER": Instrument(tick=0.25)})
    out = review_log(log, _hand_prices(), settings)
    assert out["Stop"].tolist() == [96.25, 104.5]
    assert out["Target"].tolist() == [106.25, 94.5]
    assert out["Size"].tolist() == [24.0, 23.0]
    # Target R from the rounded levels: 5.95 / 4.05 and 5.8 / 4.2.
    assert out["Target R"].tolist() == pytest.approx([5.95 / 4.05, 5.8 / 4.2])
    # The same log without a tick: 96.3 and 25 units.
    plain = review_log(log, _hand_prices(), dataclasses.replace(settings, instruments={}))
    assert plain["Stop"].iloc[0] == pytest.approx(96.3) and plain["Size"].iloc[0] == 25.0


def test_price_basis_of_the_measure_matches_python_statistics():
    # Reference: statistics.pstdev of the typical prices (H + L + C) / 3 of the 5 bars up to
    # the entry bar. Bars with the close at the top of the range so typical != close.
    closes = [100.0, 101.5, 99.0, 102.0, 103.5, 101.0, 104.0]
    bars = pd.DataFrame({"Open": closes, "High": [c + 0.5 for c in closes],
                         "Low": [c - 2.0 for c in closes], "Close": closes},
                        index=pd.bdate_range("2025-01-06", periods=len(closes)))
    log = pd.DataFrame({"Date": ["2025-01-13"], "Instrument": ["ALDER"], "Side": ["long"],
                        "Entry": [101.0], "Equity": [10_000.0]})  # Monday = row 5
    typical = [(c + 0.5 + c - 2.0 + c) / 3 for c in closes[1:6]]
    out = review_log(log, {"ALDER": bars}, TradeSettings(
        measure="deviation", options={"period": 5, "basis": "typical"}))
    assert out["Volatility"].iloc[0] == pytest.approx(statistics.pstdev(typical), rel=1e-12)
    # The median price (H + L) / 2 through the long name and a capitalised word.
    median = [(c + 0.5 + c - 2.0) / 2 for c in closes[1:6]]
    out = review_log(log, {"ALDER": bars}, TradeSettings(
        measure="SV_DEVIATION", options={"period": 5, "basis": "Median"}))
    assert out["Volatility"].iloc[0] == pytest.approx(statistics.pstdev(median), rel=1e-12)
    with pytest.raises(ValueError, match="basis must be one of open, high, low, close"):
        review_log(log, {"ALDER": bars}, TradeSettings(
            measure="deviation", options={"basis": "middle"}))
    with pytest.raises(ValueError, match="SV_ATR reads high, low, close"):
        review_log(log, {"ALDER": bars}, TradeSettings(options={"basis": "typical"}))


def test_deviation_measure_matches_python_statistics():
    # Reference: Python's statistics.pstdev / stdev over the 5 closes up to the entry bar.
    closes = [100.0, 101.5, 99.0, 102.0, 103.5, 101.0, 104.0, 150.0]
    prices = {"ALDER": _calm(closes)}
    log = pd.DataFrame({"Date": ["2025-01-13"], "Instrument": ["ALDER"], "Side": ["long"],
                        "Entry": [101.0], "Equity": [10_000.0]})  # Monday = row 5
    window = closes[1:6]
    out = review_log(log, prices, TradeSettings(measure="deviation", options={"period": 5}))
    assert out["Volatility"].iloc[0] == pytest.approx(statistics.pstdev(window), rel=1e-12)
    sample = TradeSettings(measure="SV_DEVIATION", options={"period": 5, "divisor": "sample"})
    out = review_log(log, prices, sample)
    assert out["Volatility"].iloc[0] == pytest.approx(statistics.stdev(window), rel=1e-12)
    with pytest.raises(ValueError, match="price units"):
        review_log(log, prices, TradeSettings(measure="SV_ATRPCT"))
    with pytest.raises(ValueError, match="not a sheetvol function"):
        review_log(log, prices, TradeSettings(measure="range"))


def _random_bars(seed, n=80, start=100.0):
    # Invented test data: a random walk with a random range around each close.
    rng = np.random.default_rng(seed)
    c = start + np.cumsum(rng.normal(0, 1, n))
    o = c - rng.normal(0, 0.3, n)
    h = np.maximum(o, c) + rng.uniform(0, 1.5, n)
    lo = np.minimum(o, c) - rng.uniform(0, 1.5, n)
    return pd.DataFrame({"Open": o, "High": h, "Low": lo, "Close": c},
                        index=pd.bdate_range("2025-02-03", periods=n))


def test_no_look_ahead_in_entry_figures():
    prices = {"OAK": _random_bars(1), "ASH": _random_bars(2, start=50.0)}
    days = prices["OAK"].index
    log = pd.DataFrame({
        "Date": [days[20], days[33], days[47], days[60], days[60] + pd.Timedelta(days=1)],
        "Instrument": ["OAK", "ASH", "OAK", "ASH", "OAK"],
        "Side": ["long", "short", "short", "long", "long"],
        "Entry": [np.nan] * 5,
        "Equity": [100_000.0] * 5,
    })
    settings = TradeSettings(trail_multiple=3.0)
    base = review_log(log, prices, settings)
    assert base["Note"].str.startswith("entry price taken").all()
    for t in range(len(log)):
        name, when = log["Instrument"][t], log["Date"][t]
        frame = prices[name]
        later = np.flatnonzero(frame.index > when)
        for row in (later[0], later[-1]):
            moved = frame.copy()
            moved.iloc[row] = [1e9, 2e9, 1e-3, 1.5e9]  # a wild future bar
            out = review_log(log, {**prices, name: moved}, settings)
            pd.testing.assert_frame_equal(out.loc[[t], ENTRY_COLUMNS], base.loc[[t], ENTRY_COLUMNS])
        # Cutting every bar after the entry date changes no entry figure either.
        cut = review_log(log.loc[[t]], {name: frame[frame.index <= when]}, settings)
        pd.testing.assert_frame_equal(cut[ENTRY_COLUMNS], base.loc[[t], ENTRY_COLUMNS])


def test_instruments_table_and_size_note_in_the_log():
    table = pd.DataFrame({"instrument": ["ALDER", None], "Point value": [1, None],
                          "Lot step": [10, None], "Max qty": [20, None],
                          "FX_rate": [" 1.0 ", None]})
    inst = instruments_from_frame(table)
    assert inst == {"ALDER": Instrument(point_value=1.0, lot_step=10.0, max_qty=20.0,
                                        fx_rate=1.0)}
    # The tick, under either header; blank is 0 (no rounding).
    ticks = instruments_from_frame(pd.DataFrame({"Instrument": ["A", "B", "C"],
                                                 "Tick size": [0.25, None, "0.01"]}))
    assert [ticks[k].tick for k in "ABC"] == [0.25, 0.0, 0.01]
    assert instruments_from_frame(pd.DataFrame({"Instrument": ["A"], "Tick": [0.5]}))[
        "A"].tick == 0.5
    out = review_log(_hand_log().iloc[:1], _hand_prices(), TradeSettings(
        options={"period": 3}, instruments=inst))
    # 25 units (see the hand-worked log) -> 20 in lots of 10, then capped at 20.
    assert out["Size"].iloc[0] == 20.0 and out["Size note"].iloc[0] == ""
    out = review_log(_hand_log().iloc[:1], _hand_prices(), TradeSettings(
        options={"period": 3}, instruments={"ALDER": Instrument(lot_step=1, max_qty=20)}))
    assert out["Size"].iloc[0] == 20.0
    # no point value given: 1 is used, and the note says so
    assert out["Size note"].iloc[0] == ("size 25 capped at the maximum 20; point value not "
                                        "given: 1 assumed")


# -- the demo desk ------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    return pd.read_excel(DEMO, sheet_name=None, engine="openpyxl")


def test_demo_workbook_shape(demo):
    assert DEMO.stat().st_size < 1_000_000
    assert list(demo) == ["About", "Trades", "Instruments", "KESTREL", "BRAMBLE", "ORRIN",
                          "TALLOW"]
    for name, scale in (("KESTREL", 1.1), ("BRAMBLE", 100), ("ORRIN", 2000), ("TALLOW", 40_000)):
        bars = demo[name]
        assert list(bars.columns) == ["Date", "Open", "High", "Low", "Close", "Volume"]
        assert bars["Date"].is_monotonic_increasing and len(bars) >= 500  # two years of days
        assert scale / 1.5 < bars["Close"].median() < scale * 1.5
        assert (bars["High"] >= bars[["Open", "Close"]].max(axis=1)).all()
        assert (bars["Low"] <= bars[["Open", "Close"]].min(axis=1)).all()
        # Volatility clusters: large moves follow large moves. The autocorrelation of absolute
        # returns, averaged over lags 1-10, is about 0 +/- 0.02 for independent returns of
        # this length (checked with numpy on normal draws); clustered series sit well above.
        moves = np.abs(np.diff(np.log(bars["Close"].to_numpy())))
        lags = [np.corrcoef(moves[:-k], moves[k:])[0, 1] for k in range(1, 11)]
        assert np.mean(lags) > 0.08, name
    trades = demo["Trades"]
    assert len(trades) == 20 and trades["Exit"].isna().sum() >= 3
    for _, t in trades.iterrows():  # entries at the close of their day; exits inside their bar
        bars = demo[t["Instrument"]].set_index("Date")
        assert t["Entry"] == bars.loc[t["Date"], "Close"]
        if not pd.isna(t["Exit"]):
            bar = bars.loc[t["Exit date"]]
            assert bar["Low"] <= t["Exit"] <= bar["High"]
    about = " ".join(demo["About"].iloc[:, 0].dropna().astype(str))
    assert "invented" in about and "not advice" in about


def test_demo_reviews_end_to_end(demo):
    settings = TradeSettings(instruments=instruments_from_frame(demo["Instruments"]))
    out = review_log(demo["Trades"], demo, settings)
    assert out["Note"].tolist() == [""] * 20
    assert set(out["Result"]) <= set(RESULTS)
    assert out[["Volatility", "Stop", "Target", "Size"]].notna().all().all()
    summary = summarise(out, demo["Trades"], settings)
    assert summary["Trades reviewed (log rows with an outcome)"] == 20


def test_committed_demo_matches_the_generator(tmp_path):
    fresh = tmp_path / "demo.xlsx"
    subprocess.run([sys.executable, str(ROOT / "workbooks" / "make_demo.py"), "--out", str(fresh)],
                   check=True, capture_output=True)
    a, b = openpyxl.load_workbook(DEMO), openpyxl.load_workbook(fresh)
    assert a.sheetnames == b.sheetnames
    for name in a.sheetnames:
        rows_a = list(a[name].iter_rows(values_only=True))
        assert rows_a == list(b[name].iter_rows(values_only=True)), name
