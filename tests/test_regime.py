"""Percentile rank and deviation-to-ATR against plain-Python counts, statistics and pandas."""

from __future__ import annotations

import doctest
import math
import statistics

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol.core import regime
from sheetvol.core.estimators import close_to_close
from sheetvol.core.regime import deviation_to_atr, percentile_rank
from sheetvol.functions import registry


def count_rank(values: list[float], lookback: int) -> list[float]:
    """Plain-Python reference: share of the last `lookback` readings <= today's."""
    out = [math.nan] * len(values)
    for t in range(lookback - 1, len(values)):
        window = values[t - lookback + 1 : t + 1]
        out[t] = sum(1 for v in window if v <= values[t]) / lookback
    return out


@pytest.mark.parametrize("lookback", [1, 2, 7, 60])
def test_percentile_rank_equals_a_plain_count_with_ties(lookback):
    # Source: plain-Python count; values rounded to one decimal so ties are common.
    rng = np.random.default_rng(lookback)
    values = np.round(rng.normal(0.2, 0.05, 400), 1)
    got = percentile_rank(values, lookback)
    want = count_rank(values.tolist(), lookback)
    np.testing.assert_array_equal(got, want)


def test_percentile_rank_equals_pandas_rolling_rank_max_pct():
    # Source: pandas Series.rolling(L).rank(method="max", pct=True).
    rng = np.random.default_rng(5)
    values = rng.lognormal(-1.5, 0.3, 2000)
    want = pd.Series(values).rolling(252).rank(method="max", pct=True).to_numpy()
    np.testing.assert_allclose(percentile_rank(values), want, rtol=1e-15)


def test_percentile_rank_skips_blank_readings():
    # Documented gap policy: blank readings (here the estimator's warm-up and a hole) are
    # NaN in the output and the window is the last `lookback` non-blank readings.
    rng = np.random.default_rng(8)
    close = 50 * np.exp(np.cumsum(rng.normal(0, 0.01, 300)))
    vol = close_to_close(close, 20)
    vol[150] = np.nan
    got = percentile_rank(vol, 30)
    present = ~np.isnan(vol)
    want = count_rank(vol[present].tolist(), 30)
    np.testing.assert_array_equal(got[present], want)
    assert np.isnan(got[~present]).all()
    assert np.isnan(got[: 20 + 29]).all() and np.isfinite(got[20 + 29]).all()


def test_constant_series_ranks_one_and_extremes_rank_at_the_ends():
    # Hand-worked: with ties counted as at-or-below, a flat series is at 1.0; a strictly
    # rising series ranks 1.0 and a strictly falling one 1/lookback.
    assert (percentile_rank(np.full(10, 0.3), 5)[4:] == 1.0).all()
    assert (percentile_rank(np.arange(10.0), 4)[3:] == 1.0).all()
    assert (percentile_rank(np.arange(10.0)[::-1], 4)[3:] == 0.25).all()


@settings(max_examples=50, deadline=None)
@given(values=st.lists(st.floats(-1e6, 1e6), min_size=1, max_size=60),
       lookback=st.integers(1, 20))
def test_percentile_rank_is_in_zero_one(values, lookback):
    got = percentile_rank(values, lookback)
    finite = got[~np.isnan(got)]
    assert ((finite > 0) & (finite <= 1)).all()
    assert len(finite) == max(0, len(values) - lookback + 1)


def _wilder_atr(h, lo, c, n):
    """Plain-Python Wilder ATR: first true range = H-L, seed = mean of the first n."""
    tr = [h[0] - lo[0]] + [
        max(h[i] - lo[i], abs(h[i] - c[i - 1]), abs(lo[i] - c[i - 1])) for i in range(1, len(h))
    ]
    out = [math.nan] * len(h)
    atr = sum(tr[:n]) / n
    out[n - 1] = atr
    for i in range(n, len(h)):
        atr = (atr * (n - 1) + tr[i]) / n  # Wilder (1978)
        out[i] = atr
    return out


def test_deviation_to_atr_equals_pstdev_over_wilder_atr():
    # Source: statistics.pstdev of each close window over a plain-Python Wilder ATR.
    rng = np.random.default_rng(4)
    c = 100 * np.exp(np.cumsum(rng.normal(0, 0.01, 200)))
    h = c * np.exp(np.abs(rng.normal(0, 0.006, 200)))
    lo = c * np.exp(-np.abs(rng.normal(0, 0.006, 200)))
    atr = _wilder_atr(h.tolist(), lo.tolist(), c.tolist(), 14)
    want = [math.nan] * 13 + [
        statistics.pstdev(c[t - 13 : t + 1].tolist()) / atr[t] for t in range(13, 200)
    ]
    np.testing.assert_allclose(deviation_to_atr(h, lo, c, 14), want, rtol=1e-12)


def test_deviation_and_atr_are_of_the_same_order_on_a_random_walk():
    # Common practice, no source: dispersion(14) and ATR(14) of the same random walk are
    # of the same order of magnitude; we check the ratio stays between 0.2 and 5 on every
    # bar (measured here: 0.22 to 2.6, median 0.81).
    rng = np.random.default_rng(31)
    c = 100 + np.cumsum(rng.normal(0, 1, 20_000))
    o = np.r_[100.0, c[:-1]]
    h = np.maximum(o, c) + np.abs(rng.normal(0, 0.5, 20_000))
    lo = np.minimum(o, c) - np.abs(rng.normal(0, 0.5, 20_000))
    ratio = deviation_to_atr(h, lo, c, 14)[13:]
    assert np.isfinite(ratio).all()
    assert ratio.min() > 0.2 and ratio.max() < 5


def test_deviation_to_atr_is_nan_when_atr_is_zero():
    flat = np.full(20, 10.0)
    assert np.isnan(deviation_to_atr(flat, flat, flat, 5)).all()


def test_registry_entries_call_these_kernels():
    rng = np.random.default_rng(1)
    v = rng.random(300)
    np.testing.assert_array_equal(registry.get("SV_VOLRANK")(v, 50), percentile_rank(v, 50))
    np.testing.assert_array_equal(
        registry.get("SV_DEVATR")(v + 1, v, v + 0.5, 10), deviation_to_atr(v + 1, v, v + 0.5, 10)
    )


def test_docstring_examples():
    result = doctest.testmod(regime)
    assert result.attempted > 0 and result.failed == 0
