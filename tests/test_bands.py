"""Bollinger Bands, %b, bandwidth, ATR bands and envelopes vs TA-Lib, pandas and by hand."""

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

from sheetvol.core import bands
from sheetvol.core.averages import moving_average
from sheetvol.core.bands import atr_bands, bandwidth, deviation_bands, envelope, percent_b
from sheetvol.core.dispersion import dispersion
from sheetvol.functions import registry


def random_bars(n: int, seed: int = 0, start: float = 100.0):
    """Invented OHLC bars: a geometric random walk with overnight gaps and wicks."""
    rng = np.random.default_rng(seed)
    close = start * np.exp(np.cumsum(rng.normal(0, 0.01, n)))
    open_ = np.r_[start, close[:-1]] * np.exp(rng.normal(0, 0.004, n))
    high = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, 0.005, n)))
    low = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, 0.005, n)))
    return open_, high, low, close


@pytest.mark.parametrize("period,width", [(20, 2.0), (5, 1.5), (50, 3.0)])
def test_simple_bands_equal_talib_bbands(period, width):
    # Source: TA-Lib BBANDS with matype=0 (simple average, population deviation).
    # Tolerance 1e-11 relative (measured: at most 7e-13 on the bands, 7e-15 on the middle;
    # TA-Lib's variance comes from running sums and carries the larger part of that).
    _, _, _, c = random_bars(5000, seed=period)
    mid, up, low = deviation_bands(c, period, width)
    t_up, t_mid, t_low = talib.BBANDS(c, period, width, width, matype=0)
    for ours, ref in ((mid, t_mid), (up, t_up), (low, t_low)):
        np.testing.assert_array_equal(np.isnan(ours), np.isnan(ref))
        np.testing.assert_allclose(ours, ref, rtol=1e-11)
    # %b and bandwidth computed from TA-Lib's lines by their definitions.
    ref_b = (c - t_low) / (t_up - t_low)
    # Measured: at most 6e-12 absolute on %b, 1.3e-11 relative on bandwidth.
    np.testing.assert_allclose(percent_b(c, period, width), ref_b, rtol=0, atol=1e-10)
    ref_w = (t_up - t_low) / t_mid
    np.testing.assert_allclose(bandwidth(c, period, width), ref_w, rtol=1e-10)


def test_sample_divisor_bands_equal_pandas_rolling_std():
    # Source: pandas rolling(20).std(ddof=1) and rolling(20).mean().
    _, _, _, c = random_bars(3000, seed=8)
    mid, up, _ = deviation_bands(c, 20, 2.0, divisor="sample")
    s = pd.Series(c).rolling(20)
    np.testing.assert_allclose(mid, s.mean().to_numpy(), rtol=1e-12)
    # Measured: 1.2e-10 relative on the deviation (pandas' rolling std uses running sums).
    np.testing.assert_allclose(up - mid, 2.0 * s.std(ddof=1).to_numpy(), rtol=1e-8)


@pytest.mark.parametrize("average", ["simple", "exponential", "wilder", "linear"])
@pytest.mark.parametrize("divisor", ["population", "sample"])
def test_bands_are_built_from_moving_average_and_dispersion(average, divisor):
    # Definition (issue 2): middle = the average, upper/lower = middle +/- k x dispersion.
    _, _, _, c = random_bars(500, seed=21)
    mid, up, low = deviation_bands(c, 14, 2.5, average, divisor)
    np.testing.assert_array_equal(mid, moving_average(c, 14, average))
    dev = dispersion(c, 14, average, divisor)
    np.testing.assert_array_equal(up, mid + 2.5 * dev)
    np.testing.assert_array_equal(low, mid - 2.5 * dev)


def test_exponential_bands_hand_worked_window():
    # Hand-worked with statistics: the deviation is about the EMA's current value, not the
    # window mean: sqrt(mean((x - ema)^2)).
    x = [10.0, 11.0, 13.0, 12.0, 15.0]
    alpha = 2 / 4
    ema = statistics.fmean(x[:3])
    for v in x[3:]:
        ema += alpha * (v - ema)
    dev = math.sqrt(statistics.fmean([(v - ema) ** 2 for v in x[2:]]))
    mid, up, low = deviation_bands(x, 3, 2.0, average="exponential")
    assert mid[-1] == pytest.approx(ema, rel=1e-14)
    assert up[-1] == pytest.approx(ema + 2 * dev, rel=1e-14)
    assert low[-1] == pytest.approx(ema - 2 * dev, rel=1e-14)


def test_atr_bands_middle_equals_talib_ema_and_width_talib_atr():
    # Source: TA-Lib EMA (seeded with the simple mean, as ours) for the middle line; TA-Lib
    # ATR for the half-width after the first-bar seeding transient (30 * atr_period bars).
    _, h, lo, c = random_bars(2000, seed=12)
    mid, up, low = atr_bands(h, lo, c, 20, 1.5, 10)
    ema = talib.EMA(c, 20)
    np.testing.assert_array_equal(np.isnan(mid), np.isnan(ema))
    np.testing.assert_allclose(mid, ema, rtol=1e-13)
    atr = talib.ATR(h, lo, c, 10)
    np.testing.assert_allclose((up - mid)[300:] / 1.5, atr[300:], rtol=1e-10)
    np.testing.assert_allclose((mid - low)[300:] / 1.5, atr[300:], rtol=1e-10)
    assert np.isnan(up[:19]).all() and np.isfinite(up[19:]).all()


