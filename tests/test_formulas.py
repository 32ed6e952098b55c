"""The headless evaluator of sheetvol formulas typed into cells, on real .xlsx files.

Workbooks are written with openpyxl (formulas typed as text, in every form a
spreadsheet program stores them), then read back two ways: with openpyxl and
with the fill's own reader (sheetvol.workbook.package). Expected numbers come
from calling the kernels directly on the same invented prices; outside
references for the kernels themselves are in their own tests, plus pandas
here for the simple average (rolling mean) and the population deviation
(rolling std, ddof=0).
"""

from __future__ import annotations

import datetime as dt
import math
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from openpyxl.utils.datetime import CALENDAR_MAC_1904

from sheetvol.core.dispersion import dispersion
from sheetvol.core.ranges import average_true_range
from sheetvol.core.regime import percentile_rank
from sheetvol.functions.evaluator import (
    Call,
    FormulaError,
    evaluate,
    evaluate_cells,
    function_name,
    mentions_sheetvol,
    openpyxl_resolver,
    package_resolver,
    parse,
    parse_reference,
)

N = 120
FIRST = dt.datetime(2025, 1, 6)


def prices(seed: int = 21) -> dict[str, np.ndarray]:
    """Invented daily bars."""
    rng = np.random.default_rng(seed)
    close = 50 * np.exp(np.cumsum(rng.normal(0, 0.012, N)))
    open_ = np.r_[50.0, close[:-1]] * np.exp(rng.normal(0, 0.003, N))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.004, N)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.004, N)))
    return {"open": open_, "high": high, "low": low, "close": close}


P = prices()
DATES = [FIRST + dt.timedelta(days=i) for i in range(N)]
ATR14 = average_true_range(P["high"], P["low"], P["close"], 14)
HLC = "Prices!C2:C121,Prices!D2:D121,Prices!E2:E121"

# (formula typed into Log!<cell>, expected value or column)
FORMS = {
    "plain": ("=SV_DEVIATION(Prices!E2:E121,14)", dispersion(P["close"], 14)),
    "future-function prefix, absolute refs": (
        '=_xludf.SV_DEVIATION(Prices!$E$2:$E$121,14,"exponential")',
        dispersion(P["close"], 14, "exponential")),
    "external-book prefix": (f"=[1]!SV_ATR_LAST({HLC})", ATR14[-1]),
    "add-in file prefix, lower case, whole columns": (
        "='sheetvol.xlam'!sv_atr(Prices!C:C,Prices!D:D,Prices!E:E,14)",
        np.r_[np.nan, ATR14]),
    "quoted sheet name": ("=SV_AVERAGE_LAST('My Sheet'!B2:B121, 5)",
                          pd.Series(P["close"]).rolling(5).mean().iloc[-1]),
    "nested series call": (f"=SV_VOLRANK(SV_ATR({HLC},14),20)", percentile_rank(ATR14, 20)),
    "nested scalar call": (f'=SV_STOP(Prices!E121, SV_ATR_LAST({HLC},14), 2, "long")',
                           P["close"][-1] - 2 * ATR14[-1]),
    "arithmetic and unary minus": ("=-SV_DEVIATION_LAST(Prices!E2:E121,14)/2+1",
                                   1 - dispersion(P["close"], 14)[-1] / 2),
    "percent": ("=SV_AVERAGE_LAST(Prices!E2:E121,5)*10%",
                pd.Series(P["close"]).rolling(5).mean().iloc[-1] / 10),
    "as-of date in a cell": ("=SV_DEVIATION_ON(B1, Prices!A2:A121, Prices!E2:E121, 14)",
                             dispersion(P["close"], 14)[60]),
    "omitted argument takes the default": ("=SV_DEVIATION_LAST(Prices!E2:E121,,)",
                                           dispersion(P["close"], 14)[-1]),
}
ERRORS = {
    "=SQRT(SV_ATR_LAST(Prices!C2:C9,Prices!D2:D9,Prices!E2:E9))":
        "cannot evaluate SQRT(...): SQRT is not evaluated headless (only sheetvol functions "
        "and DATE, ROUND",
    "=SV_AVERAGE(Closes, 5)": "cannot evaluate Closes: defined names are not supported",
    "=SV_AVERAGE(Quotes[Close], 5)": "cannot evaluate Quotes[Close]: table references",
    "=SV_NOPE(Prices!E2:E9)": "cannot evaluate SV_NOPE(...): no sheetvol function named SV_NOPE",
    "=SV_AVERAGE(Prices!E2:E121, 0)": "SV_AVERAGE: period must be a whole number from 1",
    "=SV_AVERAGE({1,2,3},2)": "array constants",
    "=SV_AVERAGE(Prices!E2:E9 Prices!E3:E9,2)": "range intersection",
    "=SV_ATR_LAST(Prices!C2:D121,Prices!D2:D121,Prices!E2:E121)":
        "SV_ATR_LAST: high must be one column",
    "=SV_AVERAGE(Prices!E2:E121,2)^2": "the operator '^' is not supported",
    "=SV_AVERAGE([other.xlsx]Data!E2:E9,2)": "other workbooks",
    "=SV_DEVIATION_ON(B1, Prices!A2:A121, Prices!E2:E60)": "SV_DEVIATION_ON: dates has 120 rows",
}


