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

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from sheetvol.core import bounds
from sheetvol.core._types import FloatArray

__all__ = [
    "RISK_SHARE",
    "SIZE_REASONS",
    "SizeResult",
    "lot_count",
    "position_size",
    "size_with_reason",
]

#: Share of equity risked per trade, the default of every face (common practice, no source).
RISK_SHARE = 0.01

#: Why a size is what it is, one code per trade (the words are made by the worksheet layer,
#: :func:`sheetvol.functions.worksheet.size_words`):
#:
#: * ``"budget"``: the risk budget rounded down to the lot step, nothing more to say;
#: * ``"under_one_lot"``: the budget buys less than one lot step (size 0);
#: * ``"under_minimum"``: the budget size is below ``min_qty`` (size 0);
#: * ``"capped"``: the budget size was cut to ``max_qty``;
#: * ``"stop_at_entry"``: the stop equals the entry, no distance to size from (size NaN);
#: * ``"missing_input"``: an input is NaN (size NaN);
#: * ``"too_large"``: the size overflows a float (size NaN).
SIZE_REASONS = ("budget", "under_one_lot", "under_minimum", "capped", "stop_at_entry",
                "missing_input", "too_large")

#: Float operations between the inputs and the lot count (two products, two quotients and
#: the lot step's own representation), each off by at most half an ulp: the count's
#: rounding noise is a few ulps of the count, widened by the cancellation in
#: ``entry - stop`` (see :func:`lot_count`).
_ULPS = 4.0


@dataclass(frozen=True)
class SizeResult:
    """Position sizes with a reason code per trade (see :data:`SIZE_REASONS`).

    ``quantity`` is 0 when nothing can be bought and NaN when the size cannot
    be computed. ``raw`` is the unrounded budget size in units and ``rounded``
    the budget size down to the lot step, before the minimum and maximum;
    ``lot_step``, ``min_qty`` and ``max_qty`` are the inputs, one per trade.
    """

    quantity: FloatArray
    reason: npt.NDArray[np.str_]
    raw: FloatArray
    rounded: FloatArray
    lot_step: FloatArray
    min_qty: FloatArray
    max_qty: FloatArray


