"""Every worksheet function through xlwings' own classic call path, as Excel on Windows calls it.

There is no spreadsheet program here. xlwings' open-source UDF module
(``xlwings.udfs``: ``call_udf``, its argument and result conversion) runs
as it does under Excel, with the Windows COM layer replaced by fakes shaped like
the values that layer hands over:

* a range is an object whose value is a tuple of row tuples (a single cell:
  the bare value), blank cells None, numbers floats, numbers stored as text
  str, date cells pywin32 datetimes (a datetime subclass with a UTC zone),
  error cells ints (``#N/A`` is 0x800A07FA, -2146826246; the numbers of
  ``xlwings._xlwindows.cell_errors``);
* an omitted optional argument is VBA's "missing" marker, -2147352572, which
  ``call_udf`` replaces by the argument's default;
* pywin32's ``win32com.client.VARIANT(vt, value)`` is mirrored by a class
  with the same two attributes, which pywin32 turns into a typed variant
  (VT_ERROR 10 with 0x800A07FA is Excel's #N/A).

What the spreadsheet receives is checked: rectangle and height, the "no
value" marker on warm-up and gap rows, messages as text, values against
the registry's Python call (the kernel) on the same bars. xlwings' PRO
modules (``xlwings/pro``, PolyForm Noncommercial or a commercial licence) are
not used, except by one opt-in check at the end, skipped by default.
"""

from __future__ import annotations

import asyncio
import datetime as dt
import importlib
import inspect
import math
import os
import sys
import types
from typing import Any

import numpy as np
import pytest

from sheetvol import addin
from sheetvol.functions.registry import FUNCTIONS, get, variant_params, worksheet_names

ALL = list(worksheet_names())
MISSING = -2147352572  # DISP_E_PARAMNOTFOUND: what VBA passes for an omitted Optional
NA_CODE = -2146826246  # #N/A as pywin32 reads it (0x800A07FA)
DIV0_CODE = -2146826281  # #DIV/0!
VT_ERROR = 10  # VARENUM value of an error variant (Windows SDK, wtypes.h)
SHEET_ROWS = 1_048_576
MODULE = "sheetvol_classic_udfs"


class ComRange:
    """A range argument as pywin32 hands it to call_udf (only what xlwings asks of it)."""

    def __init__(self, value: Any) -> None:
        self.value = value


class ComTime(dt.datetime):
    """pywin32's datetime: a subclass of datetime, carrying a UTC time zone."""


class Variant:
    """Shaped like pywin32's win32com.client.VARIANT: a type code and a value."""

    def __init__(self, vt: int, value: Any) -> None:
        self.varianttype = vt
        self.value = value


class _FakeRangeImpl:
    """xlwings' Windows Range implementation, reduced to what reading a UDF argument uses."""

    max_cells_per_read = None

    def __init__(self, xl: Any = None) -> None:
        self.xl = xl
        self.sheet = types.SimpleNamespace(
            book=types.SimpleNamespace(app=types.SimpleNamespace(engine=None, pid=0)))

    @property
    def raw_value(self) -> Any:
        return None if self.xl is None else self.xl.value


@pytest.fixture
def classic(monkeypatch):
    """call(name, *args): the function run by xlwings.udfs.call_udf with COM faked."""
    stubs = {m: types.ModuleType(m) for m in ("pythoncom", "pywintypes", "win32com",
                                               "win32com.client", "xlwings._xlwindows",
                                               "xlwings.com_server")}
    stubs["pythoncom"].CoInitialize = lambda: None
    stubs["pythoncom"].VT_ERROR = VT_ERROR
    stubs["win32com.client"].Dispatch = lambda *a, **k: None
    stubs["win32com.client"].VARIANT = Variant
    stubs["win32com"].client = stubs["win32com.client"]
    win = stubs["xlwings._xlwindows"]
    win.Range = _FakeRangeImpl
    win.is_range_instance = lambda a: isinstance(a, ComRange)
    win.BOOK_CALLER = None
    stubs["xlwings.com_server"].loop = asyncio.new_event_loop()
    for name, mod in stubs.items():
        monkeypatch.setitem(sys.modules, name, mod)
    import xlwings

    monkeypatch.setattr(xlwings, "_xlwindows", win, raising=False)
    # The desktop engine's entry (its cleaning and writing are not used by raw conversion).
    monkeypatch.setitem(xlwings.engines.engines_by_name, "excel",
                        types.SimpleNamespace(name="excel", type="desktop"))
    monkeypatch.delitem(sys.modules, "xlwings.udfs", raising=False)
    udfs = importlib.import_module("xlwings.udfs")
    module = types.ModuleType(MODULE)
    module.__file__ = addin.__file__
    module.__dict__.update(addin.make_udfs((udfs.xlfunc, udfs.xlarg, udfs.xlret),
                                           runtime="classic"))
    monkeypatch.setitem(sys.modules, MODULE, module)

    def call(name: str, *args: Any) -> Any:
        n = len(module.__dict__[name].__xlfunc__["args"])
        padded = (*args, *([MISSING] * (n - len(args))))  # VBA passes every declared argument
        return udfs.call_udf(MODULE, name, padded)

    yield call
    stubs["xlwings.com_server"].loop.close()
    sys.modules.pop("xlwings.udfs", None)


