"""The fill end to end on ordinary workbooks: numbers against outside references,
re-runs, macros, in-place writes, CSV input, typed formulas and the pandas helper."""

from __future__ import annotations

import hashlib
import math
import re
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import talib
import xlsxwriter
from openpyxl import load_workbook
from test_messy_exports import DEV, assert_deviation_on_rows, ohlc, read_column, write_book

from sheetvol.fill.job import FillError, FillOptions, fill_file
from sheetvol.fill.notes import NOTES_SHEET
from sheetvol.fill.recipe import parse_recipe
from sheetvol.frame import add_columns


@pytest.fixture(scope="module")
def filled(tmp_path_factory):
    """One newest-first fill of a 300-bar workbook, shared by the reference checks."""
    tmp = tmp_path_factory.mktemp("ref")
    df = ohlc(300, seed=11)
    src = tmp / "prices.xlsx"
    rows = write_book(src, df, title_rows=2, newest_first=True)
    report = fill_file(src)
    return df, rows, report


def _on_rows(report, header, df, rows):
    got = read_column(report.output, header)
    return np.array([np.nan if got.get(rows[d]) is None else got[rows[d]] for d in df["Date"]])


def test_deviation_matches_pandas_population_std(filled):
    df, rows, report = filled
    assert_deviation_on_rows(report.output, df, rows)


def test_atr_matches_talib_after_the_seeding_transient(filled):
    # Reference: TA-Lib ATR (Wilder). TA-Lib seeds from true ranges 2..15; sheetvol's first
    # bar uses high-low, so values agree once the seed has decayed by (13/14)^k.
    df, rows, report = filled
    got = _on_rows(report, "ATR 14 (Wilder)", df, rows)
    ref = talib.ATR(df["High"].to_numpy(float), df["Low"].to_numpy(float),
                    df["Close"].to_numpy(float), timeperiod=14)
    assert np.isnan(got[:13]).all() and not np.isnan(got[13])
    np.testing.assert_allclose(got[250:], ref[250:], rtol=1e-8)


def test_bands_and_percent_b_match_talib_bbands(filled):
    # Reference: TA-Lib BBANDS with a simple average (matype 0) and 2 deviations.
    df, rows, report = filled
    close = df["Close"].to_numpy(float)
    upper, _middle, lower = talib.BBANDS(close, timeperiod=20, nbdevup=2, nbdevdn=2, matype=0)
    np.testing.assert_allclose(_on_rows(report, "Upper band 20x2", df, rows), upper,
                               rtol=1e-9, equal_nan=True)
    np.testing.assert_allclose(_on_rows(report, "Lower band 20x2", df, rows), lower,
                               rtol=1e-9, equal_nan=True)
    pctb = (close - lower) / (upper - lower)
    np.testing.assert_allclose(_on_rows(report, "%b 20x2", df, rows), pctb, rtol=1e-8,
                               atol=1e-10, equal_nan=True)


def test_close_vol_matches_pandas_log_return_std(filled):
    # Reference: pandas, sample std (ddof=1) of 20 log returns times sqrt(252).
    df, rows, report = filled
    ref = np.log(df["Close"]).diff().rolling(20).std(ddof=1) * math.sqrt(252)
    np.testing.assert_allclose(_on_rows(report, "Close vol 20 (ann.)", df, rows),
                               ref.to_numpy(), rtol=1e-9, equal_nan=True)


def test_formats_headers_and_notes(filled):
    df, rows, report = filled
    wb = load_workbook(report.output)
    ws = wb["Prices"]
    headers = {c.value: c for c in ws[3] if c.value}
    assert list(headers)[-6:] == [DEV, "ATR 14 (Wilder)", "Upper band 20x2",
                                  "Lower band 20x2", "%b 20x2", "Close vol 20 (ann.)"]
    last = rows[df["Date"].iloc[-1]]
    # price units as quoted (2 decimals here) with thousands separators; shares in percent
    assert ws.cell(last, headers[DEV].column).number_format == "#,##0.00"
    assert ws.cell(last, headers["Upper band 20x2"].column).number_format == "#,##0.00"
    assert ws.cell(last, headers["%b 20x2"].column).number_format == "0.000"
    assert ws.cell(last, headers["Close vol 20 (ann.)"].column).number_format == "0.00%"
    lines = list(wb[NOTES_SHEET].iter_rows(values_only=True))
    notes = {r[0]: r[1] for r in lines if r[0]}
    assert notes["Input file"] == "prices.xlsx"
    assert notes["Input SHA-256"] == hashlib.sha256(report.input.read_bytes()).hexdigest()
    read = next(r for r in lines if r[0] == "Prices")
    assert read[1] == 3 and read[2].startswith("Date = A, Open = B")
    assert read[3].startswith("300 (2024-01-02 to ") and "newest first" in read[3]
    written = next(r for r in lines if r[3] == "SV_ATR")
    assert written[:3] == ("Prices", "H", "ATR 14 (Wilder)")
    assert written[4] == "period=14, smoothing=wilder, seed=average, first_bar=high-low"
    assert any("population" in str(k) for k in notes)
    assert any(str(k).startswith("Not investment advice") for k in notes)
    assert read[5] == "none"  # no gaps in this workbook


