"""Generate workbooks/demo-desk.xlsx: an invented trading desk for trying sheetvol.

Everything in it is made up: four instruments with names of our own at very
different price scales (about 1.1, 100, 2,000 and 40,000), two years of
synthetic daily bars whose volatility comes in clusters, and a 20-trade log
whose entries and exits are taken from those bars. The random numbers are
seeded, so every run writes the same values.

Run ``python workbooks/make_demo.py`` (or ``--out PATH``) from the project root.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.styles import Alignment, Font
from openpyxl.utils import get_column_letter

SEED = 20_251_201
OUT = Path(__file__).resolve().with_name("demo-desk.xlsx")
FIRST_DAY, LAST_DAY = "2024-01-01", "2025-12-31"
START_EQUITY = 250_000.0
DATE_FORMAT = "yyyy-mm-dd"


@dataclass(frozen=True)
class Spec:
    """One invented instrument: price scale, typical daily move and contract details."""

    name: str
    description: str
    start: float
    daily_vol: float  # long-run standard deviation of daily log returns
    tick: float
    currency: str
    point_value: float
    lot_step: float
    min_qty: float
    max_qty: float
    fx_rate: float  # account currency (USD here) per unit of the instrument's currency
    volume: float


SPECS = (
    Spec("KESTREL", "currency pair, quoted to 5 decimals, traded in units of 1,000",
         1.1, 0.0055, 0.00001, "USD", 1.0, 1000.0, 1000.0, 0.0, 1.0, 90_000.0),
    Spec("BRAMBLE", "share, quoted in cents, traded in whole shares",
         100.0, 0.016, 0.01, "USD", 1.0, 1.0, 1.0, 0.0, 1.0, 1_200_000.0),
    Spec("ORRIN", "index future, quarter-point ticks, 10 EUR a point, at most 40 contracts",
         2000.0, 0.011, 0.25, "EUR", 10.0, 1.0, 1.0, 40.0, 1.08, 150_000.0),
    Spec("TALLOW", "coin, traded in thousandths",
         40_000.0, 0.032, 0.5, "USD", 1.0, 0.001, 0.001, 0.0, 1.0, 25_000.0),
)


def _garch_sigmas(n: int, daily_vol: float, rng: np.random.Generator) -> tuple[np.ndarray,
                                                                              np.ndarray]:
    """Daily returns and their volatility from a GARCH(1,1)-type recursion (clustered)."""
    alpha, beta = 0.11, 0.87
    omega = daily_vol**2 * (1 - alpha - beta)
    var = daily_vol**2
    returns, sigmas = np.empty(n), np.empty(n)
    for t in range(n):
        sigma = math.sqrt(var)
        r = sigma * rng.standard_t(8) / math.sqrt(8 / 6)  # fat tails, unit variance
        returns[t], sigmas[t] = r, sigma
        var = omega + alpha * r * r + beta * var
    return returns, sigmas


def make_prices(spec: Spec, days: pd.DatetimeIndex, rng: np.random.Generator) -> pd.DataFrame:
    """Synthetic daily OHLCV bars on a tick grid, with volatility clusters."""
    n = len(days)
    returns, sigmas = _garch_sigmas(n, spec.daily_vol, rng)
    gap = 0.25 * sigmas * rng.standard_normal(n)  # overnight part of each day's move
    # A gentle pull back towards the starting level keeps each instrument at its price scale.
    level = np.empty(n)
    x = 0.0
    for t in range(n):
        x += returns[t] - 0.02 * x
        level[t] = x
    close = spec.start * np.exp(level)
    prev = np.concatenate([[spec.start], close[:-1]])
    open_ = prev * np.exp(gap)
    reach = 0.6 * sigmas
    high = np.maximum(open_, close) * np.exp(np.abs(rng.standard_normal(n)) * reach)
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.standard_normal(n)) * reach)
    tick = spec.tick
    decimals = max(0, -math.floor(math.log10(tick)) + 1)

    def grid(x: np.ndarray, how=np.round) -> np.ndarray:
        return np.round(how(x / tick) * tick, decimals)

    o, c = grid(open_), grid(close)
    h = np.maximum(grid(high, np.ceil), np.maximum(o, c))
    lo = np.minimum(grid(low, np.floor), np.minimum(o, c))
    volume = np.round(spec.volume * (sigmas / spec.daily_vol) * rng.lognormal(0, 0.3, n))
    return pd.DataFrame({"Date": days, "Open": o, "High": h, "Low": lo, "Close": c,
                         "Volume": volume.astype(np.int64)})


def make_trades(bars: dict[str, pd.DataFrame], rng: np.random.Generator) -> pd.DataFrame:
    """A 20-trade log: entries at a bar's close, exits at a later close, 6 trades still open."""
    names = [s.name for s in SPECS]
    specs = {s.name: s for s in SPECS}
    n_bars = len(next(iter(bars.values())))
    rows = []
    closed_at = np.sort(rng.choice(np.arange(40, n_bars - 60), size=14, replace=False))
    open_at = np.sort(rng.choice(np.arange(n_bars - 45, n_bars - 3), size=6, replace=False))
    for k, at in enumerate(np.concatenate([closed_at, open_at])):
        name = names[k % 4] if k < 16 else names[int(rng.integers(0, 4))]
        px = bars[name]
        side = "long" if rng.random() < 0.6 else "short"
        if k in (3, 11):
            side = {"long": "Buy", "short": "Sell"}[side]  # logs spell sides in several ways
        still_open = k >= 14
        exit_at = None if still_open else int(at + rng.integers(3, 30))
        rows.append({
            "Date": px["Date"].iloc[at], "Instrument": name, "Side": side,
            "Entry": float(px["Close"].iloc[at]), "_at": int(at), "_exit_at": exit_at,
        })
    equity = START_EQUITY
    trades = pd.DataFrame(rows).sort_values("_at", kind="stable").reset_index(drop=True)
    exits, exit_dates, quantities, equities = [], [], [], []
    booked: list[tuple[int, float]] = []  # (exit bar, profit) of trades closed so far
    for _, t in trades.iterrows():
        spec, px = specs[t["Instrument"]], bars[t["Instrument"]]
        at = t["_at"]
        equity = START_EQUITY + sum(p for when, p in booked if when <= at)
        # The desk sizes by eye: about 1% of equity over a stop near twice the recent range.
        recent_range = float((px["High"] - px["Low"]).iloc[at - 13: at + 1].mean())
        per_unit = 2 * recent_range * spec.point_value * spec.fx_rate
        qty = math.floor(equity * 0.01 / per_unit / spec.lot_step) * spec.lot_step
        qty = round(max(qty, spec.min_qty), 6)
        if spec.max_qty:
            qty = min(qty, spec.max_qty)
        if t["_exit_at"] is None or pd.isna(t["_exit_at"]):
            exits.append(None)
            exit_dates.append(None)
        else:
            e = int(t["_exit_at"])
            price = float(px["Close"].iloc[e])
            sign = 1 if str(t["Side"]).lower() in ("long", "buy") else -1
            booked.append((e, sign * (price - t["Entry"]) * qty * spec.point_value * spec.fx_rate))
            exits.append(price)
            exit_dates.append(px["Date"].iloc[e])
        quantities.append(qty)
        equities.append(round(equity, 2))
    trades["Exit"] = exits
    trades["Exit date"] = exit_dates
    trades["Quantity"] = quantities
    trades["Equity"] = equities
    return trades[["Date", "Instrument", "Side", "Entry", "Exit", "Exit date", "Quantity",
                   "Equity"]]