# -- invented bars, and the same bars as a whole column of a sheet ------------------------------
N = 120
GAPS = (40, 41, 77)  # blank cells
ERRORS = (60,)  # #N/A cells (a formula that found nothing), also gaps
TEXT_EVERY = 9  # every 9th price stored as text


def bars(n: int = N, seed: int = 3) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, n)))
    open_ = np.r_[100.0, close[:-1]] * np.exp(rng.normal(0, 0.003, n))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.004, n)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.004, n)))
    out = {"open": open_, "high": high, "low": low, "close": close, "prices": close,
           "values": close}
    for v in out.values():
        v[list(GAPS + ERRORS)] = np.nan
    return out


def com_column(a: np.ndarray, header: str | None = None, whole: bool = False) -> ComRange:
    """A column as COM reads it: rows of one cell, gaps None, errors ints, some text."""
    rows: list[tuple[Any]] = [] if header is None else [(header,)]
    for i, x in enumerate(a.tolist()):
        if i in ERRORS:
            rows.append((NA_CODE,))
        elif math.isnan(x):
            rows.append((None,))
        elif i % TEXT_EVERY == 4:
            rows.append((repr(x),))
        else:
            rows.append((x,))
    if whole:  # a whole-column reference, C:C; COM makes each row its own tuple
        blank = None
        rows += [(blank,) for _ in range(SHEET_ROWS - len(rows))]
    return ComRange(tuple(rows))


DAYS = [ComTime(2025, 1, 6, tzinfo=dt.timezone.utc) + dt.timedelta(days=i) for i in range(N)]
SERIALS = np.array([(d.replace(tzinfo=None) - dt.datetime(1899, 12, 30)).days for d in DAYS],
                   dtype=float)  # the 1900 date system counts days from 1899-12-30


def is_na(cell: Any) -> bool:
    return isinstance(cell, Variant) and cell.varianttype == VT_ERROR and cell.value == NA_CODE


def numbers(rows: list[list[Any]]) -> np.ndarray:
    """A result column read back: #N/A cells as NaN; anything else must be a float."""
    out = []
    for r in rows:
        assert len(r) == 1
        if is_na(r[0]):
            out.append(math.nan)
        else:
            assert isinstance(r[0], float) and math.isfinite(r[0]), r[0]
            out.append(r[0])
    return np.array(out)


def same(got: Any, ref: float, rel: float = 1e-12) -> None:
    if math.isnan(ref):
        assert is_na(got), got
    else:
        assert isinstance(got, float) and got == pytest.approx(ref, rel=rel, abs=1e-12), (got,
                                                                                          ref)


SERIES = [f for f in FUNCTIONS if f.shape == "series"]


