"""Recipes: which computed columns to add, as data.

A recipe is a list of columns. Each names a registry function, its options,
optionally a header and where its input columns come from. The default set
of the fill is a recipe too, and a user can keep their own in a TOML file::

    # my-columns.toml
    [[column]]
    function = "SV_DEVIATION"
    options = { period = 20, average = "exponential" }

    [[column]]
    function = "SV_ATR"
    id = "atr"                      # lets a later column use this one as input
    header = "ATR 10"
    options = { period = 10 }

    [[column]]
    function = "SV_VOLRANK"
    inputs = { values = "atr" }     # rank the ATR column written above
    options = { lookback = 100 }

Inputs name a price role (``open``, ``high``, ``low``, ``close``, ``volume``)
or the ``id`` of an earlier column. Unset inputs take the usual role: price
arguments (``prices``) read the close, ``open``/``high``/``low``/``close``
read their own column.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sheetvol.core import bounds
from sheetvol.core.estimators import PER_YEAR
from sheetvol.core.review import MEASURES
from sheetvol.fill.trade_settings import TradeSettings
from sheetvol.functions import registry

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = [
    "DEFAULT_RECIPE",
    "MEASURE_FUNCTIONS",
    "ROLES",
    "ColumnSpec",
    "Recipe",
    "RecipeError",
    "TradeSettings",
    "default_header",
    "default_specs",
    "load_recipe",
    "make_spec",
    "measure_function",
    "parse_recipe",
    "parse_trades",
    "read_recipe",
    "split_basis",
]

ROLES = ("open", "high", "low", "close", "volume")
#: How an unstated ``per_year`` is described: the fill takes it from the bar dates.
PER_YEAR_FROM_DATES = "from the dates"
_KEYS = {"function", "options", "header", "inputs", "id"}


class RecipeError(ValueError):
    """A recipe that cannot be used; the message names the file and the column."""


@dataclass(frozen=True)
class ColumnSpec:
    """One computed column: a registry function with bound options and input mapping.

    ``options`` holds the validated non-column arguments (every one, defaults
    filled in); ``inputs`` maps each column argument of the function to a
    price role or to the ``id`` of an earlier column.
    """

    function: str
    options: Mapping[str, Any]
    inputs: Mapping[str, str]
    header: str
    id: str = ""
    # options the recipe stated (the others took the registry default), and whether it
    # gave the header: the fill derives bars per year from the dates unless stated
    given: frozenset[str] = frozenset()
    header_given: bool = False

    @property
    def func(self) -> registry.Function:
        return registry.get(self.function)

    def describe_options(self) -> str:
        """``period=14, average=simple`` in registry order (``per_year=from the dates``
        when not stated: the fill derives it)."""
        return ", ".join(
            f"{k}={PER_YEAR_FROM_DATES if k == 'per_year' and k not in self.given else _plain(v)}"
            for k, v in self.options.items())


def _plain(value: Any) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _default_input(param: registry.Param) -> str:
    if param.name in ROLES:
        return param.name
    if param.name == "prices":
        return "close"
    return ""


def make_spec(
    function: str,
    options: Mapping[str, Any] | None = None,
    *,
    header: str | None = None,
    inputs: Mapping[str, str] | None = None,
    id: str = "",
    known_ids: Iterable[str] = (),
    where: str = "",
) -> ColumnSpec:
    """Validate one column description against the registry and fill in defaults.

    Parameters
    ----------
    function : str
        Registry name, e.g. ``"SV_ATR"`` (case-insensitive).
    options : mapping, optional
        Option arguments (period, average, ...); missing ones take the
        registry default.
    header : str, optional
        Header text; by default one is made from the function and options.
    inputs : mapping, optional
        Column argument -> price role or earlier column id.
    id : str
        Name other columns can use as input.
    known_ids : iterable of str
        Ids of earlier columns, valid as inputs.
    where : str
        Prefix for messages (file and column number).

    Returns
    -------
    ColumnSpec

    Examples
    --------
    >>> make_spec("SV_ATR", {"period": 10}).header
    'ATR 10 (Wilder)'
    """
    prefix = f"{where}: " if where else ""
    try:
        func = registry.get(str(function))
    except KeyError:
        raise RecipeError(
            f"{prefix}no sheetvol function named {function!r}; "
            "`sheetvol functions` lists them"
        ) from None
    if func.shape != "series":
        raise RecipeError(
            f"{prefix}{func.name} gives one value, not a column; a recipe lists column "
            "functions (`sheetvol functions` shows which)"
        )
    options = dict(options or {})
    for key in options:
        if key not in {p.name for p in func.options}:
            names = ", ".join(p.name for p in func.options)
            raise RecipeError(f"{prefix}{func.name} has no option {key!r} (options: {names})")
    # Bind with placeholder columns so that the registry validates the options.
    placeholders = {p.name: np.zeros(1) for p in func.columns}
    try:
        bound = func.bind(kwargs={**placeholders, **options})
    except registry.ArgumentError as exc:
        raise RecipeError(f"{prefix}{exc}") from None
    bound_options = {p.name: bound[p.name] for p in func.options}

    ids = set(known_ids)
    mapping: dict[str, str] = {}
    given_inputs = dict(inputs or {})
    for key in given_inputs:
        if key not in {p.name for p in func.columns}:
            names = ", ".join(p.name for p in func.columns)
            raise RecipeError(f"{prefix}{func.name} has no input {key!r} (inputs: {names})")
    for p in func.columns:
        source = str(given_inputs.get(p.name, _default_input(p))).strip()
        if not source:
            raise RecipeError(
                f"{prefix}{func.name} needs input {p.name!r} ({p.help}); give it in "
                f'inputs, e.g. inputs = {{ {p.name} = "close" }}'
            )
        if source.lower() in ROLES:
            source = source.lower()
        elif source not in ids:
            raise RecipeError(
                f"{prefix}{func.name} input {p.name} = {source!r} is neither a price column "
                f"({', '.join(ROLES)}) nor the id of an earlier column"
            )
        mapping[p.name] = source
    text = header if header else default_header(func.name, bound_options, mapping)
    return ColumnSpec(
        function=func.name,
        options=bound_options,
        inputs=mapping,
        header=str(text),
        id=str(id),
        given=frozenset(options),
        header_given=bool(header),
    )


def _w(x: Any) -> str:
    return _plain(float(x))


def default_header(function: str, options: Mapping[str, Any], inputs: Mapping[str, str]) -> str:
    """Header text of our own wording that says what a column is and its parameters.

    Parameters
    ----------
    function : str
        Registry name.
    options : mapping
        Bound options (every one, defaults filled in).
    inputs : mapping
        Column argument -> price role or earlier column id.

    Returns
    -------
    str

    Examples
    --------
    >>> default_header("SV_BAND", {"line": "upper", "period": 20, "width": 2.0,
    ...                 "average": "simple", "divisor": "population"}, {"prices": "close"})
    'Upper band 20x2'
    """
    o = dict(options)
    src = inputs.get("prices", inputs.get("close", "close"))
    extra: list[str] = []
    if o.get("divisor") == "sample":
        extra.append("sample")
    avg = o.get("average", "simple")
    if avg != "simple" and function != "SV_DEVIATION":
        extra.append(str(avg))
    if "prices" in inputs and src != "close" and function != "SV_DEVIATION":
        extra.append(src)
    period = o.get("period")
    if function == "SV_DEVIATION":
        head = f"Std dev {period} ({', '.join([str(avg), src, *extra])})"
        return head
    if function == "SV_ATR":
        head = f"ATR {period} ({str(o['smoothing']).capitalize()})"
    elif function == "SV_ATRPCT":
        head = f"ATR% {period} ({str(o['smoothing']).capitalize()})"
    elif function == "SV_TRUERANGE":
        head = "True range"
    elif function == "SV_BAND":
        head = f"{str(o['line']).capitalize()} band {period}x{_w(o['width'])}"
    elif function == "SV_PCTB":
        head = f"%b {period}x{_w(o['width'])}"
    elif function == "SV_BANDWIDTH":
        head = f"Bandwidth {period}x{_w(o['width'])}"
    elif function == "SV_ATRBAND":
        head = (f"{str(o['line']).capitalize()} ATR band {period}, "
                f"{_w(o['width'])}x ATR {o['atr_period']}")
    elif function == "SV_ENVELOPE":
        head = f"{str(o['line']).capitalize()} envelope {period} ±{_w(o['percent'])}%"
    elif function == "SV_AVERAGE":
        head = f"{str(o['kind']).capitalize()} avg {period}"
    elif function == "SV_PRICE":
        head = f"{str(o['basis']).capitalize()} price"
    elif function in _VOL_NAMES:
        head = f"{_VOL_NAMES[function]} vol {period} (ann.)"
        if float(o.get("per_year", PER_YEAR)) != PER_YEAR:
            extra.append(f"{_w(o['per_year'])}/yr")
    elif function == "SV_VOLRANK":
        head = f"Vol rank {o['lookback']} ({inputs.get('values', '')})"
    elif function == "SV_DEVATR":
        head = f"Std dev/ATR {period}"
    else:  # a function added to the registry later: plain but complete
        head = " ".join([function, *(_plain(v) for v in o.values())])
    if extra:
        head += f" [{', '.join(extra)}]"
    return head


_VOL_NAMES = {
    "SV_CLOSEVOL": "Close",
    "SV_PARKINSON": "Parkinson",
    "SV_GARMANKLASS": "Garman-Klass",
    "SV_ROGERSSATCHELL": "Rogers-Satchell",
    "SV_YANGZHANG": "Yang-Zhang",
}


def parse_recipe(data: Mapping[str, Any] | list, *, source: str = "recipe") -> list[ColumnSpec]:
    """Turn parsed TOML (``{"column": [...]}``) or a list of dicts into column specs.

    Parameters
    ----------
    data : mapping or list
        ``{"column": [{...}, ...]}`` as read from TOML, or the list itself.
    source : str
        Name used in messages (usually the file name).

    Returns
    -------
    list of ColumnSpec

    Examples
    --------
    >>> [s.header for s in parse_recipe([{"function": "SV_CLOSEVOL"}])]
    ['Close vol 20 (ann.)']
    """
    if isinstance(data, Mapping):
        unknown = set(data) - {"column", "trades"}
        if unknown:
            raise RecipeError(
                f"{source}: unknown table(s) {', '.join(sorted(unknown))}; a recipe holds "
                "[[column]] entries and a [trades] table only"
            )
        entries = data.get("column", [])
    else:
        entries = data
    if not isinstance(entries, list) or not entries:
        raise RecipeError(f"{source}: no columns; add at least one [[column]] with a function")
    specs: list[ColumnSpec] = []
    for i, entry in enumerate(entries, start=1):
        where = f"{source}, column {i}"
        if isinstance(entry, str):
            entry = {"function": entry}
        if not isinstance(entry, Mapping):
            raise RecipeError(f"{where}: expected a table with a function, got {entry!r}")
        unknown = set(entry) - _KEYS
        if unknown:
            raise RecipeError(
                f"{where}: unknown key(s) {', '.join(sorted(unknown))} "
                f"(allowed: {', '.join(sorted(_KEYS))})"
            )
        if "function" not in entry:
            raise RecipeError(f'{where}: missing function = "SV_..."')
        for key in ("options", "inputs"):
            if key in entry and not isinstance(entry[key], Mapping):
                raise RecipeError(f"{where}: {key} must be a table, e.g. {key} = {{ ... }}")
        ident = str(entry.get("id", ""))
        if ident and (ident in {s.id for s in specs} or ident.lower() in ROLES):
            raise RecipeError(f"{where}: id {ident!r} is already used")
        specs.append(
            make_spec(
                entry["function"],
                entry.get("options"),
                header=entry.get("header"),
                inputs=entry.get("inputs"),
                id=ident,
                known_ids=[s.id for s in specs if s.id],
                where=where,
            )
        )
    headers = [s.header for s in specs]
    dup = next((h for h in headers if headers.count(h) > 1), None)
    if dup is not None:
        raise RecipeError(f"{source}: two columns have the header {dup!r}; give one a header")
    return specs


def load_recipe(path: str | Path) -> list[ColumnSpec]:
    """Read the columns of a TOML recipe file (a ``[trades]`` table is allowed and ignored).

    Parameters
    ----------
    path : str or Path
        The ``.toml`` file.

    Returns
    -------
    list of ColumnSpec

    Examples
    --------
    >>> load_recipe("my-columns.toml")  # doctest: +SKIP
    """
    path = Path(path)
    return parse_recipe(_read_toml(path), source=path.name)


def _read_toml(path: Path) -> dict[str, Any]:
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise RecipeError(f"{path}: recipe file not found") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise RecipeError(f"{path.name}: not a valid TOML recipe ({exc})") from None


DEFAULT_RECIPE: tuple[dict[str, Any], ...] = (
    {"function": "SV_DEVIATION", "options": {"period": 14, "average": "simple"}},
    {"function": "SV_ATR", "options": {"period": 14}},
    {"function": "SV_BAND", "options": {"line": "upper", "period": 20, "width": 2}},
    {"function": "SV_BAND", "options": {"line": "lower", "period": 20, "width": 2}},
    {"function": "SV_PCTB", "options": {"period": 20, "width": 2}},
    {"function": "SV_CLOSEVOL", "options": {"period": 20}},  # per_year: from the dates
)
"""The fill's default columns (documented in ``sheetvol fill --help``)."""