def test_rerun_replaces_its_own_columns(tmp_path):
    df = ohlc(40)
    src = tmp_path / "p.xlsx"
    rows = write_book(src, df)
    first = fill_file(src).output
    second = fill_file(first, FillOptions(output=tmp_path / "again.xlsx"))
    assert second.replaced == 6
    ws = load_workbook(second.output)["Prices"]
    headers = [c.value for c in ws[1] if c.value]
    assert headers.count(DEV) == 1 and len(headers) == 12
    assert_deviation_on_rows(second.output, df, rows)
    # a different recipe on the third run reuses the freed places, clears the rest
    recipe = parse_recipe([{"function": "SV_ATR", "options": {"period": 10}}])
    third = fill_file(second.output, FillOptions(output=tmp_path / "third.xlsx", specs=recipe))
    ws = load_workbook(third.output)["Prices"]
    headers = [c.value for c in ws[1] if c.value]
    assert headers == ["Date", "Open", "High", "Low", "Close", "Volume", "ATR 10 (Wilder)"]
    assert all(ws.cell(r, 8).value is None for r in range(2, 42))


def test_xlsm_in_gives_xlsm_out_with_its_macros(tmp_path):
    src = tmp_path / "macro.xlsm"
    vba = b"invented vba project bytes \x00\x01\x02"
    (tmp_path / "vbaProject.bin").write_bytes(vba)
    df = ohlc(30)
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Prices")
    wb.add_vba_project(str(tmp_path / "vbaProject.bin"))
    ws.write_row(0, 0, list(df.columns))
    date_fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
    for i, row in df.iterrows():
        ws.write_datetime(i + 1, 0, row["Date"].to_pydatetime(), date_fmt)
        ws.write_row(i + 1, 1, [float(row[c]) for c in df.columns[1:]])
    wb.close()
    report = fill_file(src)
    assert report.output.name == "macro-filled.xlsm"
    with zipfile.ZipFile(report.output) as z:
        assert z.read("xl/vbaProject.bin") == vba
        assert b"macroEnabled" in z.read("[Content_Types].xml")
    with pytest.raises(FillError, match=r"must end in \.xlsm"):
        fill_file(src, FillOptions(output=tmp_path / "plain.xlsx"))


def test_in_place_keeps_a_backup(tmp_path):
    df = ohlc(30)
    src = tmp_path / "live.xlsx"
    rows = write_book(src, df)
    original = src.read_bytes()
    report = fill_file(src, FillOptions(in_place=True))
    assert report.output == src and report.backup == tmp_path / "live.bak.xlsx"
    assert report.backup.read_bytes() == original
    assert_deviation_on_rows(src, df, rows)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["live.bak.xlsx", "live.xlsx"]


def test_output_never_overwrites_the_input_by_accident(tmp_path):
    src = tmp_path / "p.xlsx"
    write_book(src, ohlc(20))
    with pytest.raises(FillError, match="--in-place"):
        fill_file(src, FillOptions(output=src))


def test_csv_input_with_semicolons_and_decimal_commas(tmp_path):
    df = ohlc(40)
    src = tmp_path / "eu.csv"
    lines = ["Datum;Open;High;Low;Close;Volume"]  # "Datum" is not ours: named with --date-col
    for _, r in df.iterrows():
        nums = ";".join(f"{r[c]:.2f}".replace(".", ",") for c in ("Open", "High", "Low", "Close"))
        lines.append(f"{r['Date']:%d.%m.%Y};{nums};{r['Volume']}")
    src.write_text("\n".join(lines) + "\n", encoding="utf-8")
    report = fill_file(src, FillOptions(decimal_comma=True, dayfirst=True,
                                        columns={"date": "Datum"}))
    assert report.output == tmp_path / "eu-filled.xlsx"
    rows = {d: i + 2 for i, d in enumerate(df["Date"])}
    assert_deviation_on_rows(report.output, df, rows, sheet="eu")
    ws = load_workbook(report.output)["eu"]
    assert ws["A2"].value == df["Date"].iloc[0].to_pydatetime()  # real dates, not text


