"""The gap policy shared by every series kernel.

A bar is *usable* when every input the kernel needs is finite on that row.
Unusable bars (blank cells, NaN, inf) are skipped: the kernel runs on the
usable bars only, as if the gap rows were not there, and the gap rows get NaN
in the output. Windows and recursions therefore carry on across a gap instead
of being poisoned by it for the rest of the series.
"""

from __future__ import annotations

import functools
import inspect
from collections.abc import Callable
from typing import Any

import numpy as np

from sheetvol.core._types import FloatArray


def as_series(x: Any, name: str = "values") -> FloatArray:
    """Return ``x`` as a 1-D float64 array (a copy only when needed)."""
    arr = np.asarray(x, dtype=np.float64)
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1:
        raise ValueError(f"{name} must be one-dimensional, got shape {arr.shape}")
    return arr


def skip_gaps(n_series: int) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """Decorate a kernel whose first ``n_series`` arguments are aligned price arrays.

    The wrapped kernel sees only the usable bars; its outputs (one array or a
    tuple of arrays) are scattered back onto the original rows with NaN on the
    skipped ones. When every bar is usable the kernel is called directly.
    """

    def decorate(kernel: Callable[..., Any]) -> Callable[..., Any]:
        signature = inspect.signature(kernel)
        names = list(signature.parameters)[:n_series]

        def _split(args: tuple[Any, ...], kwargs: dict[str, Any]) -> tuple[Any, ...]:
            bound = signature.bind(*args, **kwargs)
            given = tuple(bound.arguments[name] for name in names)
            options = {k: v for k, v in bound.arguments.items() if k not in names}
            return given, (), options

        column_names = frozenset(names)

        @functools.wraps(kernel)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            # Columns may come by position (Python callers) or by keyword (the registry).
            # The two plain cases are split here directly (per-cell forms pay this on
            # every call); anything else goes through the signature, which also gives
            # Python's own message for a wrong call.
            rest: tuple[Any, ...] = ()
            if len(args) >= n_series:
                given, rest, options = args[:n_series], args[n_series:], kwargs
                if kwargs and not column_names.isdisjoint(kwargs):
                    given, rest, options = _split(args, kwargs)
            elif not args and column_names.issubset(kwargs):
                given = tuple(kwargs[name] for name in names)
                options = {k: v for k, v in kwargs.items() if k not in column_names}
            else:
                given, rest, options = _split(args, kwargs)
            if n_series == 1:
                series = [as_series(given[0], names[0])]
            else:
                series = [as_series(a, name) for a, name in zip(given, names, strict=True)]
            n = len(series[0])
            if n_series > 1 and any(len(s) != n for s in series[1:]):
                pairs = zip(names, series, strict=True)
                lengths = ", ".join(f"{name} {len(s)}" for name, s in pairs)
                raise ValueError(f"{kernel.__name__}: columns have different lengths ({lengths})")
            if n > _LONG and _finite_sums(series):
                return kernel(*series, *rest, **options)
            usable = np.isfinite(series[0])
            for s in series[1:]:
                usable &= np.isfinite(s)
            if np.count_nonzero(usable) == n:  # every bar usable (cheaper than .all())
                return kernel(*series, *rest, **options)
            result = kernel(*(s[usable] for s in series), *rest, **options)
            if isinstance(result, tuple):
                return tuple(_scatter(r, usable) for r in result)
            return _scatter(result, usable)

        # an attribute of our own on a function object, which the checker does not model
        wrapper.__wrapped_kernel__ = kernel  # type: ignore[attr-defined]
        return wrapper

    return decorate


# Columns longer than this are first checked by their sums (see _finite_sums).
_LONG = 4096


def _finite_sums(series: list[FloatArray]) -> bool:
    """True when every column has a finite sum, so no NaN or inf anywhere in it.

    One read per column and no mask to page in on long columns; a sum of finite
    values that overflows gives False and the caller's exact check decides.
    """
    with np.errstate(over="ignore", invalid="ignore"):
        return all(np.isfinite(np.sum(s)) for s in series)


def _scatter(values: FloatArray, usable: np.ndarray) -> FloatArray:
    out = np.full(usable.shape, np.nan)
    out[usable] = values
    return out