# -- every series function: whole column, _LAST and _ON ---------------------------------------
@pytest.mark.parametrize("func", SERIES, ids=[f.name for f in SERIES])
def test_whole_column_reference_spills_as_tall_as_the_data(classic, func):
    data = bars()
    cols = [data[p.name] for p in func.columns]
    # The reference: the registry's Python call (the kernel, defaults) on the bars with a
    # leading NaN for the header row, which the column argument holds too.
    ref = func(*(np.r_[np.nan, c] for c in cols))
    rows = classic(func.name, *(com_column(c, header=p.name, whole=True)
                                for c, p in zip(cols, func.columns, strict=True)))
    assert isinstance(rows, list) and len(rows) == N + 1  # header + bars, not 1,048,576
    got = numbers(rows)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
    np.testing.assert_allclose(got, ref, rtol=0, atol=0)
    assert is_na(rows[0][0])  # the header row has no value
    assert is_na(rows[GAPS[0] + 1][0]) or not np.isnan(ref[GAPS[0] + 1])


@pytest.mark.parametrize("func", SERIES, ids=[f.name for f in SERIES])
def test_last_form_with_omitted_options_and_a_given_option(classic, func):
    data = bars()
    cols = [data[p.name] for p in func.columns]
    given = [com_column(c) for c in cols]
    same(classic(func.name + "_LAST", *given), func(*cols)[-1])
    window = next((p for p in func.options if p.name in ("period", "lookback")), None)
    if window is not None:  # an option typed as a literal, the rest omitted
        position = len(func.columns) + func.options.index(window)
        args: list[Any] = [*given] + [MISSING] * (position - len(given)) + [5.0]
        same(classic(func.name + "_LAST", *args), func(*cols, **{window.name: 5})[-1])
    # The last row a gap: no value, shown as #N/A.
    assert is_na(classic(func.name + "_LAST", *(com_column(c[:GAPS[0] + 1]) for c in cols)))


@pytest.mark.parametrize("func", SERIES, ids=[f.name for f in SERIES])
def test_on_form_with_com_dates(classic, func):
    data = bars()
    cols = [data[p.name] for p in func.columns]
    dates = ComRange(tuple((d,) for d in DAYS))
    ref = func(*cols)
    # A bar with every price usable: its own value (reference: the kernel on the column).
    k = 100
    assert all(math.isfinite(c[k]) for c in cols)
    same(classic(func.name + "_ON", DAYS[k], dates, *(com_column(c) for c in cols)), ref[k])
    # A date given as a serial number (a dynamic-array result) reads the same bar.
    same(classic(func.name + "_ON", SERIALS[k], dates, *(com_column(c) for c in cols)), ref[k])
    # Before the first bar: a message, as text.
    msg = classic(func.name + "_ON", ComTime(2024, 1, 1, tzinfo=dt.timezone.utc), dates,
                  *(com_column(c) for c in cols))
    assert isinstance(msg, str)
    assert msg.startswith(f"{func.name}_ON: no bar on or before 2024-01-01")


SCALAR_CASES = {
    # name: options after the columns, as typed in a cell ("date"/"entry"/... filled below)
    "SV_STOP": (105.2, 1.8, 2.0, "long"),
    "SV_TARGET": (105.2, 1.8, 3.0, "short"),
    "SV_SIZE": (250000.0, 0.01, 105.2, 101.6, 1.0, 1.0),
    "SV_RMULTIPLE": (100.0, 98.0, 106.0, "long"),
    "SV_TRAIL": ("date", "entry", "long", 2.0, 14.0, "atr"),
    "SV_OUTCOME": ("date", "entry", "long", "stop", "target", "r"),
}
SCALARS = [f for f in FUNCTIONS if f.shape == "scalar"]


@pytest.mark.parametrize("func", SCALARS, ids=[f.name for f in SCALARS])
def test_scalar_functions(classic, func):
    assert func.name in SCALAR_CASES, f"add a case for {func.name}"
    data = {k: np.nan_to_num(v, nan=100.0) for k, v in bars().items()}
    entry = float(data["close"][30])
    fill = {"date": DAYS[30], "entry": entry, "stop": entry * 0.97, "target": entry * 1.05}
    options = [fill.get(v, v) if isinstance(v, str) else v for v in SCALAR_CASES[func.name]]
    xl, py = [], []
    for p in func.columns:
        if p.kind == "dates":
            xl.append(ComRange(tuple((d,) for d in DAYS)))
            py.append(SERIALS)
        else:
            xl.append(ComRange(tuple((x,) for x in data[p.name].tolist())))
            py.append(data[p.name])
    py_options = [SERIALS[30] if isinstance(v, dt.datetime) else v for v in options]
    got = classic(func.name, *xl, *options)
    ref = func(*py, *py_options)
    if isinstance(ref, str):
        assert got == ref
    else:
        assert isinstance(got, float) and got == pytest.approx(float(ref), rel=1e-12)