@pytest.mark.parametrize("mode", ["values", "keep"])
def test_typed_formulas_are_evaluated(tmp_path, mode):
    df = ohlc(40)
    src = tmp_path / "typed.xlsx"
    write_book(src, df)
    wb = load_workbook(src)
    ws = wb["Prices"]
    ws["H1"] = "typed"
    ws["H2"] = "=SV_DEVIATION_LAST(E2:E41,14)"
    ws["H3"] = "=SV_NOSUCH(E2:E41)"
    ws["H4"] = '="SV_ATR("&E2'  # text that only mentions a name: not a sheetvol call
    wb.save(src)
    report = fill_file(src, FillOptions(formulas=mode))
    assert report.formulas_ok == 1
    assert any("H3" in w for w in report.warnings)
    assert not any("H4" in w for w in report.warnings)
    values = load_workbook(report.output, data_only=True)["Prices"]
    ref = df["Close"].rolling(14).std(ddof=0).iloc[-1]  # reference: pandas, ddof=0
    assert values["H2"].value == pytest.approx(ref, rel=1e-9)
    out = load_workbook(report.output)
    formulas = out["Prices"]
    if mode == "keep":
        assert formulas["H2"].value == "=SV_DEVIATION_LAST(E2:E41,14)"
    else:
        # A plain value any program shows; the formula text stays on the notes sheet.
        assert formulas["H2"].value == values["H2"].value
        notes = [tuple(r) for r in out[NOTES_SHEET].iter_rows(values_only=True)]
        assert any("SV_DEVIATION_LAST(E2:E41,14)" in str(c) for r in notes for c in r)
    assert formulas["H3"].value == "=SV_NOSUCH(E2:E41)"  # what cannot be evaluated stays
    # the fill's own columns go right of the typed one, not over it
    assert formulas["I1"].value == DEV


def test_add_columns_on_a_newest_first_frame():
    df = ohlc(60).iloc[::-1].reset_index(drop=True)
    out = add_columns(df, ["SV_DEVIATION", {"function": "SV_ATR", "options": {"period": 5}}])
    assert list(out.columns[-2:]) == [DEV, "ATR 5 (Wilder)"]
    ascending = df.iloc[::-1]
    ref = ascending["Close"].rolling(14).std(ddof=0).iloc[::-1]  # reference: pandas
    np.testing.assert_allclose(out[DEV].to_numpy(), ref.to_numpy(), rtol=1e-9, equal_nan=True)
    lower = pd.DataFrame({"close": [1.0, 2.0, 4.0], "HIGH": [1.5, 2.5, 4.5], "low": [0.5, 1, 3]})
    assert "ATR 2 (Wilder)" in add_columns(lower, [{"function": "SV_ATR",
                                                    "options": {"period": 2}}]).columns


def test_typed_column_formula_spills_down(tmp_path):
    df = ohlc(40)
    src = tmp_path / "spill.xlsx"
    write_book(src, df)
    wb = load_workbook(src)
    wb["Prices"]["H1"] = "typed column"
    wb["Prices"]["H2"] = "=SV_DEVIATION(E2:E41,14)"
    wb.save(src)
    report = fill_file(src, FillOptions(formulas="keep"))
    assert report.formulas_ok == 1
    ws = load_workbook(report.output, data_only=True)["Prices"]
    ref = df["Close"].rolling(14).std(ddof=0)  # reference: pandas, ddof=0
    got = [ws.cell(r, 8).value for r in range(2, 42)]
    assert all(v is None for v in got[:13])
    np.testing.assert_allclose(np.array(got[13:], dtype=float), ref.to_numpy()[13:], rtol=1e-9)
    assert load_workbook(report.output)["Prices"]["H2"].value is not None  # formula kept


