"""From a trade log to sized trades: levels, sizes, trailing stops and outcomes per row.

The fill calls two functions:

* :func:`review_log` takes the trade log (one row per trade) and the price bars
  of each instrument and returns new columns aligned with the log's rows;
* :func:`summarise` turns those columns into the summary block.

Everything as of entry uses only bars dated on or before the entry date (the
last such bar is the *entry bar*; the trade is assumed entered at its close),
so no figure in an entry column can see a later price. The review and the
trailing stop start on the bar after the entry bar. The arithmetic lives in
:mod:`sheetvol.core.risk`; this module finds the columns, looks up the bars
and writes down, per row, what it could not compute and why.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sheetvol.core import risk
from sheetvol.core._types import FloatArray
from sheetvol.core.prices import price_basis
from sheetvol.core.risk import (  # the review defaults, stated once
    MEASURE,
    PERIOD,
    RISK_SHARE,
    STOP_MULTIPLE,
    TARGET_MULTIPLE,
    TRAIL_MULTIPLE,
)
from sheetvol.fill.locate import normalize_header
from sheetvol.fill.recipe import split_basis
from sheetvol.fill.table import find_roles
from sheetvol.functions import cells, registry
from sheetvol.functions._lazy import pandas as pd

__all__ = [
    "LOG_COLUMNS",
    "OUTPUT_COLUMNS",
    "SUMMARY_LABELS",
    "Instrument",
    "TradeSettings",
    "instruments_from_frame",
    "missing_roles_message",
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

#: Columns :func:`review_log` returns, in order.
OUTPUT_COLUMNS = (
    "Volatility", "Bar date", "Stop", "Target", "Target R", "Size", "Size note", "Trail",
    "Result", "Exit price", "Exit date", "R", "Bars", "Adverse", "Favourable", "Adverse R",
    "Favourable R", "Open risk", "Note",
)

_MEASURE_WORDS = {"atr": "SV_ATR", "deviation": "SV_DEVIATION"}


@dataclass(frozen=True)
class Instrument:
    """Contract details of one instrument, for sizing and open risk.

    ``point_value`` is money per 1.0 price move per unit in the instrument's
    currency; ``fx_rate`` is account currency per unit of instrument currency;
    ``min_qty``/``max_qty`` of 0 mean no limit; ``tick`` is the price increment
    levels are rounded to (0: not rounded; see :func:`sheetvol.core.risk.to_tick`).
    """

    point_value: float = 1.0
    lot_step: float = 1.0
    min_qty: float = 0.0
    max_qty: float = 0.0
    fx_rate: float = 1.0
    tick: float = 0.0


@dataclass(frozen=True)
class TradeSettings:
    """How a trade log is reviewed.

    Parameters
    ----------
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
        Header for a role of :data:`LOG_COLUMNS` when the log uses another name.
    """

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
        key = _key(name)
        for k, v in self.instruments.items():
            if _key(k) == key:
                return v
        return self.default


def _key(text: Any) -> str:
    """An instrument name as compared: case and surrounding spaces ignored."""
    return " ".join(str(text).split()).lower()


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
    """Day numbers of date cells; blanks (including NaT) give NaN."""
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
        Columns ``Instrument`` and any of ``Point value``, ``Lot step``,
        ``Min qty``, ``Max qty``, ``FX rate``, ``Tick`` (or ``Tick size``)
        (headers compared ignoring case, spaces and underscores); blank cells
        take the :class:`Instrument` defaults.

    Returns
    -------
    dict
        :class:`Instrument` by name.

    Examples
    --------
    >>> t = pd.DataFrame({"Instrument": ["ORRIN"], "Point value": [10], "Lot step": [1]})
    >>> instruments_from_frame(t)["ORRIN"].point_value
    10.0
    """
    roles = {"instrument": ("instrument",), "point_value": ("point value",),
             "lot_step": ("lot step",), "min_qty": ("min qty", "minimum"),
             "max_qty": ("max qty", "maximum"), "fx_rate": ("fx rate", "fx"),
             "tick": ("tick", "tick size")}
    cols = _find_columns(frame, roles, {})
    if cols["instrument"] is None:
        raise ValueError("instrument table has no Instrument column")
    out: dict[str, Instrument] = {}
    for _, row in frame.iterrows():
        name = row[cols["instrument"]]
        if cells.is_blank(name) or (not isinstance(name, str) and pd.isna(name)):
            continue
        values = {}
        for role in ("point_value", "lot_step", "min_qty", "max_qty", "fx_rate", "tick"):
            if cols[role] is not None:
                x = _numbers([row[cols[role]]], f"{name} {cols[role]}")[0]
                if math.isfinite(x):
                    values[role] = float(x)
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
    name = _MEASURE_WORDS.get(settings.measure.strip().lower(), settings.measure)
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
    key = _key(name)
    return next((v for k, v in prices.items() if _key(k) == key), None)


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
          toward it (:func:`sheetvol.core.risk.to_tick`);
        * ``Size`` (from the rounded stop), down to the lot step, and ``Size note``;
        * ``Trail``: the trailing stop in force at the end of the review;
        * ``Result``, ``Exit price``, ``Exit date``, ``R``, ``Bars``,
          ``Adverse``/``Favourable`` (price) and in R: see
          :func:`sheetvol.core.risk.review_trade` (for an open trade ``R`` is
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
    measure = _volatility_function(settings)
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

    entry_days = _days(trades[cols["date"]].to_numpy())
    exit_days = (_days(trades[cols["exit_date"]].to_numpy()) if cols["exit_date"] is not None
                 else np.full(n, np.nan))
    entries, exits = log_numbers("entry"), log_numbers("exit")
    quantities, equities = log_numbers("quantity"), log_numbers("equity")
    equities = np.where(np.isfinite(equities), equities, settings.equity)
    names = (trades[cols["instrument"]].to_numpy() if cols["instrument"] is not None
             else np.full(n, only, dtype=object))
    sides = trades[cols["side"]].to_numpy()

    out: dict[str, list[Any]] = {c: [] for c in OUTPUT_COLUMNS}
    cache: dict[str, _Bars | str] = {}
    for t in range(n):
        row = _review_row(
            names[t], sides[t], entry_days[t], entries[t], exits[t], exit_days[t],
            quantities[t], equities[t], prices, measure, settings, cache,
        )
        for c in OUTPUT_COLUMNS:
            out[c].append(row.get(c, np.nan if c not in ("Bar date", "Exit date") else pd.NaT))
    frame = pd.DataFrame(out, index=trades.index)
    for c in ("Result", "Size note", "Note"):
        frame[c] = frame[c].fillna("").astype(str)
    return frame


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
        sign = risk.side_sign(str(side))
    except ValueError as exc:
        return {"Note": str(exc)}
    if not math.isfinite(entry_day):
        return {"Note": "no entry date"}
    i = risk.bar_on_or_before(bars.days, entry_day)
    if i is None:
        return {"Note": "no bar on or before the entry date"}
    notes = []
    row: dict[str, Any] = {"Bar date": _as_timestamp(bars.days[i])}
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
    stop = risk.stop_price(entry, vol, settings.stop_multiple, side, inst.tick)
    target = risk.target_price(entry, vol, settings.target_multiple, side, inst.tick)
    row.update({"Stop": stop, "Target": target,
                "Target R": risk.r_multiple(entry, stop, target, side)})

    size = risk.size_with_reason(equity, settings.risk, entry, stop, inst.point_value,
                                 inst.lot_step, inst.min_qty, inst.max_qty, inst.fx_rate)
    row["Size"] = float(size.quantity[0])
    row["Size note"] = "" if not math.isfinite(vol) else str(size.note[0])

    trail = None
    if settings.trail_multiple > 0:
        trail = risk.trailing_stop(bars.high, bars.low, bars.close, bars.vol, i, entry,
                                   str(side), settings.trail_multiple, inst.tick)
    has_exit = math.isfinite(exit_price)
    exit_index = risk.bar_on_or_before(bars.days, exit_day) if has_exit else None
    if has_exit and math.isfinite(exit_day) and exit_day < bars.days[i]:
        notes.append("exit date is before the entry bar")
    if not math.isfinite(stop):
        row["Note"] = "; ".join(notes)
        return row
    review = risk.review_trade(bars.open, bars.high, bars.low, bars.close, i, entry, str(side),
                               stop, target, trail, exit_index, exit_price if has_exit else None)
    row.update({
        "Trail": review.trail,
        "Result": review.result,
        "Exit price": review.exit_price,
        "Exit date": (_as_timestamp(bars.days[review.exit_index])
                      if review.exit_index is not None else pd.NaT),
        "R": review.r,
        "Bars": review.bars if review.bars is not None else np.nan,
        "Adverse": review.adverse,
        "Favourable": review.favourable,
        "Adverse R": review.adverse_r,
        "Favourable R": review.favourable_r,
    })
    if review.result == "open":
        qty = quantity if math.isfinite(quantity) else row["Size"]
        guard = stop if trail is None else sign * max(sign * stop, sign * float(trail[-1]))
        at_risk = max(0.0, sign * (float(bars.close[-1]) - guard))
        row["Open risk"] = qty * at_risk * inst.point_value * inst.fx_rate
    if has_exit and not math.isfinite(exit_day):
        notes.append("no exit date: R from the exit price only")
    elif has_exit and exit_index is None:
        notes.append("no bar on or before the exit date")
    row["Note"] = "; ".join(notes)
    return row


# -- summary ------------------------------------------------------------------------------------
SUMMARY_LABELS = {
    "trades": "Trades",
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
        :func:`sheetvol.core.risk.summarise_outcomes`); shares are fractions.
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
    figures = risk.summarise_outcomes(
        done["Result"].tolist(), done["R"].to_numpy(dtype=float),
        done["Open risk"].to_numpy(dtype=float), equity,
    )
    return pd.Series({SUMMARY_LABELS[k]: v for k, v in figures.items()}, name="Value",
                     dtype=object)


def _latest_equity(trades: pd.DataFrame, settings: TradeSettings) -> float:
    """Equity on the log's latest trade (by entry date) with an equity figure."""
    cols = _find_columns(trades, LOG_COLUMNS, settings.columns)
    if cols["equity"] is None or cols["date"] is None:
        return math.nan
    days = _days(trades[cols["date"]].to_numpy())
    equity = _numbers(trades[cols["equity"]].to_numpy(), str(cols["equity"]))
    ok = np.flatnonzero(np.isfinite(days) & np.isfinite(equity))
    if not len(ok):
        return math.nan
    return float(equity[ok[np.argmax(days[ok])]])
