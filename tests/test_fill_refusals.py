"""Fill inputs that must be refused or stated, never guessed: a chosen column without
numbers, the bars per year used to annualise."""

from __future__ import annotations

import datetime as dt
import math
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook, load_workbook

from sheetvol.cli import main
from sheetvol.fill.job import FillOptions, fill_file
from sheetvol.fill.notes import NOTES_SHEET
from sheetvol.fill.recipe import read_recipe
from sheetvol.fill.spacing import bars_per_year

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "workbooks" / "demo-desk.xlsx"


def test_a_chosen_close_column_without_numbers_is_an_error(tmp_path, capsys):
    src = tmp_path / "desk.xlsx"
    shutil.copy(DEMO, src)
    out = tmp_path / "out.xlsx"
    code = main(["fill", str(src), "--sheet", "KESTREL", "--close-col", "Z", "-o", str(out),
                 "--quiet"])
    err = capsys.readouterr().err
    assert code == 1
    assert 'sheet "KESTREL"' in err and "--close-col Z" in err and "no numbers" in err
    assert not out.exists()


# -- bars per year -------------------------------------------------------------------------
def _bars_book(path: Path, stamps: list[dt.datetime], seed: int = 3) -> pd.DataFrame:
    """Invented bars at the given times: a random walk of closes."""
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.002, len(stamps))))
    wb = Workbook()
    ws = wb.active
    ws.title = "Bars"
    ws.append(["Time", "Open", "High", "Low", "Close"])
    for t, c in zip(stamps, close, strict=True):
        ws.append([t, c, c * 1.001, c * 0.999, c])
    wb.save(path)
    return pd.DataFrame({"Close": close})


def _five_minute_stamps(days: int) -> list[dt.datetime]:
    """09:30 to 15:55 in 5-minute steps (78 bars a session) on weekdays from 6 Jan 2025."""
    out = []
    for day in pd.bdate_range("2025-01-06", periods=days):
        start = day.to_pydatetime() + dt.timedelta(hours=9, minutes=30)
        out.extend(start + dt.timedelta(minutes=5 * k) for k in range(78))
    return out


def test_five_minute_bars_are_annualised_from_the_dates(tmp_path):
    """78 bars a session x 252 sessions = 19,656 bars a year (common practice: 252
    trading days); reference: pandas, sample std of 20 log returns x sqrt(19,656)."""
    src = tmp_path / "intraday.xlsx"
    frame = _bars_book(src, _five_minute_stamps(4))
    report = fill_file(src)
    header = "Close vol 20 (ann.) [19656/yr]"
    assert any("19656 bars/yr" in a and "78 a session x 252 sessions" in a
               for a in report.assumptions)
    ws = load_workbook(report.output)["Bars"]
    col = next(c.column for c in ws[1] if c.value == header)
    got = np.array([ws.cell(r, col).value for r in range(2, ws.max_row + 1)], dtype=float)
    ref = np.log(frame["Close"]).diff().rolling(20).std(ddof=1) * math.sqrt(78 * 252)
    np.testing.assert_allclose(got, ref.to_numpy(), rtol=1e-9, equal_nan=True)
    notes = " ".join(str(v) for r in load_workbook(report.output)[NOTES_SHEET].iter_rows(
        values_only=True) for v in r if v is not None)
    assert "19656 bars/yr" in notes


@pytest.mark.parametrize(("dates", "per_year", "kind"), [
    (pd.bdate_range("2025-01-06", periods=60), 252, "daily"),    # weekdays
    (pd.date_range("2025-01-06", periods=60, freq="D"), 365, "daily"),  # every day
    (pd.date_range("2025-01-06", periods=30, freq="W-MON"), 52, "weekly"),
    (pd.date_range("2023-01-31", periods=30, freq="ME"), 12, "monthly"),
])
def test_bars_per_year_of_regular_dates(dates, per_year, kind):
    # Dates made by pandas' calendar; the conventions 252/365/52/12 are common practice.
    serials = np.array([(d - pd.Timestamp("1899-12-30")).days for d in dates], dtype=float)
    got = bars_per_year(serials)
    assert (got.kind, got.per_year) == (kind, per_year)


def _irregular_stamps() -> list[dt.datetime]:
    rng = np.random.default_rng(11)
    gaps = rng.choice([1, 2, 5, 9, 17], size=60)  # days between bars, no pattern
    return [dt.datetime(2025, 1, 6) + dt.timedelta(days=int(g)) for g in np.cumsum(gaps)]


def test_irregular_dates_are_refused_unless_per_year_is_given(tmp_path, capsys):
    src = tmp_path / "odd.xlsx"
    _bars_book(src, _irregular_stamps())
    recipe = tmp_path / "vol.toml"
    recipe.write_text('[[column]]\nfunction = "SV_CLOSEVOL"\noptions = { period = 10 }\n')
    code = main(["fill", str(src), "--recipe", str(recipe), "-o", str(tmp_path / "o.xlsx"),
                 "--quiet"])
    err = capsys.readouterr().err
    assert code == 1
    assert 'sheet "Bars"' in err and "column A" in err and "irregular" in err
    assert "per_year" in err
    # stated in the recipe: used as given, header says so
    recipe.write_text('[[column]]\nfunction = "SV_CLOSEVOL"\n'
                      'options = { period = 10, per_year = 365 }\n')
    report = fill_file(src, FillOptions(specs=read_recipe(recipe).columns,
                                        output=tmp_path / "p.xlsx"))
    assert [w.spec.header for w in report.written] == ["Close vol 10 (ann.) [365/yr]"]
    assert not any("bars/yr" in a for a in report.assumptions)
    # the default columns, not asked for: the annualised one is left out with the reason
    report = fill_file(src, FillOptions(output=tmp_path / "q.xlsx"))
    assert "Close vol 20 (ann.)" not in [w.spec.header for w in report.written]
    assert any("irregular" in w and "left out" in w for w in report.warnings)


def test_daily_demo_states_252_bars_a_year(tmp_path):
    src = tmp_path / "desk.xlsx"
    shutil.copy(DEMO, src)
    report = fill_file(src, FillOptions(review_trades=False))
    said = [a for a in report.assumptions if "252 bars/yr" in a]
    assert len(said) == 4 and all("daily bars" in a for a in said)
