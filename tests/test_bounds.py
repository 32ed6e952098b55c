"""One validation for both faces: the Python API and the worksheet functions refuse the
same values with the same words (issue 8, "One validation for both faces").

Each case was accepted by the Python API before, or refused with a message that blamed
the wrong argument; the expected messages name the argument and its allowed range.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

import sheetvol
from sheetvol.core import bounds
from sheetvol.functions import calling, registry


def both_faces(name: str, kernel, args: tuple, kwargs: dict | None = None) -> tuple[str, str]:
    """The Python API's message and the worksheet's, for the same bad call."""
    with pytest.raises(ValueError) as py:
        kernel(*args, **(kwargs or {}))
    sheet_args = list(args)
    if kwargs:
        params = [p.name for p in registry.get(name).params]
        sheet_args += [None] * (len(params) - len(sheet_args))
        for k, v in kwargs.items():
            sheet_args[params.index(k)] = v
    return str(py.value), _sheet_message(name, sheet_args)


def _sheet_message(name: str, args: list) -> str:
    with pytest.raises(registry.ArgumentError) as err:
        calling.call_worksheet(name, args)
    return str(err.value)


@pytest.mark.parametrize(("args", "kwargs", "words"), [
    # position_size(100_000, 1.5, 50, 47) returned 50,000: 150 % of equity at risk.
    ((100_000, 1.5, 50.0, 47.0), {}, "risk must be a number above 0, up to 0.25, got 1.5"),
    # risk 0 or -0.01 said "less than one lot", blaming the lot.
    ((100_000, 0.0, 50.0, 47.0), {}, "risk must be a number above 0, up to 0.25, got 0"),
    ((100_000, -0.01, 50.0, 47.0), {}, "risk must be a number above 0, up to 0.25, got -0.01"),
    # lot_step -1 returned more than the budget allows; lot_step 0 returned "SV_SIZE: ".
    ((100_000, 0.01, 50.0, 47.0), {"lot_step": -1.0}, "lot_step must be a number above 0, got -1"),
    ((100_000, 0.01, 50.0, 47.0), {"lot_step": 0.0}, "lot_step must be a number above 0, got 0"),
    # fx_rate 0 said "stop equals entry".
    ((100_000, 0.01, 50.0, 47.0), {"fx_rate": 0.0}, "fx_rate must be a number above 0, got 0"),
    ((0.0, 0.01, 50.0, 47.0), {}, "equity must be a number above 0, got 0"),
    ((100_000, 0.01, 50.0, 47.0), {"point_value": -5.0},
     "point_value must be a number above 0, got -5"),
])
def test_size_arguments_are_refused_by_name_on_both_faces(args, kwargs, words):
    py, sheet = both_faces("SV_SIZE", sheetvol.position_size, args, kwargs)
    assert py == words
    assert sheet == f"SV_SIZE: {words}"
    # The vectorised kernel the fill uses refuses the same way.
    with pytest.raises(ValueError, match=re.escape(words)):
        sheetvol.size_with_reason(*args, **kwargs)


def test_min_qty_above_max_qty_is_refused():
    # min_qty 300 with max_qty 100 returned 100.
    words = ("min_qty (300) is above max_qty (100): give a max_qty of at least min_qty, "
             "or 0 for no limit")
    with pytest.raises(ValueError) as err:
        sheetvol.position_size(100_000, 0.01, 50.0, 47.0, min_qty=300, max_qty=100)
    assert str(err.value) == words
    sheet = _sheet_message("SV_SIZE", [100_000, 0.01, 50.0, 47.0, 1, 1, 300, 100])
    assert sheet == f"SV_SIZE: {words}"
    # max_qty 0 means no limit: a minimum alone is fine (hand-worked: 1,000 / 3 = 333).
    assert sheetvol.position_size(100_000, 0.01, 50.0, 47.0, min_qty=300) == 333.0


def test_negative_volatility_is_refused_for_every_level():
    # stop_price with negative volatility put a long stop above entry.
    words = "volatility must be a number of at least 0, got -1.5"
    for kernel, name in ((sheetvol.stop_price, "SV_STOP"), (sheetvol.target_price, "SV_TARGET")):
        py, sheet = both_faces(name, kernel, (100.0, -1.5, 2.0, "long"))
        assert py == words and sheet == f"{name}: {words}"
    with pytest.raises(ValueError, match="volatility must be a number of at least 0, got -1"):
        sheetvol.trailing_stop([101.0, 102.0], [99.0, 100.0], [100.0, 101.0], [1.0, -1.0], 0,
                               100.0)
    # A NaN volatility (warm-up) is not a refusal: the level is simply not known yet.
    assert math.isnan(sheetvol.stop_price(100.0, math.nan))
    with pytest.raises(ValueError, match="multiple must be a number above 0, up to 1000, got 0"):
        sheetvol.stop_price(100.0, 1.0, 0.0)
    with pytest.raises(ValueError, match=r"tick must be a number of at least 0, got -0\.25"):
        sheetvol.target_price(100.0, 1.0, 3.0, "long", -0.25)


def test_high_below_low_is_refused_naming_the_bar():
    # true_range and parkinson accepted high below low.
    high, low, close = [10.0, 9.0, 11.0], [9.0, 9.5, 10.0], [9.5, 9.2, 10.5]
    words = "high is below low on bar 2 (high 9, low 9.5); are the columns swapped?"
    for kernel, args in (
        (sheetvol.true_range, (high, low, close)),
        (sheetvol.average_true_range, (high, low, close, 2)),
        (sheetvol.atr_percent, (high, low, close, 2)),
        (sheetvol.atr_bands, (high, low, close, 2, 2.0, 2)),
        (sheetvol.parkinson, (high, low, 2)),
        (sheetvol.garman_klass, (close, high, low, close, 2)),
        (sheetvol.rogers_satchell, (close, high, low, close, 2)),
        (sheetvol.yang_zhang, (close, high, low, close, 2)),
    ):
        with pytest.raises(ValueError) as err:
            kernel(*args)
        assert str(err.value) == words, kernel.__name__
    # A swapped bar that is a gap (its close blank) is skipped by the gap policy, not judged.
    assert sheetvol.true_range(high, low, [9.5, math.nan, 10.5])[2] == 1.5  # 11 - 10 by hand


@pytest.mark.parametrize(("kernel", "args", "column"), [
    (sheetvol.atr_percent, lambda p: (p + 1, p - 1, p, 2), "close"),
    (sheetvol.bandwidth, lambda p: (p, 2), "prices"),
    (sheetvol.envelope, lambda p: (p, 2), "prices"),
    (sheetvol.close_to_close, lambda p: (p, 2), "close"),
    (sheetvol.parkinson, lambda p: (p + 1, p, 2), "low"),
    (sheetvol.garman_klass, lambda p: (p, p + 1, p, p, 2), "open"),
    (sheetvol.rogers_satchell, lambda p: (p, p + 1, p, p, 2), "open"),
    (sheetvol.yang_zhang, lambda p: (p, p + 1, p, p, 2), "open"),
])
def test_functions_that_need_positive_prices_refuse_naming_the_bar(kernel, args, column):
    # ATR %, bandwidth and envelopes went negative or crossed on prices at or below 0; the
    # range estimators skipped such bars and a close-to-close return spanned the gap.
    prices = np.array([3.0, 2.0, -0.5, 2.5])
    with pytest.raises(ValueError, match=rf"^{column} is -0\.5 on bar 3: .* needs prices above 0"):
        kernel(*args(prices))


def test_dispersion_and_atr_keep_working_on_negative_prices():
    # Hand-worked on a spread that trades below zero: prices -1, -3 -> mean -2, population
    # deviation 1 (statistics.pstdev([-1, -3]) == 1.0); true ranges 2 and 2 -> ATR(2) 2.
    assert sheetvol.dispersion([-1.0, -3.0], 2)[1] == 1.0
    assert sheetvol.average_true_range([0.0, -1.0], [-2.0, -3.0], [-1.0, -2.0], 2)[1] == 2.0
    # %b is a ratio of distances, valid at any price level. By hand: the window -3, -1 has
    # mean -2 and population deviation 1, so with width 1 the bands are -1 and -3; the price
    # -1 is on the upper band: (-1 - -3) / (-1 - -3) = 1.
    assert sheetvol.percent_b([-3.0, -1.0], 2, 1.0)[1] == 1.0


@pytest.mark.parametrize("per_year", [0, -252])
@pytest.mark.parametrize("kernel", [sheetvol.close_to_close, sheetvol.parkinson,
                                    sheetvol.garman_klass, sheetvol.rogers_satchell,
                                    sheetvol.yang_zhang])
def test_per_year_of_zero_or_below_is_refused_everywhere(kernel, per_year):
    n = kernel.__code__.co_argcount - 2  # price columns before period and per_year
    cols = [np.array([10.0, 11.0, 10.5, 10.8])] * n
    if n >= 2:
        cols = [cols[0]] * n
        cols[1 if n == 4 else 0] = cols[0] + 1  # the high above every other price
    words = f"per_year must be a number above 0, got {per_year}"
    with pytest.raises(ValueError) as err:
        kernel(*cols, 2, per_year)
    assert str(err.value) == words
    name = {"close_to_close": "SV_CLOSEVOL", "parkinson": "SV_PARKINSON",
            "garman_klass": "SV_GARMANKLASS", "rogers_satchell": "SV_ROGERSSATCHELL",
            "yang_zhang": "SV_YANGZHANG"}[kernel.__name__]
    assert _sheet_message(name, [*cols, 2, per_year]) == f"{name}: {words}"


def test_every_trade_argument_range_comes_from_the_core():
    # Stated once: the registry's ranges for the trade functions are the core's bounds.
    expected = {
        ("SV_SIZE", "equity"): bounds.EQUITY, ("SV_SIZE", "risk"): bounds.RISK,
        ("SV_SIZE", "point_value"): bounds.POINT_VALUE, ("SV_SIZE", "lot_step"): bounds.LOT_STEP,
        ("SV_SIZE", "min_qty"): bounds.QUANTITY, ("SV_SIZE", "max_qty"): bounds.QUANTITY,
        ("SV_SIZE", "fx_rate"): bounds.FX_RATE, ("SV_STOP", "volatility"): bounds.VOLATILITY,
        ("SV_STOP", "multiple"): bounds.MULTIPLE, ("SV_STOP", "tick"): bounds.TICK,
        ("SV_TARGET", "volatility"): bounds.VOLATILITY, ("SV_TARGET", "multiple"): bounds.MULTIPLE,
        ("SV_TRAIL", "multiple"): bounds.MULTIPLE, ("SV_TRAIL", "tick"): bounds.TICK,
        ("SV_OUTCOME", "tick"): bounds.TICK, ("SV_CLOSEVOL", "per_year"): bounds.BARS_PER_YEAR,
    }
    for (name, arg), bound in expected.items():
        assert registry.get(name).param(arg).bound == bound, (name, arg)


def test_band_widths_are_refused_on_both_faces():
    # A negative width swapped the upper and lower bands in Python while the worksheet
    # refused it: one range now, from the core.
    prices = [10.0, 11.0, 12.0]
    for kernel, args in (
        (sheetvol.deviation_bands, (prices, 2, -2.0)),
        (sheetvol.atr_bands, ([11.0] * 3, [9.0] * 3, [10.0] * 3, 2, -2.0)),
    ):
        with pytest.raises(ValueError) as err:
            kernel(*args)
        assert str(err.value) == "width must be a number above 0, up to 100, got -2"
    assert _sheet_message("SV_BAND", [prices, "upper", 2, -2.0]) == (
        "SV_BAND: width must be a number above 0, up to 100, got -2")
    with pytest.raises(ValueError, match="percent must be a number above 0, up to 100, got 0"):
        sheetvol.envelope(prices, 2, 0.0)
    assert registry.get("SV_ENVELOPE").param("percent").bound == bounds.PERCENT
    assert registry.get("SV_BAND").param("width").bound == bounds.WIDTH


def test_last_and_on_forms_name_the_row_of_the_users_ranges():
    # _LAST and _ON read only the last bars they need; a refusal about a bar names its row
    # in the ranges the user gave (here row 296 of 300), not its place in the part read.
    close = list(np.linspace(100.0, 120.0, 300))
    close[295] = 0.0
    col = [[v] for v in close]
    assert _sheet_message("SV_CLOSEVOL_LAST", [col, 5]) == (
        "SV_CLOSEVOL_LAST: close is 0 on row 296 of the ranges: a volatility estimator "
        "(it takes logarithms of prices) needs prices above 0")
    dates = [[45000.0 + i] for i in range(300)]
    assert "close is 0 on row 296 of the ranges" in _sheet_message(
        "SV_CLOSEVOL_ON", [45299.0, dates, col, 5])
    assert "close is 0 on bar 296:" in _sheet_message("SV_CLOSEVOL", [col, 5])
