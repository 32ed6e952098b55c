"""Moving averages: simple and linear (window), exponential and Wilder smoothing (recursive).

Seeding of the recursive kinds (exponential, Wilder):

* ``seed="average"`` (default): the first output, on bar ``N-1``, is the simple
  average of the first ``N`` values; the recursion runs from there. TA-Lib's EMA
  seeds the same way, so the two agree from the first output on.
* ``seed="first"``: the recursion starts from the first value on bar 0. Early
  outputs lean on that one value, so bars before ``N-1`` are still NaN; from
  bar ``N-1`` on the result approaches the ``"average"`` one as the start-up
  weight ``(1 - alpha)^t`` dies away.

Gaps: bars with a non-finite price are skipped (NaN on that row) and the
average carries on over the remaining bars (see ``sheetvol.core._gaps``).
"""

from __future__ import annotations

import numpy as np

from sheetvol.core._gaps import as_series, skip_gaps
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_choice, check_period, window_linear, window_mean

WINDOW_KINDS = ("simple", "linear")
"""Averages over a window of the last N bars."""
RECURSIVE_KINDS = ("exponential", "wilder")
"""Averages that carry on from their previous value (see :func:`smoothing_factor`)."""
KINDS = WINDOW_KINDS + RECURSIVE_KINDS
"""Every moving average, by family, in the order help and docs list them."""
SEEDS = ("average", "first")


def smoothing_factor(kind: str, period: int) -> float:
    """Weight of the newest value in a recursive average.

    Parameters
    ----------
    kind : {"exponential", "wilder"}
        ``"exponential"`` uses ``2 / (N + 1)``, ``"wilder"`` uses ``1 / N``.
    period : int
        N, the number of bars.

    Returns
    -------
    float
        The factor alpha in ``m_t = m_{t-1} + alpha * (x_t - m_{t-1})``.

    Examples
    --------
    >>> smoothing_factor("exponential", 19)
    0.1
    """
    check_choice(kind, "kind", RECURSIVE_KINDS)
    period = check_period(period)
    return 2.0 / (period + 1.0) if kind == "exponential" else 1.0 / period


# Block length of the vectorised recursion: short blocks make each numpy call a
# long strided pass over all blocks at once (measured fastest at 8-32 on 1e6 bars).
_RECURSION_BLOCK = 32


def linear_recurrence(u: FloatArray, r: float) -> FloatArray:
    """Solve ``y_t = r * y_{t-1} + u_t`` with ``y_{-1} = 0``, vectorised and O(n).

    The series is cut into blocks of 32. Each block runs the recursion from zero,
    all blocks at once (one numpy call per position in the block). The true value
    carried into each block is itself a recursion over the block ends with factor
    ``r^32``, solved the same way (recursively, so a Python loop only ever runs
    over at most 32 values), and added back as ``r^(j+1) * carry``.

    Parameters
    ----------
    u : array_like
        Inputs, oldest first (finite).
    r : float
        Decay factor, ``0 <= r <= 1``.

    Returns
    -------
    numpy.ndarray
        ``y`` aligned with ``u``.

    Examples
    --------
    >>> linear_recurrence([1.0, 1.0, 1.0], 0.5)
    array([1.  , 1.5 , 1.75])
    """
    out = as_series(u).copy()
    _recur_in_place(out, r)
    return out