def test_typed_formulas_show_numbers_in_libreoffice(tmp_path, libreoffice):
    # The colleague without the add-in: LibreOffice opens the filled file and, having no
    # sheetvol functions, must still show the numbers (it recalculates array formulas on
    # opening, so the default stores plain values).
    df = ohlc(40)
    src = tmp_path / "typed.xlsx"
    write_book(src, df)
    wb = load_workbook(src)
    wb["Prices"]["H1"] = "typed column"
    wb["Prices"]["H2"] = "=SV_DEVIATION(E2:E41,14)"
    wb["Prices"]["I1"] = "typed cell"
    wb["Prices"]["I2"] = '=SV_ATR_LAST(C2:C41,D2:D41,E2:E41,14,"wilder","average","blank")'
    wb.save(src)
    report = fill_file(src)
    assert report.formulas_ok == 2
    seen = load_workbook(libreoffice(report.output), data_only=True)["Prices"]
    ref = df["Close"].rolling(14).std(ddof=0).to_numpy()  # reference: pandas, ddof=0
    got = np.array([seen.cell(r, 8).value or np.nan for r in range(2, 42)], dtype=float)
    np.testing.assert_allclose(got[13:], ref[13:], rtol=1e-12)
    atr = talib.ATR(df["High"].to_numpy(), df["Low"].to_numpy(), df["Close"].to_numpy(), 14)
    # Reference: TA-Lib ATR, which leaves the first bar's true range blank as asked here.
    assert seen["I2"].value == pytest.approx(atr[-1], rel=1e-12)


def test_columns_join_a_spreadsheet_table(tmp_path):
    df = ohlc(30)
    src = tmp_path / "table.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Prices")
    date_fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
    data = [[r["Date"].to_pydatetime(), *(float(r[c]) for c in df.columns[1:])]
            for _, r in df.iterrows()]
    ws.add_table(0, 0, len(df), len(df.columns) - 1, {
        "name": "Bars", "data": data,
        "columns": [{"header": "Date", "format": date_fmt},
                    *({"header": c} for c in df.columns[1:])]})
    wb.close()
    report = fill_file(src)
    assert [w.letter for w in report.written] == list("GHIJKL")
    table = load_workbook(report.output)["Prices"].tables["Bars"]
    assert table.ref == "A1:L31"
    assert [c.name for c in table.tableColumns][-1] == "Close vol 20 (ann.)"
    rows = {d: i + 2 for i, d in enumerate(df["Date"])}
    assert_deviation_on_rows(report.output, df, rows)


def test_progress_bar_only_on_a_terminal(tmp_path, monkeypatch, capsys):
    import sys

    import sheetvol.fill.job as fill_mod

    df = ohlc(60)
    src = tmp_path / "p.xlsx"
    rows = write_book(src, df)
    monkeypatch.setattr(fill_mod, "PROGRESS_MIN_BYTES", 0)
    fill_file(src, FillOptions(progress=True))
    assert capsys.readouterr().err == ""  # captured stderr is not a terminal
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True, raising=False)
    fill_file(src, FillOptions(progress=True, output=tmp_path / "shown.xlsx"))
    err = capsys.readouterr().err
    # one bar over the whole job, in stages: reading and computing too, not only writing
    stages = ["finding the price columns", 'reading sheet "Prices"',
              'computing 6 columns for "Prices"', "writing shown.xlsx"]
    at = [err.find(stage) for stage in stages]
    assert -1 not in at and at == sorted(at), err
    assert "100%" in err  # the bar ends full
    assert_deviation_on_rows(tmp_path / "shown.xlsx", df, rows)
    fill_file(src, FillOptions(progress=False))
    assert capsys.readouterr().err == ""
    monkeypatch.setattr(fill_mod, "PROGRESS_MIN_BYTES", 10**9)  # a small fill: no bar
    fill_file(src, FillOptions(progress=True))
    assert capsys.readouterr().err == ""
    # a CSV export: its conversion to a workbook is a stage of its own
    csv = tmp_path / "p.csv"
    df.to_csv(csv, index=False, date_format="%Y-%m-%d")
    monkeypatch.setattr(fill_mod, "CSV_PROGRESS_MIN_ROWS", 10)
    fill_file(csv, FillOptions(progress=True))
    assert "p.csv: converting to a workbook" in capsys.readouterr().err
    assert_deviation_on_rows(tmp_path / "p-filled.xlsx", df, rows, sheet="p")


def test_cells_far_below_the_header_are_never_overwritten(tmp_path):
    df = ohlc(80)
    src = tmp_path / "note.xlsx"
    rows = write_book(src, df)
    wb = load_workbook(src)
    wb["Prices"]["H70"] = "my note"  # below the rows the header search looks at
    wb.save(src)
    report = fill_file(src)
    assert report.written[0].letter == "I"
    ws = load_workbook(report.output)["Prices"]
    assert ws["H70"].value == "my note" and ws["G1"].value is None
    assert_deviation_on_rows(report.output, df, rows)


