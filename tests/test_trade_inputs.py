"""Trade-review inputs the fill must never guess silently: contract details, equity.

Every expected figure is hand-worked in the test from calm bars: high 101, low 99,
close 100 on every day, so each true range is 2 and ATR 14 (Wilder) is 2; a long entry
at 100 with the default stop of 2 ATR has its stop at 96, 4 points away; 1 % of 10,000
equity is a budget of 100.
"""

from __future__ import annotations

import datetime as dt
import zipfile
from pathlib import Path

import pytest
from openpyxl import Workbook, load_workbook
from openpyxl.workbook.defined_name import DefinedName

from sheetvol.fill.job import FillOptions, fill_file
from sheetvol.fill.notes import NOTES_SHEET
from sheetvol.fill.review import contract_role
from sheetvol.fill.trade_log import REVIEW_SHEET
from sheetvol.fill.trade_settings import TradeSettings

NO_EQUITY = "no equity: add an Equity column, a recipe equity or --equity"


def _book(path: Path, *, contracts: list[list] | None = None, log_head=None, log_rows=None,
          settings: list[list] | None = None, names: dict[str, str] | None = None) -> None:
    """One instrument, BIRCH, on calm bars; a log; optional contract and settings sheets."""
    wb = Workbook()
    log = wb.active
    log.title = "Trades"
    log.append(log_head or ["Date", "Instrument", "Side", "Entry", "Equity"])
    for row in log_rows or [[dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0, 10_000]]:
        log.append(row)
    bars = wb.create_sheet("BIRCH")
    bars.append(["Date", "Open", "High", "Low", "Close"])
    for k in range(25):
        bars.append([dt.datetime(2025, 1, 1) + dt.timedelta(days=k), 100.0, 101.0, 99.0, 100.0])
    if contracts is not None:
        sheet = wb.create_sheet("Instruments")
        for row in contracts:
            sheet.append(row)
    if settings is not None:
        sheet = wb.create_sheet("Settings")
        for row in settings:
            sheet.append(row)
    for name, ref in (names or {}).items():
        wb.defined_names[name] = DefinedName(name, attr_text=ref)
    wb.save(path)


def columns_by_header(ws, header_row: int = 1) -> dict[str, list]:
    """Header -> the column's values below the header (openpyxl, stored values)."""
    heads = {c.value: c.column for c in ws[header_row] if c.value is not None}
    return {h: [ws.cell(r, col).value for r in range(header_row + 1, ws.max_row + 1)]
            for h, col in heads.items()}


def review_settings(ws) -> dict[str, object]:
    """The review sheet's rows as label -> value (first two columns)."""
    return {r[0]: r[1] if len(r) > 1 else None for r in ws.iter_rows(values_only=True) if r[0]}


def _notes_text(path: Path) -> str:
    return " ".join(str(v) for r in load_workbook(path)[NOTES_SHEET].iter_rows(values_only=True)
                    for v in r if v is not None)


# -- contract details --------------------------------------------------------------------
@pytest.mark.parametrize("header", ["Point value", "Multiplier", "Contract size",
                                    "Big point value", "Point value (EUR)", "Value per point",
                                    "CONTRACT_MULTIPLIER"])
def test_point_value_under_its_usual_names(tmp_path, header):
    """Point value 5, FX 1.1: a unit loses 4 x 5 x 1.1 = 22 at the stop; 100 / 22 = 4.5 -> 4."""
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Symbol", header, "FX rate"], ["BIRCH", 5, 1.1]])
    report = fill_file(src)
    got = columns_by_header(load_workbook(report.output)["Trades"])
    assert got["Size at 1% risk"][0] == 4
    assert report.trades is not None and report.trades.instruments_sheet == "Instruments"
    assert got["Size note"][0] is None


