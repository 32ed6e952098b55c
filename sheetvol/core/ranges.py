"""True range, average true range (ATR) and ATR as a fraction of the close.

Conventions
-----------
* **True range** of a bar is the largest of ``high - low``, ``|high - previous
  close|`` and ``|low - previous close|`` (Wilder, 1978). The first bar has no
  previous close: with ``first_bar="high-low"`` (the default) its true range is
  its own ``high - low``; with ``first_bar="blank"`` it is NaN. "blank" is the
  convention of TA-Lib's ``TRANGE``.
* **ATR** averages the true ranges over ``period`` bars. The default is Wilder
  smoothing (an exponential average with ``alpha = 1/period``) seeded with the
  simple average of the first ``period`` true ranges, so the first ATR appears
  on bar ``period`` (row ``period - 1``). ``smoothing="exponential"`` uses
  ``alpha = 2/(period+1)`` with the same seed; ``smoothing="simple"`` is the
  plain rolling mean of the last ``period`` true ranges. ``seed="first"`` starts
  the recursion at the first true range instead (see
  :func:`sheetvol.core.averages.moving_average`).
* TA-Lib's ``ATR`` leaves the first bar out (it has no previous close) and seeds
  with the mean of true ranges 2..period+1; that is the convention of
  ``first_bar="blank"`` here, whose first ATR is on row ``period`` (the values
  agree with TA-Lib to about 1e-15 relative, the last bits of the recursion
  aside). With the
  default ``first_bar="high-low"`` the seed differs and the difference decays
  by a factor ``1 - 1/period`` per bar.
* **ATR percent** is ATR divided by the close of the same bar, returned as a
  fraction (0.012 means 1.2 %; sheets format it as a percentage). A close of 0
  gives NaN.
* Gaps: a bar is skipped when its high, low or close is not finite (see
  :mod:`sheetvol.core._gaps`); it is NaN in every output and the previous
  close of the next usable bar is the close of the last usable bar.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from sheetvol.core import bounds
from sheetvol.core._gaps import skip_gaps
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_choice, check_period
from sheetvol.core.averages import SEEDS, average_of

__all__ = [
    "atr_percent",
    "average_true_range",
    "average_true_range_of",
    "true_range",
    "true_range_of",
]

FIRST_BAR = ("high-low", "blank")
# Bars per step of the true range: the scratch stays in the CPU cache on long columns.
_CHUNK = 16384
SMOOTHING = ("simple", "exponential", "wilder")  # by family, as averages.KINDS


def true_range_of(
    high: FloatArray, low: FloatArray, close: FloatArray, first_bar: str
) -> FloatArray:
    """:func:`true_range` on finite, aligned float arrays (no gap handling).

    For kernels that already run inside ``skip_gaps``.

    Parameters
    ----------
    high, low, close : numpy.ndarray
        Finite float64 prices, oldest first.
    first_bar : {"high-low", "blank"}
        Already validated.

    Returns
    -------
    numpy.ndarray
        True range on each bar.

    Examples
    --------
    >>> true_range_of(np.array([2.0, 5.0]), np.array([1.0, 4.0]), np.array([1.5, 4.5]),
    ...               "high-low").tolist()
    [1.0, 3.5]
    """
    n = len(high)
    out = np.empty(n)
    if n == 0:
        return out
    # max(H-L, |H-pC|, |L-pC|) = max(H, pC) - min(L, pC) for H >= L, and bit for bit:
    # both round the same largest difference of two prices. Three operations, run
    # chunk by chunk so the scratch stays in the CPU cache on long columns.
    part = np.empty(min(n - 1, _CHUNK))
    inverted = np.empty(len(part), dtype=bool)
    for i in range(1, n, _CHUNK):
        j = min(i + _CHUNK, n)
        h, lo, prev, tr = high[i:j], low[i:j], close[i - 1 : j - 1], out[i:j]
        np.maximum(h, prev, out=tr)
        np.minimum(lo, prev, out=part[: j - i])
        tr -= part[: j - i]
        # A bar with its high below its low breaks that identity: keep the definition.
        bad = np.less(h, lo, out=inverted[: j - i])
        if bad.any():
            k = np.flatnonzero(bad)
            hk, lk, pk = h[k], lo[k], prev[k]
            tr[k] = np.maximum(np.maximum(hk - lk, np.abs(hk - pk)), np.abs(lk - pk))
    out[0] = high[0] - low[0] if first_bar == "high-low" else np.nan
    return out


_true_range = skip_gaps(3)(true_range_of)


def true_range(
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    first_bar: str = "high-low",
) -> FloatArray:
    """True range of each bar.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest bar first.
    first_bar : {"high-low", "blank"}, default "high-low"
        The first bar has no previous close: use its ``high - low`` or give NaN.

    Returns
    -------
    FloatArray
        ``max(H - L, |H - previous C|, |L - previous C|)`` on each bar, in price
        units; NaN on gap rows.

    Examples
    --------
    The second bar gaps up above the first close, so ``|H - prev C|`` wins:

    >>> true_range([10.0, 13.0], [9.0, 12.0], [9.5, 12.5]).tolist()
    [1.0, 3.5]
    >>> true_range([10.0, 13.0], [9.0, 12.0], [9.5, 12.5], first_bar="blank").tolist()
    [nan, 3.5]
    """
    check_choice(first_bar, "first_bar", FIRST_BAR)
    bounds.check_high_low(high, low, close)
    return _true_range(high, low, close, first_bar)


def average_true_range_of(
    high: FloatArray,
    low: FloatArray,
    close: FloatArray,
    period: int,
    smoothing: str = "wilder",
    seed: str = "average",
    first_bar: str = "high-low",
) -> FloatArray:
    """:func:`average_true_range` on finite arrays with checked options (no gap handling).

    For kernels that already run inside ``skip_gaps`` (ATR bands, ratios).

    Parameters
    ----------
    high, low, close : numpy.ndarray
        Finite float64 prices, oldest first.
    period : int
        Already validated.
    smoothing, seed, first_bar : str
        Already validated.

    Returns
    -------
    numpy.ndarray
        ATR on each bar; NaN during the warm-up.

    Examples
    --------
    >>> average_true_range_of(np.array([3.0, 3.0]), np.array([1.0, 1.0]),
    ...                       np.array([2.0, 2.0]), 2).tolist()
    [nan, 2.0]
    """
    tr = true_range_of(high, low, close, first_bar)
    # The true ranges are ours: the recursive averages overwrite them in place.
    if first_bar == "high-low":
        return average_of(tr, period, smoothing, seed, overwrite=True)
    if len(tr) > 1:
        tr[1:] = average_of(tr[1:], period, smoothing, seed, overwrite=True)
    return tr


_average_true_range = skip_gaps(3)(average_true_range_of)


def _check_atr_args(high: npt.ArrayLike, low: npt.ArrayLike, close: npt.ArrayLike,
                    smoothing: str, seed: str, first_bar: str) -> None:
    """The checks every public ATR form makes before computing (one list for all)."""
    check_choice(smoothing, "smoothing", SMOOTHING)
    check_choice(seed, "seed", SEEDS)
    check_choice(first_bar, "first_bar", FIRST_BAR)
    bounds.check_high_low(high, low, close)


def average_true_range(
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 14,
    smoothing: str = "wilder",
    seed: str = "average",
    first_bar: str = "high-low",
) -> FloatArray:
    """Average true range.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest bar first.
    period : int, default 14
        Bars averaged: 1 to 5000 (:data:`sheetvol.core.bounds.PERIOD`).
    smoothing : {"simple", "exponential", "wilder"}, default "wilder"
        Wilder smoothing (alpha = 1/period), a simple rolling mean, or an
        exponential average (alpha = 2/(period+1)).
    seed : {"average", "first"}, default "average"
        How the recursive averages start: the simple mean of the first
        ``period`` true ranges, or the first true range itself.
    first_bar : {"high-low", "blank"}, default "high-low"
        True range of the first bar (see :func:`true_range`). ``"blank"`` with
        Wilder smoothing reproduces TA-Lib's ATR.

    Returns
    -------
    FloatArray
        ATR in price units; NaN until a full window of true ranges and on gap
        rows.

    Examples
    --------
    Three bars, each with a true range of 2, average to 2:

    >>> average_true_range([11.0, 11.0, 11.0], [9.0, 9.0, 9.0], [10.0, 10.0, 10.0],
    ...                    period=2).tolist()
    [nan, 2.0, 2.0]
    """
    _check_atr_args(high, low, close, smoothing, seed, first_bar)
    return _average_true_range(high, low, close, check_period(period), smoothing, seed, first_bar)


def atr_percent(
    high: npt.ArrayLike,
    low: npt.ArrayLike,
    close: npt.ArrayLike,
    period: int = 14,
    smoothing: str = "wilder",
    seed: str = "average",
    first_bar: str = "high-low",
) -> FloatArray:
    """Average true range as a fraction of the close.

    Parameters
    ----------
    high, low, close : array_like
        Aligned price columns, oldest bar first.
    period, smoothing, seed, first_bar
        As for :func:`average_true_range`.

    Returns
    -------
    FloatArray
        ``ATR / close`` as a fraction (0.012 = 1.2 %); NaN during the warm-up
        and on gap rows. A close of 0 or below is refused (naming the bar), as
        is a high below its low.

    Examples
    --------
    >>> atr_percent([11.0, 11.0, 11.0], [9.0, 9.0, 9.0], [10.0, 10.0, 10.0],
    ...             period=2).tolist()
    [nan, 0.2, 0.2]
    """
    _check_atr_args(high, low, close, smoothing, seed, first_bar)
    bounds.check_positive_prices("ATR as a share of the close", close=close)
    return _atr_percent(high, low, close, check_period(period), smoothing, seed, first_bar)


@skip_gaps(3)
def _atr_percent(
    high: FloatArray, low: FloatArray, close: FloatArray,
    period: int, smoothing: str, seed: str, first_bar: str,
) -> FloatArray:
    atr = average_true_range_of(high, low, close, period, smoothing, seed, first_bar)
    with np.errstate(divide="ignore", invalid="ignore"):
        np.divide(atr, close, out=atr)
    atr[close == 0] = np.nan
    return atr
