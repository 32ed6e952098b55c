"""Dispersion (rolling deviation about the current moving average) against outside references.

Sources: Python's ``statistics`` (exact arithmetic), NIST StRD NumAcc1-NumAcc4, TA-Lib's
STDDEV (test-only), pandas rolling std, a hand-worked 14-value window, a plain two-pass
computation about the average's value, and hypothesis properties.
"""

from __future__ import annotations

import doctest
import math
import statistics

import numpy as np
import pandas as pd
import pytest
import talib
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetvol.core import dispersion as dispersion_module
from sheetvol.core.averages import moving_average
from sheetvol.core.dispersion import dispersion
from sheetvol.functions import registry

KINDS = ("simple", "exponential", "wilder", "linear")


def two_pass_about(x, level, period, divisor):
    """Plain loop: sqrt(fsum((x_i - level_t)^2) / D) over each window (the oracle)."""
    out = np.full(len(x), np.nan)
    d = period if divisor == "population" else period - 1
    for t in range(period - 1, len(x)):
        if math.isfinite(level[t]):
            dev = x[t - period + 1 : t + 1] - level[t]
            out[t] = math.sqrt(math.fsum(dev * dev) / d)
    return out


def assert_close(got, want, rtol, atol=0.0):
    assert np.array_equal(np.isnan(got), np.isnan(want))
    ok = ~np.isnan(want)
    np.testing.assert_allclose(got[ok], want[ok], rtol=rtol, atol=atol)


# -- hand-worked -----------------------------------------------------------------------------
def test_hand_worked_14_value_window():
    # Values 17 19 20 22 21 18 23 20 19 21 18 22 20 20: sum 280, mean 20.
    # Deviations -3 -1 0 2 1 -2 3 0 -1 1 -2 2 0 0; squares 9 1 0 4 1 4 9 0 1 1 4 4 0 0 = 38.
    # Population variance 38/14 = 2.7142857..., deviation sqrt(38/14) = 1.6475089...;
    # sample variance 38/13, deviation sqrt(38/13) = 1.7097167...
    x = [17.0, 19.0, 20.0, 22.0, 21.0, 18.0, 23.0, 20.0, 19.0, 21.0, 18.0, 22.0, 20.0, 20.0]
    pop = dispersion(x, 14)
    assert np.isnan(pop[:13]).all()
    assert pop[13] == pytest.approx(math.sqrt(38 / 14), rel=1e-15)
    assert dispersion(x, 14, divisor="sample")[13] == pytest.approx(math.sqrt(38 / 13), rel=1e-15)


def test_constant_prices_give_exactly_zero():
    for kind in KINDS:
        for divisor in ("population", "sample"):
            out = dispersion(np.full(300, 4321.123), 14, kind, divisor)
            assert np.all(out[13:] == 0.0), (kind, divisor)


# -- Python statistics and NIST --------------------------------------------------------------
def test_simple_equals_statistics_pstdev_and_stdev(walk):
    x = walk(400, start=1e6, step=0.05, seed=21)
    pop = dispersion(x, 20)
    smp = dispersion(x, 20, divisor="sample")
    for t in range(19, 400):
        window = x[t - 19 : t + 1].tolist()
        assert pop[t] == pytest.approx(statistics.pstdev(window), rel=1e-12)
        assert smp[t] == pytest.approx(statistics.stdev(window), rel=1e-12)


@pytest.mark.parametrize("x0", [1.0, 1e6, 1e7], ids=["NumAcc2", "NumAcc3", "NumAcc4"])
def test_nist_numacc_through_the_public_function(x0):
    # NIST StRD NumAcc2-4 layout (x0+0.2, then 500 pairs x0+0.1, x0+0.3); certified s = 0.1.
    x = np.array([x0 + 0.2] + [x0 + 0.1, x0 + 0.3] * 500)
    got = dispersion(x, len(x), divisor="sample")[-1]
    assert got == pytest.approx(statistics.stdev(x.tolist()), rel=1e-12)  # Python statistics
    assert got == pytest.approx(0.1, rel=1e-7)  # NIST certified (decimal data, see windows)