@pytest.mark.parametrize(("header", "role"), [
    ("Point value", "point_value"), ("Multiplier", "point_value"),
    ("Contract size", "point_value"), ("Big point value", "point_value"),
    ("Tick", "tick"), ("Tick size", "tick"), ("Min tick", "tick"),
    ("Price increment", "tick"), ("Tick value", "tick_value"), ("Value per tick", "tick_value"),
    ("Lot step", "lot_step"), ("Lot size", "lot_step"), ("Quantity step", "lot_step"),
    ("Min qty", "min_qty"), ("Minimum quantity", "min_qty"), ("Min lot", "min_qty"),
    ("Max qty", "max_qty"), ("Maximum quantity", "max_qty"), ("Max size", "max_qty"),
    ("FX rate", "fx_rate"), ("Exchange rate", "fx_rate"), ("FX", "fx_rate"),
    ("Conversion rate", "fx_rate"),
    ("Symbol", "instrument"), ("Ticker", "instrument"), ("Instrument", "instrument"),
    ("Margin", None), ("Description", None), ("Currency", None), ("Quantity", None),
])
def test_contract_header_words(header, role):
    # The trade words for each contract detail (common practice, no source).
    assert contract_role(header) == role


def test_tick_value_and_lot_size_give_the_point_value_and_the_step(tmp_path):
    """Tick 0.25 worth 1.25 is 5 per point; a unit loses 4 x 5 = 20 at the stop, so the
    budget of 100 buys 5 units, down to a lot size of 3 -> 3."""
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Market", "Tick size", "Tick value", "Lot size", "Margin"],
                          ["BIRCH", 0.25, 1.25, 3, 1200]])
    report = fill_file(src)
    got = columns_by_header(load_workbook(report.output)["Trades"])
    assert got["Size at 1% risk"][0] == 3
    said = 'column "Margin" on sheet "Instruments" not used'
    assert any(said in a for a in report.assumptions)
    assert any(said in line for line in report.summary())
    assert said in _notes_text(report.output)


def test_tick_value_without_a_tick_size_is_refused(tmp_path):
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Instrument", "Tick value"], ["BIRCH", 1.25]])
    with pytest.raises(ValueError, match=r'sheet "Instruments".*BIRCH.*tick value.*tick size'):
        fill_file(src)


def test_a_defaulted_point_value_is_never_silent(tmp_path):
    """No contract row for BIRCH: 1 per point, so 100 / 4 = 25 units, and the row says so."""
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Instrument", "Point value"], ["ALDER", 10]])
    report = fill_file(src)
    got = columns_by_header(load_workbook(report.output)["Trades"])
    assert got["Size at 1% risk"][0] == 25
    assert got["Size note"][0] == "point value not given: 1 assumed"
    assert any("BIRCH" in a and "point value" in a for a in report.assumptions)
    # no contract sheet at all: the same
    bare = tmp_path / "bare.xlsx"
    _book(bare)
    report = fill_file(bare)
    got = columns_by_header(load_workbook(report.output)["Trades"])
    assert got["Size note"][0] == "point value not given: 1 assumed"
    assert any("point value" in a for a in report.assumptions)
    assert "point value not given: 1 assumed" in _notes_text(report.output)


# -- equity ------------------------------------------------------------------------------------
def test_no_equity_gives_blank_risk_figures_with_the_reason(tmp_path):
    src = tmp_path / "desk.xlsx"
    rows = [[dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0],
            [dt.datetime(2025, 1, 21), "BIRCH", "short", 100.0]]
    _book(src, contracts=[["Instrument", "Point value"], ["BIRCH", 1]],
          log_head=["Date", "Instrument", "Side", "Entry"], log_rows=rows)
    report = fill_file(src)
    wb = load_workbook(report.output)
    got = columns_by_header(wb["Trades"])
    assert got["Reviewed outcome"] == ["open", "open"]
    assert got["Size at 1% risk"] == [None, None]
    assert got["Open risk"] == [None, None]
    assert got["Size note"] == [NO_EQUITY, NO_EQUITY]
    settings = review_settings(wb[REVIEW_SHEET])
    assert "Open risk (account currency)" in settings
    assert settings["Open risk (account currency)"] is None
    # the row claims no column the log does not have
    assert "the log's" not in settings["Equity"] and settings["Equity"].startswith("none")
    assert NO_EQUITY in settings["Equity"]
    assert any("open risk" in line and "no equity" in line for line in report.summary())


