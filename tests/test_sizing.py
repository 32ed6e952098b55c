"""Position sizes from a risk budget (sheetvol.core.sizing) and SV_SIZE.

Every expected value is worked by hand in the comments beside it, or comes from the
published source named beside the check.
"""

from __future__ import annotations

import math

from sheetvol.core.sizing import position_size, size_note, size_with_reason
from sheetvol.functions import registry


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
    assert res.note.tolist() == [""]
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
    dear = position_size(200_000, 0.005, 150.0, 148.0, point_value=1000, fx_rate=2.5)
    assert dear == "SV_SIZE: risk budget buys 0.2 units, less than one lot of 1"


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
    assert position_size(10_000, 0.01, 100.0, 90.0, lot_step=20) == (
        "SV_SIZE: risk budget buys 10 units, less than one lot of 20"
    )
    # The note counts units, not lots: 250,000 x 1% = 2,500 over a 3.04 stop = 822.37 units,
    # in lots of 1,000 -> zero; the note says 822 units (whole units, thousands separated).
    assert size_note(250_000, 0.01, 105.2, 102.16, lot_step=1000) == (
        "risk budget buys 822 units, less than one lot of 1,000")
    # 694 units (see above) against a minimum of 1,000: nothing, with the reason.
    assert position_size(250_000, 0.01, 105.2, 101.6, min_qty=1000) == (
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
    assert position_size(250_000, 0.01, 105.2, 105.2).startswith("SV_SIZE: stop equals entry")
    assert size_note(250_000, 0.01, 105.2, 101.6) == ""


def test_size_is_vectorised_with_one_note_per_row():
    res = size_with_reason([250_000, 10_000, math.nan], 0.01, [105.2, 100.0, 1.0],
                           [101.6, 90.0, 0.9], lot_step=[1, 20, 1])
    assert res.quantity[:2].tolist() == [694.0, 0.0]
    assert math.isnan(res.quantity[2])
    assert res.note.tolist() == [
        "", "risk budget buys 10 units, less than one lot of 20", "missing input"]