def test_default_fills_every_price_sheet(tmp_path):
    a, b = ohlc(30, seed=3), ohlc(40, seed=4)
    src = tmp_path / "desk.xlsx"
    rows_a = write_book(src, a, sheet="ALPHA")
    wb = load_workbook(src)
    ws = wb.create_sheet("BETA")
    ws.append(list(b.columns))
    for _, r in b.iterrows():
        ws.append([r["Date"].to_pydatetime(), *(float(r[c]) for c in b.columns[1:])])
    log = wb.create_sheet("Log", 0)
    log.append(["Date", "Instrument", "Entry"])  # no Close: not a price sheet
    wb.save(src)
    # --sheet restricts; the default fills both
    first = fill_file(src, FillOptions(sheets=("alpha",)))
    assert [s.sheet for s in first.sheets] == ["ALPHA"]
    both = fill_file(src, FillOptions(output=tmp_path / "both.xlsx"))
    assert [s.sheet for s in both.sheets] == ["ALPHA", "BETA"]
    assert both.trades is None  # the Log sheet has no Side column: not a trade log
    assert_deviation_on_rows(both.output, a, rows_a, sheet="ALPHA")
    assert_deviation_on_rows(both.output, b, {d: i + 2 for i, d in enumerate(b["Date"])},
                             sheet="BETA")
    again = fill_file(both.output, FillOptions(output=tmp_path / "again.xlsx"))
    assert [s.replaced for s in again.sheets] == [6, 6]


def test_typed_formula_on_another_sheet_with_a_stored_prefix(tmp_path):
    df = ohlc(40)
    src = tmp_path / "dash.xlsx"
    write_book(src, df)
    wb = load_workbook(src)
    dash = wb.create_sheet("Dash board")
    # as saved by a program without the add-in: the name carries the _xludf. prefix
    dash["B2"] = "=_xludf.SV_DEVIATION_LAST(Prices!$E$2:$E$41, 20, \"simple\")"
    dash["B3"] = "=SV_ATR_LAST(Prices!C2:C41,Prices!D2:D41,Prices!E2:E41,0)"  # bad period
    wb.save(src)
    report = fill_file(src)
    assert report.formulas_ok == 1
    bad = [w for w in report.warnings if "'Dash board'!B3" in w]
    assert bad and "period must be a whole number from 1 to 5000" in bad[0]
    values = load_workbook(report.output, data_only=True)["Dash board"]
    ref = df["Close"].rolling(20).std(ddof=0).iloc[-1]  # reference: pandas, ddof=0
    assert values["B2"].value == pytest.approx(ref, rel=1e-9)
    notes = [r for r in load_workbook(report.output)[NOTES_SHEET].iter_rows(values_only=True)
             if r[0] == "'Dash board'!B3"]
    # One policy for a bad argument: the cell shows the add-in's message; the notes list it.
    assert notes and notes[0][2].startswith("bad argument: SV_ATR_LAST: period must be")
    assert values["B3"].value == notes[0][2].removeprefix("bad argument: ")


def test_chart_option_draws_close_with_bands_and_dispersion_with_atr(tmp_path):
    df = ohlc(40)
    src = tmp_path / "chart.xlsx"
    write_book(src, df)
    report = fill_file(src, FillOptions(chart=True))
    with zipfile.ZipFile(report.output) as z:
        charts = sorted(n for n in z.namelist() if n.startswith("xl/charts/chart"))
        refs = [z.read(n).decode() for n in charts]
    assert len(charts) == 2
    # close (E) with the upper (I) and lower (J) bands; deviation (G) with ATR (H)
    for col in "EIJ":
        assert f"Prices!${col}$2:${col}$41" in refs[0].replace("'", "")
    for col in "GH":
        assert f"Prices!${col}$2:${col}$41" in refs[1].replace("'", "")
    assert "sheetvol charts" in load_workbook(report.output).sheetnames
    # Dates label the x axis; the price axis brackets close and bands instead of starting
    # at 0 (which would flatten the lines). Reference values: pandas' rolling mean/std.
    assert 'formatCode="yyyy-mm-dd" sourceLinked="0"' in refs[0]
    y_max = float(re.search(r'<c:max val="([^"]+)"', refs[0]).group(1))
    y_min = float(re.search(r'<c:min val="([^"]+)"', refs[0]).group(1))
    mid, sd = df["Close"].rolling(20).mean(), df["Close"].rolling(20).std(ddof=0)
    lowest = min(df["Close"].min(), (mid - 2 * sd).min())
    highest = max(df["Close"].max(), (mid + 2 * sd).max())
    assert 0 < y_min <= lowest and highest <= y_max
    assert (y_max - y_min) < 1.5 * (highest - lowest)
    assert "<c:min " not in refs[1]  # dispersion and ATR: the program's own scale from 0


