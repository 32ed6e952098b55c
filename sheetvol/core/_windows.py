"""Accurate O(n) rolling window sums, means and variances.

Why not running sums over the whole series: a running sum of prices near 1e7
grows to 1e13 after a million bars, and the difference of two such sums keeps
only the last few digits of a window sum; a running sum of squares (the naive
``E[x^2] - E[x]^2`` variance) cancels catastrophically as soon as the prices
are large and the moves small. The obvious accurate method (two passes over
every window) costs O(n * period).

What we do instead (block-local shifts): the series is cut into blocks of
exactly ``period`` bars, so the window ending in block ``b`` covers a suffix
of block ``b-1`` and a prefix of block ``b``. Each block gets its own shift
``c_b`` (one of its own prices), and only the deviations ``y = x - c_b`` are
summed, with cumulative sums that never run over more than one block. The
part of a window taken from block ``b-1`` is moved to the shift of block ``b``
with the exact identity ``sum(y + d) = Y1 + k d`` and
``sum((y + d)^2) = Y2 + 2 d Y1 + k d^2`` (``d = c_{b-1} - c_b``, ``k`` bars).
Deviations are small, so the variance ``S2/N - (S1/N)^2`` loses almost no
digits, and nothing accumulates along the series, so there is no drift after a
million bars. Constant prices give exactly zero (every deviation is 0).

When a window is much flatter than its neighbourhood (a flat stretch after a
jump, two nearly equal prices at period 2), the one-pass variance could lose
relative digits; such windows are detected from the size of the cancelling terms
and recomputed by two passes (exactly flat ones in O(n) by counting price
changes), see ``_refine``.

The blocks are laid out transposed, one row per position inside a block and one
column per block, so the cumulative sums are vectorised row additions across all
blocks instead of a sequential scan (several times faster in numpy); long periods
group the rows so the number of numpy calls grows only like sqrt(period). The
work runs over chunks of blocks small enough to stay in the CPU cache, and the
cost per bar does not grow with the period.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Iterable
from typing import Any, Literal

import numpy as np

from sheetvol.core._gaps import as_series
from sheetvol.core._types import FloatArray
from sheetvol.core.bounds import PERIOD, Bound

# Work is done on chunks of blocks so the temporaries stay in the CPU cache; a chunk
# spans at least _MIN_COLUMNS blocks so the per-row numpy calls stay cheap, and about
# _CHUNK_ELEMENTS values otherwise (measured on 1e6 bars, see docs/performance.md).
_CHUNK_ELEMENTS = 32768
_MIN_COLUMNS = 1024
# With fewer blocks than this (short series), the row loop costs more than numpy's own
# cumulative sum down each block, which is then run on blocks stored contiguously.
_ROW_LOOP_MIN_COLUMNS = 256
_ROW_LOOP_MAX_PERIOD = 64
# Longer periods: rows are grouped (see _cumsum_rows); each call covers about this many
# values. _GROUPED_ROWS False falls back to numpy's cumulative sum on contiguous blocks.
_GROUPED_CALL = 2048
_GROUPED_ROWS = True
# A window is recomputed by two passes when its variance is below this share of the
# terms that cancel in the one-pass formula: the one-pass relative error is a few
# eps divided by this share, so 1e-3 keeps it near 1e-12 or better.
_REFINE_RATIO = 1e-3
# Short inputs (windows x period up to this many values, e.g. the one window of a
# per-cell _LAST call) skip the block engine, whose fixed cost is tens of numpy calls,
# and are computed window by window in two passes (see _small). 8192 takes in 300 bars
# at a period of 20 (5,620 values); the two cost about the same near 12,000 values
# (``window_mean_var``, 300 to 3,000 bars, periods 14 to 200, on the project's 2-core box).
_SMALL_ELEMENTS = 8192


#: Windows the engine itself computes: any length (the public functions check theirs
#: against :mod:`sheetvol.core.bounds` first).
_ANY = Bound(1, whole=True)
_ANY_SPREAD = Bound(2, whole=True)


# -- option checks shared by the kernels ---------------------------------------------
def check_period(period: Any, name: str = "period", bound: Bound = PERIOD) -> int:
    """Return ``period`` as an int or raise ``ValueError`` naming the bad value.

    Parameters
    ----------
    period : int
        Window length in bars; a float is accepted only when it is whole.
    name : str
        Argument name used in the message.
    bound : Bound, default :data:`sheetvol.core.bounds.PERIOD`
        The allowed range, the one the worksheet functions state too
        (:data:`~sheetvol.core.bounds.SPREAD_PERIOD` for a spread).

    Returns
    -------
    int
        The validated period.

    Examples
    --------
    >>> check_period(14.0)
    14
    >>> from sheetvol.core.bounds import SPREAD_PERIOD
    >>> check_period(1, bound=SPREAD_PERIOD)
    Traceback (most recent call last):
    ...
    ValueError: period must be a whole number from 2 to 5000, got 1
    """
    if type(period) is int and bound.holds(period):  # the usual case: no message to build
        return period
    if isinstance(period, (bool, np.bool_)):
        raise _refused(period, name, bound)
    try:
        value = operator.index(period)
    except TypeError:
        if isinstance(period, (float, np.floating)) and float(period).is_integer():
            value = int(period)
        else:
            raise _refused(period, name, bound) from None
    if not bound.holds(value):
        raise _refused(period, name, bound)
    return value


def _refused(period: Any, name: str, bound: Bound) -> ValueError:
    return ValueError(f"{name} must be {bound.words()}, got {period!r}")


def check_choice(value: Any, name: str, allowed: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``allowed``, else raise ``ValueError``.

    Parameters
    ----------
    value : str
        The option given by the caller.
    name : str
        Argument name used in the message.
    allowed : iterable of str
        The valid option words.

    Returns
    -------
    str
        ``value`` unchanged.

    Examples
    --------
    >>> check_choice("simple", "kind", ("simple", "exponential"))
    'simple'
    """
    if type(allowed) is tuple and type(value) is str and value in allowed:
        return value  # the usual case, without building the message's list
    options = tuple(allowed)
    if not isinstance(value, str) or value not in options:
        listed = ", ".join(f'"{o}"' for o in options)
        raise ValueError(f"{name} must be one of {listed}, got {value!r}")
    return value