def default_specs() -> list[ColumnSpec]:
    """The default column set as specs.

    Returns
    -------
    list of ColumnSpec
        Deviation 14, ATR 14, upper and lower bands 20x2, %b 20x2, close vol 20.

    Examples
    --------
    >>> len(default_specs())
    6
    """
    return parse_recipe(list(DEFAULT_RECIPE), source="default columns")


# -- the trade-log part of a recipe ---------------------------------------------------------
#: Keys of ``[trades]`` and what each accepts (for messages and ``--help``).
TRADE_KEYS = {
    "enabled": "true or false",
    "sheet": "the trade-log sheet's name",
    "instruments": "the instrument-details sheet's name",
    "measure": ", ".join(f'"{m}"' for m in MEASURES)
               + " or a sheetvol column function in price units",
    "options": "a table of the measure's options, e.g. { period = 20 }; basis = a price of "
               'the bar (e.g. "typical") for a measure of one price column',
    "stop_multiple": f"volatility units from entry to the stop, {bounds.MULTIPLE.words()}",
    "target_multiple": f"volatility units from entry to the target, {bounds.MULTIPLE.words()}",
    "trail_multiple": f"volatility units of the trailing stop (0: off), {bounds.TRAIL.words()}",
    "risk": f"risk is a share of equity: 0.01 = 1%, {bounds.RISK.words()}",
    "equity": f"account equity where the log has none, {bounds.EQUITY.words()}",
    "columns": 'a table of log roles to headers, e.g. { side = "B/S" }',
}
_LOG_ROLES = ("date", "instrument", "side", "entry", "exit", "exit_date", "quantity", "equity")
# the ranges of the [trades] numbers: the core's, as the worksheet functions take them
_NUMBER_RULES: dict[str, bounds.Bound] = {
    "stop_multiple": bounds.MULTIPLE,
    "target_multiple": bounds.MULTIPLE,
    "trail_multiple": bounds.TRAIL,
    "risk": bounds.RISK,  # the worksheet SV_SIZE's cap: 1 typed for 1 % is refused
    "equity": bounds.EQUITY,
}


