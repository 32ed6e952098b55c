"""Computed columns for a pandas DataFrame: the pandas face of the fill's compute path.

Every column goes through the registry (``Function.bind`` validates,
``Function.compute`` calls the kernel), so a filled workbook, a typed
worksheet formula and this helper give the same numbers.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from sheetvol.fill.table import (
    ColumnsArg,
    ComputeError,
    as_specs,
    compute_columns,
    find_roles,
    needed_roles,
)

__all__ = ["ComputeError", "add_columns", "as_specs", "compute_columns", "find_roles",
           "needed_roles"]


def add_columns(
    df: pd.DataFrame,
    columns: ColumnsArg = None,
    *,
    roles: Mapping[str, str] | None = None,
) -> pd.DataFrame:
    """Add sheetvol columns to a DataFrame of OHLC prices.

    Columns named like ``Open``/``High``/``Low``/``Close`` (any case, usual
    spellings) are found by name. Rows are computed in date order when there
    is a date column or a DatetimeIndex (a newest-first frame keeps its
    order in the result); otherwise in row order.

    Parameters
    ----------
    df : pandas.DataFrame
        Price data.
    columns : None, path or list, optional
        ``None`` for the default set (as ``sheetvol fill``), a TOML recipe
        path, or a list of function names / recipe dicts / ColumnSpec.
    roles : mapping, optional
        Role -> column name when the names are not recognised,
        e.g. ``{"close": "Settle"}``.

    Returns
    -------
    pandas.DataFrame
        A copy of ``df`` with the new columns on the right, named by their
        headers (e.g. ``ATR 14 (Wilder)``; a recipe's ``header`` overrides).

    Examples
    --------
    >>> df = pd.DataFrame({"Close": np.linspace(100, 120, 30),
    ...                    "High": np.linspace(101, 121, 30), "Low": np.linspace(99, 119, 30)})
    >>> list(add_columns(df, ["SV_ATR"]).columns)
    ['Close', 'High', 'Low', 'ATR 14 (Wilder)']
    """
    specs = as_specs(columns)
    found = find_roles(df.columns, roles)
    order = np.arange(len(df))
    date_key = found.get("date")
    if date_key is not None and date_key in df.columns:
        stamps = pd.to_datetime(df[date_key], errors="coerce")
        order = np.argsort(stamps.to_numpy(), kind="stable")
    elif isinstance(df.index, pd.DatetimeIndex):
        order = np.argsort(df.index.to_numpy(), kind="stable")
    series: dict[str, np.ndarray] = {}
    for role in needed_roles(specs):
        if role not in found:
            raise ComputeError(
                f"no {role.capitalize()} column among {', '.join(map(str, df.columns))}; "
                f'name it with roles={{"{role}": "<column>"}}'
            )
        values = pd.to_numeric(df[found[role]], errors="coerce").to_numpy(dtype=np.float64)
        series[role] = values[order]
    out = df.copy()
    for spec, values in zip(specs, compute_columns(specs, series), strict=True):
        back = np.empty_like(values)
        back[order] = values
        out[spec.header] = back
    return out
