"""Position size from a risk budget: equity times the risk share, over the loss to the stop.

Conventions (also in ``docs/trade-log.md``)
-------------------------------------------
* **Size** risks ``equity * risk`` (account currency) between entry and stop.
  One unit loses ``|entry - stop| * point_value`` in the instrument's currency,
  times ``fx_rate`` (account currency per unit of instrument currency) in the
  account's. The size is rounded *down* to the lot step.

Pure numpy: no text, no dates, no I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from sheetvol.core._types import FloatArray

__all__ = [
    "RISK_SHARE",
    "SIZE_EPSILON",
    "SizeResult",
    "position_size",
    "size_note",
    "size_with_reason",
]

#: Share of equity risked per trade, the default of every face (common practice, no source).
RISK_SHARE = 0.01

#: Relative tolerance when rounding a size down to the lot step. A budget that
#: falls short of a whole number of steps by less than one part in 10^9 counts
#: as reaching it, so float noise such as 16.999999999999996 steps (from
#: ``1000 / (1.3 - 1.2)``) gives 17, not 16. One part in 10^9 of a size is far
#: below any lot step a broker offers, so no real shortfall is rounded up.
SIZE_EPSILON = 1e-9


# -- size ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SizeResult:
    """Position sizes with the reason for any size that is not the plain budget size.

    ``quantity`` is 0 when nothing can be bought (NaN when an input is
    missing); ``note`` is ``""`` when the size is simply the budget rounded
    down, otherwise a short sentence (zero size, below the minimum, capped at
    the maximum, stop equal to entry, missing input). ``raw`` is the unrounded
    budget size in units, for messages and checks.
    """

    quantity: FloatArray
    note: npt.NDArray[np.str_]
    raw: FloatArray


def _fmt(x: float) -> str:
    return f"{x:.10g}"


def _units(x: float) -> str:
    """A budget size in words: whole units from 100 up, else 3 significant figures, never
    rounded up to a lot it cannot buy (822.4 -> '822', 16.88 -> '16.8', 0.5 -> '0.5')."""
    if x >= 100:
        return f"{math.floor(x):,}"
    if x <= 0:
        return "0"
    scale = 10.0 ** (2 - math.floor(math.log10(x)))
    return f"{math.floor(x * scale * (1 + SIZE_EPSILON)) / scale:.3g}"


def size_with_reason(
    equity: npt.ArrayLike,
    risk: npt.ArrayLike,
    entry: npt.ArrayLike,
    stop: npt.ArrayLike,
    point_value: npt.ArrayLike = 1.0,
    lot_step: npt.ArrayLike = 1.0,
    min_qty: npt.ArrayLike = 0.0,
    max_qty: npt.ArrayLike = 0.0,
    fx_rate: npt.ArrayLike = 1.0,
) -> SizeResult:
    """Position size that risks ``equity * risk`` between entry and stop, with reasons.

    Parameters
    ----------
    equity : float or array_like
        Account equity, in account currency.
    risk : float or array_like
        Share of equity to risk (0.01 = 1 %).
    entry, stop : float or array_like
        Entry and stop prices.
    point_value : float or array_like, default 1.0
        Money per 1.0 price move per unit, in the instrument's currency
        (1 for shares; the contract multiplier for futures).
    lot_step : float or array_like, default 1.0
        Smallest tradable increment; the size is a whole number of steps.
    min_qty, max_qty : float or array_like, default 0.0
        Smallest and largest allowed size; 0 means no limit.
    fx_rate : float or array_like, default 1.0
        Account currency per unit of instrument currency.

    Returns
    -------
    SizeResult
        ``quantity = floor(equity * risk / (|entry - stop| * point_value * fx_rate)
        / lot_step) * lot_step``, with a size below ``min_qty`` set to 0 and one
        above ``max_qty`` cut to the largest whole number of steps within it;
        ``note`` says when either happened. The floor forgives a shortfall of
        :data:`SIZE_EPSILON` (relative) so float noise at an exact multiple of
        the lot step does not lose a step.

    Examples
    --------
    1 % of 1,000,000 with a stop 0.0141 away at 42,000 per point buys 16.88
    units, rounded down to 16:

    >>> s = size_with_reason(1_000_000, 0.01, 2.5, 2.5 - 0.0141, 42_000)
    >>> s.quantity.tolist(), round(float(s.raw[0]), 2)
    ([16.0], 16.89)
    >>> size_with_reason(10_000, 0.01, 100.0, 90.0, lot_step=20).note.tolist()
    ['risk budget buys 10 units, less than one lot of 20']
    """
    e, s, eq, rk, pv, step, lo, hi, fx = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=float))
          for x in (entry, stop, equity, risk, point_value, lot_step, min_qty, max_qty, fx_rate))
    )
    budget = eq * rk
    loss_per_unit = np.abs(e - s) * pv * fx
    with np.errstate(divide="ignore", invalid="ignore"):
        raw = budget / loss_per_unit
        steps = np.floor(raw / step * (1.0 + SIZE_EPSILON))
    # Round away the float noise of steps * step (3 * 0.1 = 0.30000000000000004).
    decimals = int(max(10, 6 - math.floor(math.log10(np.nanmin(step))))) if np.any(step > 0) else 10
    qty = np.round(steps * step, decimals)
    note = np.full(qty.shape, "", dtype=object)

    missing = ~np.isfinite(budget) | ~np.isfinite(loss_per_unit) | ~np.isfinite(step)
    flat = ~missing & (loss_per_unit == 0)
    zero = ~missing & ~flat & (qty <= 0)
    below = ~missing & ~flat & ~zero & (lo > 0) & (qty < lo)
    above = ~missing & ~flat & ~zero & ~below & (hi > 0) & (qty > hi)

    for i in np.flatnonzero(zero):
        note[i] = (f"risk budget buys {_units(raw[i])} units, less than one lot of "
                   f"{step[i]:,.10g}")
    for i in np.flatnonzero(below):
        note[i] = f"size {_fmt(qty[i])} is below the minimum {_fmt(lo[i])}"
    capped = np.round(np.floor(hi / step * (1.0 + SIZE_EPSILON)) * step, decimals)
    for i in np.flatnonzero(above):
        note[i] = f"size {_fmt(qty[i])} capped at the maximum {_fmt(capped[i])}"
    note[flat] = "stop equals entry: no distance to size from"
    note[missing] = "missing input"

    qty = np.where(zero | below, 0.0, qty)
    qty = np.where(above, capped, qty)
    qty = np.where(missing | flat, np.nan, qty)
    return SizeResult(qty, note.astype(str), raw)


def position_size(
    equity: float,
    risk: float,
    entry: float,
    stop: float,
    point_value: float = 1.0,
    lot_step: float = 1.0,
    min_qty: float = 0.0,
    max_qty: float = 0.0,
    fx_rate: float = 1.0,
) -> float | str:
    """Position size for one trade, as a worksheet cell shows it.

    The same arithmetic as :func:`size_with_reason` for one trade. A cell gets
    the quantity when there is one (a size capped at ``max_qty`` is returned
    capped; :func:`size_note` says so), and a short message instead of 0 when
    nothing can be bought, so a zero size is never mistaken for a computed one.

    Parameters
    ----------
    equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate : float
        See :func:`size_with_reason`.

    Returns
    -------
    float or str
        The quantity, or ``"SV_SIZE: <reason>"`` when the size is zero or
        cannot be computed.

    Examples
    --------
    >>> position_size(250_000, 0.01, 105.2, 101.6)
    694.0
    >>> position_size(10_000, 0.01, 100.0, 90.0, lot_step=20)
    'SV_SIZE: risk budget buys 10 units, less than one lot of 20'
    """
    res = size_with_reason(equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty,
                           fx_rate)
    qty, note = float(res.quantity[0]), str(res.note[0])
    if not math.isfinite(qty) or qty == 0:
        return f"SV_SIZE: {note}"
    return qty


def size_note(
    equity: float,
    risk: float,
    entry: float,
    stop: float,
    point_value: float = 1.0,
    lot_step: float = 1.0,
    min_qty: float = 0.0,
    max_qty: float = 0.0,
    fx_rate: float = 1.0,
) -> str:
    """Why a position size is not the plain budget size; empty text when it is.

    Parameters
    ----------
    equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate : float
        See :func:`size_with_reason`.

    Returns
    -------
    str
        ``""``, or a sentence such as ``"size 694 capped at the maximum 500"``.

    Examples
    --------
    >>> size_note(250_000, 0.01, 105.2, 101.6, max_qty=500)
    'size 694 capped at the maximum 500'
    >>> size_note(250_000, 0.01, 105.2, 101.6)
    ''
    """
    res = size_with_reason(equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty,
                           fx_rate)
    return str(res.note[0])