# -- the block engine ------------------------------------------------------------------
def _cumsum_rows(a: FloatArray) -> FloatArray:
    """Cumulative sums down each column (one column per block), in place.

    Short blocks: one numpy call per row. Long blocks: rows are grouped by about
    sqrt(period); sums run within all groups at once, then each group gets the
    total of the groups before it, so the calls number about 2 sqrt(period).
    """
    rows = a.shape[0]
    if not a.flags.c_contiguous:
        return np.cumsum(a, axis=0, out=a)
    if rows <= _ROW_LOOP_MAX_PERIOD:
        for j in range(1, rows):
            np.add(a[j - 1], a[j], out=a[j])
        return a
    size = math.isqrt(rows)
    groups = rows // size
    main = groups * size
    grouped = a[:main].reshape(groups, size, a.shape[1])
    for r in range(1, size):
        np.add(grouped[:, r - 1], grouped[:, r], out=grouped[:, r])
    for g in range(1, groups):
        grouped[g] += grouped[g - 1, -1]
    for j in range(main, rows):
        np.add(a[j - 1], a[j], out=a[j])
    return a


def _older(prefix: FloatArray) -> FloatArray:
    """Sum over rows j+1..N-1 of the previous block, for each row j of blocks 1..c."""
    return prefix[-1, :-1] - prefix[:, :-1]