def check_trade_number(key: str, value: Any, where: str = "[trades]") -> float:
    """A multiple, risk share or equity checked against its valid range.

    Parameters
    ----------
    key : str
        One of ``stop_multiple``, ``target_multiple``, ``trail_multiple``,
        ``risk``, ``equity``.
    value : Any
        The value given.
    where : str
        Prefix of the message (file and table, or a command-line flag).

    Returns
    -------
    float

    Examples
    --------
    >>> check_trade_number("risk", 0.02)
    0.02
    >>> check_trade_number("risk", 2)
    Traceback (most recent call last):
    ...
    sheetvol.fill.recipe.RecipeError: [trades] risk: risk is a share of equity: 0.01 = 1%, \
a number above 0, up to 0.25; got 2
    """
    bound = _NUMBER_RULES[key]
    number = math.nan
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        number = float(value)
    if not bound.holds(number):
        raise RecipeError(f"{where} {key}: {TRADE_KEYS[key]}; got {value!r}")
    return number


def parse_trades(table: Any, *, source: str = "recipe") -> TradeSettings:
    """Check a ``[trades]`` table and turn it into a :class:`TradeSettings`.

    Parameters
    ----------
    table : mapping
        The ``[trades]`` table as read from TOML.
    source : str
        Name used in messages (usually the file name).

    Returns
    -------
    TradeSettings

    Raises
    ------
    RecipeError
        Naming the file and the key, with what the key accepts.

    Examples
    --------
    >>> parse_trades({"stop_multiple": 1.5, "risk": 0.005}).stop_multiple
    1.5
    >>> parse_trades({"stop": 2}, source="desk.toml")
    Traceback (most recent call last):
    ...
    sheetvol.fill.recipe.RecipeError: desk.toml, [trades]: unknown key 'stop' (keys: enabled, \
sheet, instruments, measure, options, stop_multiple, target_multiple, trail_multiple, risk, \
equity, columns)
    """
    where = f"{source}, [trades]"
    if not isinstance(table, Mapping):
        raise RecipeError(f"{where}: expected a table ([trades] with key = value lines)")
    for key in table:
        if key not in TRADE_KEYS:
            raise RecipeError(f"{where}: unknown key {key!r} (keys: {', '.join(TRADE_KEYS)})")
    values: dict[str, Any] = {}
    for key, value in table.items():
        if key == "enabled":
            if not isinstance(value, bool):
                raise RecipeError(f"{where} enabled: {TRADE_KEYS[key]}; got {value!r}")
            values[key] = value
        elif key in ("sheet", "instruments", "measure"):
            if not isinstance(value, str) or not value.strip():
                raise RecipeError(f"{where} {key}: {TRADE_KEYS[key]} as text; got {value!r}")
            values[key] = value.strip()
        elif key in _NUMBER_RULES:
            values[key] = check_trade_number(key, value, where)
        elif key in ("options", "columns"):
            if not isinstance(value, Mapping):
                raise RecipeError(f"{where} {key}: {TRADE_KEYS[key]}; got {value!r}")
            values[key] = dict(value)
    for role, header in values.get("columns", {}).items():
        if role not in _LOG_ROLES:
            raise RecipeError(f"{where} columns: no log role {role!r} (roles: "
                              f"{', '.join(_LOG_ROLES)})")
        if not isinstance(header, str) or not header.strip():
            raise RecipeError(f"{where} columns.{role}: a header text; got {header!r}")
    if "instruments" in values:  # the key's name in the table; the sheet of contract details
        values["contract_sheet"] = values.pop("instruments")
    recipe = TradeSettings(**values)
    check_measure(recipe, where)
    return recipe


