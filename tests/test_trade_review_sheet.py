"""The Trade review as a colleague reads it: partial reviews said once, one trade count,
one precision, readable settings, the log's own date format, typeable labels."""

from __future__ import annotations

import datetime as dt
import shutil
from pathlib import Path

from openpyxl import Workbook, load_workbook

from sheetvol.cli import main
from sheetvol.fill.job import FillOptions, fill_file
from sheetvol.fill.trade_log import OWN_HEADER, REVIEW_SHEET

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "workbooks" / "demo-desk.xlsx"
TEMPLATE = ROOT / "workbooks" / "template.xlsx"


def review_rows(path: Path) -> list[tuple]:
    return [r for r in load_workbook(path)[REVIEW_SHEET].iter_rows(values_only=True) if r[0]]


def test_sheet_option_says_once_that_other_trades_were_not_reviewed(tmp_path, capsys):
    src = tmp_path / "desk.xlsx"
    shutil.copy(DEMO, src)
    assert main(["fill", str(src), "--sheet", "KESTREL", "-o", str(tmp_path / "k.xlsx")]) == 0
    out = capsys.readouterr().out
    names = [r[1] for r in load_workbook(DEMO)["Trades"].iter_rows(min_row=2, values_only=True)
             if r[1]]
    others = sum(n != "KESTREL" for n in names)
    assert "no prices for instrument" not in out
    said = [line for line in out.splitlines() if "not reviewed" in line and "--sheet" in line]
    assert len(said) == 1 and f"{others} trades" in said[0]
    assert "BRAMBLE" in said[0] and "ORRIN" in said[0] and "TALLOW" in said[0]
    assert "partial" in out
    rows = review_rows(tmp_path / "k.xlsx")
    assert any(str(r[0]).startswith("Summary (partial") for r in rows)
    counts = {r[0]: r[1] for r in rows}
    assert counts["Trades in the log"] == len(names)
    assert counts["Trades reviewed (log rows with an outcome)"] == len(names) - others


def _log_book(path: Path, date_format: str = "yyyy-mm-dd") -> None:
    """Calm bars (high 11, low 9, close 10: ATR 14 = 2) from 1 Jan 2025; three trades:
    one stopped out by a low of 5 on 24 Jan, one still open, one entered before 14 bars
    of history (no ATR, so no stop and no outcome)."""
    wb = Workbook()
    log = wb.active
    log.title = "Trades"
    log.append(["Date", "Instrument", "Side", "Entry", "Equity"])
    for day, side in ((20, "long"), (22, "short"), (5, "long")):
        log.append([dt.datetime(2025, 1, day), "ALDER", side, 10.0, 10_000])
        log.cell(log.max_row, 1).number_format = date_format
    bars = wb.create_sheet("ALDER")
    bars.append(["Date", "Open", "High", "Low", "Close"])
    for k in range(30):
        low = 5.0 if k == 23 else 9.0
        bars.append([dt.datetime(2025, 1, 1) + dt.timedelta(days=k), 10.0, 11.0, low, 10.0])
    wb.save(path)


def test_one_trade_count_on_the_sheet_and_in_the_terminal(tmp_path):
    src = tmp_path / "log.xlsx"
    _log_book(src)
    report = fill_file(src)
    counts = {r[0]: r[1] for r in review_rows(report.output)}
    assert counts["Trades in the log"] == 3
    assert counts["Trades reviewed (log rows with an outcome)"] == 2
    line = next(s for s in report.summary() if 'trade log "Trades"' in s)
    assert "3 trades in the log, 2 reviewed (log rows with an outcome)" in line


def test_open_risk_share_has_one_precision(tmp_path):
    src = tmp_path / "desk.xlsx"
    shutil.copy(DEMO, src)
    report = fill_file(src)
    ws = load_workbook(report.output)[REVIEW_SHEET]
    cell = next(r[1] for r in ws.iter_rows() if r[0].value == "Open risk (share of equity)")
    assert cell.number_format == "0.00%"
    shown = f"{100 * cell.value:.2f}%"  # what the 0.00% format displays
    assert any(f"open risk {shown} of equity" in line for line in report.summary())


def test_settings_rows_are_readable(tmp_path):
    src = tmp_path / "desk.xlsx"
    shutil.copy(DEMO, src)
    report = fill_file(src)
    rows = review_rows(report.output)
    start = next(i for i, r in enumerate(rows) if r[0] == "Settings")
    end = next(i for i, r in enumerate(rows) if str(r[0]).startswith("Each trade"))
    settings = rows[start + 1:end]
    assert settings and all(len(str(r[1])) <= 100 for r in settings), settings
    levels = [r for r in settings if r[0] == "Levels"]
    assert levels and "rounded to each instrument's tick" in levels[0][1]


def test_entry_bar_date_takes_the_log_date_format(tmp_path):
    src = tmp_path / "log.xlsx"
    _log_book(src, "dd/mm/yyyy")
    report = fill_file(src)
    ws = load_workbook(report.output)["Trades"]
    heads = {c.value: c.column for c in ws[1]}
    for header in ("Entry-bar date", "Reviewed exit date"):
        assert ws.cell(2, heads[header]).number_format == "dd/mm/yyyy", header


def test_band_labels_have_one_typeable_spelling(tmp_path):
    """The template's typed column headers and the fill's agree, in plain keyboard text."""
    src = tmp_path / "template.xlsx"
    shutil.copy(TEMPLATE, src)
    report = fill_file(src, FillOptions(output=tmp_path / "t.xlsx"))
    typed = [c.value for c in load_workbook(TEMPLATE)["Prices"][1] if c.value]
    assert "Upper band 20x2" in typed and "Lower band 20x2" in typed
    written = [w.spec.header for w in report.written]
    assert "Upper band 20x2" in written and "%b 20x2" in written
    trade_heads = [h for _letter, h, _what in report.trades.written]
    assert "Stop 2x vol" in trade_heads and "Trail 3x vol" in trade_heads
    assert all(h.isascii() for h in written + trade_heads)
    assert all(str(h).isascii() for h in typed)


def test_trade_headers_of_an_earlier_fill_are_recognised_in_either_spelling():
    # a log filled before the labels became plain text is still re-filled in place
    for header in ("Stop 2×vol", "Stop 2x vol", "Target 3×vol", "Trail 1.5x vol"):
        assert OWN_HEADER.match(header), header