def build(path: Path, *, date1904: bool = False) -> Path:
    wb = openpyxl.Workbook()
    if date1904:
        wb.epoch = CALENDAR_MAC_1904
    ws = wb.active
    ws.title = "Prices"
    ws.append(["Date", "Open", "High", "Low", "Close"])
    for i in range(N):
        ws.append([DATES[i], P["open"][i], P["high"][i], P["low"][i], P["close"][i]])
    ws["J1"] = 5
    ws["H2"] = "=SV_AVERAGE_LAST(E2:E121, J1)"  # same-sheet references
    my = wb.create_sheet("My Sheet")
    my["B1"] = "Close copy"
    for i in range(N):
        my.cell(row=i + 2, column=2, value=P["close"][i])
    log = wb.create_sheet("Log")
    log["B1"] = DATES[60] + dt.timedelta(hours=20)  # between bars 60 and 61
    for row, (formula, _) in enumerate(FORMS.values(), start=2):
        log.cell(row=row, column=1, value=formula)
    for row, formula in enumerate(ERRORS, start=2):
        log.cell(row=row, column=3, value=formula)
    wb.save(path)
    return path


@pytest.fixture(scope="module")
def book(tmp_path_factory) -> Path:
    return build(tmp_path_factory.mktemp("formulas") / "typed.xlsx")


def check(got, expected):
    if isinstance(expected, np.ndarray):
        assert isinstance(got, np.ndarray) and got.shape == expected.shape
        np.testing.assert_array_equal(np.isnan(got), np.isnan(expected))
        np.testing.assert_allclose(got, expected, rtol=1e-12)
    else:
        assert got == pytest.approx(float(expected), rel=1e-12)


@pytest.mark.parametrize("label", list(FORMS))
def test_forms_read_with_openpyxl(book, label):
    formulas = openpyxl.load_workbook(book)
    values = openpyxl.load_workbook(book, data_only=True)
    row = list(FORMS).index(label) + 2
    text = formulas["Log"].cell(row=row, column=1).value
    assert text == FORMS[label][0]
    assert mentions_sheetvol(text)
    got = evaluate(text, openpyxl_resolver(values), current_sheet="Log")
    check(got, FORMS[label][1])


def test_same_sheet_references_and_a_period_from_a_cell(book):
    wb = openpyxl.load_workbook(book)
    text = wb["Prices"]["H2"].value
    got = evaluate(text, openpyxl_resolver(openpyxl.load_workbook(book, data_only=True)),
                   current_sheet="Prices")
    assert got == pytest.approx(pd.Series(P["close"]).rolling(5).mean().iloc[-1], rel=1e-12)


@pytest.mark.parametrize("text", list(ERRORS))
def test_what_cannot_be_evaluated_says_why(book, text):
    values = openpyxl.load_workbook(book, data_only=True)
    with pytest.raises(FormulaError) as err:
        evaluate(text, openpyxl_resolver(values), current_sheet="Log")
    assert ERRORS[text] in str(err.value)