ABOUT = (
    "demo-desk.xlsx: an invented trading desk for trying sheetvol",
    "",
    "Everything in this workbook is invented. The instruments (KESTREL, BRAMBLE, ORRIN, TALLOW)"
    " do not exist; their prices are synthetic, generated by workbooks/make_demo.py with a fixed"
    " random seed (volatility in clusters, like real markets, but not market data). The trade log"
    " is made up to fit those prices.",
    "",
    "Sheets: Trades (the log, one row per trade; a blank exit means the trade is still open),"
    " Instruments (point value, lot step, size limits, conversion rate into the account"
    " currency, USD, and tick), and one sheet of daily bars per instrument.",
    "",
    "Cautions: this is not advice, and neither are sheetvol's results. A stop is a level, not a"
    " guaranteed fill: markets gap through stops. Check every size against your broker's margin"
    " rules, contract specifications and local regulation before trading.",
)


def _write_table(ws, frame: pd.DataFrame, formats: dict[str, str], widths: dict[str, float]):
    ws.append(list(frame.columns))
    for cell in ws[1]:
        cell.font = Font(bold=True)
    for row in frame.itertuples(index=False):
        ws.append([_cell(v) for v in row])
    for j, col in enumerate(frame.columns, start=1):
        letter = get_column_letter(j)
        ws.column_dimensions[letter].width = widths.get(col, 12)
        fmt = formats.get(col)
        if fmt:
            for (cell,) in ws.iter_rows(min_row=2, min_col=j, max_col=j):
                cell.number_format = fmt
    ws.freeze_panes = "A2"


