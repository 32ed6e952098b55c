"""The xlwings add-in: generated from the registry, called the way xlwings calls it.

There is no spreadsheet program here. The functions are called with the
values xlwings hands over (ranges declared ``ndim=2`` arrive as lists of rows;
blank and error cells as None; numbers as floats; numbers stored as text as
str; date cells as datetimes, dynamic-array dates as serial numbers), and
xlwings' Windows registration code (``xlwings.udfs``) is run against the
generated functions with the COM modules stubbed out, so what Import Functions
would read and the VBA it would write are checked too.

Outside references: TA-Lib ATR (Wilder) and pandas ``rolling(n).std(ddof=0)``.
"""

from __future__ import annotations

import datetime as dt
import importlib
import inspect
import io
import math
import re
import sys
import textwrap
import types
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import talib
import xlwings
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol import addin
from sheetvol.functions import calling
from sheetvol.functions.registry import FUNCTIONS, get, variant_params, worksheet_names

ALL = list(worksheet_names())
SERIES = [f for f in FUNCTIONS if f.shape == "series"]
DOCS = Path(__file__).resolve().parent.parent / "docs" / "functions.md"


def bars(n: int = 120, seed: int = 3) -> dict[str, np.ndarray]:
    """Invented OHLC bars (a geometric random walk)."""
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, n)))
    open_ = np.r_[100.0, close[:-1]] * np.exp(rng.normal(0, 0.003, n))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.004, n)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.004, n)))
    return {"open": open_, "high": high, "low": low, "close": close, "prices": close,
            "values": close}


def as_xlwings(a: np.ndarray, text_every: int = 7) -> list[list[object]]:
    """A column as xlwings passes it with ndim=2: rows of one cell; NaN cells as None,
    and every ``text_every``-th number stored as text (str)."""
    out: list[list[object]] = []
    for i, x in enumerate(a.tolist()):
        if math.isnan(x):
            out.append([None])
        elif i % text_every == 3:
            out.append([repr(x)])
        else:
            out.append([x])
    return out


def from_cells(rows: list[list[object]]) -> np.ndarray:
    return np.array([math.nan if r[0] is None else r[0] for r in rows], dtype=np.float64)


# -- generation ------------------------------------------------------------------------------
def test_module_imports_and_exports_every_worksheet_name():
    names = [name for name, _, _ in ALL]
    assert sorted(addin.UDFS) == sorted(names)
    for name in names:
        assert getattr(addin, name) is addin.UDFS[name]
        assert name in addin.__all__


@pytest.mark.parametrize(("name", "func", "variant"), ALL, ids=[n for n, _, _ in ALL])
def test_signature_help_and_options(name, func, variant):
    udf = addin.UDFS[name]
    params = variant_params(func, variant)
    sig = inspect.signature(udf)
    assert list(sig.parameters) == [addin.addin_arg_name(p.name) for p in params]
    assert udf.__name__ == name
    assert 0 < len(udf.__doc__) <= 255
    meta = udf.__sheetvol__
    assert meta["func"]["category"] == "sheetvol"
    assert meta["func"]["call_in_wizard"] is False
    for p, arg_name in zip(params, sig.parameters, strict=True):
        opts = meta["args"][arg_name]
        assert 0 < len(opts["doc"]) <= 255
        assert p.help.split()[0] in opts["doc"]
        assert opts.get("ndim") == (2 if p.is_column else None)
        default = sig.parameters[arg_name].default
        if not p.required:
            assert default == p.default


def test_argument_names_are_valid_vba_names():
    # VBA identifiers: a letter, then letters, digits or underscores; no keyword (xlwings
    # issues #563/#384: a keyword breaks Import Functions for the whole module). Excel's
    # function dialog breaks when argument count + name lengths exceed 254 (xlwings #1489).
    for name, udf in addin.UDFS.items():
        params = list(inspect.signature(udf).parameters)
        for p in params:
            assert re.fullmatch(r"[A-Za-z][A-Za-z0-9_]{0,30}", p), (name, p)
            assert p.lower() not in addin.VBA_KEYWORDS, (name, p)
        assert len(params) + sum(map(len, params)) <= 254, name


