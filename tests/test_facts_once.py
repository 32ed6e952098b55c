"""Facts stated once: each limit, choice list, default and conversion has one home.

These tests fail when a fact is restated somewhere else and drifts from its home:
the recipe's number ranges against :mod:`sheetvol.core.bounds`, the date-system
offset, the measure and result words, the column-letter rule.
"""

from __future__ import annotations

import math

import pytest

from sheetvol.core import bounds
from sheetvol.fill import price_table, recipe, trade_log
from sheetvol.functions import cells

# -- the 1904 date system ---------------------------------------------------------------------


def test_date_1904_offset_is_one_public_constant():
    # Microsoft's documentation of the two date systems: "the 1904 date system ... the
    # difference between the two date systems is 1,462 days".
    assert cells.DATE_1904_OFFSET == 1462.0
    assert cells.datetime_to_serial(cells.EPOCH_1904) == cells.DATE_1904_OFFSET
    for module in (price_table, trade_log):
        assert not hasattr(module, "_DATE_1904_OFFSET"), module.__name__


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
