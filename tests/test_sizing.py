"""Position sizes from a risk budget (sheetvol.core.sizing) and SV_SIZE.

Every expected value is worked by hand in the comments beside it, or comes from the
published source named beside the check.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from sheetvol.core.sizing import position_size, size_with_reason
from sheetvol.functions import registry
from sheetvol.functions.worksheet import size_or_reason, size_words


def size_note(*args, **kwargs):
    """The words of one size's reason, as the fill's Size note shows them."""
    return size_words(size_with_reason(*args, **kwargs))[0]


# -- sizing: published worked example ---------------------------------------------------------
def test_turtle_unit_heating_oil_example():
    # Source: The Original Turtle Trading Rules (published 2003; reprinted in C. Faith,
    # Way of the Turtle, 2007, appendix). Unit = 1% of account / (N x dollars per point).
    # Heating oil: N = 0.0141, 42,000 dollars per point, account 1,000,000:
    # 10,000 / (0.0141 x 42,000) = 10,000 / 592.2 = 16.88..., "so 16 contracts" (truncated).
    entry = 0.80
    res = size_with_reason(1_000_000, 0.01, entry, entry - 0.0141, point_value=42_000)
    assert 16.88 <= float(res.raw[0]) < 16.89
    assert res.quantity.tolist() == [16.0]
    assert res.reason.tolist() == ["budget"] and size_words(res) == [""]
    # The worksheet function gives the same figure through the registry's validation.
    assert registry.get("SV_SIZE")(1_000_000, 0.01, entry, entry - 0.0141, 42_000, 1) == 16.0


# -- sizing: hand-worked ---------------------------------------------------------------------
def test_size_is_truncated_never_rounded_to_nearest():
    # 2,500 risk money / 3.6 stop distance = 694.44 -> 694; 2,500 / 3.55 = 704.2 -> 704.
    assert position_size(250_000, 0.01, 105.2, 101.6) == 694.0
    # A budget of 0.99 steps short of 17 must give 16, not 17: 16.99 units.
    assert position_size(1699, 0.01, 101.0, 100.0) == 16.0


def test_size_converts_the_loss_into_account_currency():
    # Hand-worked: account equity 200,000, risk 0.5% -> 1,000 of account currency.
    # Stop 2.0 points away, 1,000 instrument currency per point per contract, and
    # 0.0065 account currency per unit of instrument currency:
    # loss per contract = 2.0 x 1,000 x 0.0065 = 13 account currency -> 1,000 / 13 = 76.9 -> 76.
    assert position_size(200_000, 0.005, 150.0, 148.0, point_value=1000, fx_rate=0.0065) == 76.0
    # At 2.5 account units per instrument unit one contract loses 2 x 1,000 x 2.5 = 5,000,
    # more than the 1,000 budget: 0.2 of a contract, so nothing, with the reason.
    dear = size_or_reason(200_000, 0.005, 150.0, 148.0, point_value=1000, fx_rate=2.5)
    assert dear == "SV_SIZE: risk budget buys 0.2 units, less than one lot of 1"
    assert position_size(200_000, 0.005, 150.0, 148.0, point_value=1000, fx_rate=2.5) == 0.0


def test_float_noise_at_an_exact_multiple_does_not_lose_a_step():
    # 1,000 / (1.3 - 1.2) is 10,000 on paper but 9,999.99999999999 in floats:
    # a plain floor loses one unit.
    assert math.floor(1000 / (1.3 - 1.2)) == 9999
    assert position_size(100_000, 0.01, 1.3, 1.2) == 10_000.0
    # The tolerance is relative 1e-9: a real shortfall of one part in 10^6 still rounds down.
    assert position_size(100_000, 0.01, 1.3, 1.3 - 0.1 * (1 + 1e-6)) == 9999.0
    # Lot steps that are not whole numbers come back as clean multiples:
    # 30 / (1.0 x 100) = 0.3 units -> 3 steps of 0.1 = 0.3 (not 0.30000000000000004).
    assert position_size(3000, 0.01, 101.0, 100.0, point_value=100, lot_step=0.1) == 0.3


def test_size_limits_and_their_messages():
    # Hand-worked: 10,000 x 1% = 100 to risk, stop 10 away -> 10 units = 0.5 of a 20-unit lot.
    assert size_or_reason(10_000, 0.01, 100.0, 90.0, lot_step=20) == (
        "SV_SIZE: risk budget buys 10 units, less than one lot of 20"
    )
    assert position_size(10_000, 0.01, 100.0, 90.0, lot_step=20) == 0.0
    # The note counts units, not lots: 250,000 x 1% = 2,500 over a 3.04 stop = 822.37 units,
    # in lots of 1,000 -> zero; the note says 822 units (whole units, thousands separated).
    assert size_note(250_000, 0.01, 105.2, 102.16, lot_step=1000) == (
        "risk budget buys 822 units, less than one lot of 1,000")
    # 694 units (see above) against a minimum of 1,000: nothing, with the reason.
    assert size_or_reason(250_000, 0.01, 105.2, 101.6, min_qty=1000) == (
        "SV_SIZE: size 694 is below the minimum 1000"
    )
    # Above the maximum: capped, the cell keeps a number and the note says why.
    assert position_size(250_000, 0.01, 105.2, 101.6, max_qty=500) == 500.0
    assert size_note(250_000, 0.01, 105.2, 101.6, max_qty=500) == (
        "size 694 capped at the maximum 500"
    )
    # A maximum that is not a whole number of lots is cut to the lot below it: 505 -> 500.
    res = size_with_reason(250_000, 0.01, 105.2, 101.6, lot_step=10, max_qty=505)
    assert res.quantity.tolist() == [500.0]
    assert size_or_reason(250_000, 0.01, 105.2, 105.2).startswith("SV_SIZE: stop equals entry")
    with pytest.raises(ValueError, match=r"stop equals entry \(105.2\)"):
        position_size(250_000, 0.01, 105.2, 105.2)
    assert size_note(250_000, 0.01, 105.2, 101.6) == ""


def test_size_is_vectorised_with_one_note_per_row():
    res = size_with_reason([250_000, 10_000, math.nan], 0.01, [105.2, 100.0, 1.0],
                           [101.6, 90.0, 0.9], lot_step=[1, 20, 1])
    assert res.quantity[:2].tolist() == [694.0, 0.0]
    assert math.isnan(res.quantity[2])
    assert res.reason.tolist() == ["budget", "under_one_lot", "missing_input"]
    assert size_words(res) == [
        "", "risk budget buys 10 units, less than one lot of 20", "missing input"]




# -- rounding at the extremes (issue 8) -----------------------------------------------------------
def test_size_floor_beyond_a_billion_lots_gains_nothing():
    # A tolerance relative to the size (1e-9 of it) added lots from about 1e9 lots on:
    # 2,500,000,000.6 units of budget gave 2,500,000,003. By hand: floor(2,500,000,000.6) =
    # 2,500,000,000 (equity 10,000,000,002.4 x 0.25 = 2,500,000,000.6 over a loss of 1).
    res = size_with_reason(10_000_000_002.4, 0.25, 1.0, 0.0)
    assert res.quantity.tolist() == [2_500_000_000.0]


def test_a_size_too_large_to_be_a_number_says_so():
    # Issue 13: SV_SIZE(1e308, 0.25, 100, 99.999999) returned the bare text "SV_SIZE: ".
    # 2.5e307 of budget over a loss of 1e-6 per unit is 2.5e313: beyond the largest float.
    res = size_with_reason(1e308, 0.25, 100.0, 99.999999)
    assert res.reason.tolist() == ["too_large"] and math.isnan(res.quantity[0])
    text = size_or_reason(1e308, 0.25, 100.0, 99.999999)
    assert text.startswith("SV_SIZE: size too large to be a number")
    assert registry.get("SV_SIZE")(1e308, 0.25, 100.0, 99.999999) == text
    with pytest.raises(ValueError, match="too large to be a number"):
        position_size(1e308, 0.25, 100.0, 99.999999)


@settings(max_examples=300, deadline=None)
@given(
    equity_exp=st.integers(-2, 12),
    equity_digits=st.integers(1, 999_999),
    risk=st.sampled_from([0.001, 0.005, 0.01, 0.02, 0.25]),
    entry_exp=st.integers(-8, 12),
    distance=st.integers(1, 10**6),
    step=st.sampled_from([1e-8, 0.001, 0.01, 0.1, 1.0, 5.0, 100.0, 1000.0]),
    point_value=st.sampled_from([1.0, 0.1, 5.0, 42_000.0]),
)
def test_size_is_never_over_budget_at_any_magnitude(equity_exp, equity_digits, risk, entry_exp,
                                                    distance, step, point_value):
    # Equity from 1e-2 to 1e18, prices from 1e-8 to 1e12: the size is a whole number of lot
    # steps whose loss at the stop never exceeds the budget (checked in exact fractions),
    # and one more step would (so no lot is lost to the rounding either). "Exceeds" allows
    # only what the inputs cannot tell apart: entry and stop are typed decimals held within
    # half an ulp each, so their distance is known to eps/2 x (|entry| + |stop|) / distance.
    from fractions import Fraction

    equity = equity_digits * 10.0 ** equity_exp
    entry = 10.0 ** entry_exp
    stop = entry - entry * distance / 2e6  # up to half the price away
    assume(stop != entry)  # a distance that vanishes in floats is a refusal, tested elsewhere
    res = size_with_reason(equity, risk, entry, stop, point_value, step)
    qty = float(res.quantity[0])
    if res.reason[0] == "under_one_lot":
        assert qty == 0.0
    assert res.reason[0] in ("budget", "under_one_lot")
    lots = Fraction(qty) / Fraction(step)
    # A whole number of steps (to the float precision of qty itself).
    assert abs(lots - round(lots)) <= Fraction(1, 10**6) + lots / 10**12
    budget = Fraction(equity) * Fraction(risk)
    loss = abs(Fraction(entry) - Fraction(stop)) * Fraction(point_value)
    slack = Fraction(1, 10**12) + Fraction(2.0**-53) * (abs(Fraction(entry)) + abs(
        Fraction(stop))) / abs(Fraction(entry) - Fraction(stop))
    assert Fraction(qty) * loss <= budget * (1 + slack)
    assert (round(lots) + 1) * Fraction(step) * loss > budget * (1 - slack)
