"""The fill on messy exports: real .xlsx files built with openpyxl in tmp_path.

Each test builds the kind of file brokers and platforms export (newest first,
a title above the header, blank rows, #N/A cells, text numbers, decimal
commas, text dates, the 1904 date system, a trailing Total row) and checks
what the fill read and wrote, with the numbers compared to pandas' rolling
standard deviation (ddof=0) on the bars in date order, placed on the right rows.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook, load_workbook
from openpyxl.utils.datetime import CALENDAR_MAC_1904

from sheetvol.fill.job import FillOptions, fill_file
from sheetvol.fill.locate import LocateError
from sheetvol.fill.price_table import PriceTableError
from sheetvol.workbook import WorkbookError

DEV = "Std dev 14 (simple, close)"


def ohlc(n: int = 60, seed: int = 7, start: float = 100.0) -> pd.DataFrame:
    """A random-walk OHLC frame, oldest first, prices with two decimals."""
    rng = np.random.default_rng(seed)
    close = np.round(start + np.cumsum(rng.normal(0, 1, n)), 2)
    open_ = np.round(close + rng.normal(0, 0.3, n), 2)
    high = np.round(np.maximum(open_, close) + rng.uniform(0.01, 1, n), 2)
    low = np.round(np.minimum(open_, close) - rng.uniform(0.01, 1, n), 2)
    dates = pd.bdate_range("2024-01-02", periods=n)
    return pd.DataFrame({"Date": dates, "Open": open_, "High": high, "Low": low,
                         "Close": close, "Volume": rng.integers(1000, 5000, n)})


Cell = Callable[[str, object], object]


def write_book(
    path: Path,
    df: pd.DataFrame,
    *,
    title_rows: int = 0,
    newest_first: bool = False,
    cell: Cell | None = None,
    extra_rows: list[list[object]] | None = None,
    blank_every: int = 0,
    date1904: bool = False,
    sheet: str = "Prices",
) -> dict[pd.Timestamp, int]:
    """Write ``df`` as a sheet; returns date -> sheet row of each bar."""
    wb = Workbook()
    if date1904:
        wb.epoch = CALENDAR_MAC_1904
    ws = wb.active
    ws.title = sheet
    for i in range(title_rows):
        ws.append([f"Invented export, line {i + 1}"] if i == 0 else [])
    ws.append(list(df.columns))
    order = list(range(len(df)))[::-1] if newest_first else list(range(len(df)))
    rows: dict[pd.Timestamp, int] = {}
    for k, i in enumerate(order):
        if blank_every and k and k % blank_every == 0:
            ws.append([])
        values = []
        for name in df.columns:
            v = df.iloc[i][name]
            v = v.to_pydatetime() if isinstance(v, pd.Timestamp) else v
            v = v.item() if isinstance(v, np.generic) else v
            values.append(cell(name, v) if cell else v)
        ws.append(values)
        rows[df.iloc[i]["Date"]] = ws.max_row
    for extra in extra_rows or []:
        ws.append(extra)
    wb.save(path)
    return rows


def read_column(path: Path, header: str, sheet: str = "Prices") -> dict[int, object]:
    """row -> value of the output column with this header (openpyxl as the reader)."""
    ws = load_workbook(path)[sheet]
    for row in ws.iter_rows(max_row=60):
        for c in row:
            if c.value == header:
                return {r: ws.cell(r, c.column).value for r in range(c.row + 1, ws.max_row + 1)}
    raise AssertionError(f"no header {header!r} in {path.name}")


def assert_deviation_on_rows(out: Path, df: pd.DataFrame, rows: dict[pd.Timestamp, int],
                             close: np.ndarray | None = None, sheet: str = "Prices") -> None:
    """Reference: pandas rolling(14).std(ddof=0) over the bars in date order."""
    series = pd.Series(df["Close"].to_numpy() if close is None else close, index=df["Date"])
    ref = series.dropna().rolling(14).std(ddof=0)
    got = read_column(out, DEV, sheet=sheet)
    checked = 0
    for date, value in ref.items():
        r = rows[date]
        if np.isnan(value):
            assert got.get(r) is None, f"warm-up row {r} should be blank"
        else:
            assert got[r] == pytest.approx(value, rel=1e-9), f"row {r}"
            checked += 1
    assert checked >= len(ref) - 14


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_newest_first_under_a_title_with_blank_rows(tmp_path):
    df = ohlc(60)
    src = tmp_path / "export.xlsx"
    rows = write_book(src, df, title_rows=3, newest_first=True, blank_every=17)
    before = sha(src)
    report = fill_file(src)
    assert report.output == tmp_path / "export-filled.xlsx"
    assert report.match.row == 4
    assert report.table.order == "newest first"
    assert report.table.skipped["blank"] == 3
    assert_deviation_on_rows(report.output, df, rows)
    assert sha(src) == before  # input never touched
    # newest first stays newest first: the first data row is the latest date
    ws = load_workbook(report.output)["Prices"]
    assert ws.cell(5, 1).value == df["Date"].iloc[-1].to_pydatetime()


def test_error_cells_and_blank_words_are_gaps(tmp_path):
    df = ohlc(50)
    gaps = {df["Date"].iloc[20]: "#N/A", df["Date"].iloc[33]: "n/a"}
    src = tmp_path / "gaps.xlsx"

    def cell(name, v):
        return v

    rows = write_book(src, df, cell=cell)
    wb = load_workbook(src)
    ws = wb["Prices"]
    for date, text in gaps.items():
        ws.cell(rows[date], 5).value = text  # openpyxl stores "#N/A" as an error cell
    wb.save(src)
    report = fill_file(src)
    assert dict(report.sheets[0].gaps) == {"#N/A in Close": 1, '"n/a" in Close': 1}
    got = read_column(report.output, DEV)
    for date in gaps:
        assert got[rows[date]] is None  # blank on the gap bar
    close = df["Close"].to_numpy().copy()
    close[[20, 33]] = np.nan
    # gap policy: windows continue over the usable bars (pandas on the bars without gaps)
    assert_deviation_on_rows(report.output, df, rows, close=close)


def test_text_numbers_with_thousands_separators(tmp_path):
    df = ohlc(40, start=2500.0)
    src = tmp_path / "text.xlsx"

    def cell(name, v):
        return f"{v:,.2f}" if name in ("Open", "High", "Low", "Close") else v

    rows = write_book(src, df, cell=cell)
    assert load_workbook(src)["Prices"]["E2"].value.count(",") == 1  # e.g. "2,501.23"
    report = fill_file(src)
    assert_deviation_on_rows(report.output, df, rows)


def test_decimal_comma_export_needs_the_option(tmp_path):
    df = ohlc(40, start=1500.0)
    src = tmp_path / "eu.xlsx"

    def cell(name, v):
        if name in ("Open", "High", "Low", "Close"):
            return f"{v:,.2f}".replace(",", " ").replace(".", ",").replace(" ", ".")
        return v

    rows = write_book(src, df, cell=cell)
    with pytest.raises(PriceTableError, match=r"B2 holds '1\.\d{3},\d\d'.*--decimal-comma"):
        fill_file(src)
    assert not (tmp_path / "eu-filled.xlsx").exists()
    report = fill_file(src, FillOptions(decimal_comma=True))
    assert_deviation_on_rows(report.output, df, rows)


def test_text_dates_day_first_and_unsorted(tmp_path):
    df = ohlc(45)
    src = tmp_path / "textdates.xlsx"

    def cell(name, v):
        return v.strftime("%d/%m/%Y") if name == "Date" else v

    rows = write_book(src, df, cell=cell)
    # swap two rows so the sheet is not in date order
    wb = load_workbook(src)
    ws = wb["Prices"]
    a, b = rows[df["Date"].iloc[5]], rows[df["Date"].iloc[30]]
    for c in range(1, 7):
        ws.cell(a, c).value, ws.cell(b, c).value = ws.cell(b, c).value, ws.cell(a, c).value
    wb.save(src)
    rows[df["Date"].iloc[5]], rows[df["Date"].iloc[30]] = b, a
    # read month first, 02/01 would be 1 February while 13/02 cannot be: refused, not mixed
    late_day = r"A\d+ holds '(1[3-9]|2\d|3[01])/\d\d/2024', "
    with pytest.raises(PriceTableError,
                       match=late_day + "which reads as day/month/year; run again with --dayfirst"):
        fill_file(src)
    report = fill_file(src, FillOptions(dayfirst=True))
    assert report.table.order == "not in date order"
    assert report.table.first_last_dates() == (
        df["Date"].iloc[0].strftime("%Y-%m-%d"), df["Date"].iloc[-1].strftime("%Y-%m-%d"))
    assert_deviation_on_rows(report.output, df, rows)


def test_1904_date_system(tmp_path):
    df = ohlc(30)
    src = tmp_path / "mac.xlsx"
    rows = write_book(src, df, date1904=True, newest_first=True)
    report = fill_file(src)
    # 1904 serials read as 1904 dates: the first and last dates are the ones written
    assert report.table.first_last_dates() == ("2024-01-02", df["Date"].iloc[-1].strftime(
        "%Y-%m-%d"))
    assert_deviation_on_rows(report.output, df, rows)


def test_trailing_total_and_average_rows_are_skipped(tmp_path):
    df = ohlc(30)
    src = tmp_path / "totals.xlsx"
    rows = write_book(src, df, extra_rows=[
        [], ["Total", None, None, None, float(df["Close"].sum()), 12345],
        ["Average", None, None, None, float(df["Close"].mean()), None],
        [None, None, None, None, float(df["Close"].max()), None],
        ["Source: invented data for a test"],
    ])
    report = fill_file(src)
    assert report.table.skipped["summary or footer row"] == 4
    assert len(report.table) == 30
    got = read_column(report.output, DEV)
    assert all(got.get(r) is None for r in range(33, 36))
    assert_deviation_on_rows(report.output, df, rows)


def test_holiday_rows_without_prices_are_skipped(tmp_path):
    df = ohlc(40)
    src = tmp_path / "holidays.xlsx"
    rows = write_book(src, df)
    wb = load_workbook(src)
    ws = wb["Prices"]
    ws.insert_rows(12)
    ws.cell(12, 1).value = dt.datetime(2024, 1, 15, 12)  # a dated row with no prices
    wb.save(src)
    rows = {d: (r + 1 if r >= 12 else r) for d, r in rows.items()}
    report = fill_file(src)
    assert report.table.skipped["no prices on that date (holiday or blank)"] == 1
    assert_deviation_on_rows(report.output, df, rows)


def test_duplicate_dates_name_both_rows(tmp_path):
    df = ohlc(30)
    df.loc[17, "Date"] = df.loc[16, "Date"]
    src = tmp_path / "dup.xlsx"
    write_book(src, df)
    with pytest.raises(PriceTableError) as err:
        fill_file(src)
    msg = str(err.value)
    assert "dup.xlsx" in msg and 'sheet "Prices"' in msg
    assert "rows 18 and 19" in msg and "A18, A19" in msg
    assert not (tmp_path / "dup-filled.xlsx").exists()


def test_high_below_low_names_the_row(tmp_path):
    df = ohlc(70)
    df.loc[55, ["High", "Low"]] = [90.0, 95.5]  # row 57 on the sheet
    src = tmp_path / "hl.xlsx"
    write_book(src, df)
    with pytest.raises(PriceTableError, match=r"High below Low on row 57: C57 = 90 is below "
                                              r"D57 = 95\.5"):
        fill_file(src)


def test_non_numeric_price_names_the_cell(tmp_path):
    df = ohlc(230)
    src = tmp_path / "abc.xlsx"
    write_book(src, df)
    wb = load_workbook(src)
    wb["Prices"]["E212"] = "abc"
    wb.save(src)
    with pytest.raises(PriceTableError, match=r"E212 holds 'abc', which is not a number"):
        fill_file(src)
    wb["Prices"]["E212"] = "n/a"  # a blank word is a gap, not an error
    wb.save(src)
    report = fill_file(src)
    assert dict(report.sheets[0].gaps) == {'"n/a" in Close': 1}


def test_missing_close_lists_headers(tmp_path):
    df = ohlc(20).drop(columns=["Close"])
    src = tmp_path / "noclose.xlsx"
    write_book(src, df)
    with pytest.raises(LocateError) as err:
        fill_file(src)
    msg = str(err.value)
    assert "noclose.xlsx" in msg and "no Close column" in msg
    assert "A 'Date'" in msg and "D 'Low'" in msg and "--close-col" in msg


def test_missing_high_low_drops_atr_from_the_default_set(tmp_path):
    df = ohlc(30).drop(columns=["High", "Low", "Open"])
    src = tmp_path / "closeonly.xlsx"
    write_book(src, df)
    report = fill_file(src)
    assert [w.spec.function for w in report.written] == [
        "SV_DEVIATION", "SV_BAND", "SV_BAND", "SV_PCTB", "SV_CLOSEVOL"]
    assert any("ATR 14 (Wilder) left out" in w for w in report.warnings)


def test_sheet_not_found_lists_sheets(tmp_path):
    src = tmp_path / "book.xlsx"
    write_book(src, ohlc(20))
    with pytest.raises(WorkbookError, match=r"no sheet 'Daily'; its sheets are 'Prices'"):
        fill_file(src, FillOptions(sheets=("Daily",)))


def test_corrupt_and_encrypted_files_are_refused(tmp_path):
    bad = tmp_path / "broken.xlsx"
    bad.write_bytes(b"PK\x03\x04 this is not really a zip")
    with pytest.raises(WorkbookError, match=r"broken\.xlsx"):
        fill_file(bad)
    # An encrypted workbook is an OLE compound file, not a zip (its magic number)
    enc = tmp_path / "locked.xlsx"
    enc.write_bytes(bytes.fromhex("D0CF11E0A1B11AE1") + b"\0" * 504)
    with pytest.raises(WorkbookError, match=r"locked\.xlsx"):
        fill_file(enc)
    assert not list(tmp_path.glob("*-filled.*"))


def test_price_sheet_is_found_among_other_sheets(tmp_path):
    df = ohlc(30)
    src = tmp_path / "multi.xlsx"
    rows = write_book(src, df, sheet="Daily bars")
    wb = load_workbook(src)
    info = wb.create_sheet("About", 0)
    info["A1"] = "Notes about this export"
    wb.save(src)
    report = fill_file(src)
    assert report.sheet == "Daily bars"
    assert_deviation_on_rows(report.output, df, rows, sheet="Daily bars")


def test_yyyymmdd_number_dates(tmp_path):
    df = ohlc(30)
    src = tmp_path / "ymd.xlsx"

    def cell(name, v):
        return int(v.strftime("%Y%m%d")) if name == "Date" else v

    rows = write_book(src, df, cell=cell, newest_first=True)
    report = fill_file(src)
    assert report.table.first_last_dates() == ("2024-01-02", df["Date"].iloc[-1].strftime(
        "%Y-%m-%d"))
    assert_deviation_on_rows(report.output, df, rows)


def test_intraday_date_and_time_columns(tmp_path):
    df = ohlc(40)
    stamps = pd.date_range("2024-03-04 09:30", periods=40, freq="5min")
    df["Date"] = stamps
    src = tmp_path / "intraday.xlsx"
    split = df.drop(columns=["Date"])
    split.insert(0, "Time", [s.strftime("%H:%M") for s in stamps])  # text times
    split.insert(0, "Date", [s.normalize() for s in stamps])
    wb = Workbook()
    ws = wb.active
    ws.title = "Prices"
    ws.append(list(split.columns))
    for i in range(len(split))[::-1]:  # newest first
        row = split.iloc[i].tolist()
        row[0] = row[0].to_pydatetime()
        ws.append([v.item() if isinstance(v, np.generic) else v for v in row])
    wb.save(src)
    rows = {d: 2 + (len(df) - 1 - i) for i, d in enumerate(df["Date"])}
    report = fill_file(src)
    assert report.match.columns["time"] == 2
    assert report.table.first_last_dates() == ("2024-03-04 09:30", "2024-03-04 12:45")
    assert_deviation_on_rows(report.output, df, rows)


def test_lone_time_column_with_timestamps_is_the_date(tmp_path):
    df = ohlc(30).rename(columns={"Date": "Time"})
    df["Time"] = pd.date_range("2024-03-04 00:00", periods=30, freq="h")
    src = tmp_path / "hourly.xlsx"
    wb = Workbook()
    ws = wb.active
    ws.title = "Prices"
    ws.append(list(df.columns))
    for i in range(len(df)):
        row = df.iloc[i].tolist()
        row[0] = row[0].to_pydatetime()
        ws.append([v.item() if isinstance(v, np.generic) else v for v in row])
    wb.save(src)
    report = fill_file(src)
    assert report.match.columns == {"date": 1, "open": 2, "high": 3, "low": 4, "close": 5,
                                    "volume": 6}
    assert report.table.order == "oldest first"
    rows = {d: i + 2 for i, d in enumerate(df["Time"])}
    assert_deviation_on_rows(report.output, df.rename(columns={"Time": "Date"}), rows)


def test_gaps_counted_once_per_bar_and_skipped_rows_apart(tmp_path, capsys):
    import talib

    from sheetvol.cli import main

    df = ohlc(300, seed=5)
    src = tmp_path / "gaps.xlsx"
    rows = write_book(src, df)
    wb = load_workbook(src)
    ws = wb["Prices"]
    col = {"Open": 2, "High": 3, "Low": 4, "Close": 5}

    def put(i: int, name: str, value: object) -> None:
        ws.cell(rows[df["Date"].iloc[i]], col[name]).value = value  # "#N/A": an error cell

    for name in col:
        put(40, name, None)  # a date without prices: skipped (holiday)
        put(60, name, "#N/A")  # a date with only errors: skipped, and not also a gap
    put(100, "Close", "#N/A")
    put(120, "High", "n/a")
    put(140, "Open", "#N/A")  # no default column reads Open: not a gap
    put(160, "Low", None)
    put(180, "Close", "#N/A")
    put(180, "High", "n/a")  # two unusable cells, one bar
    wb.save(src)
    assert main(["fill", str(src)]) == 0
    out = capsys.readouterr().out
    # Hand count: rows 40 and 60 skipped for different reasons; bars 100, 120, 160 and 180
    # are gaps (four bars, five unusable cells).
    assert ("rows skipped: 1 no prices on that date (holiday or blank), 1 no usable price on "
            "that date (only error values or blank words)") in out
    line = next(x.strip() for x in out.splitlines() if "bars with a gap" in x)
    assert line == ('bars with a gap: 4 (1 #N/A in Close, 1 "n/a" in High, 1 "n/a" in High + '
                    "#N/A in Close, 1 blank Low); the columns that need that price are blank "
                    "on those bars")
    # the same four bars by cell (header in row 1: bar i is row i + 2; Close E, High C)
    assert '    cells to fix or clear: E102 #N/A, C122 "n/a", C182 "n/a", E182 #N/A' in out
    filled = tmp_path / "gaps-filled.xlsx"
    notes = load_workbook(filled)["sheetvol notes"].iter_rows(values_only=True)
    assert next(r for r in notes if r[0] == "Prices")[5].startswith("bars with a gap: 4 (")
    # Reference: pandas rolling std (ddof=0) over the bars with a usable close.
    kept = df.drop(index=[40, 60])
    close = kept["Close"].to_numpy().copy()
    close[kept.index.get_indexer([100, 180])] = np.nan
    assert_deviation_on_rows(filled, kept, rows, close=close)
    got = read_column(filled, "ATR 14 (Wilder)")
    for i in (40, 60, 100, 120, 160, 180):
        assert got.get(rows[df["Date"].iloc[i]]) is None
    # Reference: TA-Lib ATR on the bars whose High, Low and Close are usable (the gap
    # policy skips the others), after its different seed has decayed.
    usable = df.drop(index=[40, 60, 100, 120, 160, 180])
    ref = talib.ATR(*(usable[c].to_numpy(float) for c in ("High", "Low", "Close")), 14)
    mine = np.array([got[rows[d]] for d in usable["Date"]], dtype=float)
    np.testing.assert_allclose(mine[-40:], ref[-40:], rtol=1e-8)
    assert np.isfinite(mine[-40:]).all()


def test_explicit_column_flag_that_matches_nothing_says_so_first(tmp_path, capsys):
    from sheetvol.cli import main

    src = tmp_path / "p.xlsx"
    write_book(src, ohlc(20))
    wb = load_workbook(src)
    wb.create_sheet("About", 0)["A1"] = "Notes about this export"
    wb.save(src)
    assert main(["fill", str(src), "--close-col", "Settle"]) == 1
    err = capsys.readouterr().err
    assert err.startswith('sheetvol: error: p.xlsx: --close-col "Settle": no column headed '
                          "\"Settle\" on sheet \"Prices\" (headers found in row 1: A 'Date', "
                          "B 'Open'"), err
    assert "not on 'About' either" in err
    assert not (tmp_path / "p-filled.xlsx").exists()
