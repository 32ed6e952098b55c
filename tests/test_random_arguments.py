"""Every worksheet function, given random arguments, answers with a value or a message;
so does the evaluator, given random formula text.

What a cell may hold is anything: blanks, text, true/false, error codes, dates,
huge or non-finite numbers, blocks, rows, ranges of any length. The contract of the
worksheet layer is a result or an :class:`ArgumentError` whose message names the
function, never another exception (which the add-in would show as Python's own words).
The arguments are drawn from a fixed seed, so a failure reproduces; the cases it
found first (date serials past 9999-12-31, infinite dates) have their own tests in
``test_cells.py``.
"""

from __future__ import annotations

import datetime as dt
import math
import random
import warnings

import pytest

from sheetvol.functions import registry
from sheetvol.functions.calling import call_worksheet
from sheetvol.functions.convert import ArgumentError

ODD_TEXT = ["", "abc", "1.5", "n/a", "#N/A", "Close", " 2,5 ", "1e999", "-0", "TRUE"]
ODD_VALUES = [True, False, 0, -1.0, math.nan, math.inf, 1e308, -1e308, 1e-320, -2146826246]
SCALARS = [None, 0, 1, 2, 14, 14.0, 14.5, -3, 1e9, math.nan, math.inf, "14", "abc", "", True,
           "simple", "exponential", "wilder", "linear", "upper", "lower", "middle", "long",
           "short", "close", "typical", "high-low", "blank", "average", "first", "atr",
           "deviation", 0.01, "1%", dt.datetime(2024, 2, 1), 45330.0, 1e12, -5.0, [[14.0]],
           [[1.0], [2.0]], [], [[]], [[None]]]


def _column(rng: random.Random, n: int) -> object:
    level, cells = 100.0, []
    for i in range(n):
        level *= math.exp(rng.gauss(0, 0.01))
        r = rng.random()
        if r < 0.03:
            v: object = None
        elif r < 0.05:
            v = rng.choice(ODD_TEXT)
        elif r < 0.06:
            v = rng.choice(ODD_VALUES)
        elif r < 0.07:
            v = dt.datetime(2020, 1, 1) + dt.timedelta(days=i)
        else:
            v = round(level, 4)
        cells.append([v])
    shape = rng.random()
    if shape < 0.1:
        return [[c[0] for c in cells]]  # a row
    if shape < 0.15:
        return [c[0] for c in cells]  # a flat list
    if shape < 0.18:
        return [[*c, 1.0] for c in cells]  # a block two columns wide
    if shape < 0.2:
        return tuple(tuple(c) for c in cells)  # as COM hands them over
    return cells


def _dates(rng: random.Random, n: int) -> list[list[object]]:
    start = dt.datetime(2024, 1, 1)
    out: list[list[object]] = [[start + dt.timedelta(days=i)] for i in range(n)]
    if n and rng.random() < 0.3:
        out[rng.randrange(n)] = [rng.choice([None, "x", 45000.0, "2024-13-01", start, -5.0,
                                             1e12, math.inf])]
    if rng.random() < 0.1:
        out.reverse()
    return out


def _arguments(rng: random.Random, name: str) -> list[object]:
    func, variant = registry.variant_of(name)
    n = rng.choice([0, 1, 3, 14, 20, 40, 260])
    args: list[object] = []
    for p in registry.variant_params(func, variant):
        if args and rng.random() < 0.15:
            break  # the rest left out
        if p.kind == "series":
            args.append(_column(rng, n if rng.random() < 0.9 else rng.choice([0, 2, 15])))
        elif p.kind == "dates":
            args.append(_dates(rng, n))
        else:
            args.append(rng.choice(SCALARS))
    return args


NAMES = sorted(name for name, _f, _v in registry.worksheet_names())


OUTCOMES: dict[str, int] = {"value": 0, "message": 0}