def test_every_worksheet_name_is_reached_by_the_tests_above():
    names = {name for name, _, _ in ALL}
    covered = {f.name + s for f in SERIES for s in ("", "_LAST", "_ON")} | set(SCALAR_CASES)
    assert names == covered


# -- what the cells show ------------------------------------------------------------------------
def test_messages_arrive_as_short_text(classic):
    c = com_column(bars()["close"])
    for call, start in [
        (("SV_DEVIATION", c, 1.0), "SV_DEVIATION: period must be a whole number from 2"),
        (("SV_AVERAGE", c, 5.0, "weekly"), 'SV_AVERAGE: kind must be one of "simple"'),
        (("SV_ATR", c, c, ComRange(c.value[:-1])), "SV_ATR: the ranges differ in height"),
        (("SV_DEVIATION", ComRange(((1.0, 2.0), (3.0, 4.0)))), "SV_DEVIATION: prices must be"),
        (("SV_DEVIATION", ComRange(((1.0,), (True,)))), "SV_DEVIATION: prices item 2 is True"),
        # A period cell holding #DIV/0! (COM passes -2146826281): named, not read as -2e9.
        (("SV_DEVIATION", c, ComRange(DIV0_CODE)), "SV_DEVIATION: period is an error cell "
                                                   "(#DIV/0!)"),
    ]:
        out = classic(*call)
        assert isinstance(out, str) and out.startswith(start), out
        assert "\n" not in out and len(out) <= 255


def test_scalar_over_a_trade_log_marks_unfilled_rows_as_no_value(classic):
    # Hand-worked: 100 - 2 x 2 = 96 and 50 - 2 x 1 = 48 (typed as text); row 2 unfilled.
    entries = ComRange(((100.0,), (None,), ("50",)))
    vols = ComRange(((2.0,), (1.0,), (1.0,)))
    rows = classic("SV_STOP", entries, vols, 2.0, "long")
    assert rows[0] == [96.0] and rows[2] == [48.0] and is_na(rows[1][0])


def test_blanks_policy_empty_text(classic, monkeypatch):
    monkeypatch.setenv(addin.BLANKS_VARIABLE, "empty")
    rows = classic("SV_DEVIATION", com_column(bars()["close"]), 14.0)
    # 13 warm-up rows, then values; the gap rows hold empty text too.
    assert [r[0] for r in rows[:13]] == [""] * 13 and isinstance(rows[13][0], float)
    assert rows[GAPS[0]] == [""]
    assert classic("SV_DEVIATION_LAST", com_column(bars()["close"][:5]), 14.0) == ""
    monkeypatch.setenv(addin.BLANKS_VARIABLE, "zero")
    msg = classic("SV_DEVIATION_LAST", com_column(bars()["close"]), 14.0)
    assert msg.startswith("SV_DEVIATION_LAST: SHEETVOL_BLANKS='zero' is not one of na, empty")


def test_an_empty_one_cell_range_reads_the_same_on_both_paths(classic):
    # Classic: COM gives a one-cell range as its bare value, None when empty. The in-Excel
    # runtime passes an empty cell as nothing (None) too. Both: no value, not a message.
    assert is_na(classic("SV_DEVIATION_LAST", ComRange(None), 14.0))
    lite = addin.make_udf("SV_DEVIATION_LAST", get("SV_DEVIATION"), "last", runtime="lite")
    assert lite(None, 14.0) == "#N/A"
    # The whole-column form of one empty cell has nothing to spill: a message on both.
    msg = "SV_DEVIATION: prices hold no values (every cell is blank)"
    assert classic("SV_DEVIATION", ComRange(None), 14.0) == msg
    lite_col = addin.make_udf("SV_DEVIATION", get("SV_DEVIATION"), "column", runtime="lite")
    assert lite_col(None, 14.0) == msg