def test_xlwings_decorators_are_inert_here_and_module_still_works():
    assert addin.XLWINGS is True
    if not sys.platform.startswith("win"):
        def f(x):
            return x
        assert xlwings.func(category="sheetvol", call_in_wizard=False)(f) is f
        assert xlwings.arg("x", ndim=2, doc="d")(f) is f


@pytest.fixture
def windows_udfs(monkeypatch):
    """xlwings' Windows UDF registration module, importable with COM stubbed out."""
    for mod in ("pythoncom", "pywintypes", "win32com", "win32com.client"):
        monkeypatch.setitem(sys.modules, mod, types.ModuleType(mod))
    sys.modules["pythoncom"].CoInitialize = lambda: None
    sys.modules["win32com.client"].Dispatch = lambda *a, **k: None
    sys.modules["win32com"].client = sys.modules["win32com.client"]
    monkeypatch.delitem(sys.modules, "xlwings.udfs", raising=False)
    udfs = importlib.import_module("xlwings.udfs")
    yield udfs
    sys.modules.pop("xlwings.udfs", None)


def test_windows_registration_sees_help_options_and_writes_valid_vba(windows_udfs):
    u = windows_udfs
    built = addin.make_udfs((u.xlfunc, u.xlarg, u.xlret))
    for name, f in built.items():
        info = f.__xlfunc__
        assert info["name"] == name and info["category"] == "sheetvol"
        assert info["call_in_wizard"] is False
        assert len(info["ret"]["doc"]) <= 255
        for a in info["args"]:
            assert len(a["doc"]) <= 255 and not a["doc"].startswith("Positional argument")
    atr = built["SV_ATR"].__xlfunc__
    assert [a["name"] for a in atr["args"]] == [
        "high", "low", "close_price", "period", "smoothing", "seed", "first_bar"
    ]
    assert atr["args"][0]["options"] == {"ndim": 2}
    assert atr["args"][3]["optional"] == 14
    # The VBA wrapper Import Functions would write.
    module = types.ModuleType("sheetvol_addin_copy")
    module.__dict__.update(built)
    buf = io.StringIO()
    u.generate_vba_wrapper("sheetvol.addin", module, buf, types.SimpleNamespace(Name="a.xlam"))
    vba = buf.getvalue()
    assert (
        "Function SV_ATR(high, low, close_price, Optional period, Optional smoothing, "
        "Optional seed, Optional first_bar)"
    ) in vba
    assert vba.count("End Function") == len(built)
    for header in re.findall(r"^Function \w+\((.*)\)$", vba, flags=re.M):
        for arg in header.split(", "):
            assert arg.replace("Optional ", "").lower() not in addin.VBA_KEYWORDS


# -- numbers: the add-in against the registry and outside references --------------------------
@pytest.mark.parametrize("func", SERIES, ids=[f.name for f in SERIES])
def test_whole_column_equals_the_kernel_with_blanks_and_text_numbers(func):
    data = bars()
    clean = {k: v.copy() for k, v in data.items()}
    for v in clean.values():
        v[[40, 41, 77]] = np.nan  # blank cells (gaps)
    cols = {p.name: clean[p.name] for p in func.columns}
    ref = func(**cols)  # the registry's Python call: the kernel with defaults
    rows = addin.UDFS[func.name](*(as_xlwings(cols[p.name]) for p in func.columns))
    assert isinstance(rows, list) and len(rows) == len(data["close"])  # spill height
    assert all(isinstance(r, list) and len(r) == 1 for r in rows)
    got = from_cells(rows)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
    np.testing.assert_allclose(got, ref, rtol=0, atol=0)
    assert rows[0] == [None] or func.name in ("SV_PRICE", "SV_TRUERANGE")  # warm-up blank
    assert not any(isinstance(r[0], float) and math.isnan(r[0]) for r in rows)


@pytest.mark.parametrize("func", SERIES, ids=[f.name for f in SERIES])
def test_last_form_filled_down_matches_the_kernel_on_each_prefix(func):
    # Each cell of a filled-down _LAST column sees a longer anchored range ($E$2:E10,
    # $E$2:E11, ...) and must give what the kernel gives on that prefix. Equal to
    # rounding: window kernels centre on a value of their input for accuracy, so the last
    # bits depend on where the input starts (the tail read by window functions).
    data = bars(90)
    cols = [data[p.name] for p in func.columns]
    udf = addin.UDFS[func.name + "_LAST"]
    for m in (90, 30, 60, 89, 45, 1):
        got = udf(*(as_xlwings(c[:m]) for c in cols))
        ref = func(*(c[:m] for c in cols))[-1]
        if math.isnan(ref):
            assert got is None
        else:
            assert got == pytest.approx(ref, rel=1e-12, abs=1e-300), (m, got, ref)


