"""Returns-based volatility estimators against their published formulas, pandas and a simulation.

References:
- Parkinson, M. (1980). The extreme value method for estimating the variance of the
  rate of return. Journal of Business 53(1), 61-65.
- Garman, M. B. and Klass, M. J. (1980). On the estimation of security price
  volatilities from historical data. Journal of Business 53(1), 67-78.
- Rogers, L. C. G. and Satchell, S. E. (1991). Estimating variance from high, low and
  closing prices. Annals of Applied Probability 1(4), 504-512.
- Yang, D. and Zhang, Q. (2000). Drift-independent volatility estimation based on
  high, low, open, and close prices. Journal of Business 73(3), 477-491.
Each reference below is a plain-Python loop over one window at a time, written from
the paper's formula with ``math`` and ``statistics``; it shares no code with the kernels.
"""

from __future__ import annotations

import doctest
import math
import statistics
from decimal import Decimal, getcontext

import numpy as np
import pandas as pd
import pytest

from sheetvol.core import estimators
from sheetvol.core.estimators import (
    close_to_close,
    garman_klass,
    parkinson,
    rogers_satchell,
    yang_zhang,
)
from sheetvol.functions import registry

LN2 = math.log(2.0)


def random_ohlc(n: int, seed: int = 1, start: float = 100.0, daily: float = 0.015):
    """Invented OHLC bars: a geometric random walk with overnight gaps and intrabar ranges."""
    rng = np.random.default_rng(seed)
    close = np.empty(n)
    open_ = np.empty(n)
    prev = start
    for i in range(n):
        open_[i] = prev * math.exp(0.3 * daily * rng.standard_normal())
        close[i] = open_[i] * math.exp(daily * rng.standard_normal())
        prev = close[i]
    top = np.maximum(open_, close) * np.exp(np.abs(rng.normal(0, daily / 2, n)))
    bottom = np.minimum(open_, close) * np.exp(-np.abs(rng.normal(0, daily / 2, n)))
    return open_, top, bottom, close


# -- plain-Python references, one window at a time ------------------------------------
def ref_close_to_close(c, n, per_year):
    out = [math.nan] * len(c)
    for t in range(n, len(c)):
        rets = [math.log(c[i] / c[i - 1]) for i in range(t - n + 1, t + 1)]
        out[t] = statistics.stdev(rets) * math.sqrt(per_year)
    return out


def ref_parkinson(h, lo, n, per_year):  # Parkinson (1980), eq. for sigma^2 from ln(H/L)
    out = [math.nan] * len(h)
    for t in range(n - 1, len(h)):
        s = sum(math.log(h[i] / lo[i]) ** 2 for i in range(t - n + 1, t + 1))
        out[t] = math.sqrt(s / (4 * n * LN2) * per_year)
    return out


def ref_garman_klass(o, h, lo, c, n, per_year):  # Garman & Klass (1980), practical estimator
    out = [math.nan] * len(h)
    for t in range(n - 1, len(h)):
        s = sum(
            0.5 * math.log(h[i] / lo[i]) ** 2 - (2 * LN2 - 1) * math.log(c[i] / o[i]) ** 2
            for i in range(t - n + 1, t + 1)
        )
        out[t] = math.sqrt(s / n * per_year)
    return out


def _rs_term(o, h, lo, c):  # Rogers & Satchell (1991)
    return math.log(h / c) * math.log(h / o) + math.log(lo / c) * math.log(lo / o)


def ref_rogers_satchell(o, h, lo, c, n, per_year):
    out = [math.nan] * len(h)
    for t in range(n - 1, len(h)):
        s = sum(_rs_term(o[i], h[i], lo[i], c[i]) for i in range(t - n + 1, t + 1))
        out[t] = math.sqrt(s / n * per_year)
    return out


def ref_yang_zhang(o, h, lo, c, n, per_year):
    # Yang & Zhang (2000): V = V_O + k V_C + (1 - k) V_RS, sample variances (n - 1) for
    # the overnight and open-to-close parts, k = 0.34 / (1.34 + (n + 1)/(n - 1)).
    k = 0.34 / (1.34 + (n + 1) / (n - 1))
    out = [math.nan] * len(h)
    for t in range(n, len(h)):
        window = range(t - n + 1, t + 1)
        v_o = statistics.variance([math.log(o[i] / c[i - 1]) for i in window])
        v_c = statistics.variance([math.log(c[i] / o[i]) for i in window])
        v_rs = sum(_rs_term(o[i], h[i], lo[i], c[i]) for i in window) / n
        out[t] = math.sqrt((v_o + k * v_c + (1 - k) * v_rs) * per_year)
    return out


