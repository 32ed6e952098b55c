"""Build workbooks/template.xlsx: sheetvol formulas typed in, results already stored.

Invented scenario: daily bars of "Larkspur Tin", a made-up instrument, and a
small trade log. The price sheet holds filled-down ``_LAST`` formulas (ATR, bands,
close-to-close volatility); the trade log reads volatility on each trade's
date (``_ON``) and derives stop, target, size and outcome. The formulas are
written with openpyxl, then their results are computed by the headless
evaluator (``sheetvol.functions.evaluator.evaluate_cells``, the code the fill uses) and
stored with the workbook layer, keeping the formulas. Opened without the
add-in, the template shows numbers; with the add-in, the same formulas
recalculate live.

Run: ``python workbooks/make_template.py [--out PATH]`` from the project root
(deterministic: the same content every time, apart from zip timestamps).
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
import sys
import tempfile
from pathlib import Path

import numpy as np
import openpyxl
from openpyxl.styles import Font

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # run from a checkout without installing the package
    sys.path.insert(0, str(HERE.parent))

from sheetvol.functions import evaluator as formulas  # noqa: E402
from sheetvol.functions.registry import get  # noqa: E402
from sheetvol.workbook.edits import CellResult, SpillResult  # noqa: E402
from sheetvol.workbook.package import Package  # noqa: E402
from sheetvol.workbook.writer import write_package  # noqa: E402

OUT = HERE / "template.xlsx"
ROWS = 260  # trading days
LAST = ROWS + 1  # last price row on the sheet
SEED = 20250102


def bars() -> tuple[list[dt.datetime], dict[str, np.ndarray]]:
    """Invented weekday bars: a geometric random walk with gaps and wicks."""
    rng = np.random.default_rng(SEED)
    days: list[dt.datetime] = []
    day = dt.datetime(2025, 1, 2)
    while len(days) < ROWS:
        if day.weekday() < 5:
            days.append(day)
        day += dt.timedelta(days=1)
    close = 31.5 * np.exp(np.cumsum(rng.normal(0.0002, 0.013, ROWS)))
    open_ = np.r_[31.5, close[:-1]] * np.exp(rng.normal(0, 0.004, ROWS))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.006, ROWS)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.006, ROWS)))
    volume = rng.integers(20_000, 90_000, ROWS)
    cols = {"open": open_, "high": high, "low": low, "close": close, "volume": volume}
    return days, {k: np.round(v, 3) if k != "volume" else v for k, v in cols.items()}


def _col(letter: str) -> str:
    return f"Prices!${letter}$2:${letter}${LAST}"


TRADES = [  # (bar index of the trade date, side)
    (40, "long"), (71, "short"), (102, "long"), (133, "long"), (160, "short"),
    (188, "long"), (215, "short"), (240, "long"),
]


def raw_workbook(path: Path) -> None:
    """Write the workbook with formulas only (no stored results yet)."""
    days, p = bars()
    wb = openpyxl.Workbook()
    bold = Font(bold=True)

    about = wb.active
    about.title = "About"
    lines = [
        "sheetvol template (invented data: Larkspur Tin is not a real instrument)",
        "",
        "Prices: daily bars; columns H to K hold sheetvol formulas filled down, one per row",
        "  (the _LAST form: the value on the last row of the ranges, e.g. $C$2:C30),",
        "  starting on the first row that has a value (earlier rows are the warm-up).",
        "Trades: a trade log; volatility on each trade's date (SV_ATR_ON), stop, target,",
        "  size (from Settings) and the outcome read from the bars after entry, with the",
        "  trailing stop of Settings: the same words and figures as `sheetvol fill` writes.",
        "",
        "The results were computed and stored by sheetvol's headless evaluator, so the",
        "numbers show without the add-in. With the add-in installed (docs/addin.md) the",
        "same formulas recalculate live when prices change.",
        "",
        "With the add-in, try the whole-column form in an empty column of Prices, e.g. in M2:",
        "  =SV_ATR(C2:C261, D2:D261, E2:E261, 14)",
        "It returns the whole column at once (it spills down in Excel 365; blank warm-up rows).",
        "Whole-column results are stored as array formulas, which LibreOffice always",
        "recalculates on opening, so this template uses the filled-down form throughout.",
    ]
    for i, text in enumerate(lines, start=1):
        about.cell(row=i, column=1, value=text)
    about["A1"].font = bold
    about.column_dimensions["A"].width = 90

    first = {  # first bar with a value, per formula column
        col: int(np.argmax(np.isfinite(values))) for col, values in (
            (8, get("SV_ATR")(p["high"], p["low"], p["close"], 14)),
            (9, get("SV_BAND")(p["close"], "upper", 20, 2)),
            (10, get("SV_BAND")(p["close"], "lower", 20, 2)),
            (11, get("SV_CLOSEVOL")(p["close"], 20, 252)),
        )
    }
    ws = wb.create_sheet("Prices")
    ws.append(["Date", "Open", "High", "Low", "Close", "Volume", None,
               "ATR 14", "Upper band 20x2", "Lower band 20x2", "Volatility 20 (ann.)"])
    for c in ws[1]:
        c.font = bold
    for i, d in enumerate(days):
        r = i + 2
        ws.cell(row=r, column=1, value=d).number_format = "yyyy-mm-dd"
        for j, key in enumerate(("open", "high", "low", "close"), start=2):
            ws.cell(row=r, column=j, value=float(p[key][i])).number_format = "0.000"
        ws.cell(row=r, column=6, value=int(p["volume"][i]))
        for col, text, fmt in (
            (8, f"=SV_ATR_LAST($C$2:C{r},$D$2:D{r},$E$2:E{r},14)", "0.000"),
            (9, f'=SV_BAND_LAST($E$2:E{r},"upper",20,2)', "0.000"),
            (10, f'=SV_BAND_LAST($E$2:E{r},"lower",20,2)', "0.000"),
            (11, f"=SV_CLOSEVOL_LAST($E$2:E{r},20,252)", "0.0%"),
        ):
            # Warm-up rows stay empty: a formula cell whose stored result is blank is
            # recalculated by LibreOffice on opening (#NAME? without the add-in).
            if i >= first[col]:
                ws.cell(row=r, column=col, value=text).number_format = fmt
    ws.freeze_panes = "B2"
    for letter, width in zip("ABCDEFGHIJK", (12, 9, 9, 9, 9, 9, 3, 10, 15, 15, 19), strict=True):
        ws.column_dimensions[letter].width = width

    st = wb.create_sheet("Settings")
    for r, (label, value, fmt) in enumerate([
        ("Account equity", 100_000, "#,##0"),
        ("Risk per trade", 0.01, "0.0%"),
        ("Stop distance (ATR multiples)", 2, "0.0"),
        ("Target distance (ATR multiples)", 3, "0.0"),
        ("Trailing stop (ATR multiples)", 3, "0.0"),
    ], start=1):
        st.cell(row=r, column=1, value=label)
        st.cell(row=r, column=2, value=value).number_format = fmt
    st.column_dimensions["A"].width = 32

    tr = wb.create_sheet("Trades")
    tr.append(["Trade date", "Side", "Entry", "ATR at entry", "Stop", "Target", "Size",
               "Outcome", "R"])
    for c in tr[1]:
        c.font = bold
    bars_ = ", ".join(_col(x) for x in "ABCDE")
    for k, (i, side) in enumerate(TRADES):
        r = k + 2
        tr.cell(row=r, column=1, value=days[i]).number_format = "yyyy-mm-dd"
        tr.cell(row=r, column=2, value=side)
        tr.cell(row=r, column=3, value=float(p["close"][i])).number_format = "0.000"
        tr.cell(row=r, column=4, value=(
            f"=SV_ATR_ON(A{r}, {_col('A')}, {_col('C')}, {_col('D')}, {_col('E')}, 14)"
        )).number_format = "0.000"
        tr.cell(row=r, column=5, value=f"=SV_STOP(C{r}, D{r}, Settings!$B$3, B{r})")
        tr.cell(row=r, column=6, value=f"=SV_TARGET(C{r}, D{r}, Settings!$B$4, B{r})")
        tr.cell(row=r, column=7, value=f"=SV_SIZE(Settings!$B$1, Settings!$B$2, C{r}, E{r})")
        trail = 'Settings!$B$5, 14, "atr"'  # the trailing stop the fill's review uses too
        tr.cell(row=r, column=8, value=(
            f'=SV_OUTCOME({bars_}, A{r}, C{r}, B{r}, E{r}, F{r}, "result", {trail})'))
        tr.cell(row=r, column=9, value=(
            f'=SV_OUTCOME({bars_}, A{r}, C{r}, B{r}, E{r}, F{r}, "r", {trail})'))
        for c in (5, 6):
            tr.cell(row=r, column=c).number_format = "0.000"
        tr.cell(row=r, column=9).number_format = "0.00"
    for letter, width in zip("ABCDEFGHI", (12, 7, 9, 12, 9, 9, 8, 10, 7), strict=True):
        tr.column_dimensions[letter].width = width
    # openpyxl asks for a full recalculation on open by default, which would replace the
    # stored results with errors wherever the add-in is missing.
    wb.calculation.fullCalcOnLoad = False
    wb.save(path)


def store_results(raw: Path, out: Path) -> list[str]:
    """Evaluate every sheetvol formula and store the results; return problems found."""
    pkg = Package.open(raw)
    cells = pkg.formula_cells()
    results = formulas.evaluate_cells(cells, formulas.package_resolver(pkg),
                                      date1904=pkg.date1904)
    edits: list = []
    problems: list[str] = []
    for fc in cells:
        value = results[(fc.sheet, fc.row, fc.col)]
        if isinstance(value, formulas.FormulaError):
            problems.append(f"{fc.sheet}!R{fc.row}C{fc.col}: {value}")
        elif isinstance(value, np.ndarray):
            edits.append(SpillResult(fc.sheet, fc.row, fc.col, fc.formula,
                                     np.asarray(value, dtype=np.float64), "0.000"))
        else:
            if value is None or (isinstance(value, float) and not math.isfinite(value)):
                # A formula cell without a stored value is recalculated on opening by
                # LibreOffice (#NAME? without the add-in); empty text shows as blank.
                value = ""
            edits.append(CellResult(fc.sheet, fc.row, fc.col, value))
    write_package(pkg, out, edits)
    return problems


def main(argv: list[str] | None = None) -> int:
    """Build the template; print what was stored."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--out", type=Path, default=OUT)
    ns = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="sheetvol-template-") as tmp:
        raw = Path(tmp) / "raw.xlsx"
        raw_workbook(raw)
        problems = store_results(raw, ns.out)
    for line in problems:
        print("not evaluated:", line, file=sys.stderr)
    print(f"wrote {ns.out}")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