def test_defined_names_when_given():
    def cells(sheet, top, left, bottom, right):
        assert sheet == "Prices" and (top, left, bottom, right) == (2, 5, 121, 5)
        return [[x] for x in P["close"].tolist()]
    got = evaluate("=SV_AVERAGE_LAST(Closes, 5)", cells, names={"closes": "Prices!$E$2:$E$121"})
    assert got == pytest.approx(pd.Series(P["close"]).rolling(5).mean().iloc[-1], rel=1e-12)


def test_the_fill_reader_finds_and_evaluates_the_same_formulas(book):
    # The fill reads with sheetvol.workbook.package: stored results, raw serial dates.
    package_mod = pytest.importorskip("sheetvol.workbook.package")
    pkg = package_mod.Package.open(book)
    found = {(fc.sheet, fc.row, fc.col): fc for fc in pkg.formula_cells()}
    resolve = package_resolver(pkg)
    for row, (formula, expected) in enumerate(FORMS.values(), start=2):
        fc = found[("Log", row, 1)]
        assert "=" + fc.formula == formula
        check(evaluate(fc.formula, resolve, current_sheet=fc.sheet, date1904=pkg.date1904),
              expected)


def test_1904_workbook_dates(tmp_path):
    package_mod = pytest.importorskip("sheetvol.workbook.package")
    path = build(tmp_path / "mac.xlsx", date1904=True)
    pkg = package_mod.Package.open(path)
    assert pkg.date1904
    text = FORMS["as-of date in a cell"][0]
    got = evaluate(text, package_resolver(pkg), current_sheet="Log", date1904=True)
    assert got == pytest.approx(dispersion(P["close"], 14)[60], rel=1e-12)
    # A date typed as text is absolute; the dates column holds 1904 serials. Only with
    # the workbook's date system do the two meet on the right bar. Read as 1900 serials
    # the bars would seem 1,462 days earlier, all before the date: the last bar is used.
    typed = '=SV_DEVIATION_ON("' + DATES[60].strftime("%Y-%m-%d") + '", Prices!A2:A121, ' \
        "Prices!E2:E121, 14)"
    right = evaluate(typed, package_resolver(pkg), current_sheet="Log", date1904=True)
    assert right == pytest.approx(dispersion(P["close"], 14)[60], rel=1e-12)
    wrong = evaluate(typed, package_resolver(pkg), current_sheet="Log", date1904=False)
    assert wrong == pytest.approx(dispersion(P["close"], 14)[-1], rel=1e-12)
    assert wrong != pytest.approx(right, rel=1e-6)


def test_whole_column_result_is_a_column_and_pandas_agrees():
    # Reference: pandas rolling(14).std(ddof=0).
    def cells(sheet, top, left, bottom, right):
        assert bottom is None  # whole column: the resolver reads to the last used row
        return [["Close"]] + [[x] for x in P["close"].tolist()]
    got = evaluate("=SV_DEVIATION(E:E,14)", cells, current_sheet="Prices")
    ref = np.r_[np.nan, pd.Series(P["close"]).rolling(14).std(ddof=0).to_numpy()]
    np.testing.assert_allclose(got, ref, rtol=1e-10)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))


def test_scalar_function_over_ranges_gives_a_column():
    def cells(sheet, top, left, bottom, right):
        return [[100.0], [50.0], [None]] if left == 1 else [[2.0], [1.0], [1.0]]
    got = evaluate('=SV_STOP(A1:A3, B1:B3, 2, "long")', cells)
    # Hand-worked: 100 - 2*2 = 96, 50 - 2*1 = 48; the blank trade stays blank.
    np.testing.assert_array_equal(got, [96.0, 48.0, np.nan])