def test_equity_stated_on_the_settings_sheet_is_used(tmp_path):
    """The template's Settings sheet: equity 100,000 in B1 -> 1,000 / 4 = 250 units."""
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Instrument", "Point value"], ["BIRCH", 1]],
          log_head=["Date", "Instrument", "Side", "Entry"],
          log_rows=[[dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0]],
          settings=[["Account equity", 100_000], ["Risk per trade", 0.01]])
    report = fill_file(src)
    wb = load_workbook(report.output)
    assert columns_by_header(wb["Trades"])["Size at 1% risk"][0] == 250
    settings = review_settings(wb[REVIEW_SHEET])
    assert "100,000.00" in settings["Equity"] and "Settings!B1" in settings["Equity"]
    # --equity given too, and different: used, and the notes say why the figure differs
    other = fill_file(src, FillOptions(output=tmp_path / "o.xlsx",
                                       trades=TradeSettings(equity=50_000)))
    assert columns_by_header(load_workbook(other.output)["Trades"])["Size at 1% risk"][0] == 125
    differs = [a for a in other.assumptions if "Settings!B1" in a]
    assert differs and "50,000" in differs[0] and "100,000" in differs[0]


def test_equity_from_a_defined_name(tmp_path):
    """A workbook-level name "Equity" pointing at Inputs!C3 = 20,000 -> 200 / 4 = 50 units."""
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Instrument", "Point value"], ["BIRCH", 1]],
          log_head=["Date", "Instrument", "Side", "Entry"],
          log_rows=[[dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0]],
          names={"Equity": "Inputs!$C$3"})
    wb = load_workbook(src)
    wb.create_sheet("Inputs")["C3"] = 20_000
    wb.save(src)
    report = fill_file(src)
    assert columns_by_header(load_workbook(report.output)["Trades"])["Size at 1% risk"][0] == 50


def test_a_log_header_named_in_the_recipe_is_used(tmp_path):
    """[trades] columns = { side = "B/S" }: the log is found and reviewed with that column."""
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Instrument", "Point value"], ["BIRCH", 1]],
          log_head=["Date", "Instrument", "B/S", "Entry", "Equity"],
          log_rows=[[dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0, 10_000]])
    report = fill_file(src, FillOptions(trades=TradeSettings(columns={"side": "B/S"})))
    got = columns_by_header(load_workbook(report.output)["Trades"])
    assert got["Stop 2x vol"][0] == 96.0 and got["Size at 1% risk"][0] == 25


def test_a_1904_date_system_log_keeps_its_dates(tmp_path):
    """A workbook in the 1904 date system: the entry bar and the review's dates read back
    as the same calendar dates (openpyxl converts both ways)."""
    from openpyxl.utils.datetime import CALENDAR_MAC_1904

    src = tmp_path / "mac.xlsx"
    _book(src, contracts=[["Instrument", "Point value"], ["BIRCH", 1]])
    wb = load_workbook(src)
    wb.epoch = CALENDAR_MAC_1904
    wb.save(src)
    report = fill_file(src)
    got = columns_by_header(load_workbook(report.output)["Trades"])
    assert got["Entry-bar date"][0] == dt.datetime(2025, 1, 20)
    assert got["Size at 1% risk"][0] == 25


def test_settings_the_workbook_states_but_the_review_does_not_use_are_said(tmp_path):
    src = tmp_path / "desk.xlsx"
    _book(src, contracts=[["Instrument", "Point value"], ["BIRCH", 1]],
          log_head=["Date", "Instrument", "Side", "Entry"],
          log_rows=[[dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0]],
          settings=[["Account equity", 100_000], ["Risk per trade", 0.02],
                    ["Stop distance (ATR multiples)", 2], ["Trailing stop (ATR multiples)", 4]])
    report = fill_file(src)
    said = " | ".join(report.assumptions)
    assert "Settings!B2 states risk 0.02, the review uses 0.01: give --risk 0.02" in said
    assert "Settings!B4 states trail multiple 4, the review uses 3" in said
    assert "Settings!B3" not in said  # the stop agrees: nothing to say
    # given the same figures, nothing is said
    same = fill_file(src, FillOptions(output=tmp_path / "same.xlsx", trades=TradeSettings(
        risk=0.02, trail_multiple=4)))
    assert not [a for a in same.assumptions if "Settings!" in a]


