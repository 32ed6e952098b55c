"""Facts stated once: each limit, choice list, default and conversion has one home.

These tests fail when a fact is restated somewhere else and drifts from its home:
the recipe's number ranges against :mod:`sheetvol.core.bounds`, the date-system
offset, the measure and result words, the column-letter rule.
"""

from __future__ import annotations

import ast
import math
from pathlib import Path

import pytest

from sheetvol.core import bounds
from sheetvol.fill import price_table, recipe, trade_log
from sheetvol.functions import cells

PACKAGE = Path(__file__).resolve().parent.parent / "sheetvol"
# -- the 1904 date system ---------------------------------------------------------------------


def test_date_1904_offset_is_one_public_constant():
    # Microsoft's documentation of the two date systems: "the 1904 date system ... the
    # difference between the two date systems is 1,462 days".
    assert cells.DATE_1904_OFFSET == 1462.0
    assert cells.datetime_to_serial(cells.EPOCH_1904) == cells.DATE_1904_OFFSET
    for module in (price_table, trade_log):
        assert not hasattr(module, "_DATE_1904_OFFSET"), module.__name__
    # no other module keeps its own copy of the number
    copies = [f"{path.relative_to(PACKAGE)}:{node.lineno}"
              for path in sorted(PACKAGE.rglob("*.py")) if path.name != "cells.py"
              for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
              if isinstance(node, ast.Constant) and node.value in (1462, 1462.0)
              and not isinstance(node.value, bool)]
    assert not copies, copies


# -- the recipe's [trades] numbers --------------------------------------------------------------
_PROBES = (-1.0, 0.0, 1e-9, 0.01, 0.25, 0.2500001, 2.0, 999.0, 1000.0, 1000.5, 1e9,
           math.inf, math.nan)


@pytest.mark.parametrize(("key", "bound"), [
    ("stop_multiple", bounds.MULTIPLE),
    ("target_multiple", bounds.MULTIPLE),
    ("trail_multiple", bounds.TRAIL),
    ("risk", bounds.RISK),
    ("equity", bounds.EQUITY),
])
def test_recipe_trade_numbers_take_the_core_ranges(key, bound):
    # The recipe refuses exactly what the core (and so the worksheet) refuses.
    for value in _PROBES:
        accepted = True
        try:
            recipe.check_trade_number(key, value)
        except recipe.RecipeError as err:
            accepted = False
            assert bound.words() in str(err), (key, value, str(err))
        assert accepted == bool(bound.holds(value)), (key, value)


def test_multiples_are_capped_in_the_recipe():
    # The worksheet's cap on multiples (1000 units) holds for the recipe too.
    with pytest.raises(recipe.RecipeError, match="stop_multiple"):
        recipe.check_trade_number("stop_multiple", 1000.5)
    with pytest.raises(recipe.RecipeError, match="trail_multiple"):
        recipe.check_trade_number("trail_multiple", 5000)
    assert recipe.check_trade_number("trail_multiple", 0) == 0.0  # 0 turns the trail off


# -- choice lists -----------------------------------------------------------------------------

def _word_lists(tree: ast.AST):
    """Literal tuples, lists and sets of two or more strings, with their line numbers."""
    for node in ast.walk(tree):
        if isinstance(node, (ast.Tuple, ast.List, ast.Set)) and len(node.elts) >= 2 and all(
                isinstance(e, ast.Constant) and isinstance(e.value, str) for e in node.elts):
            yield node.lineno, frozenset(e.value for e in node.elts)


def _core_choice_lists() -> dict[frozenset[str], str]:
    """Every module-level tuple of words in the core, by its set of words."""
    found: dict[frozenset[str], str] = {}
    for path in sorted((PACKAGE / "core").glob("*.py")):
        for node in ast.parse(path.read_text(encoding="utf-8")).body:
            target = (node.targets[0] if isinstance(node, ast.Assign) else
                      node.target if isinstance(node, ast.AnnAssign) else None)
            if not isinstance(target, ast.Name) or node.value is None:
                continue
            for _line, words in _word_lists(node.value):
                found[words] = f"core/{path.name}:{target.id}"
    return found