def test_scalar_over_ranges_keeps_good_rows_beside_a_bad_one():
    # Hand-worked: 100 - 2*2 = 96 and 60 - 2*1 = 58; the middle trade's volatility is
    # negative, so only its own row carries the message, and arithmetic on the column
    # leaves that row blank instead of failing the whole formula.
    def cells(sheet, top, left, bottom, right):
        return [[100.0], [50.0], [60.0]] if left == 1 else [[2.0], [-1.0], [1.0]]
    got = evaluate('=SV_STOP(A1:A3, B1:B3, 2, "long")', cells)
    assert got[0] == 96.0 and got[2] == 58.0
    assert got[1].startswith("SV_STOP: volatility must be")
    doubled = evaluate('=SV_STOP(A1:A3, B1:B3, 2, "long")*2', cells)
    np.testing.assert_array_equal(doubled, [192.0, np.nan, 116.0])


# -- parsing ---------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("token", "name"),
    [("SV_ATR(", "SV_ATR"), ("_xludf.SV_ATR(", "SV_ATR"), ("[1]!SV_ATR(", "SV_ATR"),
     ("'addin.xlam'!sv_atr_on(", "SV_ATR_ON"), ("sheetvol.xlam!SV_ATR(", "SV_ATR"),
     ("_xlfn.STDEV.P(", "STDEV.P")],
)
def test_function_name_forms(token, name):
    assert function_name(token) == name


def test_mentions_sheetvol():
    assert mentions_sheetvol("=[1]!SV_ATR(A1:A9,B1:B9,C1:C9)")
    assert mentions_sheetvol("ROUND(_xludf.sv_deviation(E2:E9,5),2)")
    assert not mentions_sheetvol('=CONCAT("SV_ATR(", A1)')
    assert not mentions_sheetvol("=SUM(SV_RANGE)")  # a defined name, not a call
    assert not mentions_sheetvol("=SUM(A1:A3)")


@pytest.mark.parametrize(
    ("text", "sheet", "box"),
    [
        ("A1", None, (1, 1, 1, 1)),
        ("$B$2:$C$10", None, (2, 2, 10, 3)),
        ("C10:A2", None, (2, 1, 10, 3)),
        ("Prices!E2:E300", "Prices", (2, 5, 300, 5)),
        ("'My Sheet'!E2", "My Sheet", (2, 5, 2, 5)),
        ("'It''s'!A1:A2", "It's", (1, 1, 2, 1)),
        ("E:E", None, (1, 5, None, 5)),
        ("Prices!$C:$E", "Prices", (1, 3, None, 5)),
        ("2:3", None, (2, 1, 3, None)),
    ],
)
def test_parse_reference(text, sheet, box):
    ref = parse_reference(text)
    assert ref.sheet == sheet
    assert (ref.top, ref.left, ref.bottom, ref.right) == box


def test_parse_tree():
    node = parse("SV_STOP(E9, SV_ATR_LAST(C2:C9,D2:D9,E2:E9), 2)")
    assert isinstance(node, Call) and node.name == "SV_STOP"
    assert isinstance(node.args[1], Call) and node.args[1].name == "SV_ATR_LAST"


def test_bare_range_and_literal_top_level():
    def cells(sheet, top, left, bottom, right):
        return [[7.0]]
    assert evaluate("=A1", cells) == 7.0
    assert evaluate("=1+2*3", cells) == 7.0
    assert math.isnan(evaluate("=SV_AVERAGE(A1:A1, 2)", cells)[0])