CASES = [
    ("close_to_close", lambda o, h, lo, c, n, y: close_to_close(c, n, y),
     lambda o, h, lo, c, n, y: ref_close_to_close(c, n, y), 1),
    ("parkinson", lambda o, h, lo, c, n, y: parkinson(h, lo, n, y),
     lambda o, h, lo, c, n, y: ref_parkinson(h, lo, n, y), 0),
    ("garman_klass", garman_klass, ref_garman_klass, 0),
    ("rogers_satchell", rogers_satchell, ref_rogers_satchell, 0),
    ("yang_zhang", yang_zhang, ref_yang_zhang, 1),
]


@pytest.mark.parametrize("name,kernel,reference,extra", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("period", [2, 5, 20])
def test_matches_the_published_formula_window_by_window(name, kernel, reference, extra, period):
    # Source: the papers listed in the module docstring, as plain-Python loops.
    o, h, lo, c = random_ohlc(120, seed=period)
    got = kernel(o, h, lo, c, period, 252)
    want = np.array(reference(*(list(map(float, a)) for a in (o, h, lo, c)), period, 252))
    warmup = period - 1 + extra
    assert np.isnan(got[:warmup]).all()
    assert np.isfinite(got[warmup:]).all()
    np.testing.assert_allclose(got[warmup:], want[warmup:], rtol=1e-10, atol=0)


def test_close_to_close_equals_pandas_rolling_std_of_log_returns():
    # Source: pandas Series.rolling(20).std(ddof=1) of log returns, times sqrt(252).
    _, _, _, c = random_ohlc(3000, seed=7)
    want = pd.Series(np.log(c)).diff().rolling(20).std(ddof=1).to_numpy() * math.sqrt(252)
    got = close_to_close(c, 20, 252)
    assert np.isnan(got[:20]).all() and np.isnan(want[:20]).all()
    # Measured: 1.6e-14 relative on these 3000 bars. pandas' running sums drift on much
    # longer series, so the bound is 1e-11, still far below any convention change.
    np.testing.assert_allclose(got[20:], want[20:], rtol=1e-11)


def test_close_to_close_keeps_digits_on_large_prices_with_small_moves():
    # Source: exact log ratios with Python's decimal module (50 digits), then statistics.
    getcontext().prec = 50
    rng = np.random.default_rng(3)
    c = 1e7 + np.cumsum(np.round(rng.normal(0, 0.01, 400), 2))
    got = close_to_close(c, 30, 1)
    for t in (30, 200, 399):
        rets = [
            float((Decimal(c[i]) / Decimal(c[i - 1])).ln()) for i in range(t - 29, t + 1)
        ]
        assert got[t] == pytest.approx(statistics.stdev(rets), rel=1e-9)


def test_per_year_scales_by_its_square_root():
    o, h, lo, c = random_ohlc(200, seed=11)
    for kernel in (garman_klass, rogers_satchell, yang_zhang):
        a, b = kernel(o, h, lo, c, 20, 252), kernel(o, h, lo, c, 20, 365)
        np.testing.assert_allclose(b[20:], a[20:] * math.sqrt(365 / 252), rtol=1e-13)


def test_constant_prices_give_exactly_zero():
    # Hand-worked: no move at all means every log ratio is 0.
    flat = np.full(50, 123.45)
    for got in (
        close_to_close(flat, 10),
        parkinson(flat, flat, 10),
        garman_klass(flat, flat, flat, flat, 10),
        rogers_satchell(flat, flat, flat, flat, 10),
        yang_zhang(flat, flat, flat, flat, 10),
    ):
        values = got[~np.isnan(got)]
        assert len(values) >= 40 and (values == 0.0).all()


def test_non_positive_prices_are_refused_naming_the_bar():
    # Issue 8: skipping such a bar made the next close-to-close return span two bars with
    # nothing said. Logarithms need prices above 0: refuse, naming the column and the bar.
    o, h, lo, c = random_ohlc(80, seed=5)
    bad = 40
    for value in (0.0, -1.0):
        lo2 = lo.copy()
        lo2[bad] = value
        for kernel in (garman_klass, rogers_satchell, yang_zhang):
            with pytest.raises(ValueError, match=f"low is {value:g} on bar 41: .* above 0"):
                kernel(o, h, lo2, c, 10)
        with pytest.raises(ValueError, match=r"low is .* on bar 41"):
            parkinson(h, lo2, 10)
        c2 = c.copy()
        c2[bad] = value
        with pytest.raises(ValueError, match=r"close is .* on bar 41"):
            close_to_close(c2, 10)
    # A blank (NaN) is still a gap, not an error.
    c3 = c.copy()
    c3[bad] = np.nan
    assert np.isnan(close_to_close(c3, 10)[bad])


def test_a_close_outside_the_bar_that_makes_the_mean_negative_gives_nan():
    # Garman-Klass per bar: 0.5 ln(H/L)^2 - 0.386 ln(C/O)^2 < 0 when the close is far
    # outside an inconsistent narrow bar; documented as NaN rather than a made-up 0.
    o, h, lo, c = (np.full(3, 100.0) for _ in range(4))
    h = h + 0.01
    c = c * 1.5
    got = garman_klass(o, h, lo, c, 3, 1)
    assert np.isnan(got[2])


def test_simulated_gbm_estimators_land_near_the_true_sigma():
    # Simulation check (no published value): geometric Brownian motion at 30 % a year,
    # 390 steps a day for 2000 days, OHLC formed from the path. Range-based estimators see
    # only the sampled path, so they read a few percent low (discrete monitoring);
    # tolerance 8 % relative for all, with a fixed seed.
    sigma, days, steps = 0.30, 2000, 390
    rng = np.random.default_rng(20000)
    dt = 1.0 / (252 * steps)
    incr = rng.standard_normal((days, steps)) * (sigma * math.sqrt(dt)) - 0.5 * sigma**2 * dt
    path = np.log(100.0) + np.cumsum(incr.reshape(-1)).reshape(days, steps)
    open_log = np.concatenate([[math.log(100.0)], path[:-1, -1]])  # no overnight gap
    high = np.exp(np.maximum(path.max(axis=1), open_log))
    low = np.exp(np.minimum(path.min(axis=1), open_log))
    o, c = np.exp(open_log), np.exp(path[:, -1])
    n = days - 1
    for name, value in {
        "close_to_close": close_to_close(c, n)[-1],
        "parkinson": parkinson(high, low, n)[-1],
        "garman_klass": garman_klass(o, high, low, c, n)[-1],
        "rogers_satchell": rogers_satchell(o, high, low, c, n)[-1],
        "yang_zhang": yang_zhang(o, high, low, c, n)[-1],
    }.items():
        assert value == pytest.approx(sigma, rel=0.08), name


def test_yang_zhang_counts_overnight_moves_that_range_estimators_miss():
    # Simulation check: half the daily variance overnight (open gaps), half intraday.
    # Yang-Zhang and close-to-close see it all; Parkinson sees only the intraday half.
    sigma, days, steps = 0.30, 2000, 200
    rng = np.random.default_rng(77)
    day_var = sigma**2 / 252
    gaps = rng.standard_normal(days) * math.sqrt(day_var / 2)
    intraday = rng.standard_normal((days, steps)) * math.sqrt(day_var / 2 / steps)
    o_log = np.empty(days)
    path = np.empty((days, steps))
    prev = math.log(50.0)
    for d in range(days):
        o_log[d] = prev + gaps[d]
        path[d] = o_log[d] + np.cumsum(intraday[d])
        prev = path[d, -1]
    high = np.exp(np.maximum(path.max(axis=1), o_log))
    low = np.exp(np.minimum(path.min(axis=1), o_log))
    o, c = np.exp(o_log), np.exp(path[:, -1])
    n = days - 1
    assert yang_zhang(o, high, low, c, n)[-1] == pytest.approx(sigma, rel=0.08)
    assert close_to_close(c, n)[-1] == pytest.approx(sigma, rel=0.08)
    assert parkinson(high, low, n)[-1] == pytest.approx(sigma / math.sqrt(2), rel=0.08)


def test_registry_entries_call_these_kernels():
    o, h, lo, c = random_ohlc(60, seed=2)
    np.testing.assert_array_equal(
        registry.get("SV_YANGZHANG")(o, h, lo, c, 10, 365), yang_zhang(o, h, lo, c, 10, 365)
    )
    np.testing.assert_array_equal(registry.get("SV_CLOSEVOL")(c), close_to_close(c))


def test_docstring_examples():
    result = doctest.testmod(estimators)
    assert result.attempted > 0 and result.failed == 0