@pytest.mark.parametrize(("start", "places", "fmt"), [
    (35000.0, 1, "#,##0.00"),  # an index quoted to 0.1: at least 2 decimals, with separators
    (110.0, 5, "#,##0.00000"),  # scaled to a currency pair near 1.1 quoted to 5 decimals
])
def test_price_columns_follow_the_quote_with_thousands_separators(tmp_path, start, places,
                                                                   fmt):
    df = ohlc(30, start=start)
    rng = np.random.default_rng(3)
    for c in ("Open", "High", "Low", "Close"):  # quoted to `places` decimals (hand-chosen)
        df[c] = np.round(df[c] * (1 if places == 1 else 0.01) + rng.uniform(0, 1e-4, 30),
                         places)
    df["High"] = df[["Open", "High", "Close"]].max(axis=1)
    df["Low"] = df[["Open", "Low", "Close"]].min(axis=1)
    src = tmp_path / "q.xlsx"
    write_book(src, df)
    report = fill_file(src)
    ws = load_workbook(report.output)["Prices"]
    formats = {ws.cell(1, c).value: ws.cell(30, c).number_format for c in range(7, 13)}
    for header in (DEV, "ATR 14 (Wilder)", "Upper band 20x2", "Lower band 20x2"):
        assert formats[header] == fmt
    assert formats["%b 20x2"] == "0.000" and formats["Close vol 20 (ann.)"] == "0.00%"


def test_notes_keep_numbers_and_list_each_caution_once(tmp_path):
    from sheetvol.fill.trade_log import TRADE_CAUTIONS

    df = ohlc(60)
    src = tmp_path / "desk.xlsx"
    write_book(src, df, sheet="ALPHA")
    wb = load_workbook(src)
    log = wb.create_sheet("Trades")
    log.append(["Date", "Instrument", "Side", "Entry"])
    log.append([df["Date"].iloc[30].to_pydatetime(), "ALPHA", "Long",
                float(df["Close"].iloc[30])])
    wb["ALPHA"]["H1"] = "typed"
    wb["ALPHA"]["H2"] = "=SV_DEVIATION_LAST(E2:E61,14)"
    wb.save(src)
    report = fill_file(src)
    assert report.trades is not None and report.formulas_ok == 1
    lines = [r for r in load_workbook(report.output)[NOTES_SHEET].iter_rows(values_only=True)]
    typed = next(r for r in lines if r[0] == "ALPHA!H2")
    ref = df["Close"].rolling(14).std(ddof=0).iloc[-1]  # reference: pandas, ddof=0
    assert isinstance(typed[2], float) and typed[2] == pytest.approx(ref, rel=1e-12)
    start = next(i for i, r in enumerate(lines) if r[0] == "Cautions") + 1
    cautions = [r[0] for r in lines[start:] if r[0]]
    text = " ".join(cautions).lower()
    # one list: each subject once, the trade review's content kept
    for subject in ("advice", "stop", "margin", "export", "trade review"):
        assert sum(subject in c.lower() for c in cautions) == 1, subject
    for phrase in ("gap", "slip", "contract specifications", "local regulation",
                   "logged trades"):
        assert phrase in text, phrase
    assert len(cautions) == len(set(cautions)) == 5
    assert not set(cautions) & set(TRADE_CAUTIONS)  # not listed a second time verbatim


def test_output_places_may_be_given_as_text(tmp_path):
    # A script's FillOptions(output="...") failed with AttributeError deep in the fill.
    src = Path(__file__).resolve().parents[1] / "workbooks" / "demo-desk.xlsx"
    report = fill_file(src, FillOptions(output=str(tmp_path / "out.xlsx")))
    assert report.output == tmp_path / "out.xlsx" and report.output.exists()
    options = FillOptions(out_dir=str(tmp_path / "here"))
    assert options.out_dir == tmp_path / "here"