# -- many cells ----------------------------------------------------------------------------
def test_evaluate_cells_orders_dependencies_and_overlays_spills(tmp_path):
    # A trade log: ATR at entry (an _ON formula), then a stop reading that cell; and a
    # whole-column ATR whose spilled values a _LAST formula reads. openpyxl-written files
    # store no results, so without ordering the later formulas would read blanks.
    from types import SimpleNamespace

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Prices"
    ws.append(["Date", "Open", "High", "Low", "Close"])
    for i in range(N):
        ws.append([DATES[i], P["open"][i], P["high"][i], P["low"][i], P["close"][i]])
    path = tmp_path / "log.xlsx"
    wb.save(path)
    resolve = openpyxl_resolver(openpyxl.load_workbook(path, data_only=True))
    cells = [
        SimpleNamespace(sheet="Log", row=2, col=5, formula='SV_STOP(C2, D2, 2, "long")'),
        SimpleNamespace(sheet="Log", row=2, col=4,
                        formula="SV_ATR_ON(A2, Prices!A2:A121, Prices!C2:C121, Prices!D2:D121,"
                                " Prices!E2:E121, 14)"),
        SimpleNamespace(sheet="Prices", row=2, col=9, formula="SV_AVERAGE_LAST(H2:H121, 3)"),
        SimpleNamespace(sheet="Prices", row=2, col=8, formula="SV_ATR(C2:C121,D2:D121,E2:E121)"),
        SimpleNamespace(sheet="Log", row=3, col=1, formula="SV_STOP(A3, B3)"),
        SimpleNamespace(sheet="Log", row=3, col=2, formula="SV_STOP(B3, A3)"),
    ]
    log_values = {(2, 1): DATES[70], (2, 3): 55.0}

    def read(sheet, top, left, bottom, right):
        if sheet == "Log":
            return [[log_values.get((r, c)) for c in range(left, right + 1)]
                    for r in range(top, bottom + 1)]
        return resolve(sheet, top, left, bottom, right)

    out = evaluate_cells(cells, read)
    assert out[("Log", 2, 4)] == pytest.approx(ATR14[70], rel=1e-12)
    assert out[("Log", 2, 5)] == pytest.approx(55.0 - 2 * ATR14[70], rel=1e-12)
    np.testing.assert_allclose(out[("Prices", 2, 8)], ATR14, rtol=1e-12)
    assert out[("Prices", 2, 9)] == pytest.approx(ATR14[-3:].mean(), rel=1e-12)
    for key in (("Log", 3, 1), ("Log", 3, 2)):
        assert isinstance(out[key], FormulaError) and "circular" in str(out[key])


def test_docstring_examples():
    import doctest

    from sheetvol import addin
    from sheetvol.functions import calling
    from sheetvol.functions import convert as _convert
    from sheetvol.functions import evaluator as formulas

    for module in (formulas, calling, _convert, addin):
        result = doctest.testmod(module)
        assert result.failed == 0 and result.attempted > 0, module.__name__


# -- the template workbook --------------------------------------------------------------------
TEMPLATE = Path(__file__).resolve().parent.parent / "workbooks" / "template.xlsx"


@pytest.fixture(scope="module")
def template():
    if not TEMPLATE.exists():
        pytest.skip("workbooks/template.xlsx not built (python workbooks/make_template.py)")
    return TEMPLATE


def test_template_stored_results_are_current(template):
    # Every stored result equals a fresh headless evaluation of its formula.
    from sheetvol.functions.evaluator import evaluate_cells
    from sheetvol.workbook.package import Package

    pkg = Package.open(template)
    cells = pkg.formula_cells()
    assert len(cells) > 900
    fresh = evaluate_cells(cells, package_resolver(pkg), date1904=pkg.date1904)
    stored = openpyxl.load_workbook(template, data_only=True)
    for fc in cells:
        value = fresh[(fc.sheet, fc.row, fc.col)]
        assert not isinstance(value, (FormulaError, np.ndarray)), (fc, value)
        kept = stored[fc.sheet].cell(row=fc.row, column=fc.col).value
        if isinstance(value, str):
            assert kept == value
        else:
            assert kept == pytest.approx(value, rel=1e-15), fc


def test_template_trade_levels_follow_the_settings(template):
    # Hand relations from the Settings sheet: equity 100,000, risk 1% (1,000 a trade),
    # stop 2 ATR and target 3 ATR from entry, size = floor(1,000 / |entry - stop|).
    wb = openpyxl.load_workbook(template, data_only=True)
    rows = list(wb["Trades"].iter_rows(min_row=2, values_only=True))
    assert len(rows) == 8
    for _date, side, entry, atr, stop, target, size, outcome, r in rows:
        sign = 1 if side == "long" else -1
        assert stop == pytest.approx(entry - sign * 2 * atr, rel=1e-12)
        assert target == pytest.approx(entry + sign * 3 * atr, rel=1e-12)
        assert size == math.floor(1000 / abs(entry - stop))
        assert outcome in ("stop", "target", "trail", "closed", "open", "ambiguous")
        if outcome == "stop":
            assert r <= -1 + 1e-9  # a stop costs at least 1 R (more when it gaps through)
        if outcome == "target":
            assert r >= 1.5 - 1e-9  # 3 ATR of reward for 2 ATR of risk