class _Grid:
    """A series viewed as blocks of ``period`` bars, (position in block, block).

    Whole blocks are a view of the input (no copy); only a last, partial block is
    copied and padded with ``fill``.
    """

    def __init__(self, values: FloatArray, period: int, fill: float) -> None:
        n = len(values)
        self.whole = n // period
        self.n_blocks = -(-n // period)
        self.view = values[: self.whole * period].reshape(self.whole, period).T
        self.last = None
        if self.n_blocks > self.whole:
            self.last = np.full(period, fill)
            self.last[: n - self.whole * period] = values[self.whole * period :]

    def column(self, b: int) -> FloatArray:
        # b past the whole blocks is asked for only when the partial last block exists
        return self.view[:, b] if b < self.whole else self.last  # type: ignore[return-value]

    def put(self, out: FloatArray, b0: int, b1: int, minus: FloatArray | None = None) -> None:
        """Copy blocks b0..b1-1 into the columns of ``out``, less ``minus`` per column."""
        top = min(b1, self.whole)
        if minus is None:
            if top > b0:
                out[:, : top - b0] = self.view[:, b0:top]
            if b1 > self.whole:
                out[:, -1] = self.last
            return
        if top > b0:
            np.subtract(self.view[:, b0:top], minus[: top - b0], out=out[:, : top - b0])
        if b1 > self.whole:
            assert self.last is not None  # blocks past the whole ones: the partial last one
            np.subtract(self.last, minus[-1], out=out[:, -1])


def _small(
    x: FloatArray, period: int, mode: str, level: FloatArray | None, sample: bool
) -> list[FloatArray]:
    """The engine's results for short inputs: every window on its own, two passes.

    Each window is shifted by its own middle price (exact deviations for prices
    of one sign, 0 on a flat window), summed, and its variance taken about the
    mean of the deviations (two passes): no cancellation at all, so this is at
    least as accurate as the block engine, in a few numpy calls.
    """
    n, big_n = len(x), float(period)
    m = n - period + 1
    if m == 1 and mode == "deviation":  # one window (a per-cell _LAST call's): 1-D steps
        return [_one_deviation(x, period, level, sample)]
    if not x.flags.c_contiguous:
        x = np.ascontiguousarray(x)
    step = x.strides[0]
    w = np.ndarray((m, period), np.float64, buffer=x, strides=(step, step))
    shift = w[:, period // 2]  # a strided view; w - shift is a fresh array anyway
    y = np.subtract(w, shift[:, None])
    count = 3 if mode == "frame" else 2 if mode == "moments" else 1
    outs = [np.empty(n) for _ in range(count)]
    tail = []
    for o in outs:
        o[: period - 1] = np.nan
        tail.append(o[period - 1 :])
    if mode == "linear":
        weights = np.arange(1.0, big_n + 1.0)
        np.add(shift, np.dot(y, weights) / (big_n * (big_n + 1.0) / 2.0), out=tail[0])
        return outs
    total = np.add.reduce(y, axis=1)
    if mode == "sum":
        np.add(big_n * shift, total, out=tail[0])
        return outs
    offset = np.divide(total, big_n, out=total)
    if mode == "mean":
        np.add(shift, offset, out=tail[0])
        return outs
    if mode == "deviation" and level is not None:
        y -= (level[period - 1 :] - shift)[:, None]  # level - shift: exact nearby
    else:
        y -= offset[:, None]
    np.multiply(y, y, out=y)
    squares = np.add.reduce(y, axis=1)
    if mode == "deviation":
        squares /= big_n  # the same roundings as the engine and window_mean_var
        if sample:
            squares *= big_n / (big_n - 1.0)
        np.sqrt(squares, out=tail[0])
    elif mode == "moments":
        np.add(shift, offset, out=tail[0])
        np.divide(squares, big_n, out=tail[1])
    else:  # frame
        tail[0][:] = shift
        tail[1][:] = offset
        np.divide(squares, big_n, out=tail[2])
    return outs


def _one_deviation(x: FloatArray, period: int, level: FloatArray | None,
                   sample: bool) -> FloatArray:
    """:func:`_small`'s deviation of one window (``len(x) == period``): the same steps."""
    big_n = float(period)
    shift = x[period // 2]
    y = np.subtract(x, shift)
    if level is not None:
        y -= level[-1] - shift
    else:
        y -= np.add.reduce(y) / big_n
    np.multiply(y, y, out=y)
    squares = np.add.reduce(y) / big_n
    if sample:
        squares *= big_n / (big_n - 1.0)
    out = np.full(period, np.nan)
    out[-1] = np.sqrt(squares)
    return out


def _engine(
    x: FloatArray, period: int, mode: str, level: FloatArray | None = None, sample: bool = False
) -> list[FloatArray]:
    """Window statistics by blocks of ``period`` bars (see the module docstring).

    ``mode``: ``"sum"``, ``"mean"``, ``"moments"`` (mean, variance), ``"frame"``
    (shift, offset, variance), ``"deviation"`` (root mean square about ``level``
    or about the window mean) or ``"linear"`` (linearly weighted mean).
    """
    n, big_n = len(x), float(period)
    if (n - period + 1) * period <= _SMALL_ELEMENTS:
        return _small(x, period, mode, level, sample)
    gx = _Grid(x, period, x[-1])  # padding only feeds rows that are cut off again
    n_blocks = gx.n_blocks
    gl = None if level is None else _Grid(level, period, np.nan)
    # The shift of each block is one of its own prices: deviations from it are exact
    # (Sterbenz) for prices of one sign, and 0 for constant prices.
    shift = np.empty(n_blocks)
    shift[: gx.whole] = gx.view[period // 2]
    if gx.last is not None:
        shift[-1] = gx.last[period // 2]
    n_out = {"moments": 2, "frame": 3}.get(mode, 1)
    outs = [np.empty(n_blocks * period) for _ in range(n_out)]
    grids = [o.reshape(n_blocks, period).T for o in outs]
    pos = np.arange(period, dtype=np.float64)[:, None]
    k = (period - 1.0) - pos  # bars of each window that lie in the previous block
    if period <= _ROW_LOOP_MAX_PERIOD:
        wide = n_blocks >= _ROW_LOOP_MIN_COLUMNS
        cols = max(_MIN_COLUMNS if wide else 4, _CHUNK_ELEMENTS // period)
    else:  # grouped rows: keep each numpy call over a few thousand values
        wide = _GROUPED_ROWS
        cols = max(_GROUPED_CALL // math.isqrt(period), _CHUNK_ELEMENTS // period)
    cols = min(n_blocks, cols)
    flagged: list[np.ndarray] = []
    # Every chunk works in the same few buffers: fresh temporaries of this size would
    # each be paged in again (the allocator hands their memory back between chunks).
    order: Literal["C", "F"] = "C" if wide else "F"
    y_buf = np.empty((period, cols + 1), order=order)
    y2_buf = np.empty((period, cols + 1), order=order) if mode != "linear" else None
    work = [np.empty((period, cols), order=order) for _ in range(5)]
    for b0 in range(0, n_blocks, cols):
        b1 = min(b0 + cols, n_blocks)
        m = b1 - b0
        here = slice(b0, b1)
        # Column 0 is the previous block; before block 0 a dummy of zero deviations.
        sh = np.empty(m + 1)
        sh[1:] = shift[here]
        sh[0] = shift[b0 - 1] if b0 else shift[0]
        # Wide chunks: one row per position (row loop); narrow: one contiguous block
        # per column (numpy's cumulative sum); every later step follows this order.
        y = y_buf if m == cols else np.empty((period, m + 1), order=order)
        gx.put(y[:, 1:], b0, b1, minus=sh[1:])  # deviations from each block's shift
        if b0:
            np.subtract(gx.column(b0 - 1), sh[0], out=y[:, 0])
        else:
            y[:, 0] = 0.0
        d = sh[:-1] - sh[1:]  # moves the older part onto the newer block's shift
        kd, t1, t2, t3, t4 = (w if m == cols else w[:, :m] for w in work)
        np.multiply(k, d, out=kd)
        if mode == "linear":
            pj = _cumsum_rows(y * pos)
            p1 = _cumsum_rows(y)
            q1, qj = _older(p1), _older(pj)
            # Rows 0..j of block b carry weights (N - j) + p, rows j+1..N-1 of block
            # b-1 carry p - j; the shift change adds d * k(k+1)/2.
            acc = (big_n - pos) * p1[:, 1:]
            acc += pj[:, 1:]
            acc += qj
            acc -= pos * q1
            acc += kd * ((k + 1.0) / 2.0)
            acc /= big_n * (big_n + 1.0) / 2.0
            acc += sh[1:]
            grids[0][:, here] = acc
            continue
        y2 = None
        if mode in ("moments", "frame", "deviation"):
            y2 = y2_buf if m == cols else np.empty((period, m + 1), order=order)
            np.multiply(y, y, out=y2)
        p1 = _cumsum_rows(y)
        q1 = np.subtract(p1[-1, :-1], p1[:, :-1], out=t1)  # the older part of each window
        s1 = np.add(p1[:, 1:], q1, out=t2)
        s1 += kd
        if mode == "sum":
            s1 += big_n * sh[1:]
            grids[0][:, here] = s1
            continue
        mean = np.divide(s1, big_n, out=t3)  # the window mean minus the shift
        if y2 is None:
            np.add(mean, sh[1:], out=grids[0][:, here])
            continue
        p2 = _cumsum_rows(y2)
        # Size of the terms that cancel in s2, per block: block sums of squares, the
        # cross term bounded by Cauchy-Schwarz (sum|y| <= sqrt(N sum y^2)) and N d^2.
        # The variance's rounding error is a few eps times this, which only matters
        # when a window is much flatter than its neighbourhood (see _refine).
        prev_total = p2[-1, :-1]
        bound = p2[-1, 1:] + prev_total
        bound += 2.0 * np.abs(d) * np.sqrt(big_n * prev_total)
        bound += big_n * d * d
        bound *= _REFINE_RATIO
        # s2 = N * population variance in the block's frame, term by term in the
        # buffers of the terms that are done with.
        s2 = np.subtract(p2[-1, :-1], p2[:, :-1], out=t4)
        s2 += p2[:, 1:]
        np.multiply(q1, 2.0 * d, out=q1)
        s2 += q1
        np.multiply(kd, d, out=kd)
        s2 += kd
        np.multiply(s1, mean, out=s1)
        s2 -= s1  # minus N * (mean - shift)^2
        # Rounding may leave s2 a hair below 0 on a flat window: such windows are below
        # their bound and recomputed by _refine (and their square roots ignored).
        if mode == "deviation" and gl is not None:
            # mean - level in the local frame: (level - shift) is exact nearby.
            gap = kd
            gl.put(gap, b0, b1)
            gap -= sh[1:]
            np.subtract(mean, gap, out=gap)
            gap *= gap
            gap *= big_n
            s2 += gap
        # Blocks with a window below its bound: a reduction first, rows only for those.
        # fmin skips the NaN of windows whose level is still warming up (a plain min
        # would be NaN and hide the block's other windows).
        few = np.flatnonzero(np.fmin.reduce(s2, axis=0) < bound)
        if len(few):
            rows, at = np.nonzero(s2[:, few] < bound[few])
            flagged.append((b0 + few[at]) * period + rows)
        if mode == "moments":
            np.add(mean, sh[1:], out=grids[0][:, here])
            np.divide(s2, big_n, out=grids[1][:, here])
        elif mode == "frame":
            grids[0][:, here] = sh[1:]
            grids[1][:, here] = mean
            np.divide(s2, big_n, out=grids[2][:, here])
        else:
            s2 /= big_n  # the same roundings as window_mean_var, so callers can mix them
            if sample:
                s2 *= big_n / (big_n - 1.0)
            with np.errstate(invalid="ignore"):
                np.sqrt(s2, out=grids[0][:, here])
    for o in outs:
        o[: period - 1] = np.nan
    outs = [o[:n] for o in outs]
    if flagged:
        ends = np.concatenate(flagged)
        ends = ends[(ends >= period - 1) & (ends < n)]
        _refine(x, period, ends, mode, outs[-1], level, sample)
    return outs


def _refine(
    x: FloatArray,
    period: int,
    ends: np.ndarray,
    mode: str,
    out: FloatArray,
    level: FloatArray | None,
    sample: bool,
) -> None:
    """Recompute flagged windows by two passes (in place on ``out``).

    Flagged windows are those whose variance is tiny next to the deviations from
    the block shift (a flat stretch after a jump, two nearly equal prices in a short
    window). There the one-pass formula could lose relative digits; two passes over
    just those windows restore full accuracy. For random walks this is a few percent
    of the windows at period 2 and almost none at longer periods; stale prices give
    many exactly flat windows, which are recognised in O(n) and need no second pass.
    """
    if len(ends) * period > 4 * len(x):
        # Many flagged windows (stale, tick-rounded prices): the flat ones, those with
        # no price change inside, are settled without a second pass.
        changes = np.flatnonzero(x[1:] != x[:-1])  # i: x[i] differs from x[i + 1]
        flat = np.searchsorted(changes, ends) == np.searchsorted(changes, ends - (period - 1))
        t = ends[flat]
        if mode == "deviation" and level is not None:
            scale = math.sqrt(period / (period - 1.0)) if sample else 1.0
            out[t] = np.abs(x[t] - level[t]) * scale
        else:
            out[t] = 0.0
        ends = ends[~flat]
    offsets = np.arange(1 - period, 1)
    batch = max(1, _CHUNK_ELEMENTS // period)
    for i in range(0, len(ends), batch):
        t = ends[i : i + batch]
        w = x[t[:, None] + offsets]
        if mode == "deviation" and level is not None:
            dev = w - level[t][:, None]
        else:
            dev = w - w[:, -1:]  # exact for nearby prices; 0 on a flat window
            dev -= dev.mean(axis=1, keepdims=True)
        var = np.einsum("ij,ij->i", dev, dev) / period
        if mode == "deviation":
            out[t] = np.sqrt(var * (period / (period - 1.0)) if sample else var)
        else:
            out[t] = var


def _empty(n: int) -> FloatArray:
    return np.full(n, np.nan)


def _prepare(values: Any, period: Any) -> tuple[FloatArray, int]:
    return as_series(values), check_period(period, bound=_ANY)


def window_sum(values: FloatArray, period: int) -> FloatArray:
    """Sum of the last ``period`` values at each bar, accurate and O(n).

    Parameters
    ----------
    values : array_like
        Finite values, oldest first (callers drop gaps with ``skip_gaps``).
    period : int
        Window length in bars (at least 1).

    Returns
    -------
    numpy.ndarray
        Window sums aligned with ``values``; NaN on the first ``period - 1`` rows.

    Examples
    --------
    >>> window_sum([1.0, 2.0, 3.0, 4.0], 2)
    array([nan,  3.,  5.,  7.])
    """
    x, period = _prepare(values, period)
    if len(x) < period:
        return _empty(len(x))
    return _engine(x, period, "sum")[0]


def window_mean(values: FloatArray, period: int) -> FloatArray:
    """Rolling mean (the simple moving average), accurate and O(n).

    Parameters
    ----------
    values : array_like
        Finite values, oldest first.
    period : int
        Window length in bars (at least 1).

    Returns
    -------
    numpy.ndarray
        Means aligned with ``values``; NaN on the first ``period - 1`` rows.

    Examples
    --------
    >>> window_mean([1.0, 2.0, 3.0, 4.0], 2)
    array([nan, 1.5, 2.5, 3.5])
    """
    x, period = _prepare(values, period)
    if len(x) < period:
        return _empty(len(x))
    return _engine(x, period, "mean")[0]


def window_mean_var(values: FloatArray, period: int) -> tuple[FloatArray, FloatArray]:
    """Rolling mean and population variance (divide by N), accurate and O(n).

    Parameters
    ----------
    values : array_like
        Finite values, oldest first (callers drop gaps with ``skip_gaps``).
    period : int
        Window length in bars (at least 1).

    Returns
    -------
    mean, variance : numpy.ndarray
        Aligned with ``values``; NaN on the first ``period - 1`` rows.

    Examples
    --------
    >>> mean, var = window_mean_var([1.0, 2.0, 3.0, 5.0], 3)
    >>> mean[2:], var[2:]
    (array([2.        , 3.33333333]), array([0.66666667, 1.55555556]))
    """
    x, period = _prepare(values, period)
    if len(x) < period:
        return _empty(len(x)), _empty(len(x))
    mean, var = _engine(x, period, "moments")
    return mean, var


def window_frame(values: FloatArray, period: int) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Window mean and population variance in a local frame (for exact differences).

    Returns ``(shift, offset, variance)`` per bar with ``mean = shift + offset``,
    where ``shift`` is one of the input prices near the window. Differences of the
    mean from another price ``m`` are best taken as ``offset - (m - shift)``: the
    subtraction ``m - shift`` is exact for nearby prices, so no digits are lost.

    Parameters
    ----------
    values : array_like
        Finite values, oldest first.
    period : int
        Window length in bars (at least 1).

    Returns
    -------
    tuple of numpy.ndarray
        ``shift``, ``offset`` and ``variance``, NaN on the warm-up rows.

    Examples
    --------
    >>> shift, offset, var = window_frame([10.0, 12.0, 14.0], 2)
    >>> (shift + offset)[1:], var[1:]
    (array([11., 13.]), array([1., 1.]))
    """
    x, period = _prepare(values, period)
    if len(x) < period:
        return _empty(len(x)), _empty(len(x)), _empty(len(x))
    shift, offset, var = _engine(x, period, "frame")
    return shift, offset, var


def window_deviation(
    values: FloatArray,
    period: int,
    level: FloatArray | None = None,
    sample: bool = False,
) -> FloatArray:
    """Root mean square deviation of each window about ``level`` (or its own mean).

    ``sqrt(sum((x_i - m_t)^2) / D)`` over the last ``period`` values, with ``m_t``
    the window mean (``level=None``) or ``level[t]``, and ``D = N`` or ``N - 1``
    (``sample=True``). Uses ``sum((x_i - m)^2) = N var + N (mean - m)^2`` with the
    difference ``mean - m`` taken in the block's local frame.

    Parameters
    ----------
    values : array_like
        Finite values, oldest first.
    period : int
        Window length in bars (at least 1; at least 2 with ``sample``).
    level : array_like, optional
        The centre on each bar (e.g. a moving average), aligned with ``values``.
    sample : bool, default False
        Divide by N - 1 instead of N.

    Returns
    -------
    numpy.ndarray
        Deviations aligned with ``values``; NaN on the warm-up rows and wherever
        ``level`` is NaN.

    Examples
    --------
    >>> window_deviation([2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0], 8)[-1]
    np.float64(2.0)
    >>> window_deviation([1.0, 3.0], 2, level=[0.0, 0.0])[-1]
    np.float64(2.23606797749979)
    """
    x = as_series(values)
    period = check_period(period, bound=_ANY_SPREAD if sample else _ANY)
    lv = None
    if level is not None:
        lv = as_series(level, "level")
        if len(lv) != len(x):
            raise ValueError(f"level has {len(lv)} rows but values has {len(x)}")
    if len(x) < period:
        return _empty(len(x))
    return _engine(x, period, "deviation", lv, sample)[0]


def window_linear(values: FloatArray, period: int) -> FloatArray:
    """Linearly weighted mean of the last ``period`` values (newest weight N, oldest 1).

    Index-weighted running sums over the whole series lose digits at 1e6 bars of
    prices near 1e7; here the weights are local positions inside a block and the
    values are deviations from the block's shift, like the other window sums.

    Parameters
    ----------
    values : array_like
        Finite values, oldest first.
    period : int
        Window length in bars (at least 1).

    Returns
    -------
    numpy.ndarray
        Weighted means aligned with ``values``; NaN on the first ``period - 1`` rows.

    Examples
    --------
    >>> window_linear([1.0, 2.0, 4.0], 2)
    array([       nan, 1.66666667, 3.33333333])
    """
    x, period = _prepare(values, period)
    if len(x) < period:
        return _empty(len(x))
    return _engine(x, period, "linear")[0]


__all__ = [
    "check_choice",
    "check_period",
    "window_deviation",
    "window_frame",
    "window_linear",
    "window_mean",
    "window_mean_var",
    "window_sum",
]
