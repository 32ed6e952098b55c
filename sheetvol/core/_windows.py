"""Accurate O(n) rolling window sums, means and variances.

Why not running sums over the whole series: a running sum of prices near 1e7
grows to 1e13 after a million bars, and the difference of two such sums keeps
only the last few digits of a window sum; a running sum of squares (the naive
``E[x^2] - E[x]^2`` variance) cancels catastrophically as soon as the prices
are large and the moves small. The obvious accurate method (two passes over
every window) costs O(n * period).

What we do instead (block-local shifts): the series is cut into blocks of
exactly ``period`` bars, so the window ending at position ``j`` of block ``b``
covers positions ``0..j`` of block ``b`` (the new part) and positions after
``j`` of block ``b-1`` (the old part). Each block gets its own shift ``c_b``,
its first price, which lies inside every window that ends in the block; both
parts are taken as deviations ``y = x - c_b`` from it, straight from the prices
(exact by Sterbenz's lemma for prices within a factor of two of each other). The new part is summed
forwards and the old part backwards, with cumulative sums that never run over
more than one block, so a window's sums of ``y`` and ``y^2`` are one running sum
of each part, added. The deviations are no larger than the window's own range,
so the variance ``S2/N - (S1/N)^2`` loses almost no digits; nothing accumulates
along the series, so there is no drift after a million bars. Constant prices give
exactly zero (every deviation is 0).

As the shift lies inside the window, a window's sum of squares in its frame is at
most 2N times its sum of squares about its mean (the variance is at least
range^2 / 2N), so the one-pass formula loses at most a factor 2N. A window whose
variance is below a thousandth of its sum of squares (which takes a period past 500
and an odd price at the start of its block) is recomputed by two passes, see
``_refine``. A flat window holds its shift, so its deviations are all 0 and its
variance is exactly 0.

The blocks are laid out transposed, one row per position inside a block and one
column per block, so the cumulative sums are vectorised row additions across all
blocks instead of a sequential scan (several times faster in numpy); long periods
store the positions grouped (see ``_Rows``), so the number of numpy calls grows
only like sqrt(period). Each sum (the deviations and their squares, of each part)
is one contiguous array, so the steps between the sums are single passes. The
work runs over chunks of blocks small enough to stay in the CPU cache, with the
buffers and their views made once, and the cost per bar does not grow with the
period.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Iterable
from typing import Any

import numpy as np

from sheetvol.core._gaps import as_series
from sheetvol.core._types import FloatArray
from sheetvol.core.bounds import PERIOD, Bound

# Work is done on chunks of blocks so the buffers stay in the CPU cache: about
# _CHUNK_ELEMENTS windows, and at least _MIN_COLUMNS blocks while each numpy call of
# the row loop covers one position of every block of the chunk (measured on 1e6 bars,
# see docs/performance.md).
_CHUNK_ELEMENTS = 49152
_MIN_COLUMNS = 1024
# Periods up to this: a row loop, one numpy call per position. Longer periods: the
# positions are grouped (see _Rows), and a chunk spans at least _GROUPED_CALL values
# per position of a group, so the copies by position stay long enough.
_ROW_LOOP_MAX_PERIOD = 24
# With fewer blocks than this (short series) the row loop's calls cost more than
# numpy's cumulative sum down the positions, which is used instead.
_ROW_LOOP_MIN_COLUMNS = 256
_GROUPED_CALL = 4096
# A window is recomputed by two passes when its variance is below this share of the
# terms that cancel in the one-pass formula (its sum of squares in the block's frame):
# the one-pass relative error is a few eps divided by this share, so 1e-3 keeps it
# near 1e-13 or better; with the shift inside every window only periods past 500 can
# get there (see the module docstring).
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
def _split(a: np.ndarray, axis: int, outer: int) -> np.ndarray:
    """View of ``a`` with ``axis`` split into (outer, len // outer).

    Splitting one axis never needs a copy, whatever the strides; the check is cheap.
    """
    shape = list(a.shape)
    shape[axis : axis + 1] = [outer, shape[axis] // outer]
    view = a.reshape(shape)
    assert view.base is (a if a.base is None else a.base), "a split axis is a view"
    return view


class _Rows:
    """The positions of a block, stored in the order the cumulative sums want them.

    Short blocks: position j is row j, and the sums add row j - 1 to row j (one numpy
    call per row, each across every block of the chunk). Long blocks: positions are
    grouped, ``size`` to a group and ``groups`` groups, padded to ``rows`` =
    size x groups; position r = k * size + i (group k) is stored at row i * groups + k.
    The sums within all groups are then ``size - 1`` additions of one contiguous slab
    of rows to the next, and the groups get the running totals of the groups before
    them in one more call: about sqrt(period) numpy calls, each over contiguous rows.
    """

    def __init__(self, period: int) -> None:
        size = 1 if period <= _ROW_LOOP_MAX_PERIOD else math.isqrt(period)
        groups = -(-period // size)
        self.size, self.groups, self.rows = size, groups, size * groups
        self.tail = period - (groups - 1) * size  # positions in the last group (1..size)
        # the position kept at each storage row (rows from ``period`` on: padding)
        self.position = np.arange(self.rows).reshape(groups, size).T.ravel()

    def stored(self, logical: np.ndarray) -> np.ndarray:
        """A view of rows in position order as (i, group, ...): the storage order."""
        return _split(logical, 0, self.groups).swapaxes(0, 1)

    def split(self, stored: np.ndarray) -> np.ndarray:
        """Rows in storage order as (i, group, ...), to pair with :meth:`stored` views."""
        return _split(stored, 0, self.size)


class _Work:
    """The buffers of chunks of ``m`` blocks and the views every step uses.

    Made once per chunk size (a view costs about as much as a numpy call on a few
    thousand values, and a chunk takes dozens), and reused by every chunk of that
    size: fresh temporaries would each be paged in again (the allocator hands their
    memory back between chunks).
    """

    def __init__(self, lay: _Rows, period: int, q: int, m: int, level: bool) -> None:
        rows, size, g = lay.rows, lay.size, lay.groups
        self.size = size
        self.a = a = np.empty((2 * q, rows, m))  # sums: new part's, then old part's
        self.prices = p = np.empty((rows + 1, m + 1))  # position x block; block 0: before
        # results in position order, in the old part's last sum (spent by then)
        r = a[-1]
        self.blocks_in, self.before, self.padding = p[:period, 1:], p[:period, 0], p[period:]
        self.new_in, self.old_in = lay.stored(p[:rows, 1:]), lay.stored(p[rows:0:-1, :m])
        self.new_out, self.old_out = lay.split(a[0]), lay.split(a[q])
        self.final, self.blocks_out = lay.stored(r), r[:period].T
        self.parts, self.older = a[:q], a[q:, ::-1]
        self.split = [lay.split(a[i]) for i in range(2 * q)]
        self.pad = self.split[1][lay.tail :, -1] if lay.tail < size and q == 2 else None
        self.carry = None
        if size == 1:
            # few blocks (short series): numpy's own cumulative sum, one call
            wide = m >= _ROW_LOOP_MIN_COLUMNS
            self.steps = [(a[:, k - 1], a[:, k]) for k in range(1, rows)] if wide else []
            self.whole = None if wide else a
        else:
            self.whole = None
            self.steps = [(a[:, (i - 1) * g : i * g], a[:, i * g : (i + 1) * g])
                          for i in range(1, size)]
            by_group = _split(a, 1, size)  # (sums, i, group, blocks)
            self.later = by_group[:, :, 1:]
            self.totals = by_group[:, -1]
            # the totals of the groups before each group (0 before the first), as one
            # small matrix product (a numpy call per group would cost more)
            self.before_groups = np.tri(g, k=-1)
            self.carry = np.empty((2 * q, g, m))
            self.carried = self.carry[:, None, 1:]
            # a window's sums take the carries of its two rows' groups: stored row
            # i * g + k pairs with row (size - 1 - i) * g + (g - 1 - k)
            self.both = np.empty((q, g, m))
            self.windows = _split(a[:q], 1, size)
        self.level = None
        if level:
            self.level = lv = np.empty((rows, m))
            self.level_in, self.level_pad = lv[:period], lv[period:]
            self.level_rows = lay.stored(lv)
            self.gap = np.empty((rows, m))
            self.gap_out = lay.split(self.gap)

    def cumsum(self, fold: bool) -> None:
        """Running sums down the positions of every sum, in place (see :class:`_Rows`).

        Grouped positions with ``fold``: the sums run within each group only, and the
        totals of the groups before are left in ``carry`` for :meth:`window_sums`,
        which adds them to the two window sums instead of to all four running sums.
        """
        if self.whole is not None:
            np.cumsum(self.whole, axis=1, out=self.whole)
        for before, here in self.steps:
            np.add(before, here, out=here)
        if self.carry is not None:
            np.matmul(self.before_groups, self.totals, out=self.carry)
            if not fold:
                np.add(self.later, self.carried, out=self.later)

    def by_slab(self, sums: FloatArray) -> FloatArray:
        """The smallest of each group's rows for every block, as (groups, blocks) rows
        to reduce further (fewer, longer rows for numpy's reduction)."""
        if self.carry is None:
            return sums
        by_row = np.fmin.reduce(sums.reshape(self.size, -1), axis=0)
        return by_row.reshape(-1, sums.shape[1])

    def window_sums(self, fold: bool) -> None:
        """The sums of each window: the new part's and the paired old part's rows."""
        np.add(self.parts, self.older, out=self.parts)
        if fold and self.carry is not None:
            q = len(self.parts)
            np.add(self.carry[:q], self.carry[q:, ::-1], out=self.both)
            np.add(self.windows, self.both[:, None], out=self.windows)


class _Blocks:
    """A series as blocks of ``period`` bars, one per row; a partial last block is
    copied and padded with ``fill`` (padding feeds only rows that are cut off again)."""

    def __init__(self, values: FloatArray, period: int, fill: float) -> None:
        n = len(values)
        self.whole = n // period
        self.count = -(-n // period)
        self.view = values[: self.whole * period].reshape(self.whole, period)
        self.last = None
        if self.count > self.whole:
            self.last = np.full((1, period), fill)
            self.last[0, : n - self.whole * period] = values[self.whole * period :]

    def take(self, b0: int, b1: int) -> FloatArray:
        """Blocks b0..b1-1, one per row (a view unless the partial last one is among them)."""
        if b1 <= self.whole or self.last is None:
            return self.view[b0:b1]
        return np.concatenate([self.view[b0 : self.whole], self.last])


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
    per_bar = 1.0 / big_n  # a product costs less than a quotient (within an ulp of it)
    bx = _Blocks(x, period, x[-1])
    n_blocks = bx.count
    bl = None if level is None else _Blocks(level, period, np.nan)
    # The shift of each block is its first price, which lies in every window that ends
    # in the block: deviations from it are exact (Sterbenz) for prices of one sign, 0
    # for constant prices, and no larger than the window's own range.
    shift = np.empty(n_blocks + 1)
    shift[: bx.whole] = bx.view[:, 0]
    if bx.last is not None:
        shift[bx.whole] = bx.last[0, 0]
    shift[-1] = shift[-2]  # past the last block: only ever fills padding
    lay = _Rows(period)
    rows = lay.rows
    n_out = {"moments": 2, "frame": 3}.get(mode, 1)
    outs = [np.empty(n_blocks * period) for _ in range(n_out)]
    by_block = [o.reshape(n_blocks, period) for o in outs]
    q = 1 if mode in ("sum", "mean") else 2  # sums per part: y, then y^2 or y x position
    least = _MIN_COLUMNS if lay.size == 1 else _GROUPED_CALL // lay.size
    cols = max(least, _CHUNK_ELEMENTS // period, 1)
    cols = min(n_blocks, cols)
    at_new = lay.position.astype(np.float64)[:, None]
    at_old = rows - at_new  # the position the old part keeps at each row
    from_end = big_n - at_new
    end_row = int(np.flatnonzero(lay.position == period - 1)[0])
    flagged: list[np.ndarray] = []
    works: dict[int, _Work] = {}
    for b0 in range(0, n_blocks, cols):
        b1 = min(b0 + cols, n_blocks)
        m = b1 - b0
        if m not in works:
            works[m] = _Work(lay, period, q, m, level is not None)
        w = works[m]
        a = w.a
        c = shift[b0:b1]
        # Prices by position (rows) and block (columns); column 0 is the block before
        # the chunk (before block 0: the first shift, so zero deviations). Rows past
        # the period hold the next block's shift, so they add zeros.
        np.copyto(w.blocks_in, bx.take(b0, b1).T)
        np.copyto(w.before, bx.view[b0 - 1] if b0 else c[0])
        np.copyto(w.padding, shift[b0 : b1 + 1])
        # The new part: this block's deviations, position j at its row. The old part:
        # the block before, in this block's frame, backwards (row r holds position
        # rows - r), so its running sums are the sums over its last positions.
        np.subtract(w.new_in, c, out=w.new_out)
        np.subtract(w.old_in, c, out=w.old_out)
        if mode == "linear":
            np.multiply(a[0], at_new, out=a[1])
            np.multiply(a[2], at_old, out=a[3])
        elif q == 2:
            np.multiply(a[0], a[0], out=a[1])
            np.multiply(a[2], a[2], out=a[3])
        fold = mode != "linear"  # the weighted mean takes the old part's sum on its own
        w.cumsum(fold)
        if q == 2 and mode != "linear":
            # Every term of a window's sum of squares is one of these: the totals of the
            # two parts bound it, and the variance's rounding is a few eps times that.
            bound = np.add(a[1, end_row], a[3, rows - 1])
            if w.carry is not None:
                bound += w.carry[1, -1]
                bound += w.carry[3, -1]
            bound *= _REFINE_RATIO
        # The window ending at position j: positions 0..j of the new part, and the old
        # part's positions after j, whose running sum is at row rows - 1 - j.
        w.window_sums(fold)
        s1 = a[0]
        out_blocks = [o[b0:b1] for o in by_block]
        if mode == "linear":
            # (N - j) x window sum + sum of position x y - N x the old part's sum
            drop = np.multiply(w.older[0], big_n, out=a[3])
            acc = np.multiply(s1, from_end, out=a[2])
            acc += a[1]
            acc -= drop
            acc /= big_n * (big_n + 1.0) / 2.0
            np.add(w.split[2], c, out=w.final)
            np.copyto(out_blocks[0], w.blocks_out)
            continue
        if mode == "sum":
            np.add(w.split[0], big_n * c, out=w.final)
            np.copyto(out_blocks[0], w.blocks_out)
            continue
        if q == 1:
            s1 *= per_bar  # the window mean minus the shift
            np.add(w.split[0], c, out=w.final)
            np.copyto(out_blocks[0], w.blocks_out)
            continue
        mean = np.multiply(s1, per_bar, out=a[2])  # the window mean minus the shift
        s2 = a[1]
        np.multiply(s1, mean, out=s1)
        s2 -= s1  # N * population variance: the sum of squares less N (mean - shift)^2
        # Rounding may leave s2 a hair below 0 on a flat window: such windows are below
        # their bound and recomputed by _refine (and their square roots ignored).
        if mode == "deviation" and bl is not None and w.level is not None:
            # mean - level in the local frame: (level - shift) is exact nearby.
            np.copyto(w.level_in, bl.take(b0, b1).T)
            w.level_pad[...] = 0.0
            np.subtract(w.level_rows, c, out=w.gap_out)
            gap = np.subtract(mean, w.gap, out=w.gap)
            gap *= gap
            gap *= big_n
            s2 += gap
        if w.pad is not None:  # padding rows are no windows
            w.pad[...] = np.inf
        # Blocks with a window below its bound: a reduction first, rows only for those.
        # fmin skips the NaN of windows whose level is still warming up (a plain min
        # would be NaN and hide the block's other windows). There, each window is held
        # to its own terms: s2 below the share of s2 + S1^2/N (its sum of squares in the
        # frame, and more with a level), which the block's bound is at least.
        few = np.flatnonzero(np.fmin.reduce(w.by_slab(s2), axis=0) < bound)
        if len(few):
            low, own = s2[:, few], s1[:, few]  # s1 holds S1^2/N by now
            own += low
            own *= _REFINE_RATIO
            at_row, at = np.nonzero((low < bound[few]) & (low < own))
            flagged.append((b0 + few[at]) * period + lay.position[at_row])
        if mode == "moments":
            np.add(w.split[2], c, out=w.final)
            np.copyto(out_blocks[0], w.blocks_out)
            np.multiply(w.split[1], per_bar, out=w.final)
            np.copyto(out_blocks[1], w.blocks_out)
        elif mode == "frame":
            out_blocks[0][:] = c[:, None]
            np.copyto(w.final, w.split[2])
            np.copyto(out_blocks[1], w.blocks_out)
            np.multiply(w.split[1], per_bar, out=w.final)
            np.copyto(out_blocks[2], w.blocks_out)
        else:
            s2 *= per_bar  # the same roundings as window_mean_var, so callers can mix them
            if sample:
                s2 *= big_n / (big_n - 1.0)
            with np.errstate(invalid="ignore"):
                np.sqrt(w.split[1], out=w.final)
            np.copyto(out_blocks[0], w.blocks_out)
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

    Flagged windows are those whose variance is tiny next to their sum of squares in
    the block's frame (an odd price at the start of a long block, see the module
    docstring). There the one-pass formula could lose relative digits; two passes
    over just those windows restore full accuracy. They are rare; should many be
    flagged (stale, tick-rounded prices with a tiny ratio), the exactly flat ones are
    recognised in O(n) and need no second pass.
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
        dev *= dev
        var = np.add.reduce(dev, axis=1) / period  # pairwise summation along each row
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