@pytest.mark.slow
def test_template_shows_numbers_in_libreoffice(template, libreoffice):
    # LibreOffice opens the template without the add-in: no cell may show an error.
    converted = libreoffice(template)
    wb = openpyxl.load_workbook(converted, data_only=True)
    errors = [f"{ws.title}!{c.coordinate}" for ws in wb.worksheets for row in ws.iter_rows()
              for c in row if isinstance(c.value, str) and c.value.startswith("#")]
    assert errors == []
    assert isinstance(wb["Trades"]["D2"].value, float)


# -- ordinary worksheet functions around sheetvol calls (issue 9) ---------------------------
# Inputs of the reference sheet: A1 2.5, A2 "abc", A3 blank, A4 -7.25, A5 a date, A6 "12",
# A7 0, A8 1234.5678.
REF_INPUTS = {1: 2.5, 2: "abc", 4: -7.25, 5: dt.datetime(2025, 3, 14), 6: "12", 7: 0,
              8: 1234.5678}
# Every formula here is recalculated by LibreOffice, the reference engine, and the values
# compared (test_worksheet_functions_agree_with_libreoffice). Logical cells are left out of
# ranges and of &: LibreOffice stores TRUE as the number 1 there, unlike the add-in's host;
# and two-digit years (DATE(25,1,1)), which LibreOffice reads by its own year window.
REFERENCE_FORMULAS = [
    "=ROUND(A1,0)", "=ROUND(-2.5,0)", "=ROUND(2.675,2)", "=ROUND(A8,-2)", "=ROUND(A4,1)",
    "=ROUNDUP(1.21,1)", "=ROUNDUP(-1.21,1)", "=ROUNDUP(A8,-1)", "=ROUNDDOWN(-1.29,1)",
    "=ROUNDDOWN(A8,2.7)", "=ROUND(A3,2)", "=ROUND(A6,0)",
    "=DATE(2025,3,14)", "=DATE(2025,14,-3)", "=DATE(2024,2,30)",
    "=DATE(2025,0,0)", "=A5-DATE(2025,1,1)",
    "=MIN(A1:A8,7)", "=MAX(A1:A8)", "=MIN(A1:A3)", "=MAX(A2:A3)", "=MIN(A6,3)", "=MAX(-1,A3)",
    "=ABS(A4)", "=ABS(-0)", "=ABS(A6)",
    '=IF(A1>2,"big","small")', '=IF(A4>2,"big","small")', "=IF(A3,1,2)", "=IF(A1<0,1)",
    "=IF(A7,1,2)", '=IF(A2="ABC",ROUND(A1,0),0)', "=IF(A1>0,,5)",
    '=IFERROR(1/0,"none")', "=IFERROR(A1/A7,-1)", "=IFERROR(A2+1,0)", "=IFERROR(A1*2,0)",
    "=IFERROR(ROUND(A2,1),A4)",
    "=AND(A1>1,A4<0)", "=AND(A1>1,A4>0)", "=OR(A1<0,A4<0)", "=OR(A7,A3=0)", "=AND(A1:A8)",
    "=OR(A7:A8)",
    '=A1&" x "&A4', '="ATR "&ROUND(A8,1)&" pts"', "=A3&A6", "=0.1+0.2&\"\"", "=A5&\"\"",
    '="a"<"B"', '=A2="ABC"', "=A3=0", '=A3=""', "=A1<>2.5", "=A4<=A1", "=A1>=A8", '=1<"1"',
    "=A6>5", "=A1=2.5", "=-A1+A4*2%",
    "=A2+1", "=A1/A7", "=ROUND(A2,1)", "=MIN(A1,A2)",
]


def _reference_book(path: Path) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Ref"
    for row, value in REF_INPUTS.items():
        ws.cell(row=row, column=1, value=value)
    for row, formula in enumerate(REFERENCE_FORMULAS, start=1):
        ws.cell(row=row, column=3, value=formula)
    wb.save(path)
    return path


