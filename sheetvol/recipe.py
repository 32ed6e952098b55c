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

import sys
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sheetvol import registry

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = [
    "DEFAULT_RECIPE",
    "ROLES",
    "ColumnSpec",
    "RecipeError",
    "default_header",
    "default_specs",
    "load_recipe",
    "make_spec",
    "parse_recipe",
]

ROLES = ("open", "high", "low", "close", "volume")
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

    @property
    def func(self) -> registry.Function:
        return registry.get(self.function)

    def describe_options(self) -> str:
        """``period=14, average=simple`` in registry order."""
        return ", ".join(f"{k}={_plain(v)}" for k, v in self.options.items())

    def describe_inputs(self) -> str:
        return ", ".join(f"{k}={v}" for k, v in self.inputs.items())


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
    'Upper band 20×2'
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
        head = f"{str(o['line']).capitalize()} band {period}×{_w(o['width'])}"
    elif function == "SV_PCTB":
        head = f"%b {period}×{_w(o['width'])}"
    elif function == "SV_BANDWIDTH":
        head = f"Bandwidth {period}×{_w(o['width'])}"
    elif function == "SV_ATRBAND":
        head = (f"{str(o['line']).capitalize()} ATR band {period}, "
                f"{_w(o['width'])}×ATR {o['atr_period']}")
    elif function == "SV_ENVELOPE":
        head = f"{str(o['line']).capitalize()} envelope {period} ±{_w(o['percent'])}%"
    elif function == "SV_AVERAGE":
        head = f"{str(o['kind']).capitalize()} avg {period}"
    elif function == "SV_PRICE":
        head = f"{str(o['basis']).capitalize()} price"
    elif function in _VOL_NAMES:
        head = f"{_VOL_NAMES[function]} vol {period} (ann.)"
        if float(o.get("per_year", 252)) != 252:
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
        unknown = set(data) - {"column"}
        if unknown:
            raise RecipeError(
                f"{source}: unknown table(s) {', '.join(sorted(unknown))}; a recipe holds "
                "[[column]] entries only"
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
    """Read a TOML recipe file.

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
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise RecipeError(f"{path}: recipe file not found") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise RecipeError(f"{path.name}: not a valid TOML recipe ({exc})") from None
    return parse_recipe(data, source=path.name)


DEFAULT_RECIPE: tuple[dict[str, Any], ...] = (
    {"function": "SV_DEVIATION", "options": {"period": 14, "average": "simple"}},
    {"function": "SV_ATR", "options": {"period": 14}},
    {"function": "SV_BAND", "options": {"line": "upper", "period": 20, "width": 2}},
    {"function": "SV_BAND", "options": {"line": "lower", "period": 20, "width": 2}},
    {"function": "SV_PCTB", "options": {"period": 20, "width": 2}},
    {"function": "SV_CLOSEVOL", "options": {"period": 20, "per_year": 252}},
)
"""The fill's default columns (documented in ``sheetvol fill --help``)."""


def default_specs() -> list[ColumnSpec]:
    """The default column set as specs.

    Returns
    -------
    list of ColumnSpec
        Deviation 14, ATR 14, upper and lower bands 20×2, %b 20×2, close vol 20.

    Examples
    --------
    >>> len(default_specs())
    6
    """
    return parse_recipe(list(DEFAULT_RECIPE), source="default columns")