def test_atr_against_talib_after_the_seed():
    # Source: TA-Lib ATR (Wilder). Our first bar's true range is high-low where TA-Lib
    # leaves it out, so the seeds differ; the difference decays by (1-1/14) a bar and is
    # below 1e-12 relative after 30*14 bars (see tests/test_ranges.py).
    data = bars(1000, seed=11)
    rows = addin.SV_ATR(as_xlwings(data["high"]), as_xlwings(data["low"]),
                        as_xlwings(data["close"]), 14)
    ref = talib.ATR(data["high"], data["low"], data["close"], timeperiod=14)
    np.testing.assert_allclose(from_cells(rows)[420:], ref[420:], rtol=1e-12)


def test_deviation_against_pandas_population_std():
    # Source: pandas rolling(14).std(ddof=0), the population deviation about the simple mean.
    close = bars(300, seed=5)["close"]
    rows = addin.SV_DEVIATION(as_xlwings(close), 14, "simple", "population")
    ref = pd.Series(close).rolling(14).std(ddof=0).to_numpy()
    got = from_cells(rows)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
    np.testing.assert_allclose(got, ref, rtol=1e-10)
    assert rows[12] == [None] and rows[13][0] is not None  # 13 warm-up rows blank


def test_dates_and_flat_lists_and_rows_are_accepted():
    close = bars(40)["close"]
    ref = get("SV_AVERAGE")(close, 5)
    flat = addin.SV_AVERAGE(close.tolist(), 5)  # a 1-D range without ndim=2
    np.testing.assert_allclose(from_cells(flat), ref)
    row = addin.SV_AVERAGE([close.tolist()], 5)  # a row: the result is a row too
    assert len(row) == 1 and len(row[0]) == 40


def test_on_form_reads_the_last_bar_on_or_before_the_date():
    data = bars(60)
    days = [dt.datetime(2025, 1, 6) + dt.timedelta(days=i) for i in range(60)]
    dates = [[d] for d in days]
    ref = get("SV_DEVIATION")(data["close"], 14)
    args = (dates, as_xlwings(data["close"]), 14)
    # Equal to rounding: the window kernel reads the last 14 bars only and centres on one
    # of them, so the last bits can differ from the whole column's.
    want = pytest.approx(ref[30], rel=1e-12)
    assert addin.SV_DEVIATION_ON(days[30], *args) == want
    # A time of day later the same day, and a date between bars, still give that bar.
    assert addin.SV_DEVIATION_ON(days[30] + dt.timedelta(hours=15), *args) == want
    # Serial numbers (dynamic-array dates arrive so) and text dates work the same.
    serial = (days[30] - dt.datetime(1899, 12, 30)).days
    assert addin.SV_DEVIATION_ON(float(serial), [[(d - dt.datetime(1899, 12, 30)).days]
                                                 for d in days], *args[1:]) == want
    assert addin.SV_DEVIATION_ON(days[30].strftime("%Y-%m-%d"), *args) == want
    # Never a later bar: changing bars after the date does not change the answer.
    later = data["close"].copy()
    later[31:] *= 3
    after = addin.SV_DEVIATION_ON(days[30], dates, as_xlwings(later), 14)
    assert after == want
    # Warm-up: blank, not NaN.
    assert addin.SV_DEVIATION_ON(days[5], *args) is None
    # Before the first bar: a message.
    msg = addin.SV_DEVIATION_ON(dt.datetime(2024, 12, 1), *args)
    assert msg.startswith("SV_DEVIATION_ON: no bar on or before 2024-12-01")