def test_nist_numacc1():
    # NIST StRD NumAcc1: 10000001, 10000003, 10000002; certified s = 1.
    assert dispersion([10000001.0, 10000003.0, 10000002.0], 3, divisor="sample")[-1] == 1.0


# -- TA-Lib and pandas -----------------------------------------------------------------------
@pytest.mark.parametrize("period", [2, 5, 14, 20, 200])
def test_simple_equals_talib_stddev(walk, period):
    # TA-Lib STDDEV(x, N, 1) is the population deviation about the simple average. It
    # keeps running sums, so near-zero windows carry its rounding: atol on the price scale.
    x = walk(3000, start=1000.0, seed=period)
    assert_close(dispersion(x, period), talib.STDDEV(x, period, 1), rtol=1e-9, atol=1e-10)


@pytest.mark.parametrize("period", [3, 14, 60])
def test_simple_equals_pandas_rolling_std(walk, period):
    # pandas updates its sums online and carries ~1e-8 relative error on small windows
    # (the issue measured up to 3e-7 on long series), so 1e-6 here; ours is checked
    # against exact arithmetic elsewhere.
    x = walk(2000, start=500.0, seed=period)
    roll = pd.Series(x).rolling(period)
    assert_close(dispersion(x, period), roll.std(ddof=0).to_numpy(), rtol=1e-6)
    assert_close(dispersion(x, period, divisor="sample"), roll.std(ddof=1).to_numpy(), rtol=1e-6)


@pytest.mark.parametrize("average", ["exponential", "wilder", "linear"])
@pytest.mark.parametrize("divisor", ["population", "sample"])
def test_other_averages_differ_from_rolling_std_and_equal_two_pass(walk, average, divisor):
    # About the EMA (or Wilder / weighted) value, not the window mean: the issue asks to
    # show both that it differs from the rolling std and what it is instead.
    x = walk(600, start=1e7, step=0.01, seed=3)
    period = 14
    got = dispersion(x, period, average, divisor)
    level = moving_average(x, period, average)
    assert_close(got, two_pass_about(x, level, period, divisor), rtol=1e-12)
    # The ordinary rolling deviation (Python statistics) is clearly different, and never
    # larger: the window mean minimises the sum of squares.
    stdev = statistics.pstdev if divisor == "population" else statistics.stdev
    plain = np.array([stdev(x[t - period + 1 : t + 1].tolist()) for t in range(period - 1, 600)])
    about = got[period - 1 :]
    assert np.median(np.abs(about - plain) / plain) > 1e-3
    assert np.all(about >= plain * (1 - 1e-12))


def test_million_bar_walk_near_1e7_agrees_with_two_pass(long_walk_1e7):
    # Issue requirement (1e-9); we check 1e-12 for the simple and the exponential centre.
    x = long_walk_1e7
    period = 30
    simple = dispersion(x, period)
    about_ema = dispersion(x, period, "exponential")
    ema = moving_average(x, period, "exponential")
    ends = np.random.default_rng(5).integers(len(x) - 20_000, len(x), 25)
    for t in ends:
        window = x[t - period + 1 : t + 1]
        assert simple[t] == pytest.approx(statistics.pstdev(window.tolist()), rel=1e-12)
        dev = window - ema[t]
        assert about_ema[t] == pytest.approx(math.sqrt(math.fsum(dev * dev) / period), rel=1e-12)


# -- properties (hypothesis) -----------------------------------------------------------------
# Values below 1e-100 in size become 0: their squares would be subnormal (under 1e-308)
# and keep only a few bits, which no price column comes near.
prices_lists = st.lists(
    st.floats(min_value=-1e3, max_value=1e3, allow_nan=False, allow_infinity=False).map(
        lambda v: 0.0 if abs(v) < 1e-100 else v),
    min_size=2, max_size=60,
)


def _scale(x):
    return max(1.0, float(np.max(np.abs(x))))


@settings(max_examples=60, deadline=None)
@given(values=prices_lists, period=st.integers(2, 20), average=st.sampled_from(KINDS),
       shift=st.floats(-1e4, 1e4), factor=st.floats(-100, 100).filter(lambda c: abs(c) > 1e-3))