def test_core_choice_lists_are_found():
    # the scan below is only as good as this list: it must see the choice lists of the core
    lists = set(_core_choice_lists().values())
    for name in ("averages.py:SEEDS", "dispersion.py:DIVISORS", "ranges.py:FIRST_BAR",
                 "ranges.py:SMOOTHING", "review.py:MEASURES", "review.py:RESULTS",
                 "review.py:OUTCOME_FIELDS"):
        assert f"core/{name}" in lists, name


def test_no_choice_list_is_retyped_outside_the_core():
    core = _core_choice_lists()
    retyped = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.parent.name == "core":
            continue
        for line, words in _word_lists(ast.parse(path.read_text(encoding="utf-8"))):
            if words in core:
                retyped.append(f"{path.relative_to(PACKAGE)}:{line} retypes {core[words]}")
    assert not retyped, "\n".join(retyped)


def test_word_tables_cover_the_core_results():
    # the words the fill says about each outcome, and the summary's share of each,
    # are keyed by the core's list of results: none missing, none extra
    from sheetvol.core.review import RESULTS
    from sheetvol.fill.review import SUMMARY_LABELS

    assert set(trade_log.OUTCOME_WORDS) == {*RESULTS, ""}  # "": not reviewed
    assert set(RESULTS) <= set(SUMMARY_LABELS)


def test_measure_words_name_the_functions_the_core_computes():
    # each measure word of the core maps to the registry function that computes the same
    # volatility as the core's own measure of that word
    import numpy as np

    from sheetvol.core.review import MEASURES, volatility
    from sheetvol.functions import registry

    assert set(recipe.MEASURE_FUNCTIONS) == set(MEASURES)
    rng = np.random.default_rng(7)
    close = 100 + np.cumsum(rng.normal(0, 1, 60))
    high, low = close + rng.uniform(0.1, 1, 60), close - rng.uniform(0.1, 1, 60)
    for word in MEASURES:
        func = registry.get(recipe.measure_function(word.upper()))
        cols = {"high": high, "low": low, "close": close, "prices": close}
        got = func.resolve_kernel()(**{p.name: cols[p.name] for p in func.columns}, period=14)
        np.testing.assert_allclose(got, volatility(high, low, close, 14, word), equal_nan=True)


def test_trade_defaults_in_words_follow_the_core():
    from sheetvol.core import levels, review, sizing

    words = trade_log.DEFAULTS_WORDS
    for part in (f"{review.MEASURE.upper()} {review.PERIOD}", f"stop {levels.STOP_MULTIPLE:g}",
                 f"target {levels.TARGET_MULTIPLE:g}", f"trail {levels.TRAIL_MULTIPLE:g}",
                 f"risk {100 * sizing.RISK_SHARE:g}%"):
        assert part in words


# -- windows: one range, checked by the kernel and stated by the registry ---------------------
def _window_params():
    from sheetvol.functions import registry

    for func in registry.FUNCTIONS:
        if not func.kernel.startswith("sheetvol.core."):
            continue
        for p in func.params:
            if p.kind == "whole":
                yield pytest.param(func, p, id=f"{func.name}.{p.name}")


@pytest.mark.parametrize(("func", "param"), list(_window_params()))
def test_kernel_and_worksheet_allow_the_same_windows(func, param):
    # The Python API (the kernel) and the worksheet (the registry) take a window's range
    # from one statement: each accepts its ends and refuses one past them, in the same words.
    import numpy as np

    from sheetvol.functions import registry

    rng = np.random.default_rng(3)
    close = 100 + np.cumsum(rng.normal(0, 1, 12))
    cols = {"open": close + 0.1, "high": close + 1, "low": close - 1, "close": close,
            "prices": close, "values": np.abs(close) / 100}
    kernel = func.resolve_kernel()
    args = {p.name: cols[p.name] for p in func.columns}
    assert param.low is not None and param.high is not None
    words = param.bound.words()
    for value, ok in ((param.low - 1, False), (param.low, True), (param.high, True),
                      (param.high + 1, False)):
        value = int(value)
        if ok:
            kernel(**args, **{param.name: value})
            func.check(param, value)
        else:
            with pytest.raises(ValueError, match=f"{param.name} must be {words}"):
                kernel(**args, **{param.name: value})
            with pytest.raises(registry.ArgumentError, match=f"{param.name} must be {words}"):
                func.check(param, value)