def test_on_form_sorts_newest_first_exports_and_skips_a_gap_bar():
    data = bars(60)
    days = [dt.datetime(2025, 1, 6) + dt.timedelta(days=i) for i in range(60)]
    ref = get("SV_ATR")(data["high"], data["low"], data["close"], 14)
    rev = [as_xlwings(data[k][::-1], text_every=10**9) for k in ("high", "low", "close")]
    got = addin.SV_ATR_ON(days[40], [[d] for d in days[::-1]], *rev, 14)
    assert got == pytest.approx(ref[40], rel=1e-15)
    # Blank prices on the asked bar: the last usable bar before it is used.
    close = data["close"].copy()
    close[40] = np.nan
    ref_gap = get("SV_ATR")(data["high"], data["low"], close, 14)
    got = addin.SV_ATR_ON(days[40], [[d] for d in days], as_xlwings(data["high"]),
                          as_xlwings(data["low"]), as_xlwings(close), 14)
    assert got == ref_gap[39]


def test_scalar_functions_single_and_row_by_row():
    # Hand-worked: long stop = 100 - 2 x 2 = 96; short target = 100 - 3 x 2 = 94.
    assert addin.SV_STOP(100.0, 2.0) == 96.0
    assert addin.SV_TARGET(100.0, 2.0, 3, "short") == 94.0
    rows = addin.SV_STOP([[100.0], [None], ["50"]], [[2.0], [1.0], [1.0]], 2, "long")
    assert rows == [[96.0], [None], [48.0]]  # the unfilled trade stays blank
    assert addin.SV_SIZE(250000, 0.01, 105.2, 101.6) == 694.0  # floor(2500 / 3.6) = 694


# -- bad arguments ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("call", "start"),
    [
        (lambda c: addin.SV_ATR(c, c, c, 0), "SV_ATR: period must be a whole number from 1"),
        (lambda c: addin.SV_ATR(c, c, c, "abc"), "SV_ATR: period must be"),
        (lambda c: addin.SV_ATR_LAST(c, c, c, 2.5), "SV_ATR_LAST: period must be"),
        (lambda c: addin.SV_AVERAGE(c, 5, "weekly"), 'SV_AVERAGE: kind must be one of "simple"'),
        (lambda c: addin.SV_ATR([r * 2 for r in c], c, c), "SV_ATR: high must be one column"),
        (lambda c: addin.SV_ATR(c[:-1], c, c), "SV_ATR: the ranges differ in height"),
        (lambda c: addin.SV_ATR(None, c, c), "SV_ATR: the ranges differ in height (high 1, low 30"),
        (lambda c: addin.SV_DEVIATION([["x"], *c], 5), None),  # header: accepted
        (lambda c: addin.SV_DEVIATION([*c, ["oops"]], 5), "SV_DEVIATION: prices item 31 is 'oops'"),
        (lambda c: addin.SV_DEVIATION_ON("soon", c, c), "SV_DEVIATION_ON: date is 'soon'"),
        (lambda c: addin.SV_STOP(100.0, -1.0), "SV_STOP: volatility must be"),
        (lambda c: addin.SV_ATR(c, c, c, 14, "wilder", "average", "blank", 3), "SV_ATR: takes"),
    ],
)
def test_bad_arguments_give_a_short_message_not_a_traceback(call, start):
    c = [[x] for x in bars(30)["close"].tolist()]
    out = call(c)
    if start is None:
        assert isinstance(out, list)
        return
    assert isinstance(out, str), out
    assert out.startswith(start), out
    assert "Traceback" not in out and "\n" not in out and len(out) <= 255


def test_unexpected_exceptions_are_caught_at_the_boundary(monkeypatch):
    def boom(*a, **k):
        raise RuntimeError("kernel exploded")
    monkeypatch.setattr(addin, "call_worksheet", boom)
    udf = addin.make_udf("SV_ATR", get("SV_ATR"), "column")
    assert udf([[1.0]], [[1.0]], [[1.0]]) == "SV_ATR: kernel exploded"


# -- one source of truth -------------------------------------------------------------------------
def test_registry_addin_and_docs_agree():
    # docs/functions.md is generated by sheetvol.docgen from the registry and committed:
    # a missing file is a failure, not a reason to skip.
    assert DOCS.exists(), "docs/functions.md is missing (python -m sheetvol.docgen writes it)"
    text = DOCS.read_text(encoding="utf-8")
    for name, func, variant in ALL:
        params = variant_params(func, variant)
        shown = ", ".join(p.name if p.required else f"[{p.name}]" for p in params)
        assert f"{name}({shown})" in text, f"docs/functions.md lacks {name}({shown})"
        udf_params = list(inspect.signature(addin.UDFS[name]).parameters)
        assert udf_params == [addin.addin_arg_name(p.name) for p in params]
    for f in FUNCTIONS:
        assert f"### {f.name}" in text
    documented = set(re.findall(r"^### (SV_\w+)", text, flags=re.M))
    assert documented == {f.name for f in FUNCTIONS}