def test_properties(values, period, average, shift, factor):
    x = np.array(values)
    period = min(period, len(x))
    pop = dispersion(x, period, average)
    ok = ~np.isnan(pop)
    assert np.all(pop[ok] >= 0.0)  # a root of a mean of squares
    assert np.isnan(pop[: period - 1]).all() and ok[period - 1 :].all()
    # Sample = population x sqrt(N/(N-1)) (definition).
    smp = dispersion(x, period, average, "sample")
    np.testing.assert_allclose(smp[ok], pop[ok] * math.sqrt(period / (period - 1)), rtol=1e-13)
    # Shifting all prices leaves it unchanged; tolerance: rounding of x + shift itself
    # (eps * |shift|) and sqrt of eps-sized variance noise on the data's scale.
    moved = dispersion(x + shift, period, average)
    tol = 1e-6 * (_scale(x) + abs(shift))
    np.testing.assert_allclose(moved[ok], pop[ok], rtol=1e-9, atol=tol)
    # Scaling by c scales it by |c|; exactly for a power of two (no rounding changes).
    scaled = dispersion(x * factor, period, average)
    np.testing.assert_allclose(scaled[ok], abs(factor) * pop[ok], rtol=1e-9,
                               atol=1e-6 * abs(factor) * _scale(x))
    np.testing.assert_array_equal(dispersion(x * -4.0, period, average)[ok], 4.0 * pop[ok])


# -- gaps, options, registry -----------------------------------------------------------------
@pytest.mark.parametrize("average", KINDS)
def test_gap_does_not_poison_the_rest(walk, average):
    x = walk(300, seed=8)
    holed = x.copy()
    holed[[50, 51, 200]] = [np.nan, -np.inf, np.nan]
    got = dispersion(holed, 14, average)
    usable = np.isfinite(holed)
    assert np.isnan(got[~usable]).all()
    assert np.isfinite(got[13:][usable[13:]]).all()
    np.testing.assert_array_equal(got[usable], dispersion(holed[usable], 14, average))


def test_warm_up_is_nan_and_short_input_all_nan():
    out = dispersion(np.arange(20.0), 14)
    assert np.isnan(out[:13]).all() and np.isfinite(out[13:]).all()
    assert np.isnan(dispersion(np.arange(5.0), 14)).all()


def test_bad_options_raise_clear_errors():
    x = np.arange(30.0)
    with pytest.raises(ValueError, match=r'divisor must be one of "population", "sample"'):
        dispersion(x, 14, divisor="unbiased")
    with pytest.raises(ValueError, match=r"average must be one of"):
        dispersion(x, 14, average="hull")
    with pytest.raises(ValueError, match="from 2 to 5000"):
        dispersion(x, 1)


def test_registry_function_calls_the_kernel(walk):
    x = walk(100, seed=2)
    func = registry.get("SV_DEVIATION")
    np.testing.assert_array_equal(func(x, 20, "exponential", "sample"),
                                  dispersion(x, 20, "exponential", "sample"))
    np.testing.assert_array_equal(func(x), dispersion(x))  # defaults: 14, simple, population


def test_docstring_examples():
    assert doctest.testmod(dispersion_module).failed == 0


def test_a_tiny_deviation_after_a_jump_about_a_warming_average_is_refined():
    # Found by the property test above: a window whose centre is still warming up in
    # the same block hid the block's other windows from the accuracy check, and the
    # rounded-negative variance of the last window came out as NaN. Reference: the
    # definition, summed exactly with math.fsum (hand-checked case, no library).
    x = [182.0, 0.0, 0.0, 1.8716707232776688e-06, 0.0]
    w = x[1:]
    wma = math.fsum(v * (i + 1) for i, v in enumerate(w)) / 10.0
    expected = math.sqrt(math.fsum((v - wma) ** 2 for v in w) / 4)
    got = dispersion(np.array(x), 4, "linear")[-1]
    assert got == pytest.approx(expected, rel=1e-12)