def test_envelope_hand_worked_and_pandas():
    # Hand-worked: mean of 100, 102, 104 is 102; 2.5 % of it is 2.55.
    mid, up, low = envelope([100.0, 102.0, 104.0], 3, 2.5)
    assert mid[2] == pytest.approx(102.0, rel=1e-15)
    assert up[2] == pytest.approx(104.55, rel=1e-15)
    assert low[2] == pytest.approx(99.45, rel=1e-15)
    assert np.isnan(mid[:2]).all()
    # Source: pandas rolling mean for the simple middle line.
    _, _, _, c = random_bars(500, seed=2)
    mid, up, low = envelope(c, 20, 4.0)
    ref = pd.Series(c).rolling(20).mean().to_numpy()
    np.testing.assert_allclose(mid, ref, rtol=1e-12)
    np.testing.assert_allclose(up, ref * 1.04, rtol=1e-12)
    np.testing.assert_allclose(low, ref * 0.96, rtol=1e-12)


def test_constant_prices_collapse_the_bands():
    # Hand-worked: identical prices have zero deviation, so all three lines meet; %b is
    # 0/0 and documented as NaN; bandwidth is 0.
    flat = np.full(40, 77.25)
    mid, up, low = deviation_bands(flat, 20)
    assert (mid[19:] == 77.25).all() and (up[19:] == 77.25).all() and (low[19:] == 77.25).all()
    assert np.isnan(percent_b(flat, 20)).all()
    w = bandwidth(flat, 20)
    assert np.isnan(w[:19]).all() and (w[19:] == 0.0).all()


def test_bollinger_rule_of_thumb_on_a_random_walk():
    # Common practice, no source: on a long random walk roughly 88-97 % of closes lie
    # inside 20-period 2-deviation bands. A Gaussian random walk sits at the low end
    # (measured here: 88.0-88.4 % over eight seeds, 88.3 % for this one), because the
    # walk drifts within each window and the newest close is the one furthest out.
    rng = np.random.default_rng(2024)
    c = 1000.0 + np.cumsum(rng.standard_normal(100_000))
    _, up, low = deviation_bands(c, 20, 2.0)
    ok = ~np.isnan(up)
    inside = np.mean((c[ok] >= low[ok]) & (c[ok] <= up[ok]))
    assert 0.88 <= inside <= 0.97, inside


def test_registry_selects_the_requested_line():
    _, h, lo, c = random_bars(100, seed=3)
    mid, _, low = deviation_bands(c, 10, 2.5)
    np.testing.assert_array_equal(registry.get("SV_BAND")(c, "lower", 10, 2.5), low)
    np.testing.assert_array_equal(registry.get("SV_BAND")(c, "middle", 10, 2.5), mid)
    _, up2, _ = atr_bands(h, lo, c, 15, 2.0, 7)
    np.testing.assert_array_equal(registry.get("SV_ATRBAND")(h, lo, c, "upper", 15, 2.0, 7), up2)
    _, _, low3 = envelope(c, 12, 3.0, "linear")
    np.testing.assert_array_equal(registry.get("SV_ENVELOPE")(c, "lower", 12, 3.0, "linear"), low3)
    np.testing.assert_array_equal(registry.get("SV_PCTB")(c, 10), percent_b(c, 10))


def test_bad_options_are_refused():
    with pytest.raises(ValueError, match="average"):
        deviation_bands([1.0, 2.0, 3.0], 2, average="median")
    with pytest.raises(ValueError, match="divisor"):
        percent_b([1.0, 2.0, 3.0], 2, divisor="n")
    with pytest.raises(ValueError, match="atr_period"):
        atr_bands([1.0], [1.0], [1.0], 2, 2.0, 0)


# -- properties (hypothesis) ---------------------------------------------------------------
kinds = st.sampled_from(["simple", "exponential", "wilder", "linear"])


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), shift=st.floats(-1e4, 1e4), period=st.integers(2, 30),
       average=kinds)
def test_band_width_is_unchanged_by_a_shift(seed, shift, period, average):
    _, h, lo, c = random_bars(80, seed=seed)
    _, up, low = deviation_bands(c, period, 2.0, average)
    _, up2, low2 = deviation_bands(c + shift, period, 2.0, average)
    tol = 1e-10 * (abs(shift) + 200)
    np.testing.assert_allclose(up2 - low2, up - low, rtol=0, atol=tol)
    _, up, low = atr_bands(h, lo, c, period, 2.0, 10)
    _, up2, low2 = atr_bands(h + shift, lo + shift, c + shift, period, 2.0, 10)
    np.testing.assert_allclose(up2 - low2, up - low, rtol=0, atol=tol)


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), period=st.integers(2, 30), width=st.floats(0.1, 4.0),
       average=kinds)
def test_percent_b_is_within_0_and_1_when_the_price_is_within_the_bands(
    seed, period, width, average
):
    _, _, _, c = random_bars(80, seed=seed)
    _, up, low = deviation_bands(c, period, width, average)
    b = percent_b(c, period, width, average)
    inside = (c >= low) & (c <= up) & (up > low)
    assert ((b[inside] >= 0) & (b[inside] <= 1)).all()
    outside = ((c < low) | (c > up)) & (up > low)
    assert ((b[outside] < 0) | (b[outside] > 1)).all()


def test_docstring_examples():
    result = doctest.testmod(bands)
    assert result.attempted > 0 and result.failed == 0