def _recur_in_place(y: FloatArray, r: float) -> None:
    """:func:`linear_recurrence` overwriting ``y`` (a contiguous 1-D float64 array)."""
    n, size = len(y), _RECURSION_BLOCK
    full = (n // size) * size
    if full > size:
        n_blocks = full // size
        grid = y[:full].reshape(n_blocks, size)  # one row per block, a view of y
        tmp = np.empty(n_blocks)
        for j in range(1, size):
            np.multiply(grid[:, j - 1], r, out=tmp)
            grid[:, j] += tmp
        # True value at the end of each block: local end plus r^size times the previous.
        ends = grid[:, -1].copy()
        _recur_in_place(ends, r**size)
        powers = r ** np.arange(1.0, size + 1.0)
        powers[powers < 1e-30] = 0.0  # negligible, and avoids slow subnormal arithmetic
        carry = tmp[:-1]
        for j in range(size):
            if powers[j] == 0.0:
                break
            np.multiply(ends[:-1], powers[j], out=carry)
            grid[1:, j] += carry
        start, acc = full, float(y[full - 1])
    else:
        start, acc = 0, 0.0
    if start < n:  # what is left (short series, or the last partial block): plain loop
        tail = y[start:]
        for i, value in enumerate(tail.tolist()):
            acc = r * acc + value
            tail[i] = acc


def recursive_average(
    values: FloatArray, alpha: float, start: int, seed_value: float
) -> FloatArray:
    """Run ``m_t = m_{t-1} + alpha (x_t - m_{t-1})`` from ``m_start = seed_value``.

    Vectorised through :func:`linear_recurrence` (no Python loop per bar). The
    recursion runs on deviations from the seed, ``m_t = seed + e_t`` with
    ``e_t = (1 - alpha) e_{t-1} + alpha (x_t - seed)``, which keeps more digits
    when prices are large and moves small.

    Parameters
    ----------
    values : array_like
        Finite values, oldest first.
    alpha : float
        Weight of the newest value, in (0, 1].
    start : int
        Index of the first output; earlier rows are NaN.
    seed_value : float
        The average on bar ``start``.

    Returns
    -------
    numpy.ndarray
        The recursion aligned with ``values``.

    Examples
    --------
    >>> recursive_average([1.0, 2.0, 3.0, 4.0], 0.5, 1, 1.5)
    array([  nan, 1.5  , 2.25 , 3.125])
    """
    x = as_series(values)
    out = np.full(len(x), np.nan)
    if start >= len(x):
        return out
    work = out[start:]
    np.subtract(x[start:], seed_value, out=work)
    work *= alpha
    work[0] = 0.0  # the seed itself: no deviation
    _recur_in_place(work, 1.0 - alpha)
    work += seed_value
    return out


def average_of(prices: FloatArray, period: int, kind: str, seed: str) -> FloatArray:
    """:func:`moving_average` on finite prices with checked options (no gap handling).

    For kernels that already run inside ``skip_gaps`` and need an average.

    Parameters
    ----------
    prices : numpy.ndarray
        Finite float64 prices, oldest first.
    period : int
        N, already validated.
    kind : str
        One of :data:`KINDS`.
    seed : str
        One of :data:`SEEDS`.

    Returns
    -------
    numpy.ndarray
        The average on each bar; NaN on the warm-up rows.

    Examples
    --------
    >>> average_of(np.array([2.0, 4.0, 6.0]), 2, "linear", "average")
    array([       nan, 3.33333333, 5.33333333])
    """
    n = len(prices)
    if n < period:
        return np.full(n, np.nan)
    if kind == "simple":
        return window_mean(prices, period)
    if kind == "linear":
        return window_linear(prices, period)
    alpha = smoothing_factor(kind, period)
    if seed == "average":
        # Seed = mean of the first N values (taken from the accurate window mean).
        first_mean = window_mean(prices[:period], period)[-1]
        return recursive_average(prices, alpha, period - 1, first_mean)
    out = recursive_average(prices, alpha, 0, prices[0])
    out[: period - 1] = np.nan
    return out


_average = skip_gaps(1)(average_of)


def moving_average(
    prices: FloatArray, period: int = 14, kind: str = "simple", seed: str = "average"
) -> FloatArray:
    """Moving average of a price column.

    Parameters
    ----------
    prices : array_like
        Prices, oldest first. Non-finite entries are gaps: NaN on that row, the
        average continues over the other bars.
    period : int, default 14
        N, bars in the window (at least 1).
    kind : {"simple", "linear", "exponential", "wilder"}, default "simple"
        ``"simple"``: mean of the last N; ``"exponential"``: alpha = 2/(N+1);
        ``"wilder"``: Wilder smoothing, alpha = 1/N; ``"linear"``: linearly
        weighted, newest weight N down to 1 for the oldest.
    seed : {"average", "first"}, default "average"
        Start of the recursive kinds: the simple average of the first N values on
        bar N-1, or the first value on bar 0 (outputs before bar N-1 stay NaN).
        Ignored by the window kinds.

    Returns
    -------
    numpy.ndarray
        The average on each bar; NaN until N usable bars have been seen.

    Examples
    --------
    >>> moving_average([1.0, 2.0, 3.0, 4.0, 5.0], 3)
    array([nan, nan,  2.,  3.,  4.])
    >>> moving_average([1.0, 2.0, 3.0, 4.0, 5.0], 3, "exponential")
    array([nan, nan,  2.,  3.,  4.])
    """
    period = check_period(period)
    check_choice(kind, "kind", KINDS)
    check_choice(seed, "seed", SEEDS)
    return _average(prices, period, kind, seed)


__all__ = [
    "KINDS",
    "RECURSIVE_KINDS",
    "SEEDS",
    "WINDOW_KINDS",
    "average_of",
    "linear_recurrence",
    "moving_average",
    "recursive_average",
    "smoothing_factor",
]
