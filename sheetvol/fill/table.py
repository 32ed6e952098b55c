"""The one compute path of the fill: recipe columns from price arrays.

Every column goes through the registry (``Function.bind`` validates,
``Function.compute`` calls the kernel), so a filled workbook, a typed
worksheet formula and this helper give the same numbers.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from sheetvol.fill.locate import role_of
from sheetvol.fill.recipe import ColumnSpec, default_specs, load_recipe, parse_recipe
from sheetvol.functions import registry

__all__ = ["ColumnsArg", "ComputeError", "as_specs", "compute_columns", "find_roles",
           "needed_roles"]

ColumnsArg = str | Path | Sequence[ColumnSpec | Mapping[str, Any] | str] | None


class ComputeError(ValueError):
    """A column that could not be computed; the message names the column."""


def as_specs(columns: ColumnsArg) -> list[ColumnSpec]:
    """Column specs from ``None`` (the default set), a TOML path or a list.

    Parameters
    ----------
    columns : None, str, Path or sequence
        ``None`` for the default set, a TOML recipe path, or function names,
        recipe dicts or ColumnSpec objects.

    Returns
    -------
    list of ColumnSpec

    Examples
    --------
    >>> [s.function for s in as_specs(["SV_ATR", {"function": "SV_PCTB"}])]
    ['SV_ATR', 'SV_PCTB']
    """
    if columns is None:
        return default_specs()
    if isinstance(columns, (str, Path)):
        return load_recipe(columns)
    items = list(columns)
    specs = [c for c in items if isinstance(c, ColumnSpec)]
    if items and len(specs) == len(items):
        return specs
    return parse_recipe([c.__dict__ if isinstance(c, ColumnSpec) else c for c in items],
                        source="columns")


def needed_roles(specs: Iterable[ColumnSpec]) -> set[str]:
    """Price roles the specs read (``close``, ``high``...).

    Parameters
    ----------
    specs : iterable of ColumnSpec
        The columns.

    Returns
    -------
    set of str

    Examples
    --------
    >>> sorted(needed_roles(as_specs(["SV_ATR"])))
    ['close', 'high', 'low']
    """
    ids = {s.id for s in specs if s.id}
    return {src for s in specs for src in s.inputs.values() if src not in ids}


def compute_columns(
    specs: Sequence[ColumnSpec], series: Mapping[str, np.ndarray]
) -> list[np.ndarray]:
    """Compute each spec's column from price series in date order.

    Parameters
    ----------
    specs : sequence of ColumnSpec
        The columns, in recipe order (a column may read an earlier one by id).
    series : mapping
        role -> float array (oldest bar first, NaN for gaps).

    Returns
    -------
    list of numpy.ndarray
        One float64 array per spec, aligned with the input bars.

    Raises
    ------
    ComputeError
        When a needed price column is missing or the kernel refuses the input.

    Examples
    --------
    >>> from sheetvol.fill.recipe import make_spec
    >>> out = compute_columns([make_spec("SV_DEVIATION", {"period": 2})],
    ...                       {"close": np.array([1.0, 3.0, 3.0])})
    >>> out[0].tolist()
    [nan, 1.0, 0.0]
    """
    results: dict[str, np.ndarray] = {}
    out: list[np.ndarray] = []
    for spec in specs:
        func = registry.get(spec.function)
        args: dict[str, Any] = {}
        for param, source in spec.inputs.items():
            data = results.get(source) if source in results else series.get(source)
            if data is None:
                raise ComputeError(
                    f"{spec.header}: {func.name} needs a {source.capitalize()} column "
                    f"(argument {param}) and none was found"
                )
            args[param] = np.asarray(data, dtype=np.float64)
        try:
            bound = func.bind(kwargs={**args, **spec.options})
            values = np.asarray(func.compute(bound), dtype=np.float64)
        except (registry.ArgumentError, ValueError) as exc:
            raise ComputeError(f"{spec.header}: {exc}") from None
        if spec.id:
            results[spec.id] = values
        out.append(values)
    return out


def find_roles(names: Iterable[str], overrides: Mapping[str, str] | None = None) -> dict[str, str]:
    """Match DataFrame column names to price roles (case-insensitive synonyms).

    Parameters
    ----------
    names : iterable of str
        Column names.
    overrides : mapping, optional
        role -> column name, taking precedence.

    Returns
    -------
    dict
        role -> column name.

    Examples
    --------
    >>> find_roles(["DATE", "Open", "HIGH", "low", "Last price"])["close"]
    'Last price'
    """
    found: dict[str, tuple[int, str]] = {}
    for name in names:
        hit = role_of(str(name))
        if hit is None:
            continue
        role, rank = hit
        if role not in found or rank < found[role][0]:
            found[role] = (rank, name)
    roles = {role: name for role, (_, name) in found.items()}
    roles.update({k: v for k, v in (overrides or {}).items() if v})
    return roles