@pytest.mark.parametrize("name", NAMES)
def test_random_arguments_give_a_value_or_a_message_naming_the_function(name):
    rng = random.Random(name)
    for _ in range(60):
        args = _arguments(rng, name)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # overflow of 1e308 inputs
                call_worksheet(name, args)
        except ArgumentError as exc:  # any other exception fails the test
            assert str(exc).startswith(f"{name}:"), (args, str(exc))
            OUTCOMES["message"] += 1
        else:
            OUTCOMES["value"] += 1


def test_the_random_arguments_reach_both_answers():
    # The draws are not all refused at the door: some reach the kernels and give values.
    for name in NAMES[:20]:
        test_random_arguments_give_a_value_or_a_message_naming_the_function(name)
    assert OUTCOMES["value"] >= 20 and OUTCOMES["message"] >= 20, OUTCOMES


# -- random formula text through the evaluator (the fill's path for typed formulas) -------
REFS = ["C:C", "D:D", "E:E", "E2:E121", "E2:E10", "A2:A121", "$E$2:E50", "Prices!E:E",
        "'Odd sheet''s'!A1:A2", "E1", "F:F", "A:E", "E2:E1", "XFD1", "Nope!A1", "E0",
        "E1048577", "1:1"]
ATOMS = ["14", "0", "-3", "1e309", '"exponential"', '"wilder"', '"upper"', '"x"', '""', "TRUE",
         "FALSE", "#N/A", "#DIV/0!", "2.5", '"14"', "DATE(2024,2,1)", "DATE(2024,13,45)",
         "DATE(-1,1,1)", "1/0", '-"a"', "45330"]
OPERATORS = ["+", "-", "*", "/", "^", "&", "=", "<>", "<", ">=", ""]
OTHERS = ["IF", "IFERROR", "ROUND", "ROUNDUP", "MIN", "MAX", "ABS", "AND", "OR", "DATE", "SUM",
          "INDEX", "sv_atr", "SV_NOPE"]
STRAY = ["(", ")", ",", '"', "!", "'", ":", "$", "=", " ", "@", "{", "}", ";"]


def _formula(rng: random.Random, depth: int = 0) -> str:
    r = rng.random()
    if depth > 3 or r < 0.35:
        return rng.choice(ATOMS + REFS)
    if r < 0.7:
        args = [_formula(rng, depth + 1) for _ in range(rng.choice([0, 1, 2, 3, 4, 6, 12]))]
        if rng.random() < 0.1:
            args.insert(rng.randrange(len(args) + 1), "")
        return f"{rng.choice(NAMES + OTHERS)}({','.join(args)})"
    if r < 0.85:
        return f"({_formula(rng, depth + 1)}{rng.choice(OPERATORS)}{_formula(rng, depth + 1)})"
    text = _formula(rng, depth + 1)
    cut = rng.randrange(len(text) + 1)
    return text[:cut] + rng.choice(STRAY) + text[cut:]


def test_random_formula_text_gives_a_result_or_a_formula_message():
    from openpyxl import Workbook

    from sheetvol.functions.evaluator import FormulaError, evaluate, openpyxl_resolver

    wb = Workbook()
    ws = wb.active
    ws.title = "Prices"
    ws.append(["Date", "Open", "High", "Low", "Close", "Note"])
    for i in range(120):
        c = 100 + 5 * math.sin(i / 7)
        ws.append([dt.datetime(2024, 1, 1) + dt.timedelta(days=i), c, c + 1, c - 1, c + 0.2,
                   "x" if i % 17 == 0 else None])
    odd = wb.create_sheet("Odd sheet's")
    odd["A1"], odd["A2"], odd["B2"] = "abc", 5, True
    resolve = openpyxl_resolver(wb)
    rng = random.Random(7)
    outcomes = {"value": 0, "message": 0}
    for _ in range(250):
        text = "=" + _formula(rng)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                evaluate(text, resolve, current_sheet="Prices")
        except FormulaError:  # any other exception fails the test
            outcomes["message"] += 1
        else:
            outcomes["value"] += 1
    assert outcomes["value"] >= 20 and outcomes["message"] >= 20, outcomes