def _cell(v):
    if v is None or (isinstance(v, float) and math.isnan(v)) or v is pd.NaT:
        return None
    if isinstance(v, pd.Timestamp):
        return v.to_pydatetime().date()
    if isinstance(v, np.generic):
        return v.item()
    return v


def _price_format(tick: float) -> str:
    decimals = max(0, -math.floor(math.log10(tick)))
    return "#,##0" + ("." + "0" * decimals if decimals else "")


def build() -> Workbook:
    """The demo workbook, with every value generated from :data:`SEED`."""
    rng = np.random.default_rng(SEED)
    days = pd.bdate_range(FIRST_DAY, LAST_DAY)
    bars = {s.name: make_prices(s, days, rng) for s in SPECS}
    trades = make_trades(bars, rng)

    wb = Workbook()
    about = wb.active
    about.title = "About"
    for line in ABOUT:
        about.append([line])
    about.column_dimensions["A"].width = 110
    for (cell,) in about.iter_rows():
        cell.alignment = Alignment(wrap_text=True, vertical="top")
    about["A1"].font = Font(bold=True, size=13)

    _write_table(
        wb.create_sheet("Trades"), trades,
        {"Date": DATE_FORMAT, "Exit date": DATE_FORMAT, "Entry": "#,##0.00###",
         "Exit": "#,##0.00###", "Quantity": "#,##0.###", "Equity": "#,##0.00"},
        {"Date": 12, "Instrument": 12, "Side": 8, "Exit date": 12, "Equity": 13},
    )
    table = pd.DataFrame([{
        "Instrument": s.name, "Description": s.description, "Currency": s.currency,
        "Point value": s.point_value, "Lot step": s.lot_step, "Min qty": s.min_qty,
        "Max qty": s.max_qty, "FX rate": s.fx_rate, "Tick": s.tick,
    } for s in SPECS])
    _write_table(wb.create_sheet("Instruments"), table, {"Tick": "0.#####"},
                 {"Description": 70})
    for s in SPECS:
        fmt = _price_format(s.tick)
        _write_table(
            wb.create_sheet(s.name), bars[s.name],
            {"Date": DATE_FORMAT, "Open": fmt, "High": fmt, "Low": fmt, "Close": fmt,
             "Volume": "#,##0"},
            {"Date": 12, "Volume": 13},
        )
    fixed = dt.datetime(2025, 12, 31, 18, 0, 0)
    wb.properties.creator = "sheetvol workbooks/make_demo.py"
    wb.properties.title = "sheetvol demo desk (invented data)"
    wb.properties.created = fixed
    return wb


def main(argv: list[str] | None = None) -> int:
    """Write the demo workbook (``--out`` to choose the path)."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=OUT, help=f"output file (default {OUT.name})")
    args = parser.parse_args(argv)
    build().save(args.out)
    print(f"wrote {args.out} ({args.out.stat().st_size / 1024:.0f} KiB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