def check_measure(recipe: TradeSettings, where: str = "[trades]") -> registry.Function:
    """The registry function of ``recipe.measure``, with its options validated.

    Parameters
    ----------
    recipe : TradeSettings
        The settings to check.
    where : str
        Prefix of the message.

    Returns
    -------
    registry.Function

    Examples
    --------
    >>> check_measure(TradeSettings(measure="deviation", options={"period": 20})).name
    'SV_DEVIATION'
    """
    name = measure_function(recipe.measure)
    try:
        func = registry.get(name)
    except KeyError:
        raise RecipeError(f"{where} measure: {TRADE_KEYS['measure']}; got "
                          f"{recipe.measure!r}") from None
    if func.shape != "series" or func.unit != "price":
        raise RecipeError(f"{where} measure: {func.name} is not a column function in price "
                          "units (use SV_ATR, SV_DEVIATION or similar)")
    try:
        _basis, options = split_basis(func, recipe.options)
    except ValueError as exc:
        raise RecipeError(f"{where} options: {exc}") from None
    for key in options:
        if key not in {p.name for p in func.options}:
            names = ", ".join(p.name for p in func.options)
            raise RecipeError(f"{where} options: {func.name} has no option {key!r} "
                              f"(options: {names}{', basis' if _one_price(func) else ''})")
    try:
        func.bind(kwargs={**{p.name: np.zeros(1) for p in func.columns}, **options})
    except registry.ArgumentError as exc:
        raise RecipeError(f"{where} options: {exc}") from None
    return func