# -- column letters ---------------------------------------------------------------------------
def test_column_letters_follow_the_spreadsheet_rule():
    # Hand-worked from the rule (base 26, digits A=1..Z=26, no zero): Z = 26, AA = 27,
    # AZ = 52, ZZ = 26*26+26 = 702, AAA = 703, XFD = 24*676 + 6*26 + 4 = 16384 (the last
    # column of a sheet, as the .xlsx limits state).
    from sheetvol.functions import grid

    for col, letters in ((1, "A"), (26, "Z"), (27, "AA"), (52, "AZ"), (702, "ZZ"),
                         (703, "AAA"), (16384, "XFD")):
        assert grid.column_letters(col) == letters
        assert grid.column_number(letters) == col
        assert grid.column_number(letters.lower()) == col
    for bad in (0, -1, grid.MAX_COL + 1):
        with pytest.raises(ValueError, match="outside"):
            grid.column_letters(bad)
    for bad in ("", "A1", "É", "$A"):
        with pytest.raises(ValueError, match="not a column letter"):
            grid.column_number(bad)


def test_one_column_letter_rule_everywhere():
    # every layer that names columns uses the one conversion (the workbook's byte parser
    # through a cache in front of it)
    from sheetvol.fill import locate
    from sheetvol.functions import grid
    from sheetvol.workbook import _sheetxml

    assert locate.col_letter is grid.column_letters
    assert locate.col_number is grid.column_number
    assert _sheetxml.col_letters is grid.column_letters
    for col in (1, 26, 27, 702, 703, 16384, 18278):
        letters = "ZZZ" if col == 18278 else grid.column_letters(col)
        assert _sheetxml.col_index(letters.encode()) == grid.column_number(letters) == col
    evaluator = (PACKAGE / "functions" / "evaluator.py").read_text(encoding="utf-8")
    assert "column_index_from_string" not in evaluator and "get_column_letter" not in evaluator


def _choice_params():
    from sheetvol.functions import registry

    for func in registry.FUNCTIONS:
        if func.kernel.startswith("sheetvol.core.") and func.shape == "series":
            for p in func.params:
                # the output selector (line of the bands) picks a result, not a kernel option
                if p.kind == "choice" and p.name != func.select:
                    yield pytest.param(func, p, id=f"{func.name}.{p.name}")


@pytest.mark.parametrize(("func", "param"), list(_choice_params()))
def test_worksheet_choices_are_the_kernel_choices(func, param):
    # the kernel refuses an unknown word listing what it allows: the registry offers the
    # same words, in the same order, and its default is the kernel's
    import inspect
    import re

    import numpy as np

    rng = np.random.default_rng(5)
    close = 100 + np.cumsum(rng.normal(0, 1, 30))
    cols = {"open": close + 0.1, "high": close + 1, "low": close - 1, "close": close,
            "prices": close, "values": np.abs(close) / 100}
    kernel = func.resolve_kernel()
    args = {p.name: cols[p.name] for p in func.columns}
    with pytest.raises(ValueError, match=f"{param.name} must be one of") as err:
        kernel(**args, **{param.name: "no-such-word"})
    listed = tuple(re.findall(r'"([^"]+)"', str(err.value)))
    assert listed == tuple(param.choices)
    default = inspect.signature(kernel).parameters[param.name].default
    assert default == param.default
