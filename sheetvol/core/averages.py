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

import functools

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


# Block length of the recursion, and blocks per matrix product (see _recur_into): 1024
# blocks of 16 keep a product's data (about 260 KB) in the CPU cache and below the size
# at which OpenBLAS starts a second thread (measured on 1e5-1e7 values).
_RECURSION_BLOCK = 16
_RECURSION_ROWS = 1024
# Weights below this are dropped: they cannot move a result and subnormal arithmetic is slow.
_NEGLIGIBLE = 1e-30


@functools.lru_cache(maxsize=64)
def _weights(r: float, scale: float) -> tuple[FloatArray, FloatArray]:
    """The matrices of one block of the recursion (see :func:`_recur_into`).

    ``block`` (L by L): ``scale r^(j-k)``, the weight of input k in output j >= k.
    ``ends`` (length L): its last column, the weights of the block's last output.
    Kept for reuse (read only): a long series asks for the same few factors again.
    """
    size = _RECURSION_BLOCK
    j = np.arange(size)
    lag = j[None, :] - j[:, None]
    block = np.where(lag >= 0, r ** np.maximum(lag, 0).astype(np.float64), 0.0) * scale
    block[np.abs(block) < _NEGLIGIBLE] = 0.0
    ends = np.ascontiguousarray(block[:, -1])
    block.setflags(write=False)
    ends.setflags(write=False)
    return ends, block


def _recur_into(
    x: FloatArray, out: FloatArray, r: float, scale: float = 1.0, shift: float = 0.0
) -> None:
    """``out_t = shift + e_t`` with ``e_t = r e_(t-1) + scale (x_t - shift)``, ``e_(-1) = 0``.

    ``x`` and ``out`` are contiguous 1-D float64 arrays of one length (``out`` may be
    ``x``). The series is cut into blocks of 16 values; within a block the recursion
    is a fixed 16 by 16 matrix of powers of ``r``. So: (1) every block's last value
    from its own inputs (a matrix-vector product), (2) the true block ends, which
    follow the same recursion with factor ``r^16`` over a sixteenth of the values
    (solved by this function again), (3) every block from its inputs, the end of the
    block before entering as ``r E / scale`` added to the first input (one matrix
    product). Steps 1 and 3 run over ``_RECURSION_ROWS`` blocks at a time, so the
    working set stays in the CPU cache whatever the length (a few sweeps over the
    data, instead of the many strided ones a position-by-position recursion makes),
    and each product stays small enough that the BLAS library runs it on one thread.
    """
    if len(x) < _SHORT_RECURSION:
        _recur_short(x, out, r, scale, shift)
        return
    n, size, rows = len(x), _RECURSION_BLOCK, _RECURSION_ROWS
    n_blocks = n // size
    acc = 0.0
    start = 0
    if n_blocks >= 2 and scale != 0.0:
        full = n_blocks * size
        xb = x[:full].reshape(n_blocks, size)
        ob = out[:full].reshape(n_blocks, size)
        ends_w, block_w = _weights(r, scale)
        ends = np.empty(n_blocks)
        work = np.empty((min(rows, n_blocks), size))
        for b0 in range(0, n_blocks, rows):  # (1)
            b1 = min(b0 + rows, n_blocks)
            dev = np.subtract(xb[b0:b1], shift, out=work[: b1 - b0])
            np.matmul(dev, ends_w, out=ends[b0:b1])
        if r**size >= _NEGLIGIBLE:  # (2); else nothing is carried across a whole block
            _recur_into(ends, ends, r**size)
        carry = r / scale
        for b0 in range(0, n_blocks, rows):  # (3); x is read again rather than stored
            b1 = min(b0 + rows, n_blocks)
            dev = np.subtract(xb[b0:b1], shift, out=work[: b1 - b0])
            if b0:
                dev[0, 0] += carry * ends[b0 - 1]
            dev[1:, 0] += carry * ends[b0 : b1 - 1]
            np.matmul(dev, block_w, out=ob[b0:b1])
            if shift:
                ob[b0:b1] += shift
        acc = float(ends[-1])
        start = full
    # What is left (short series, the last partial block): plain loop.
    for i in range(start, n):
        acc = r * acc + scale * (float(x[i]) - shift)
        out[i] = shift + acc


# Series shorter than this (a per-cell call's few hundred bars) take _recur_short: their
# block ends number under 32, so the recursion on the ends is a plain loop anyway.
_SHORT_RECURSION = 2 * _RECURSION_BLOCK * _RECURSION_BLOCK


