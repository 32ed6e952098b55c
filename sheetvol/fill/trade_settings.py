"""The trade-review settings: one class for the recipe's ``[trades]`` table, the
command-line flags and the Python API, and the contract details of an instrument.

The defaults are stated once, in the core (:mod:`sheetvol.core.levels`,
:mod:`sheetvol.core.sizing`, :mod:`sheetvol.core.review`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from sheetvol.core.levels import (  # the review defaults, stated once
    STOP_MULTIPLE,
    TARGET_MULTIPLE,
    TRAIL_MULTIPLE,
)
from sheetvol.core.review import MEASURE, PERIOD
from sheetvol.core.sizing import RISK_SHARE

__all__ = ["Instrument", "TradeSettings", "instrument_key"]


@dataclass(frozen=True)
class Instrument:
    """Contract details of one instrument, for sizing and open risk.

    ``point_value`` is money per 1.0 price move per unit in the instrument's
    currency (NaN: not given; 1 is used and every row of the instrument says
    so, see :data:`POINT_VALUE_ASSUMED`); ``fx_rate`` is account currency per
    unit of instrument currency; ``min_qty``/``max_qty`` of 0 mean no limit;
    ``tick`` is the price increment levels are rounded to (0: not rounded; see
    :func:`sheetvol.core.levels.to_tick`).
    """

    point_value: float = math.nan
    lot_step: float = 1.0
    min_qty: float = 0.0
    max_qty: float = 0.0
    fx_rate: float = 1.0
    tick: float = 0.0

    @property
    def per_point(self) -> float:
        """The point value used: the one given, else 1."""
        return self.point_value if math.isfinite(self.point_value) else 1.0


@dataclass(frozen=True)
class TradeSettings:
    """How a trade log is reviewed.

    One class for the ``[trades]`` table of a recipe, the command-line flags and the
    Python API: where the log is, how it is reviewed, and the contract details.

    Parameters
    ----------
    enabled : bool
        False: the fill does not review a trade log.
    sheet : str
        The trade-log sheet ("" : found by its headers).
    contract_sheet : str
        The contract-details sheet ("": found by its headers); the ``[trades]``
        key is ``instruments``.
    measure : str
        Volatility measure: ``"atr"``, ``"deviation"`` or the name of any
        registry column function whose result is in price units (for example
        ``"SV_ATR"`` or ``"SV_DEVIATION"``). Its price columns are taken from the
        bars (``prices`` means the close).
    options : mapping
        Options of that function (``{"period": 20, "average": "exponential"}``),
        validated by the registry. For a measure of one price column,
        ``basis`` picks the bar's price it is computed on (one of SV_PRICE's
        ``basis`` words, e.g. ``"typical"``; default the close).
    stop_multiple, target_multiple : float
        Volatility units from entry to stop and to target. The defaults, 2 and 3,
        are common practice (no source).
    trail_multiple : float
        Volatility units between the best price since entry and the trailing
        stop; 0 turns the trailing stop off. The default 3, looser than the
        stop, lets the trail take over after a move of about one unit the
        trade's way (common practice, no source).
    risk : float
        Share of equity risked per trade (0.01 = 1 %).
    equity : float
        Equity used when the log has no equity column or a blank cell, and for
        the open-risk share (NaN: the equity of the latest trade in the log).
    instruments : mapping
        :class:`Instrument` details by instrument name; others use ``default``.
    default : Instrument
        Details for instruments not in ``instruments``.
    columns : mapping
        Header for a role of the log (``date``, ``instrument``, ``side``,
        ``entry``, ``exit``, ``exit_date``, ``quantity``, ``equity``) when the log
        uses another name.

    Examples
    --------
    >>> TradeSettings(risk=0.005).instrument("KESTREL").per_point
    1.0
    """

    enabled: bool = True
    sheet: str = ""
    contract_sheet: str = ""
    measure: str = MEASURE
    options: Mapping[str, Any] = field(default_factory=lambda: {"period": PERIOD})
    stop_multiple: float = STOP_MULTIPLE
    target_multiple: float = TARGET_MULTIPLE
    trail_multiple: float = TRAIL_MULTIPLE
    risk: float = RISK_SHARE
    equity: float = math.nan
    instruments: Mapping[str, Instrument] = field(default_factory=dict)
    default: Instrument = Instrument()
    columns: Mapping[str, str] = field(default_factory=dict)

    def instrument(self, name: str) -> Instrument:
        """Details of one instrument (matched ignoring case and surrounding spaces)."""
        key = instrument_key(name)
        for k, v in self.instruments.items():
            if instrument_key(k) == key:
                return v
        return self.default


def instrument_key(name: object) -> str:
    """An instrument or sheet name as compared: case and surrounding spaces ignored.

    Examples
    --------
    >>> instrument_key(" Kestrel ")
    'kestrel'
    """
    return " ".join(str(name).split()).lower()
