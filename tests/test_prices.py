"""Price basis against TA-Lib's price transforms (test-only) and a hand-worked bar."""

from __future__ import annotations

import doctest
import math

import numpy as np
import pytest
import talib

from sheetvol.core import prices
from sheetvol.core.prices import BASES, price_basis
from sheetvol.functions import registry


@pytest.fixture
def bars(walk):
    close = walk(500, start=50.0, step=0.3, seed=9) + 100.0
    rng = np.random.default_rng(9)
    open_ = close + rng.normal(0, 0.2, len(close))
    high = np.maximum(open_, close) + rng.uniform(0, 0.5, len(close))
    low = np.minimum(open_, close) - rng.uniform(0, 0.5, len(close))
    return open_, high, low, close


def test_hand_worked_bar():
    # O 9, H 12, L 8, C 10.5: median (12+8)/2 = 10; typical (12+8+10.5)/3 = 10.1666...;
    # weighted (12+8+2*10.5)/4 = 10.25.
    o, h, lo, c = [9.0], [12.0], [8.0], [10.5]
    want = {"close": 10.5, "open": 9.0, "high": 12.0, "low": 8.0,
            "median": 10.0, "typical": 30.5 / 3, "weighted": 10.25}
    for basis, value in want.items():
        assert price_basis(o, h, lo, c, basis)[0] == pytest.approx(value, rel=1e-15)


def test_equal_to_talib_price_transforms(bars):
    o, h, lo, c = bars
    np.testing.assert_allclose(price_basis(o, h, lo, c, "median"), talib.MEDPRICE(h, lo),
                               rtol=1e-15)
    np.testing.assert_allclose(price_basis(o, h, lo, c, "typical"), talib.TYPPRICE(h, lo, c),
                               rtol=1e-15)
    np.testing.assert_allclose(price_basis(o, h, lo, c, "weighted"), talib.WCLPRICE(h, lo, c),
                               rtol=1e-15)


def test_single_columns_pass_through(bars):
    o, h, lo, c = bars
    for basis, col in zip(("open", "high", "low", "close"), bars, strict=True):
        out = price_basis(o, h, lo, c, basis)
        np.testing.assert_array_equal(out, col)
        assert out is not col  # a new array: callers may write into it


def test_blank_only_matters_in_columns_the_basis_uses(bars):
    o, h, lo, c = (a.copy() for a in bars)
    o[3] = np.nan
    c[7] = np.nan
    assert np.isfinite(price_basis(o, h, lo, c, "median")).all()  # uses H and L only
    typ = price_basis(o, h, lo, c, "typical")
    assert math.isnan(typ[7]) and np.isfinite(np.delete(typ, 7)).all()
    assert math.isnan(price_basis(o, h, lo, c, "open")[3])


def test_bad_basis_and_lengths():
    with pytest.raises(ValueError, match=r'basis must be one of "open", .*got \'mid\''):
        price_basis([1.0], [2.0], [0.5], [1.5], "mid")
    with pytest.raises(ValueError, match="different lengths"):
        price_basis([1.0], [2.0, 3.0], [0.5], [1.5])


def test_registry_default_is_typical(bars):
    func = registry.get("SV_PRICE")
    assert func.param("basis").default == "typical"
    assert set(func.param("basis").choices) == set(BASES)
    np.testing.assert_array_equal(func(*bars), price_basis(*bars, "typical"))


def test_choices_in_bar_order_then_derived_then_the_bar_average():
    # Listed as a bar reads (open, high, low, close), then the derived prices, then the
    # bar average; one list, which the registry uses as it is.
    assert BASES == ("open", "high", "low", "close", "median", "typical", "weighted", "average")
    assert registry.get("SV_PRICE").param("basis").choices is BASES
    assert list(prices.DERIVED_FORMULAS) == list(prices.DERIVED_PRICES)
    assert registry.get("SV_PRICE").param("basis").help.endswith("average (O+H+L+C)/4")


def test_bar_average(bars):
    # Hand-worked: O 9, H 12, L 8, C 10.5 -> (9 + 12 + 8 + 10.5) / 4 = 9.875.
    assert price_basis([9.0], [12.0], [8.0], [10.5], "average")[0] == 9.875
    # Reference: TA-Lib's AVGPRICE, the same (O+H+L+C)/4.
    o, h, lo, c = bars
    np.testing.assert_allclose(price_basis(o, h, lo, c, "average"), talib.AVGPRICE(o, h, lo, c),
                               rtol=1e-15)


def test_docstring_examples():
    assert doctest.testmod(prices).failed == 0