def _recur_short(x: FloatArray, out: FloatArray, r: float, scale: float, shift: float) -> None:
    """:func:`_recur_into` for fewer than ``_SHORT_RECURSION`` values, bit for bit.

    The same products of the same shapes and the same loops, without the general
    path's fixed cost: the block ends and the partial last block run on Python
    floats (the same IEEE operations) instead of numpy scalars, in one chunk.
    """
    n, size = len(x), _RECURSION_BLOCK
    n_blocks = n // size
    acc = 0.0
    start = 0
    if n_blocks >= 2 and scale != 0.0:
        start = n_blocks * size
        ends_w, block_w = _weights(r, scale)
        dev = np.subtract(x[:start].reshape(n_blocks, size), shift)
        ends = np.matmul(dev, ends_w)
        if r**size >= _NEGLIGIBLE:  # the recursion on the ends, as _recur_into(ends, ends, r^L)
            rl, e = r**size, 0.0
            ends = np.array([0.0 + (e := rl * e + 1.0 * (v - 0.0)) for v in ends.tolist()])
        if n_blocks > 1:
            dev[1:, 0] += (r / scale) * ends[:-1]
        np.matmul(dev, block_w, out=out[:start].reshape(n_blocks, size))
        if shift:
            out[:start] += shift
        acc = float(ends[-1])
    if start < n:  # the plain loop of _recur_into, as one list (acc is carried along)
        out[start:] = [shift + (acc := r * acc + scale * (v - shift))
                       for v in x[start:].tolist()]


def linear_recurrence(u: FloatArray, r: float) -> FloatArray:
    """Solve ``y_t = r * y_{t-1} + u_t`` with ``y_{-1} = 0``, vectorised and O(n).

    Blocks of 16 values are solved by small matrix products, the values carried
    between blocks by the same recursion on the block ends (see ``_recur_into``).
    Each value is a sum of at most 16 products plus one carry, so the rounding is
    that of the plain loop (a few ulps), and nothing accumulates along the series.

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
    x = np.ascontiguousarray(as_series(u))
    out = np.empty_like(x)
    _recur_into(x, out, float(r))
    return out


def recursive_average(
    values: FloatArray,
    alpha: float,
    start: int,
    seed_value: float,
    out: FloatArray | None = None,
) -> FloatArray:
    """Run ``m_t = m_{t-1} + alpha (x_t - m_{t-1})`` from ``m_start = seed_value``.

    Vectorised by the blocked solver of :func:`linear_recurrence` (no Python loop
    per bar). The recursion runs on deviations from the seed, ``m_t = seed + e_t`` with
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
    out : numpy.ndarray, optional
        Where to write the result (contiguous float64, the length of ``values``);
        may be ``values`` itself, which saves a fresh array on long series.

    Returns
    -------
    numpy.ndarray
        The recursion aligned with ``values``.

    Examples
    --------
    >>> recursive_average([1.0, 2.0, 3.0, 4.0], 0.5, 1, 1.5)
    array([  nan, 1.5  , 2.25 , 3.125])
    """
    x = np.ascontiguousarray(as_series(values))
    if out is None:
        out = np.empty(len(x))
    out[:start] = np.nan
    if start >= len(x):
        return out
    out[start] = seed_value
    _recur_into(x[start + 1 :], out[start + 1 :], 1.0 - alpha, alpha, float(seed_value))
    return out


def average_of(
    prices: FloatArray, period: int, kind: str, seed: str, overwrite: bool = False
) -> FloatArray:
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
    overwrite : bool, default False
        The recursive kinds may write their result into ``prices`` (a contiguous
        scratch array of the caller's), which saves a fresh array on long series.

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
    out = prices if overwrite else None
    if seed == "average":
        # Seed = mean of the first N values (taken from the accurate window mean).
        first_mean = _first_mean(prices, period)
        return recursive_average(prices, alpha, period - 1, first_mean, out)
    out = recursive_average(prices, alpha, 0, float(prices[0]), out)
    out[: period - 1] = np.nan
    return out


def _first_mean(prices: FloatArray, period: int) -> float:
    """The mean of the first ``period`` prices, as ``window_mean`` gives it for one window.

    Its short path's arithmetic without its layers (a recursive average pays this
    on every call): the deviations from the middle price, summed, divided by N,
    added back to that price.
    """
    shift = prices[period // 2]
    total = np.add.reduce(prices[:period] - shift)
    return float(shift + total / float(period))


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
        N, bars in the window: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).
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