def test_the_fill_guide_recipe_runs_as_written_on_the_demo(tmp_path):
    """docs/fill.md's recipe, copied as written, on workbooks/demo-desk.xlsx."""
    import re
    import shutil

    from sheetvol.cli import main

    root = Path(__file__).resolve().parent.parent
    text = (root / "docs" / "fill.md").read_text(encoding="utf-8")
    (recipe,) = re.findall(r"```toml\n(.*?)```", text, re.S)
    (tmp_path / "desk.toml").write_text(recipe, encoding="utf-8")
    shutil.copy(root / "workbooks" / "demo-desk.xlsx", tmp_path / "desk.xlsx")
    out = tmp_path / "out.xlsx"
    assert main(["fill", str(tmp_path / "desk.xlsx"), "--recipe", str(tmp_path / "desk.toml"),
                 "-o", str(out), "--quiet"]) == 0
    heads = [c.value for c in load_workbook(out)["Trades"][1]]
    assert "Stop 1.5x vol" in heads and "Size at 0.5% risk" in heads


def test_a_recipe_header_the_log_lacks_is_named_with_the_way_out(tmp_path):
    src = tmp_path / "desk.xlsx"
    _book(src)  # the log's side column is headed "Side"
    with pytest.raises(ValueError) as err:
        fill_file(src, FillOptions(trades=TradeSettings(sheet="Trades",
                                                        columns={"side": "B/S"})))
    text = str(err.value)
    assert '[trades] columns: side = "B/S": no column headed "B/S" in row 1' in text
    assert "remove it from [trades] columns so the usual names are looked for" in text
    assert 'e.g. columns = { side = "B/S" }' not in text  # not the line that caused it


@pytest.mark.parametrize(("cell", "value", "words"), [
    ("A2", "sometime in May", "is not a date"),
    ("D2", "a hundred", "is not a number"),
    ("E2", "lots", "is not a number"),
])
def test_a_log_cell_that_cannot_be_read_is_refused_naming_the_cell(tmp_path, cell, value,
                                                                    words):
    # Found by mutating the demo workbook: text in a log's date or number column escaped as
    # an unexpected failure. Now a refusal naming sheet, cell, header and the way out.
    src = tmp_path / "book.xlsx"
    row = [dt.datetime(2025, 1, 20), "BIRCH", "long", 100.0, 10_000]
    row[{"A": 0, "D": 3, "E": 4}[cell[0]]] = value
    _book(src, log_rows=[row])
    with pytest.raises(ValueError) as err:
        fill_file(src, FillOptions(output=tmp_path / "out.xlsx"))
    message = str(err.value)
    assert f'sheet "Trades", cell {cell}' in message and repr(value) in message
    assert words in message and "clear the cell" in message
    assert type(err.value).__name__ == "TradeLogError"
    assert not (tmp_path / "out.xlsx").exists()


def test_review_columns_go_right_of_a_merged_block_beside_the_log(tmp_path):
    # As on price sheets: a merged block right of the log (a comment box F2:H4) would hide
    # the review values written under it; they go right of it instead.
    src = tmp_path / "desk.xlsx"
    _book(src)
    wb = load_workbook(src)
    wb["Trades"]["F2"] = "checked by risk"
    wb["Trades"].merge_cells("F2:H4")
    wb.save(src)
    report = fill_file(src)
    ws = load_workbook(report.output)["Trades"]
    heads = {c.value: c.column for c in ws[1] if c.value is not None}
    review = [col for h, col in heads.items()
              if h not in ("Date", "Instrument", "Side", "Entry", "Equity")]
    assert min(review) == 9, heads  # column I, right of the block
    assert [str(r) for r in ws.merged_cells.ranges] == ["F2:H4"]
    assert ws["F2"].value == "checked by risk"


@pytest.mark.parametrize("block", ["F2:XFD4", "ZZZ9:A1"])
def test_no_room_right_of_the_log_is_refused_naming_the_sheet(tmp_path, block):
    # Found by mutating workbooks: a merged block reaching past the sheet's last column
    # (or beyond it: ZZZ is no column) beside the log sent the review columns past XFD and
    # the fill failed unexpectedly.
    src = tmp_path / "desk.xlsx"
    _book(src)
    with zipfile.ZipFile(src) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    sheet = "xl/worksheets/sheet1.xml"
    parts[sheet] = parts[sheet].replace(
        b"</sheetData>", b'</sheetData><mergeCells count="1"><mergeCell ref="%s"/></mergeCells>'
        % block.encode())
    with zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as zf:
        for n, data in parts.items():
            zf.writestr(n, data)
    with pytest.raises(ValueError) as err:
        fill_file(src, FillOptions(output=tmp_path / "out.xlsx"))
    assert type(err.value).__name__ == "TradeLogError", err.value
    assert 'sheet "Trades"' in str(err.value) and "no room" in str(err.value)