def test_module_imports_without_xlwings():
    # A Python without the [addin] extra: inert stand-in decorators, same functions.
    import subprocess

    code = ("import sys; sys.modules['xlwings'] = None\n"
            "import sheetvol.addin as a\n"
            "print(a.XLWINGS, a.SV_STOP(100.0, 2.0), len(a.UDFS))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=Path(__file__).resolve().parent.parent)
    assert out.stdout.split() == ["False", "96.0", str(len(ALL))]


def test_benchmark_runs_and_reports_every_part():
    # Functional check only: speed targets live in python -m benches.addin, which
    # prints read, compute and write against the budget; no time limit is asserted here.
    from benches import addin as bench_addin

    results = bench_addin.run(rows=500, repeat=1)
    parts = results["SV_DEVIATION whole column C:C"]
    assert set(parts) == {"read", "compute", "write", "whole call_udf"}
    for part in results.values():
        for best, median in part.values():
            assert 0 <= best <= median


SCALAR_CASES = {
    # name: (scalar arguments after the columns, as a user types them)
    "SV_STOP": (105.2, 1.8, 2, "long"),
    "SV_TARGET": (105.2, 1.8, 3, "short"),
    "SV_SIZE": (250000, 0.01, 105.2, 101.6, 1, 1),
    "SV_RMULTIPLE": (100, 98, 106, "long"),
    "SV_TRAIL": ("date", "entry", "long", 2, 14, "atr"),
    "SV_OUTCOME": ("date", "entry", "long", "stop", "target", "r"),
}


@pytest.mark.parametrize("func", [f for f in FUNCTIONS if f.shape == "scalar"],
                         ids=[f.name for f in FUNCTIONS if f.shape == "scalar"])
def test_scalar_functions_equal_the_kernel(func):
    # Columns as xlwings passes them (dates as datetimes, some numbers as text) against the
    # registry's Python call with day numbers and float arrays.
    assert func.name in SCALAR_CASES, f"add a case for {func.name}"
    data = bars(80)
    days = [dt.datetime(2025, 1, 6) + dt.timedelta(days=i) for i in range(80)]
    serials = np.array([(d - dt.datetime(1899, 12, 30)).days for d in days], dtype=float)
    entry = float(data["close"][30])
    fill = {"date": days[30], "entry": entry, "stop": entry * 0.97, "target": entry * 1.05}
    options = [fill.get(v, v) if isinstance(v, str) else v for v in SCALAR_CASES[func.name]]
    xl_args, py_args = [], []
    for p in func.columns:
        if p.kind == "dates":
            xl_args.append([[d] for d in days])
            py_args.append(serials)
        else:
            xl_args.append(as_xlwings(data[p.name]))
            py_args.append(data[p.name])
    py_options = [serials[30] if isinstance(v, dt.datetime) else v for v in options]
    got = addin.UDFS[func.name](*xl_args, *options)
    ref = func(*py_args, *py_options)
    if isinstance(ref, str):
        assert got == ref
    else:
        assert got == pytest.approx(float(ref), rel=1e-12)


# -- scalar functions over a trade log: one bad row does not blank the others ------------------
def test_scalar_over_ranges_puts_a_message_only_in_the_bad_row():
    # Hand-worked: 100 - 2 x 2 = 96 and 60 - 2 x 1 = 58. Row 2's volatility is negative.
    rows = addin.SV_STOP([[100.0], [50.0], [60.0]], [[2.0], [-1.0], [1.0]], 2, "long")
    assert rows[0] == [96.0] and rows[2] == [58.0]
    msg = rows[1][0]
    assert isinstance(msg, str) and msg.startswith("SV_STOP: volatility must be")
    assert len(msg) <= 255 and "row" not in msg
    # Hand-worked sizes: floor(2500 / 3.6) = 694; row 2's stop equals its entry.
    sizes = addin.SV_SIZE(250000, 0.01, [[105.2], [100.0]], [[101.6], [100.0]])
    assert sizes[0] == [694.0] and isinstance(sizes[1][0], str)
    assert sizes[1][0].startswith("SV_SIZE:")
    # A bad single value applies to every row: one message for the call.
    out = addin.SV_STOP([[100.0], [50.0]], [[2.0], [1.0]], -2, "long")
    assert isinstance(out, str) and out.startswith("SV_STOP: multiple must be")


# -- High below Low ----------------------------------------------------------------------------
SWAP = "high is below low on row {} of the ranges (are the columns swapped?)"


def test_high_below_low_is_refused_with_the_row():
    data = bars(60)
    high, low, close = data["high"].copy(), data["low"].copy(), data["close"]
    high[4], low[4] = low[4], high[4]  # row 5 of the ranges
    xl = [as_xlwings(c, text_every=10**9) for c in (high, low, close)]
    assert addin.SV_ATR(*xl, 14) == "SV_ATR: " + SWAP.format(5)
    assert addin.SV_ATR_LAST(*xl, 14) == "SV_ATR_LAST: " + SWAP.format(5)
    assert addin.SV_PARKINSON(*xl[:2]) == "SV_PARKINSON: " + SWAP.format(5)
    days = [dt.datetime(2025, 1, 6) + dt.timedelta(days=i) for i in range(60)]
    # Newest first: the row number is still the row in the ranges as given (row 56).
    rev = [c[::-1] for c in xl]
    got = addin.SV_ATR_ON(days[50], [[d] for d in days[::-1]], *rev, 14)
    assert got == "SV_ATR_ON: " + SWAP.format(56)
    # Swapped whole columns: the first bar already shows it.
    assert addin.SV_ATR(xl[1], xl[0], xl[2]) == "SV_ATR: " + SWAP.format(1)
    # Scalar functions that take bars check them too.
    trail = addin.SV_TRAIL([[d] for d in days], *xl, days[20], float(close[20]))
    assert trail == "SV_TRAIL: " + SWAP.format(5)


def test_high_below_low_on_a_gap_row_or_above_a_window_tail_is_not_read():
    data = bars(60)
    high, low, close = data["high"].copy(), data["low"].copy(), data["close"].copy()
    high[4], low[4] = low[4], high[4]
    close[4] = np.nan  # a gap bar is skipped by the gap policy, so it is not judged
    xl = [as_xlwings(c, text_every=10**9) for c in (high, low, close)]
    assert isinstance(addin.SV_ATR_LAST(*xl, 14), float)
    # A window function's _LAST reads only its last bars: a swap far above them does not
    # change its value and is not seen; one inside them is reported with its row.
    high, low, close = data["high"].copy(), data["low"].copy(), data["close"]
    high[4], low[4] = low[4], high[4]
    xl = [as_xlwings(c, text_every=10**9) for c in (high, low, close)]
    got = addin.SV_ATR_LAST(*xl, 14, "simple")
    assert got == pytest.approx(get("SV_ATR")(data["high"], data["low"], close, 14,
                                              "simple")[-1], rel=1e-12)
    high[55], low[55] = low[55], high[55]
    xl = [as_xlwings(c, text_every=10**9) for c in (high, low, close)]
    assert addin.SV_ATR_LAST(*xl, 14, "simple") == "SV_ATR_LAST: " + SWAP.format(56)


# -- _LAST and _ON read only the tail a window function needs --------------------------------
DECIDING = ("kind", "average", "smoothing")  # the options that make an average recursive


def tail_cases() -> list[tuple[object, dict]]:
    cases = []
    for f in SERIES:
        choices = [p for p in f.options if p.name in DECIDING]
        variants = [{choices[0].name: c} for c in choices[0].choices] if choices else [{}]
        window = [p.name for p in f.options if p.name in ("period", "lookback")]
        for v in variants:
            for extra in ({}, *({w: 5} for w in window)):
                cases.append((f, {**v, **extra}))
    cases.append((get("SV_ATR"), {"smoothing": "simple", "first_bar": "blank", "period": 5}))
    cases.append((get("SV_TRUERANGE"), {"first_bar": "blank"}))
    return cases


TAIL_CASES = tail_cases()


def gappy(n: int = 400, seed: int = 9) -> dict[str, np.ndarray]:
    """Invented bars with blank cells in every column (prices of 0 are refused by the
    functions that need positive prices, so there are none here)."""
    data = bars(n, seed)
    rng = np.random.default_rng(seed)
    out = {}
    for k, v in data.items():
        v = v.copy()
        v[rng.choice(n, n // 15, replace=False)] = np.nan
        out[k] = v
    return out


def test_every_series_function_has_a_tail_rule():
    # A new series function must say whether its last value needs the whole history.
    assert set(calling.TAIL_BARS) == {f.name for f in SERIES}


@pytest.mark.parametrize(("func", "opts"), TAIL_CASES,
                         ids=[f"{f.name}-{'-'.join(map(str, o.values()))}" for f, o in TAIL_CASES])
def test_last_form_equals_the_whole_column_computation(func, opts, monkeypatch):
    # The reference is the registry's Python call on the whole prefix (the full kernel);
    # the _LAST form converts and computes only the tail when the function is a window.
    data = gappy()
    cols = [data[p.name] for p in func.columns]
    names = [p.name for p in func.options]
    args = [opts.get(n) for n in names]
    converted = []
    real = calling._convert.column

    def spy(value, **kw):
        col = real(value, **kw)
        converted.append(len(col.values))
        return col

    monkeypatch.setattr(calling._convert, "column", spy)
    need = calling.tail_bars(func, func.bind((), {**{p.name: 0.0 for p in func.columns},
                                                   **opts}))
    for m in (400, 399, 200, 30, 7, 6, 5, 2, 1):
        converted.clear()
        got = calling.call_worksheet(func.name + "_LAST",
                                     [as_xlwings(c[:m]) for c in cols] + args)
        ref = func(*(c[:m] for c in cols), **opts)[-1]
        if math.isnan(ref):
            assert got is None, (m, got)
        else:
            assert got == pytest.approx(ref, rel=1e-12, abs=1e-12), (m, got, ref)
        if m == 400:
            if need is None:  # recursive: whole columns
                assert sum(converted) == 400 * len(cols)
            elif need < 50:  # a short window: a chunk at the end, not the whole column
                assert sum(converted) < 400 * len(cols) / 2, converted


@pytest.mark.parametrize(("func", "opts"), [c for c in TAIL_CASES if c[1].get("period") == 5
                                            or c[1].get("lookback") == 5])
def test_the_tail_table_is_exact_both_ways(func, opts):
    # Both sides of the table, on bars without gaps. Where it says "whole history", the
    # last value computed from a generous tail (8 x period bars) differs from the whole
    # column's, so reading only a tail would be wrong there. Where it gives a number of
    # bars, exactly that many last bars give the whole column's value and one bar fewer
    # does not (no value, or another one): the table is neither short nor generous.
    data = bars(400, seed=4)
    cols = [data[p.name] for p in func.columns]
    bound = func.bind((), {**{p.name: 0.0 for p in func.columns}, **opts})
    need = calling.tail_bars(func, bound)
    full = func(*cols, **opts)[-1]
    assert math.isfinite(full)
    if need is None:
        short = func(*(c[-40:] for c in cols), **opts)[-1]
        assert abs(short - full) > 1e-9 * abs(full), (func.name, opts)
        return
    tail = func(*(c[-need:] for c in cols), **opts)[-1]
    assert tail == pytest.approx(full, rel=1e-12), (func.name, opts, need)
    fewer = func(*(c[-need + 1:] for c in cols), **opts)[-1] if need > 1 else math.nan
    assert math.isnan(fewer) or abs(fewer - full) > 1e-12 * abs(full), (func.name, opts)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.sampled_from(["ok", "ok", "ok", "blank", "text"]), min_size=1,
             max_size=80),
    st.integers(2, 12),
    st.sampled_from(["SV_CLOSEVOL", "SV_DEVIATION", "SV_VOLRANK", "SV_YANGZHANG"]),
)
def test_tail_reading_with_any_gap_pattern(pattern, period, name):
    # Any mix of blank cells and numbers stored as text (a price of 0 is refused now):
    # the tail gives the whole-column value (the registry's Python call) to 1e-12.
    func = get(name)
    base = bars(len(pattern), seed=len(pattern))
    xl, ref_cols = [], []
    for p in func.columns:
        v = base[p.name].copy()
        cells_ = []
        for i, kind in enumerate(pattern):
            if kind == "blank":
                v[i] = np.nan
                cells_.append([None])
            elif kind == "text":
                cells_.append([repr(float(v[i]))])
            else:
                cells_.append([float(v[i])])
        xl.append(cells_)
        ref_cols.append(v)
    ref = func(*ref_cols, period)[-1]
    got = calling.call_worksheet(name + "_LAST", [*xl, period])
    if math.isnan(ref):
        assert got is None
    else:
        assert got == pytest.approx(ref, rel=1e-12, abs=1e-12)


@pytest.mark.parametrize("name", ["SV_DEVIATION", "SV_CLOSEVOL", "SV_ATR"])
@pytest.mark.parametrize("newest_first", [False, True])
def test_on_form_equals_the_whole_column_computation(name, newest_first):
    # Dates oldest first (read from the end) or newest first (sorted, then cut), with
    # blank dates and blank prices; reference: the kernel on the dated bars in date order.
    func = get(name)
    data = gappy(300, seed=2)
    days = np.array([45000.0 + i for i in range(300)])
    days[[10, 150, 290]] = np.nan
    dated = np.isfinite(days)
    cols = [data[p.name] for p in func.columns]
    ref_all = func(*(c[dated] for c in cols), 10)
    ref_days = days[dated]
    for target in (45295.0, 45200.5, 45020.0):
        k = int(np.searchsorted(ref_days, target, side="right")) - 1
        usable = np.flatnonzero(np.all([np.isfinite(c[dated][: k + 1]) for c in cols], axis=0))
        ref = ref_all[usable[-1]]
        dates = [[None if math.isnan(d) else float(d)] for d in days]
        xl = [as_xlwings(c) for c in cols]
        if newest_first:
            dates, xl = dates[::-1], [c[::-1] for c in xl]
        got = calling.call_worksheet(name + "_ON", [target, dates, *xl, 10])
        if math.isnan(ref):
            assert got is None
        else:
            assert got == pytest.approx(ref, rel=1e-12, abs=1e-12), (target, got, ref)


def test_tail_reading_of_headers_and_bad_cells():
    close = bars(300)["close"]
    col = as_xlwings(close, text_every=10**9)
    # A header at the top is still a header when the tail reaches it.
    got = addin.SV_DEVIATION_LAST([["Close"], *col[:5]], 5)
    assert got == pytest.approx(get("SV_DEVIATION")(close[:5], 5)[-1], rel=1e-12)
    # Text inside the rows read is refused with its position in the whole range.
    bad = [*col[:-3], ["oops"], *col[-2:]]
    assert addin.SV_DEVIATION_LAST(bad, 5).startswith("SV_DEVIATION_LAST: prices item 298 is")
    # Text that might be a header (nothing but blanks above the rows read) is judged with
    # the rows above: whole columns are converted, and the message is the usual one.
    blanks_then_text = [[None]] * 200 + [["n/a?"]] + col[:99]
    msg = addin.SV_DEVIATION_LAST([*blanks_then_text, ["x"]], 5)
    assert msg == "SV_DEVIATION_LAST: prices item 301 is 'x', not a number"
    # Far above the window, a bad cell is not read by a window function (its value cannot
    # depend on it); a recursive function reads the whole column and reports it.
    far = [*col[:10], [True], *col[11:]]
    assert isinstance(addin.SV_DEVIATION_LAST(far, 5), float)
    assert addin.SV_AVERAGE_LAST(far, 5, "exponential").startswith(
        "SV_AVERAGE_LAST: prices item 11 is True")


def test_python_lines_of_the_add_in_guide_run_as_written():
    # docs/addin.md's Python blocks (the line for xlwings Lite's main.py) run as written.
    text = (Path(__file__).resolve().parent.parent / "docs" / "addin.md").read_text("utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert blocks
    for code in blocks:
        scope: dict[str, object] = {}
        exec(compile(textwrap.dedent(code), "docs/addin.md", "exec"), scope)
        assert "SV_ATR" in scope and "SV_DEVIATION_ON" in scope
