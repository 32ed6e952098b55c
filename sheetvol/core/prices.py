"""Price basis of each bar: one price per bar from open, high, low and close."""

from __future__ import annotations

from sheetvol.core._gaps import as_series
from sheetvol.core._types import FloatArray
from sheetvol.core._windows import check_choice

BAR_PRICES = ("open", "high", "low", "close")
"""The prices of a bar, in the order a bar reads."""

DERIVED_PRICES = ("median", "typical", "weighted", "average")
"""Prices derived from a bar: median (H+L)/2, typical (H+L+C)/3, weighted close (H+L+2C)/4
and the bar average (O+H+L+C)/4."""

BASES = BAR_PRICES + DERIVED_PRICES
"""Every price basis, in the order help and docs list them."""

DERIVED_FORMULAS = {"median": "(H+L)/2", "typical": "(H+L+C)/3", "weighted": "(H+L+2C)/4",
                    "average": "(O+H+L+C)/4"}
"""How each derived price is made, for help texts."""


def price_basis(
    open: FloatArray,  # the trade's word and the registry's name, though it shadows open()
    high: FloatArray,
    low: FloatArray,
    close: FloatArray,
    basis: str = "typical",
) -> FloatArray:
    """One price per bar: open, high, low, close, or a price derived from them.

    Parameters
    ----------
    open, high, low, close : array_like
        Bar prices, oldest first, all the same length. Only the columns the basis
        uses need values; a blank in one of those gives NaN on that row only.
    basis : {"open", "high", "low", "close", "median", "typical", "weighted", "average"}
        ``"median"`` is (H+L)/2, ``"typical"`` (H+L+C)/3, ``"weighted"`` (the
        weighted close) (H+L+2C)/4 and ``"average"`` (the bar average) (O+H+L+C)/4.

    Returns
    -------
    numpy.ndarray
        The chosen price on each bar.

    Examples
    --------
    >>> price_basis([9.0], [12.0], [8.0], [10.0], "typical")
    array([10.])
    >>> price_basis([9.0], [12.0], [8.0], [10.0], "weighted")
    array([10.])
    >>> price_basis([9.0], [12.0], [8.0], [10.0], "average")
    array([9.75])
    """
    check_choice(basis, "basis", BASES)
    o, h, lo, c = (as_series(a, name) for a, name in
                   ((open, "open"), (high, "high"), (low, "low"), (close, "close")))
    if not len(o) == len(h) == len(lo) == len(c):
        raise ValueError(
            f"price_basis: open, high, low and close have different lengths "
            f"({len(o)}, {len(h)}, {len(lo)}, {len(c)})"
        )
    if basis == "close":
        return c.copy()
    if basis == "open":
        return o.copy()
    if basis == "high":
        return h.copy()
    if basis == "low":
        return lo.copy()
    if basis == "median":
        return (h + lo) / 2.0
    if basis == "typical":
        return (h + lo + c) / 3.0
    if basis == "weighted":
        return (h + lo + 2.0 * c) / 4.0
    return (o + h + lo + c) / 4.0


__all__ = ["BAR_PRICES", "BASES", "DERIVED_FORMULAS", "DERIVED_PRICES", "price_basis"]