def test_a_row_range_gives_a_row(classic):
    close = bars()["close"]
    row = ComRange((tuple(None if math.isnan(x) else x for x in close.tolist()) + (None,) * 5,))
    out = classic("SV_AVERAGE", row, 5.0)
    ref = get("SV_AVERAGE")(close, 5)
    assert len(out) == 1 and len(out[0]) == N  # trailing blank cells cut here too
    got = np.array([math.nan if is_na(v) else v for v in out[0]])
    np.testing.assert_allclose(got, ref, rtol=0, atol=0)


def test_registration_asks_for_raw_values_on_the_classic_path(classic):
    info = sys.modules[MODULE].SV_ATR.__xlfunc__
    assert all(a["options"].get("convert") == "raw" for a in info["args"])
    assert info["ret"]["options"].get("convert") == "raw"


# -- opt-in: the in-Excel runtime's writer (xlwings PRO code) -------------------------------------
@pytest.mark.skipif(os.environ.get("SHEETVOL_CHECK_XLWINGS_PRO") != "1",
                    reason="opt-in: SHEETVOL_CHECK_XLWINGS_PRO=1, with your xlwings licence key")
def test_lite_writer_turns_the_marker_into_the_error_value():
    # Licence: xlwings/pro is dual-licensed, PolyForm Noncommercial 1.0.0 or the xlwings
    # PRO licence; this check only runs locally, on request, under the licence you hold.
    from xlwings.pro import _xlofficejs

    options = {"runtime": "1.4", "date_format": None}
    out = _xlofficejs.Engine.prepare_xl_data_element(
        addin.no_value_marker("lite", "na"), options)
    assert out == {"type": "Error", "errorType": "NotAvailable"}
    assert _xlofficejs.Engine.prepare_xl_data_element(
        addin.no_value_marker("lite", "empty"), options) == ""


def test_variant_params_cover_the_call_path_padding():
    # The padding above passes one value per declared argument, as the VBA wrapper does.
    for name, func, variant in ALL:
        assert len(variant_params(func, variant)) == len(
            inspect.signature(addin.UDFS[name]).parameters)


def test_the_path_is_told_by_where_the_module_is_imported(monkeypatch):
    # Plain Python (here) is "python"; inside xlwings' COM server, whose module is loaded
    # before it imports the UDF module, "classic".
    assert addin.RUNTIME == "python"
    assert addin._detect_runtime() == "python"
    monkeypatch.setitem(sys.modules, "xlwings.com_server", types.ModuleType("stub"))
    assert addin._detect_runtime() == "classic"
    monkeypatch.setattr(sys, "platform", "emscripten")
    assert addin._detect_runtime() == "lite"


def test_whole_columns_cut_the_same_in_the_add_in_and_the_headless_evaluator(classic, tmp_path):
    # One rule (sheetvol.functions.convert.data_height, applied jointly to the ranges of a
    # call): the evaluator on a saved workbook and the add-in on the same sheet's whole
    # columns give columns of the same height and values. Column C ends two rows above D
    # and E, and a styled-but-empty cell below the data holds nothing.
    import openpyxl

    from sheetvol.functions.evaluator import evaluate, openpyxl_resolver

    data = bars()
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Prices"
    ws.append(["High", "Low", "Close"])
    cols = {"high": data["high"].copy(), "low": data["low"].copy(),
            "close": data["close"].copy()}
    cols["high"][-2:] = np.nan
    for i in range(N):
        ws.append([None if math.isnan(cols[k][i]) else float(cols[k][i])
                   for k in ("high", "low", "close")])
    ws.cell(row=N + 30, column=1).number_format = "0.00"  # formatted, no value
    path = tmp_path / "prices.xlsx"
    wb.save(path)
    book = openpyxl.load_workbook(path, data_only=True)
    headless = evaluate("=SV_ATR(A:A, B:B, C:C, 14)", openpyxl_resolver(book),
                        current_sheet="Prices")
    live = classic("SV_ATR", *(com_column(cols[k], header=k, whole=True)
                               for k in ("high", "low", "close")), 14.0)
    assert len(live) == len(headless) == N + 1
    got = numbers(live)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(headless))
    # Equal to rounding: the saved workbook holds the prices as decimal text, which can
    # move their last bit.
    np.testing.assert_allclose(got, headless, rtol=1e-12)
