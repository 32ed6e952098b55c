"""The per-cell forms' shortcuts give what the plain path gives.

References: the registry's Python call on the whole column (the definition of a
``_LAST`` value), and the registry's own refusals for bad options.
"""

from __future__ import annotations

import numpy as np
import pytest

from sheetvol.functions import calling
from sheetvol.functions.registry import ArgumentError, get


def _column(values):
    return [[float(v)] for v in values]


def test_options_are_validated_once_per_value_and_type():
    prices = 100 + np.cumsum(np.random.default_rng(3).normal(0, 1, 60))
    want = get("SV_DEVIATION")(prices, 14)[-1]
    for _ in range(3):  # the second and third calls take the cached options
        got = calling.call_worksheet("SV_DEVIATION_LAST", [_column(prices), 14])
        assert got == pytest.approx(want, rel=1e-12)
    assert calling.call_worksheet("SV_DEVIATION_LAST", [_column(prices), 14.0]) == got
    # True equals 1 in Python but is refused as a number: it may not borrow the
    # result cached for 1.
    upper = calling.call_worksheet("SV_BAND_LAST", [_column(prices), "upper", 20, 1])
    assert upper == pytest.approx(get("SV_BAND")(prices, "upper", 20, 1)[-1], rel=1e-12)
    with pytest.raises(ArgumentError, match="width"):
        calling.call_worksheet("SV_BAND_LAST", [_column(prices), "upper", 20, True])
    assert calling.call_worksheet("SV_DEVIATION_LAST", [_column(prices), "14"]) == got
    with pytest.raises(ArgumentError, match="period"):  # refused every time, never cached
        for _ in range(2):
            calling.call_worksheet("SV_DEVIATION_LAST", [_column(prices), 1])


def test_cached_options_are_not_shared_between_calls():
    a = calling._bound_options(get("SV_DEVIATION"), {"prices": [[1.0]]}, {"period": 5})
    a["period"] = 99
    b = calling._bound_options(get("SV_DEVIATION"), {"prices": [[1.0]]}, {"period": 5})
    assert b["period"] == 5


@pytest.mark.parametrize("gap_at", [None, -1, -5, -14, -15])
def test_last_bars_read_alone_or_around_a_gap(gap_at):
    # No gap among the last 14 bars: only they are read; a gap there: the rows above
    # are read too. Either way the whole-column value (the registry's call).
    prices = 100 + np.cumsum(np.random.default_rng(4).normal(0, 1, 80))
    cells = _column(prices)
    if gap_at is not None:
        prices[gap_at] = np.nan
        cells[gap_at] = [None]
    want = get("SV_DEVIATION")(prices, 14)
    got = calling.call_worksheet("SV_DEVIATION_LAST", [cells, 14])
    if np.isnan(want[-1]):
        assert gap_at == -1 and got is None
    else:
        assert got == pytest.approx(want[-1], rel=1e-12)
