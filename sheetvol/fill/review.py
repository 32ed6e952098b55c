"""From a trade log to sized trades: levels, sizes, trailing stops and outcomes per row.

The fill calls two functions:

* :func:`review_log` takes the trade log (one row per trade) and the price bars
  of each instrument and returns new columns aligned with the log's rows;
* :func:`summarise` turns those columns into the summary block.

Everything as of entry uses only bars dated on or before the entry date (the
last such bar is the *entry bar*; the trade is assumed entered at its close),
so no figure in an entry column can see a later price. The review and the
trailing stop start on the bar after the entry bar. The arithmetic lives in
:mod:`sheetvol.core.levels`, :mod:`sheetvol.core.sizing` and :mod:`sheetvol.core.review`;
this module finds the columns, looks up the bars
and writes down, per row, what it could not compute and why.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from sheetvol.core import levels, sizing
from sheetvol.core import review as trade_review
from sheetvol.core._types import FloatArray
from sheetvol.core.prices import price_basis
from sheetvol.fill.locate import normalize_header
from sheetvol.fill.recipe import measure_function, split_basis
from sheetvol.fill.table import find_roles
from sheetvol.fill.trade_settings import Instrument, TradeSettings, instrument_key
from sheetvol.functions import cells, registry
from sheetvol.functions._lazy import pandas as pd
from sheetvol.functions.worksheet import REVIEW_FLAG_WORDS, size_words

__all__ = [
    "CONTRACT_DETAILS",
    "LOG_COLUMNS",
    "NO_EQUITY",
    "OUTPUT_COLUMNS",
    "POINT_VALUE_ASSUMED",
    "SUMMARY_LABELS",
    "TRADES_REVIEWED",
    "Instrument",
    "LogArrays",
    "TradeSettings",
    "contract_role",
    "instruments_from_frame",
    "latest_equity",
    "log_arrays",
    "missing_roles_message",
    "review_arrays",
    "review_log",
    "single_instrument",
    "summarise",
]

#: Headers recognised in a trade log for each role (compared ignoring case, spaces and ``_``).
LOG_COLUMNS: dict[str, tuple[str, ...]] = {
    "date": ("date", "entry date", "opened", "open date", "trade date"),
    "instrument": ("instrument", "symbol", "market", "ticker"),
    "side": ("side", "direction"),
    "entry": ("entry", "entry price"),
    "exit": ("exit", "exit price"),
    "exit_date": ("exit date", "closed", "close date"),
    "quantity": ("quantity", "qty", "units", "contracts"),
    "equity": ("equity", "account equity", "account"),
}
_REQUIRED_ROLES = ("date", "instrument", "side")

#: Contract details a contract sheet can give (besides the instrument column), in the
#: order they are described. The header words for each are matched by
#: :func:`contract_role`.
CONTRACT_DETAILS = ("point_value", "tick", "tick_value", "lot_step", "min_qty", "max_qty",
                    "fx_rate")
# Words read as one before the rules below apply (after normalize_header).
_SAME_WORD = {"minimum": "min", "maximum": "max", "quantity": "qty", "quantities": "qty",
              "lots": "lot", "increment": "step", "exchange": "fx", "conversion": "fx",
              "multiplier": "point", "big": "", "per": "", "value": "value", "of": "",
              "contract": "contract", "number": "qty", "units": "qty", "unit": "qty",
              "size": "size", "amount": "qty", "volume": "qty", "trade": "qty",
              "order": "qty", "position": "qty"}


def contract_role(header: object) -> str | None:
    """The contract detail a contract-sheet header names, by general rules (None: not one).

    The header is normalised (case, brackets with units, punctuation); the words
    "minimum", "quantity", "lots", "increment", "exchange", "conversion",
    "multiplier" and the like are read as their short forms; then: a tick with
    a value is the tick value, any other tick (or a price step) the tick size; a
    min or max with a quantity, lot or size is that limit; an FX word is the FX
    rate; a point (or multiplier) or a contract size/unit is the point value; a
    lot or a quantity step is the lot step. The instrument column takes the
    words of :data:`LOG_COLUMNS` (one list for the log, the long price sheet and
    the contract sheet).

    Parameters
    ----------
    header : object
        A header cell's value.

    Returns
    -------
    str or None
        ``"instrument"``, one of :data:`CONTRACT_DETAILS`, or None.

    Examples
    --------
    >>> contract_role("Contract size"), contract_role("Tick value ($)"), contract_role("Margin")
    ('point_value', 'tick_value', None)
    """
    text = normalize_header(header)
    if text in {normalize_header(w) for w in LOG_COLUMNS["instrument"]}:
        return "instrument"
    words = {_SAME_WORD.get(w, w) for w in re.split(r"[\s/\-.,$]+", text)} - {""}
    if "tick" in words:
        return "tick_value" if "value" in words else "tick"
    if "price" in words and "step" in words:
        return "tick"
    for limit in ("min", "max"):
        if limit in words and (words & {"qty", "lot", "size"} or words == {limit}):
            return f"{limit}_qty"
    if "fx" in words or words == {"rate"}:
        return "fx_rate"
    if "point" in words or ("contract" in words and words & {"size", "qty", "value"}):
        return "point_value"
    if "lot" in words or ("step" in words and words & {"qty", "size"}):
        return "lot_step"
    return None

#: Columns :func:`review_log` returns, in order.
OUTPUT_COLUMNS = (
    "Volatility", "Bar date", "Stop", "Target", "Target R", "Size", "Size note", "Trail",
    "Result", "Exit price", "Exit date", "R", "Bars", "Adverse", "Favourable", "Adverse R",
    "Favourable R", "Open risk", "Note",
)


#: The Size note of a row whose instrument has no point value.
POINT_VALUE_ASSUMED = "point value not given: 1 assumed"
#: Why sizes and open risk are blank when no equity is known.
NO_EQUITY = "no equity: add an Equity column, a recipe equity or --equity"

def _find_columns(frame: pd.DataFrame, roles: Mapping[str, Iterable[str]],
                  overrides: Mapping[str, str]) -> dict[str, Any]:
    """Map each role to a column of ``frame`` (None when absent)."""
    by_key = {normalize_header(c): c for c in frame.columns}
    found: dict[str, Any] = {}
    for role, names in roles.items():
        wanted = [normalize_header(n) for n in ([overrides[role]] if role in overrides else names)]
        found[role] = next((by_key[n] for n in wanted if n in by_key), None)
    return found


def _days(values: Iterable[Any]) -> FloatArray:
    """Day numbers of date cells; blanks (including NaT) give NaN. A float array is taken
    to be day numbers already (the fill hands its bars over that way)."""
    if isinstance(values, np.ndarray) and values.dtype.kind == "f":
        return values.astype(np.float64, copy=False)
    return cells.to_day_numbers(
        None if pd.isna(v) else pd.Timestamp(v) if isinstance(v, np.datetime64) else v
        for v in values
    )


def _numbers(values: Iterable[Any], name: str = "values") -> FloatArray:
    return cells.to_series((None if (not isinstance(v, str) and pd.isna(v)) else v
                            for v in values), name=name)


def _as_timestamp(day: float) -> Any:
    return pd.NaT if not math.isfinite(day) else pd.Timestamp(cells.serial_to_datetime(day))


def instruments_from_frame(frame: pd.DataFrame) -> dict[str, Instrument]:
    """Read instrument details from a table with one row per instrument.

    Parameters
    ----------
    frame : pandas.DataFrame
        An instrument column (Instrument, Symbol, Market, Ticker) and any
        contract details, under their usual trade words (see
        :func:`contract_role`): point value (multiplier, contract size, big
        point value), tick size, tick value, lot step (lot size), min and max
        quantity, FX rate. Blank cells take the :class:`Instrument` defaults; a
        tick value gives the point value (tick value / tick size).

    Returns
    -------
    dict
        :class:`Instrument` by name.

    Raises
    ------
    ValueError
        No instrument column; a tick value without a tick size; a tick value
        and a point value that disagree; a detail that is not a number.

    Examples
    --------
    >>> t = pd.DataFrame({"Symbol": ["ORRIN"], "Multiplier": [10], "Lot step": [1]})
    >>> instruments_from_frame(t)["ORRIN"].point_value
    10.0
    """
    cols: dict[str, Any] = {}
    for c in frame.columns:
        role = contract_role(c)
        if role is not None:
            cols.setdefault(role, c)
    if "instrument" not in cols:
        words = "/".join(w.capitalize() for w in LOG_COLUMNS["instrument"])
        raise ValueError(f"instrument table has no instrument column ({words})")
    out: dict[str, Instrument] = {}
    for _, row in frame.iterrows():
        name = row[cols["instrument"]]
        if cells.is_blank(name) or (not isinstance(name, str) and pd.isna(name)):
            continue
        values: dict[str, float] = {}
        for role in CONTRACT_DETAILS:
            if role in cols:
                x = _numbers([row[cols[role]]], f"{name} {cols[role]}")[0]
                if math.isfinite(x):
                    values[role] = float(x)
        tick_value = values.pop("tick_value", math.nan)
        if math.isfinite(tick_value):
            tick = values.get("tick", 0.0)
            if not tick > 0:
                raise ValueError(f"{name}: a tick value ({tick_value:g}) needs a tick size "
                                 "above 0 to give the point value; add a Tick size column")
            per_point = tick_value / tick
            given = values.get("point_value", math.nan)
            if math.isfinite(given) and not math.isclose(given, per_point, rel_tol=1e-9):
                raise ValueError(
                    f"{name}: point value {given:g} disagrees with tick value / tick size "
                    f"= {tick_value:g} / {tick:g} = {per_point:g}; correct one of them")
            values["point_value"] = per_point
        out[str(name).strip()] = Instrument(**values)
    return out


# -- bars -------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Bars:
    days: FloatArray
    open: FloatArray
    high: FloatArray
    low: FloatArray
    close: FloatArray
    vol: FloatArray


def _volatility_function(settings: TradeSettings) -> tuple[registry.Function, str, dict]:
    """The measure, its price basis and its other options, checked."""
    name = measure_function(settings.measure)
    try:
        func = registry.get(name)
    except KeyError:
        raise ValueError(f"measure {settings.measure!r} is not a sheetvol function") from None
    if func.shape != "series" or func.unit != "price":
        raise ValueError(
            f"measure {settings.measure!r} must be a column function in price units "
            "(such as SV_ATR or SV_DEVIATION)"
        )
    basis, options = split_basis(func, settings.options)
    func.bind((), {**{p.name: [0.0] for p in func.columns}, **options})  # check early
    return func, basis, options


def _prepare(prices: pd.DataFrame, func: registry.Function, basis: str,
             options: Mapping[str, Any]) -> _Bars:
    """Bars sorted oldest first, as day numbers and floats, with the volatility column."""
    by_text = {str(c): c for c in prices.columns}
    roles = find_roles(by_text)
    cols = {role: by_text.get(roles.get(role, ""), None)
            for role in ("date", "open", "high", "low", "close")}
    if cols["date"] is not None:
        dates = prices[cols["date"]].to_numpy()
    else:
        dates = prices.index.to_numpy()
    days = _days(dates)
    order = np.argsort(days, kind="stable")
    order = order[np.isfinite(days[order])]

    def column(role: str) -> FloatArray:
        if cols[role] is None:
            if role == "open":
                return np.full(len(order), np.nan)
            found = ", ".join(map(str, prices.columns))
            raise ValueError(f"no {role.capitalize()} column (found: {found})")
        return _numbers(prices[cols[role]].to_numpy()[order], str(cols[role]))

    o, h, lo, c = column("open"), column("high"), column("low"), column("close")
    one = c if basis == "close" else price_basis(o, h, lo, c, basis)
    inputs = {"open": o, "high": h, "low": lo, "close": c, "prices": one}
    args = {p.name: inputs[p.name] for p in func.columns if p.name in inputs}
    missing = [p.name for p in func.columns if p.name not in inputs]
    if missing:
        raise ValueError(f"{func.name} needs columns the bars do not have: {', '.join(missing)}")
    vol = np.asarray(func.compute(func.bind((), {**args, **options})), dtype=float)
    return _Bars(days[order], o, h, lo, c, vol)


def single_instrument(cols: Mapping[str, Any], prices: Mapping[str, Any]) -> str:
    """The instrument of every trade when the log has no instrument column and there is
    exactly one set of prices ("" otherwise).

    Parameters
    ----------
    cols : mapping
        Role -> column found in the log (None when absent).
    prices : mapping
        Bars per instrument.

    Returns
    -------
    str

    Examples
    --------
    >>> single_instrument({"instrument": None}, {"Prices": None})
    'Prices'
    """
    if cols.get("instrument") is not None or len(prices) != 1:
        return ""
    return str(next(iter(prices)))


def missing_roles_message(cols: Mapping[str, Any], absent: Iterable[str],
                          headers: Iterable[Any]) -> str:
    """Which log roles were found (and in which column) and which are missing.

    Parameters
    ----------
    cols : mapping
        Role -> column found (None when absent).
    absent : iterable of str
        The required roles that are missing.
    headers : iterable
        The log's headers, for the message.

    Returns
    -------
    str

    Examples
    --------
    >>> missing_roles_message({"date": "Trade date", "instrument": None, "side": "Side"},
    ...                       ["instrument"], ["Trade date", "Side"])  # doctest: +ELLIPSIS
    'trade log has no instrument column (found: date in "Trade date", side in "Side"; ...'
    """
    absent = list(absent)
    found = ", ".join(f'{r} in "{c}"' for r, c in cols.items() if c is not None)
    words = {r: "/".join(LOG_COLUMNS[r][:4]) for r in absent}
    hint = ("; with exactly one price sheet, every trade is taken to be on it"
            if "instrument" in absent else "")
    return (f"trade log has no {' or '.join(absent)} column (found: {found or 'no role'}; "
            f"missing: {', '.join(f'{r} ({w})' for r, w in words.items())}; headers: "
            f"{', '.join(map(str, headers))}){hint}")


def _lookup(prices: Mapping[str, pd.DataFrame], name: str) -> pd.DataFrame | None:
    if name in prices:
        return prices[name]
    key = instrument_key(name)
    return next((v for k, v in prices.items() if instrument_key(k) == key), None)


# -- the review --------------------------------------------------------------------------------
def review_log(
    trades: pd.DataFrame,
    prices: Mapping[str, pd.DataFrame],
    settings: TradeSettings | None = None,
) -> pd.DataFrame:
    """Levels, size, trailing stop and outcome for every trade in a log.

    Parameters
    ----------
    trades : pandas.DataFrame
        One row per trade. Columns are found by header (see
        :data:`LOG_COLUMNS`): date, instrument and side are required (without
        an instrument column, every trade is on the only instrument of
        ``prices`` when there is exactly one); entry
        price (blank: the entry bar's close), exit price and exit date (blank:
        still open), quantity (blank: the computed size, for open risk) and
        equity (blank: ``settings.equity``) are optional.
    prices : mapping of str to pandas.DataFrame
        Bars per instrument: a date index or a Date column, and Open (optional),
        High, Low and Close columns; any order, blanks allowed.
    settings : TradeSettings, optional
        Measure, multiples, risk share and instrument details.

    Returns
    -------
    pandas.DataFrame
        The columns of :data:`OUTPUT_COLUMNS`, with the index of ``trades``:

        * ``Volatility`` as of the entry bar (``Bar date``: that bar's date);
        * ``Stop``, ``Target`` and ``Target R`` (the target in R); with an
          instrument tick, the stop is rounded away from entry and the target
          toward it (:func:`sheetvol.core.levels.to_tick`);
        * ``Size`` (from the rounded stop), down to the lot step, and ``Size note``;
        * ``Trail``: the trailing stop in force at the end of the review; for an
          open trade the level set at the last close, to place now (as
          SV_TRAIL gives it);
        * ``Result``, ``Exit price``, ``Exit date``, ``R``, ``Bars``,
          ``Adverse``/``Favourable`` (price) and in R: see
          :func:`sheetvol.core.review.review_trade` (for an open trade ``R`` is
          the mark at the last close);
        * ``Open risk``: for an open trade, the money (account currency) lost
          if the stop in force were hit from the last close, at the log's
          quantity (or ``Size``);
        * ``Note``: why something on the row could not be computed.

    Examples
    --------
    >>> bars = pd.DataFrame({"High": [11.0] * 4 + [13.0], "Low": [9.0] * 5,
    ...                      "Close": [10.0] * 5},
    ...                     index=pd.date_range("2025-01-06", periods=5))
    >>> log = pd.DataFrame({"Date": [pd.Timestamp("2025-01-09")], "Instrument": ["KESTREL"],
    ...                     "Side": ["long"], "Entry": [10.0], "Equity": [10_000.0]})
    >>> row = review_log(log, {"KESTREL": bars}, TradeSettings(options={"period": 3})).iloc[0]
    >>> row["Volatility"], row["Stop"], row["Target"], row["Size"], row["Result"]
    (np.float64(2.0), np.float64(6.0), np.float64(16.0), np.float64(25.0), 'open')
    """
    settings = settings or TradeSettings()
    out = review_arrays(log_arrays(trades, prices, settings), prices, settings)
    for c in ("Bar date", "Exit date"):
        out[c] = [_as_timestamp(d) for d in out[c].to_numpy(dtype=float)]
    return out


@dataclass(frozen=True)
class LogArrays:
    """A trade log read once: one entry per trade, dates as day numbers (1900-system
    serials, NaN when blank), prices and amounts as floats (NaN when blank).

    The fill builds it straight from the sheet's cells
    (:func:`sheetvol.fill.trade_log.read_log`); :func:`log_arrays` builds it from a
    DataFrame.
    """

    index: Any  # a label per trade (the sheet row in the fill)
    names: np.ndarray  # instrument of each trade (object)
    sides: np.ndarray  # side as written (object)
    entry_days: FloatArray
    entries: FloatArray
    exits: FloatArray
    exit_days: FloatArray
    quantities: FloatArray
    equities: FloatArray


def log_arrays(trades: pd.DataFrame, prices: Mapping[str, Any],
               settings: TradeSettings | None = None) -> LogArrays:
    """The columns of a trade log, found by header once, as :class:`LogArrays`.

    Parameters
    ----------
    trades : pandas.DataFrame
        One row per trade, headed as :data:`LOG_COLUMNS` says (or
        ``settings.columns``).
    prices : mapping
        Bars per instrument (only their names are used: a log without an
        instrument column is on the only instrument).
    settings : TradeSettings, optional
        For ``columns``.

    Returns
    -------
    LogArrays

    Raises
    ------
    ValueError
        A required column is missing; the message lists what was found.

    Examples
    --------
    >>> log = pd.DataFrame({"Date": [pd.Timestamp("2025-01-09")], "Symbol": ["KESTREL"],
    ...                     "Side": ["long"], "Entry": [10.0]})
    >>> a = log_arrays(log, {"KESTREL": None})
    >>> a.entry_days.tolist(), a.entries.tolist(), a.exits.tolist()
    ([45666.0], [10.0], [nan])
    """
    settings = settings or TradeSettings()
    cols = _find_columns(trades, LOG_COLUMNS, settings.columns)
    n = len(trades)
    only = single_instrument(cols, prices)
    absent = [r for r in _REQUIRED_ROLES if cols[r] is None and not (r == "instrument" and only)]
    if absent:
        raise ValueError(missing_roles_message(cols, absent, trades.columns))

    def log_numbers(role: str) -> FloatArray:
        if cols[role] is None:
            return np.full(n, np.nan)
        return _numbers(trades[cols[role]].to_numpy(), str(cols[role]))

    return LogArrays(
        index=trades.index,
        names=(trades[cols["instrument"]].to_numpy() if cols["instrument"] is not None
               else np.full(n, only, dtype=object)),
        sides=trades[cols["side"]].to_numpy(),
        entry_days=_days(trades[cols["date"]].to_numpy()),
        entries=log_numbers("entry"), exits=log_numbers("exit"),
        exit_days=(_days(trades[cols["exit_date"]].to_numpy())
                   if cols["exit_date"] is not None else np.full(n, np.nan)),
        quantities=log_numbers("quantity"), equities=log_numbers("equity"),
    )


def review_arrays(log: LogArrays, prices: Mapping[str, pd.DataFrame],
                  settings: TradeSettings | None = None) -> pd.DataFrame:
    """:func:`review_log` on a log already read: the same columns, with ``Bar date`` and
    ``Exit date`` as day numbers (1900-system serials).

    Parameters
    ----------
    log : LogArrays
        The trades.
    prices : mapping
        Bars per instrument (see :func:`review_log`); a float ``Date`` column is
        taken as day numbers.
    settings : TradeSettings, optional
        Measure, multiples, risk share, equity and contract details.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``log.index``.

    Examples
    --------
    >>> bars = pd.DataFrame({"Date": 45663.0 + np.arange(5), "High": [11.0] * 5,
    ...                      "Low": [9.0] * 5, "Close": [10.0] * 5})
    >>> log = log_arrays(pd.DataFrame({"Date": [45666.0], "Instrument": ["K"],
    ...                                "Side": ["long"]}), {"K": bars})
    >>> review_arrays(log, {"K": bars}, TradeSettings(options={"period": 3}))["Bar date"][0]
    np.float64(45666.0)
    """
    settings = settings or TradeSettings()
    measure = _volatility_function(settings)
    equities = np.where(np.isfinite(log.equities), log.equities, settings.equity)
    out: dict[str, list[Any]] = {c: [] for c in OUTPUT_COLUMNS}
    cache: dict[str, _Bars | str] = {}
    for t in range(len(log.sides)):
        row = _review_row(
            log.names[t], log.sides[t], log.entry_days[t], log.entries[t], log.exits[t],
            log.exit_days[t], log.quantities[t], equities[t], prices, measure, settings, cache,
        )
        for c in OUTPUT_COLUMNS:
            out[c].append(row.get(c, np.nan))
    frame = pd.DataFrame(out, index=log.index)
    for c in ("Result", "Size note", "Note"):
        frame[c] = frame[c].fillna("").astype(str)
    return frame


def latest_equity(log: LogArrays) -> float:
    """Equity on the log's latest trade (by entry date) that states one (NaN: none).

    Examples
    --------
    >>> none = np.full(2, np.nan)
    >>> a = LogArrays(None, np.array(["K", "K"]), np.array(["long", "long"]),
    ...               np.array([2.0, 1.0]), none, none, none, none, np.array([9.0, 5.0]))
    >>> latest_equity(a)
    9.0
    """
    ok = np.flatnonzero(np.isfinite(log.entry_days) & np.isfinite(log.equities))
    if not len(ok):
        return math.nan
    return float(log.equities[ok[np.argmax(log.entry_days[ok])]])


def _review_row(
    name: Any, side: Any, entry_day: float, entry: float, exit_price: float, exit_day: float,
    quantity: float, equity: float, prices: Mapping[str, pd.DataFrame],
    measure: tuple[registry.Function, str, dict], settings: TradeSettings,
    cache: dict[str, _Bars | str],
) -> dict[str, Any]:
    """All output columns of one trade; a ``Note`` says what stopped the row short."""
    func = measure[0]
    label = "" if name is None or (not isinstance(name, str) and pd.isna(name)) else str(name)
    if not label.strip():
        return {"Note": "no instrument"}
    if label not in cache:
        frame = _lookup(prices, label)
        if frame is None:
            cache[label] = f"no prices for instrument {label!r}"
        else:
            try:
                cache[label] = _prepare(frame, *measure)
            except (ValueError, cells.CellValueError) as exc:
                cache[label] = f"prices for {label!r}: {exc}"
    bars = cache[label]
    if isinstance(bars, str):
        return {"Note": bars}
    try:
        sign = levels.side_sign(str(side))
    except ValueError as exc:
        return {"Note": str(exc)}
    if not math.isfinite(entry_day):
        return {"Note": "no entry date"}
    i = trade_review.bar_on_or_before(bars.days, entry_day)
    if i is None:
        return {"Note": "no bar on or before the entry date"}
    notes = []
    row: dict[str, Any] = {"Bar date": float(bars.days[i])}
    if not math.isfinite(entry):
        entry = float(bars.close[i])
        notes.append("entry price taken from the entry bar's close")
    vol = float(bars.vol[i])
    row["Volatility"] = vol
    if not math.isfinite(vol):
        notes.append(f"no {func.name} on the entry bar (too little history)")
    inst = settings.instrument(label)
    # Levels on the instrument's tick: stops away from entry, targets toward it; the size
    # then risks the budget over the stop that can actually be placed.
    stop = levels.stop_price(entry, vol, settings.stop_multiple, side, inst.tick)
    target = levels.target_price(entry, vol, settings.target_multiple, side, inst.tick)
    row.update({"Stop": stop, "Target": target,
                "Target R": levels.r_multiple(entry, stop, target, side)})

    size_notes = []
    if not math.isfinite(inst.point_value):
        size_notes.append(POINT_VALUE_ASSUMED)
    if not math.isfinite(equity):
        row["Size"] = math.nan
        size_notes.insert(0, NO_EQUITY)
    else:
        try:
            size = sizing.size_with_reason(equity, settings.risk, entry, stop, inst.per_point,
                                           inst.lot_step, inst.min_qty, inst.max_qty,
                                           inst.fx_rate)
            row["Size"] = float(size.quantity[0])
            words = size_words(size)[0]
            if math.isfinite(vol) and words:
                size_notes.insert(0, words)
        except ValueError as exc:  # an input out of its range (a negative equity): this row
            row["Size"] = math.nan
            size_notes.insert(0, f"size not computed: {exc}")
    row["Size note"] = "; ".join(size_notes)

    trail = None
    if settings.trail_multiple > 0:
        trail = levels.trailing_stop(bars.high, bars.low, bars.close, bars.vol, i, entry,
                                   str(side), settings.trail_multiple, inst.tick)
    has_exit = math.isfinite(exit_price)
    exit_index = trade_review.bar_on_or_before(bars.days, exit_day) if has_exit else None
    if has_exit and math.isfinite(exit_day) and exit_day < bars.days[i]:
        notes.append("exit date is before the entry bar")
    if not math.isfinite(stop):
        row["Note"] = "; ".join(notes)
        return row
    review = trade_review.review_trade(
        bars.open, bars.high, bars.low, bars.close, i, entry, str(side), stop, target, trail,
        exit_index, exit_price if has_exit else None)
    row.update({
        "Trail": review.trail,
        "Result": review.result,
        "Exit price": review.exit_price,
        "Exit date": (float(bars.days[review.exit_index])
                      if review.exit_index is not None else np.nan),
        "R": review.r,
        "Bars": review.bars if review.bars is not None else np.nan,
        "Adverse": review.adverse,
        "Favourable": review.favourable,
        "Adverse R": review.adverse_r,
        "Favourable R": review.favourable_r,
    })
    notes.extend(REVIEW_FLAG_WORDS[flag] for flag in review.flags)
    if review.result == "open":
        qty = quantity if math.isfinite(quantity) else row["Size"]
        guard = stop if trail is None else sign * max(sign * stop, sign * float(trail[-1]))
        at_risk = max(0.0, sign * (float(bars.close[-1]) - guard))
        # blank, never 0, when neither the log's quantity nor a size (equity) is known
        row["Open risk"] = qty * at_risk * inst.per_point * inst.fx_rate
        if not math.isfinite(qty):
            notes.append(f"open risk blank: no quantity in the log and no size ({NO_EQUITY})")
    if has_exit and not math.isfinite(exit_day):
        notes.append("no exit date: R from the exit price only")
    elif has_exit and exit_index is None:
        notes.append("no bar on or before the exit date")
    row["Note"] = "; ".join(notes)
    return row


# -- summary ------------------------------------------------------------------------------------
#: What the review's trade count counts, said beside the figure on the sheet and terminal.
TRADES_REVIEWED = "log rows with an outcome"
SUMMARY_LABELS = {
    "trades": f"Trades reviewed ({TRADES_REVIEWED})",
    "stop": "Stop hit (share)",
    "target": "Target hit (share)",
    "trail": "Trailing stop hit (share)",
    "closed": "Closed at the logged exit (share)",
    "open": "Still open (share)",
    "ambiguous": "Ambiguous (share)",
    "finished": "Finished trades",
    "total_r": "Total R",
    "expectancy": "Expectancy (average R per finished trade)",
    "win_rate": "Win rate",
    "losing_streak": "Largest losing streak",
    "open_risk": "Open risk (account currency)",
    "open_risk_share": "Open risk (share of equity)",
}


def summarise(
    reviewed: pd.DataFrame,
    trades: pd.DataFrame | None = None,
    settings: TradeSettings | None = None,
) -> pd.Series:
    """The summary block of a reviewed trade log.

    Parameters
    ----------
    reviewed : pandas.DataFrame
        The output of :func:`review_log`.
    trades : pandas.DataFrame, optional
        The log itself, for the equity of the latest trade when
        ``settings.equity`` is not set.
    settings : TradeSettings, optional
        As given to :func:`review_log`.

    Returns
    -------
    pandas.Series
        Values labelled as in :data:`SUMMARY_LABELS` (see
        :func:`sheetvol.core.review.summarise_outcomes`); shares are fractions.
        Rows without a result (a ``Note`` stopped them) are not counted.

    Examples
    --------
    >>> rv = pd.DataFrame({"Result": ["target", "stop", "open"], "R": [3.0, -1.0, 0.2],
    ...                    "Open risk": [np.nan, np.nan, 400.0],
    ...                    "Bar date": pd.to_datetime(["2025-01-02", "2025-01-03", "2025-01-06"])})
    >>> s = summarise(rv, settings=TradeSettings(equity=100_000))
    >>> s["Expectancy (average R per finished trade)"], s["Open risk (share of equity)"]
    (1.0, 0.004)
    """
    settings = settings or TradeSettings()
    done = reviewed[reviewed["Result"].astype(str) != ""]
    done = done.sort_values("Bar date", kind="stable")  # entry order, for the losing streak
    equity = settings.equity
    if not math.isfinite(equity) and trades is not None:
        equity = _latest_equity(trades, settings)
    open_risk = done["Open risk"].to_numpy(dtype=float)
    figures = trade_review.summarise_outcomes(
        done["Result"].tolist(), done["R"].to_numpy(dtype=float), open_risk, equity,
    )
    is_open = (done["Result"].astype(str) == "open").to_numpy()
    if not np.isfinite(open_risk[is_open]).all():  # a total missing some trades is no total
        figures["open_risk"] = figures["open_risk_share"] = math.nan
    return pd.Series({SUMMARY_LABELS[k]: v for k, v in figures.items()}, name="Value",
                     dtype=object)


def _latest_equity(trades: pd.DataFrame, settings: TradeSettings) -> float:
    """Equity on the log's latest trade (by entry date) with an equity figure."""
    cols = _find_columns(trades, LOG_COLUMNS, settings.columns)
    if cols["equity"] is None or cols["date"] is None:
        return math.nan
    blank = np.full(len(trades), np.nan)
    return latest_equity(LogArrays(
        index=trades.index, names=blank, sides=blank,
        entry_days=_days(trades[cols["date"]].to_numpy()), entries=blank, exits=blank,
        exit_days=blank, quantities=blank,
        equities=_numbers(trades[cols["equity"]].to_numpy(), str(cols["equity"]))))