def _ours(formula: str, resolver) -> object:
    try:
        return evaluate(formula, resolver, current_sheet="Ref")
    except FormulaError as exc:
        return exc


@pytest.mark.slow
def test_worksheet_functions_agree_with_libreoffice(tmp_path, libreoffice):
    # Source of every expected value: LibreOffice recalculating the same formulas on the
    # same inputs (it computes formulas that carry no stored result when it opens a file).
    book = _reference_book(tmp_path / "reference.xlsx")
    theirs = openpyxl.load_workbook(libreoffice(book), data_only=True)["Ref"]
    resolver = openpyxl_resolver(openpyxl.load_workbook(book, data_only=True))
    wrong = []
    for row, formula in enumerate(REFERENCE_FORMULAS, start=1):
        expected = theirs.cell(row=row, column=3).value
        got = _ours(formula, resolver)
        if isinstance(expected, str) and expected.startswith("#"):
            # An error value in LibreOffice: ours is not written (the formula stays).
            ok = isinstance(got, FormulaError) and expected in str(got)
        elif isinstance(expected, bool) or isinstance(got, bool):
            ok = got is expected or (not isinstance(got, bool) and got == expected)
        elif isinstance(expected, (int, float)):
            ok = isinstance(got, float) and got == pytest.approx(expected, rel=1e-15, abs=0)
        else:
            ok = got == expected
        if not ok:
            wrong.append(f"{formula}: LibreOffice {expected!r}, ours {got!r}")
    assert wrong == []


def test_worksheet_functions_around_sheetvol_calls(book):
    resolver = openpyxl_resolver(openpyxl.load_workbook(book, data_only=True))
    atr = float(ATR14[-1])
    # Hand rule for the expected values: ROUND rounds halves away from zero on the decimal
    # text of the number (Python's decimal ROUND_HALF_UP on repr), as spreadsheets do.
    from decimal import ROUND_HALF_UP, Decimal
    rounded = float(Decimal(repr(atr)).quantize(Decimal("0.01"), rounding=ROUND_HALF_UP))
    cases = {
        f"=ROUND(SV_ATR_LAST({HLC},14),2)": rounded,
        f'=IF(SV_ATR_LAST({HLC},14)>0,"wide","narrow")': "wide",
        f"=MAX(SV_ATR_LAST({HLC},14),1000)": 1000.0,
        f"=MIN(SV_ATR_LAST({HLC},14),1000)": atr,
        f"=ABS(-SV_ATR_LAST({HLC},14))": atr,
        f'="ATR "&ROUND(SV_ATR_LAST({HLC},14),2)': f"ATR {rounded:g}",
        f"=AND(SV_ATR_LAST({HLC},14)>0,SV_ATR_LAST({HLC},14)<1000)": True,
        # DATE(2025,3,7) is bar 60 (FIRST is 2025-01-06).
        "=SV_DEVIATION_ON(DATE(2025,3,7),Prices!A2:A121,Prices!E2:E121,14)":
            float(dispersion(P["close"], 14)[60]),
        "=IFERROR(ROUND(SV_AVERAGE_LAST(Prices!E2:E121,0),2),-1)": -1.0,
        # IF computes only the branch it takes: the bad call on the other one is not met.
        "=IF(FALSE,SV_AVERAGE_LAST(Prices!E2:E121,0),5)": 5.0,
    }
    for formula, expected in cases.items():
        got = evaluate(formula, resolver, current_sheet="Log")
        assert got == (pytest.approx(expected, rel=1e-12) if isinstance(expected, float)
                       else expected), formula
    rounded_column = evaluate(f"=ROUND(SV_ATR({HLC},14),3)", resolver, current_sheet="Log")
    expected_column = [float(Decimal(repr(v)).quantize(Decimal("0.001"), rounding=ROUND_HALF_UP))
                       if v == v else math.nan for v in ATR14.tolist()]
    np.testing.assert_array_equal(rounded_column, expected_column)


