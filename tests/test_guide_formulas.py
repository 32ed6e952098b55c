"""The trade-log guide's worksheet formulas, typed into the demo and evaluated headless by
the fill, give the fill's own review columns on the same rows.

The formulas are read from docs/trade-log.md as written (row 2 of the log) and moved down
to each KESTREL row the way a spreadsheet fills a formula down (the price ranges are
absolute in effect: they do not move). Both sides are sheetvol, so this is a consistency
check between its two faces; the figures themselves are checked against outside
references in test_fill_trades.py (TA-Lib's ATR, the Turtle sizing example).
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from openpyxl import load_workbook

from sheetvol.fill.job import fill_file

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "workbooks" / "demo-desk.xlsx"
TEMPLATE = ROOT / "workbooks" / "template.xlsx"
GUIDE = ROOT / "docs" / "trade-log.md"
# guide row label -> the fill's header for the same figure (default settings)
SAME = {"volatility on entry": "Entry-bar ATR 14 (Wilder)", "stop": "Stop 2x vol",
        "target": "Target 3x vol", "size": "Size at 1% risk", "target in R": "Target in R",
        "trailing stop now": "Trail 3x vol", "outcome": "Reviewed outcome",
        "trail at the exit (the fill's Trail)": "Trail 3x vol"}


def guide_formulas() -> dict[str, str]:
    """The table of formulas under "The same in worksheet cells": label -> formula."""
    text = GUIDE.read_text(encoding="utf-8")
    section = text.split("## The same in worksheet cells", 1)[1].split("\n## ", 1)[0]
    return {m[1]: m[2] for m in re.finditer(r"^\| ([^|`]+?) \| `(=[^`]+)` \|$", section, re.M)}


def moved_down(formula: str, row: int) -> str:
    """Row-2 references of the log moved to ``row``; references to the price sheet stay."""
    return re.sub(r"(?<![!:A-Z$])([A-Z]{1,2})2(?!\d)", lambda m: f"{m[1]}{row}", formula)


def test_guide_lists_the_columns_it_says():
    assert set(guide_formulas()) == set(SAME)


@pytest.fixture(scope="module")
def typed_and_filled(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("guide")
    src = tmp / "desk.xlsx"
    wb = load_workbook(DEMO)
    ws = wb["Trades"]
    formulas = guide_formulas()
    # the guide's cells: J2 volatility, K2 stop, L2 target, then the rest in its order
    cols = dict(zip(formulas, range(10, 10 + len(formulas)), strict=True))
    rows = [r for r in range(2, ws.max_row + 1) if ws.cell(r, 2).value == "KESTREL"]
    for label, formula in formulas.items():
        ws.cell(1, cols[label]).value = label
        for r in rows:
            ws.cell(r, cols[label]).value = moved_down(formula, r)
    # The trailing stop "now" is the fill's Trail on open trades: rows without a logged exit
    # get the guide's formula with their instrument's sheet and tick; those the fill finds
    # still open are compared.
    ticks = {r[0]: r[8] for r in wb["Instruments"].iter_rows(min_row=2, values_only=True)}
    open_rows = [r for r in range(2, ws.max_row + 1)
                 if ws.cell(r, 2).value and ws.cell(r, 5).value is None]
    for r in open_rows:
        name = ws.cell(r, 2).value
        ws.cell(r, cols["trailing stop now"]).value = moved_down(
            formulas["trailing stop now"], r).replace("KESTREL", name).replace(
            ", 0.00001)", f", {ticks[name]!r})")
    wb.save(src)
    report = fill_file(src)
    return load_workbook(report.output)["Trades"], cols, rows, report, open_rows


def test_every_typed_formula_was_evaluated(typed_and_filled):
    _ws, cols, rows, report, open_rows = typed_and_filled
    extra = len([r for r in open_rows if r not in rows])
    assert open_rows  # the demo has open trades (a blank exit)
    assert report.formulas_ok == len(cols) * len(rows) + extra, [
        f.outcome for f in report.formulas]


@pytest.mark.parametrize("label", list(SAME))
def test_guide_formulas_reproduce_the_fill(typed_and_filled, label):
    ws, cols, rows, _report, open_rows = typed_and_filled
    heads = {c.value: c.column for c in ws[1] if c.value}
    fill_col = heads[SAME[label]]
    checked = 0
    outcome = {r: ws.cell(r, heads["Reviewed outcome"]).value for r in open_rows}
    still_open = [r for r in open_rows if outcome[r] == "open"]  # not stopped out since
    for r in (still_open if label == "trailing stop now" else rows):
        typed, filled = ws.cell(r, cols[label]).value, ws.cell(r, fill_col).value
        if isinstance(filled, float):
            assert typed == pytest.approx(filled, rel=1e-12, abs=1e-12), (label, r)
        else:
            assert typed == filled, (label, r)
        checked += 1
    assert checked >= 1


def test_template_typed_columns_agree_with_the_fill(tmp_path):
    """workbooks/template.xlsx: its typed Size, Outcome and R (equity, risk and trailing
    stop from its Settings sheet) equal the fill's columns on every row."""
    src = tmp_path / "template.xlsx"
    shutil.copy(TEMPLATE, src)
    report = fill_file(src)
    ws = load_workbook(report.output)["Trades"]
    heads = {c.value: c.column for c in ws[1] if c.value}
    pairs = {"Size": "Size at 1% risk", "Outcome": "Reviewed outcome", "R": "R multiple",
             "Stop": "Stop 2x vol", "Target": "Target 3x vol"}
    rows = range(2, ws.max_row + 1)
    for typed, filled in pairs.items():
        a = [ws.cell(r, heads[typed]).value for r in rows]
        b = [ws.cell(r, heads[filled]).value for r in rows]
        assert all(x is not None for x in a), typed
        if isinstance(a[0], str):
            assert a == b, typed
        else:
            assert a == pytest.approx(b, rel=1e-12), typed
    outcomes = {ws.cell(r, heads["Reviewed outcome"]).value for r in rows}
    assert "trail" in outcomes  # the trailing stop is in play on both sides


def test_guide_terminal_lines_are_what_the_demo_fill_prints(tmp_path):
    text = GUIDE.read_text(encoding="utf-8")
    block = text.split("The trade-log part of the terminal summary begins:", 1)[1]
    lines = block.split("```", 2)[1].strip("\n").splitlines()
    src = tmp_path / "demo-desk.xlsx"
    shutil.copy(DEMO, src)
    summary = fill_file(src).summary()
    start = next(i for i, s in enumerate(summary) if s == lines[0])
    assert summary[start:start + len(lines)] == lines