def lot_count(units: npt.ArrayLike, lot_step: npt.ArrayLike,
              noise: npt.ArrayLike = 0.0) -> FloatArray:
    """Whole lot steps in ``units``, rounded down, forgiving only float rounding noise.

    Parameters
    ----------
    units : array_like
        Sizes in units (computed in floats).
    lot_step : array_like
        Lot step in units, above 0.
    noise : array_like, default 0.0
        Extra relative error the inputs carry, in units of machine epsilon
        (the cancellation in ``entry - stop`` for a size).

    Returns
    -------
    FloatArray
        ``floor(units / lot_step)``, except that a count within a few ulps (of
        the count, plus ``noise`` epsilons relative) below a whole number counts
        as reaching it: ``1000 / (1.3 - 1.2)`` is 9,999.99999999999 in floats and
        gives 10,000 lots of 1. Beyond 2**53 lots every float is whole and
        nothing is forgiven.

    Examples
    --------
    >>> lot_count([16.999999999999996, 16.9], 1.0).tolist()
    [17.0, 16.0]
    >>> lot_count([2_500_000_000.6], 1.0).tolist()  # no lot gained from the tolerance
    [2500000000.0]
    """
    n = np.asarray(units, dtype=float) / np.asarray(lot_step, dtype=float)
    magnitude = np.abs(n)
    tolerance = (_ULPS * np.spacing(magnitude)
                 + np.asarray(noise, dtype=float) * np.finfo(float).eps * magnitude)
    with np.errstate(invalid="ignore"):
        nearest = np.round(n)
        on_step = np.abs(n - nearest) <= tolerance
        return np.where(on_step, nearest, np.floor(n))


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
    """Position size that risks ``equity * risk`` between entry and stop, with reason codes.

    Parameters
    ----------
    equity : float or array_like
        Account equity in account currency, above 0.
    risk : float or array_like
        Share of equity to risk, above 0 and at most 0.25 (0.01 = 1 %).
    entry, stop : float or array_like
        Entry and stop prices, any finite numbers.
    point_value : float or array_like, default 1.0
        Money per 1.0 price move per unit in the instrument's currency, above 0
        (1 for shares; the contract multiplier for futures).
    lot_step : float or array_like, default 1.0
        Smallest tradable increment, above 0; the size is a whole number of steps.
    min_qty, max_qty : float or array_like, default 0.0
        Smallest and largest allowed size, 0 or more; 0 means no limit. A
        ``min_qty`` above a (non-zero) ``max_qty`` is refused.
    fx_rate : float or array_like, default 1.0
        Account currency per unit of instrument currency, above 0.

    Returns
    -------
    SizeResult
        ``quantity = floor(equity * risk / (|entry - stop| * point_value * fx_rate)
        / lot_step) * lot_step``, with a size below ``min_qty`` set to 0 and one
        above ``max_qty`` cut to the largest whole number of steps within it;
        ``reason`` says which rule applied (:data:`SIZE_REASONS`). A NaN input
        gives NaN with ``"missing_input"``; the floor forgives only float
        rounding noise (:func:`lot_count`).

    Raises
    ------
    ValueError
        Naming the first argument outside its range (:mod:`sheetvol.core.bounds`).

    Examples
    --------
    1 % of 1,000,000 with a stop 0.0141 away at 42,000 per point buys 16.88
    units, rounded down to 16:

    >>> s = size_with_reason(1_000_000, 0.01, 2.5, 2.5 - 0.0141, 42_000)
    >>> s.quantity.tolist(), s.reason.tolist(), round(float(s.raw[0]), 2)
    ([16.0], ['budget'], 16.89)
    >>> size_with_reason(10_000, 0.01, 100.0, 90.0, lot_step=20).reason.tolist()
    ['under_one_lot']
    """
    for name, value, bound in (
        ("equity", equity, bounds.EQUITY), ("risk", risk, bounds.RISK),
        ("entry", entry, bounds.PRICE), ("stop", stop, bounds.PRICE),
        ("point_value", point_value, bounds.POINT_VALUE), ("lot_step", lot_step, bounds.LOT_STEP),
        ("min_qty", min_qty, bounds.QUANTITY), ("max_qty", max_qty, bounds.QUANTITY),
        ("fx_rate", fx_rate, bounds.FX_RATE),
    ):
        bounds.check(name, value, bound, blank_ok=True)
    e, s, eq, rk, pv, step, lo, hi, fx = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=float))
          for x in (entry, stop, equity, risk, point_value, lot_step, min_qty, max_qty, fx_rate))
    )
    with np.errstate(invalid="ignore"):
        crossed = np.flatnonzero((hi > 0) & (lo > hi))
    if crossed.size:
        i = int(crossed[0])
        where = f" (item {i + 1})" if e.size > 1 else ""
        raise ValueError(
            f"min_qty ({lo[i]:.10g}) is above max_qty ({hi[i]:.10g}){where}: give a max_qty "
            "of at least min_qty, or 0 for no limit"
        )
    budget = eq * rk
    distance = np.abs(e - s)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        loss_per_unit = distance * pv * fx
        raw = budget / loss_per_unit
        # Entry and stop are decimals held as floats, each within half an ulp of what was
        # typed; entry - stop carries that uncertainty, magnified by the cancellation.
        noise = np.where(distance > 0, 0.5 * (np.abs(e) + np.abs(s)) / distance, 0.0)
        steps = lot_count(raw, step, noise)
        rounded = _on_grid(steps * step, step)
        cap = _on_grid(lot_count(hi, step) * step, step)

    missing = np.isnan(budget) | np.isnan(distance) | np.isnan(pv * fx * step)
    flat = ~missing & (distance == 0)
    huge = ~missing & ~flat & ~(np.isfinite(raw) & np.isfinite(rounded))
    usable = ~(missing | flat | huge)
    zero = usable & (rounded <= 0)
    below = usable & ~zero & (lo > 0) & (rounded < lo)
    above = usable & ~zero & ~below & (hi > 0) & (rounded > hi)

    reason = np.full(e.shape, "budget", dtype="<U13")
    for mask, code in ((zero, "under_one_lot"), (below, "under_minimum"), (above, "capped"),
                       (flat, "stop_at_entry"), (missing, "missing_input"), (huge, "too_large")):
        reason[mask] = code
    qty = np.where(zero | below, 0.0, rounded)
    qty = np.where(above, cap, qty)
    qty = np.where(usable, qty, np.nan)
    return SizeResult(qty, reason, raw, np.where(usable, rounded, np.nan), step, lo, hi)


def _on_grid(values: FloatArray, step: FloatArray) -> FloatArray:
    """Round away the float noise of ``steps * step`` (3 * 0.1 = 0.30000000000000004)."""
    finite = step[np.isfinite(step) & (step > 0)]
    decimals = int(max(10, 6 - np.floor(np.log10(finite.min())))) if finite.size else 10
    return np.round(values, decimals)


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
) -> float:
    """Position size for one trade: the quantity, or an error saying why there is none.

    The arithmetic of :func:`size_with_reason` for one trade. A budget that
    buys less than one lot (or less than ``min_qty``) gives 0.0; a size above
    ``max_qty`` is cut to it. :func:`size_with_reason` gives the reason code.

    Parameters
    ----------
    equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate : float
        See :func:`size_with_reason` (their ranges are checked the same way).

    Returns
    -------
    float
        The quantity.

    Raises
    ------
    ValueError
        When an argument is outside its range or missing (NaN), when the stop
        equals the entry, or when the size is too large to be a float.

    Examples
    --------
    >>> position_size(250_000, 0.01, 105.2, 101.6)
    694.0
    >>> position_size(10_000, 0.01, 100.0, 90.0, lot_step=20)  # half a lot: none
    0.0
    """
    args = (equity, risk, entry, stop, point_value, lot_step, min_qty, max_qty, fx_rate)
    names = ("equity", "risk", "entry", "stop", "point_value", "lot_step", "min_qty",
             "max_qty", "fx_rate")
    for name, value in zip(names, args, strict=True):
        if np.ndim(value) != 0:
            raise ValueError(f"{name} must be one number; size_with_reason takes arrays")
        if np.isnan(float(value)):
            raise ValueError(f"{name} is missing (NaN)")
    res = size_with_reason(*args)
    code = str(res.reason[0])
    if code == "stop_at_entry":
        raise ValueError(f"stop equals entry ({float(entry):.10g}): no distance to size from")
    if code == "too_large":
        raise ValueError(
            "the size is too large to be a number: the budget over the loss per unit "
            "overflows (check equity, entry, stop, point_value and fx_rate)"
        )
    return float(res.quantity[0])