#: The registry function of each trade-measure word (:data:`sheetvol.core.review.MEASURES`).
MEASURE_FUNCTIONS = {"atr": "SV_ATR", "deviation": "SV_DEVIATION"}


def measure_function(measure: str) -> str:
    """The registry name of a trade measure: a measure word's function, else as given.

    Examples
    --------
    >>> measure_function(" ATR "), measure_function("SV_CLOSEVOL")
    ('SV_ATR', 'SV_CLOSEVOL')
    """
    return MEASURE_FUNCTIONS.get(measure.strip().lower(), measure)


#: The option of a trade measure that picks the bar's price it is computed on.
BASIS_OPTION = "basis"


def _one_price(func: registry.Function) -> bool:
    return any(p.name == "prices" for p in func.columns)


def split_basis(func: registry.Function, options: Mapping[str, Any]
                ) -> tuple[str, dict[str, Any]]:
    """Take the price basis out of a trade measure's options.

    Parameters
    ----------
    func : registry.Function
        The volatility measure.
    options : mapping
        Its options as given, possibly with ``basis``.

    Returns
    -------
    tuple
        The basis (``"close"`` when not given) and the other options.

    Raises
    ------
    ValueError
        ``basis`` is not one of SV_PRICE's ``basis`` choices, or the measure
        reads several price columns (ATR uses high, low and close).

    Examples
    --------
    >>> split_basis(registry.get("SV_DEVIATION"), {"period": 20, "basis": "Typical"})
    ('typical', {'period': 20})
    """
    rest = {k: v for k, v in options.items() if k != BASIS_OPTION}
    if BASIS_OPTION not in options:
        return "close", rest
    choices = next(p.choices for p in registry.get("SV_PRICE").params if p.name == "basis")
    word = options[BASIS_OPTION]
    basis = word.strip().lower() if isinstance(word, str) else ""
    if basis not in choices:
        raise ValueError(f"basis must be one of {', '.join(choices)}; got {word!r}")
    if not _one_price(func):
        raise ValueError(f"basis applies to a measure of one price column (such as "
                         f"SV_DEVIATION); {func.name} reads "
                         f"{', '.join(p.name for p in func.columns)}")
    return basis, rest


@dataclass(frozen=True)
class Recipe:
    """A whole recipe file: columns (None: the default set) and the trade-log settings."""

    columns: list[ColumnSpec] | None
    trades: TradeSettings | None


def read_recipe(path: str | Path) -> Recipe:
    """Read a TOML recipe: ``[[column]]`` entries and/or a ``[trades]`` table.

    Parameters
    ----------
    path : str or Path
        The ``.toml`` file.

    Returns
    -------
    Recipe
        ``columns`` is None when the file has no ``[[column]]`` entries (the
        fill then writes its default set); ``trades`` is None without ``[trades]``.

    Examples
    --------
    >>> read_recipe("desk.toml").trades.risk  # doctest: +SKIP
    0.005
    """
    path = Path(path)
    data = _read_toml(path)
    trades = parse_trades(data["trades"], source=path.name) if "trades" in data else None
    if "column" not in data and trades is not None:
        unknown = set(data) - {"trades"}
        if unknown:
            parse_recipe(data, source=path.name)  # names the unknown table
        return Recipe(columns=None, trades=trades)
    return Recipe(columns=parse_recipe(data, source=path.name), trades=trades)