def test_a_bad_argument_gives_the_add_in_message(book):
    # One policy: the message text the live add-in shows for the same call.
    from sheetvol import addin
    from sheetvol.functions.evaluator import ArgumentMessage
    from sheetvol.functions.registry import get

    udf = addin.make_udf("SV_AVERAGE_LAST", get("SV_AVERAGE"), "last")
    shown = udf(P["close"].reshape(-1, 1).tolist(), 0)
    assert shown.startswith("SV_AVERAGE_LAST: period must be a whole number from 1")
    resolver = openpyxl_resolver(openpyxl.load_workbook(book, data_only=True))
    for formula in ("=SV_AVERAGE_LAST(Prices!E2:E121,0)",
                    "=ROUND(SV_AVERAGE_LAST(Prices!E2:E121,0),2)"):
        with pytest.raises(ArgumentMessage) as err:
            evaluate(formula, resolver, current_sheet="Log")
        assert err.value.text == shown
    # The add-in's text is a value, not an error: IFERROR passes it on unchanged.
    with pytest.raises(ArgumentMessage) as err:
        evaluate("=IFERROR(SV_AVERAGE_LAST(Prices!E2:E121,0),0)", resolver, current_sheet="Log")
    assert err.value.text == shown


def test_fill_writes_values_messages_and_lists_what_stays_a_formula(tmp_path):
    from sheetvol.fill.job import FillOptions, fill_file
    from sheetvol.fill.notes import NOTES_SHEET

    src = build(tmp_path / "typed.xlsx")
    wb = openpyxl.load_workbook(src)
    del wb["Log"]  # its whole-column forms spill over one another; a plain log instead
    log = wb.create_sheet("Log")
    log["E2"] = f"=ROUND(SV_ATR_LAST({HLC},14),2)"
    log["E3"] = "=SV_AVERAGE_LAST(Prices!E2:E121,0)"
    log["E4"] = f"=SQRT(SV_ATR_LAST({HLC},14))"
    log["E5"] = "=SV_SIZE(100000,1,100,95)"
    wb.save(src)
    out = fill_file(src, FillOptions(output=tmp_path / "out.xlsx", sheets=("Prices",))).output
    values = openpyxl.load_workbook(out)
    got = values["Log"]
    from decimal import ROUND_HALF_UP, Decimal
    assert got["E2"].value == float(Decimal(repr(float(ATR14[-1]))).quantize(
        Decimal("0.01"), rounding=ROUND_HALF_UP))
    assert got["E3"].value.startswith("SV_AVERAGE_LAST: period must be a whole number from 1")
    assert got["E4"].value == f"=SQRT(SV_ATR_LAST({HLC},14))"  # stays a formula
    assert got["E5"].value.startswith("SV_SIZE: risk must be a number above 0")
    notes = [[c for c in row if c is not None]
             for row in values[NOTES_SHEET].iter_rows(values_only=True)]
    cells = {"Log!E2", "Log!E3", "Log!E4", "Log!E5"}
    listed = {row[0]: row for row in notes if row and row[0] in cells}
    assert set(listed) == cells
    assert "SQRT is not evaluated headless" in " ".join(map(str, listed["Log!E4"]))
    assert "period must be a whole number from 1" in " ".join(map(str, listed["Log!E3"]))


def test_date_in_a_1904_workbook():
    # The 1904 system counts from 1904-01-01, 1,462 days after the 1900 system's day 0
    # (1899-12-30): DATE(2025,3,14) is 45730 in one (LibreOffice above) and 44268 in the other.
    def cells(sheet, top, left, bottom, right):
        return [[None]]

    assert evaluate("=DATE(2025,3,14)", cells, date1904=True) == 45730.0 - 1462


@pytest.mark.parametrize("text", ["=E1}", "=1e30)9", "=SV_RO)GERSSATCHELL_LAST()",
                                  "=A2:A}121", "=ROUNDUP}()"])
def test_a_closer_without_its_opener_is_a_formula_message(text):
    # Found by random formula text: the tokenizer (openpyxl's) fails with IndexError on a
    # ")" or "}" that closes nothing; the fill and the evaluator must answer in words.
    with pytest.raises(FormulaError, match="cannot read the formula"):
        parse(text)
