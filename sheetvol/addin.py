"""The sheetvol worksheet functions as xlwings user-defined functions.

Point the xlwings add-in at this module (``UDF Modules: sheetvol.addin``) and
press *Import Functions*; see ``docs/addin.md``. Every name a user can type
(``SV_ATR``, ``SV_ATR_LAST``, ``SV_ATR_ON``, ...) is generated here from
:mod:`sheetvol.functions.registry` at import time, so the registry, this module and
``docs/functions.md`` cannot drift apart (a test compares them).

What each generated function does:

* takes the arguments the way xlwings passes them (ranges as lists of rows,
  blank and error cells as None, text numbers, datetimes or serial numbers),
* calls :func:`sheetvol.functions.calling.call_worksheet`, the same code the headless
  evaluator uses,
* returns a column as rows with None for warm-up and gap rows (a true blank;
  NaN would show as empty *text*), or one value,
* never raises: any problem comes back as a short message starting with the
  function name, which the cell shows.

On a machine without xlwings (or on Linux and macOS, where xlwings' own
decorators do nothing), the module still imports; the functions are then
plain Python functions with the same behaviour.
"""

from __future__ import annotations

import contextlib
import gc
import inspect
import os
from collections.abc import Callable, Iterator
from typing import Any

import numpy as np

from sheetvol.functions import convert as _convert
from sheetvol.functions.calling import call_worksheet
from sheetvol.functions.registry import (
    ArgumentError,
    Function,
    Param,
    Variant,
    variant_params,
    worksheet_names,
)

try:  # the optional extra: pip install sheetvol[addin]
    import xlwings as _xw

    XLWINGS = True
    _FUNC: Callable[..., Any] = _xw.func
    _ARG: Callable[..., Any] = _xw.arg
    _RET: Callable[..., Any] = _xw.ret
except ImportError:  # pragma: no cover - exercised only without the extra
    XLWINGS = False

    def _FUNC(f: Any = None, **_kw: Any) -> Any:
        """Inert stand-in for ``xlwings.func`` (xlwings is not installed)."""
        return f if callable(f) else (lambda g: g)

    def _ARG(*_a: Any, **_kw: Any) -> Callable[[Any], Any]:
        """Inert stand-in for ``xlwings.arg``."""
        return lambda g: g

    def _RET(*_a: Any, **_kw: Any) -> Callable[[Any], Any]:
        """Inert stand-in for ``xlwings.ret``."""
        return lambda g: g


CATEGORY = "sheetvol"
HELP_LIMIT = 255  # xlwings/Excel cut function and argument help at 255 characters
# Pre-dynamic-array Excel cannot spill; xlwings' legacy resizing (expand="table") helps there.
LEGACY_ARRAYS = os.environ.get("SHEETVOL_LEGACY_ARRAYS", "") == "1"

# Words of the VBA language. xlwings writes a VBA wrapper whose argument names are the
# Python names, and a keyword there breaks Import Functions for the whole module
# (xlwings issues #563 and #384). Our registry uses plain trade words (open, close,
# date, line, width, stop) that collide, so the add-in shows them under other names.
VBA_KEYWORDS = frozenset(
    """access alias and any append as attribute base binary boolean byref byte byval call case
    cbool cbyte ccur cdate cdbl cdec cint clng clnglng clngptr close compare const csng cstr
    currency cvar cverr date debug decimal declare defbool defbyte defcur defdate defdbl defdec
    defint deflng deflnglng deflngptr defobj defsng defstr defvar dim do double each else elseif
    empty end enum eqv erase error event exit explicit false for friend function get global gosub
    goto if imp implements in input integer is len let lib like line lock long longlong longptr
    loop lset me mid mod module name new next not nothing null object on open option optional or
    paramarray preserve print private property ptrsafe public put raiseevent random read redim
    rem resume return rset seek select set shared single spc static step stop string sub tab then
    to true type typeof unlock until variant wend while width with withevents write xor""".split()
)
ARG_NAMES = {
    "open": "open_price",
    "close": "close_price",
    "date": "on_date",
    "line": "band_line",
    "width": "band_width",
    "stop": "stop_price",
}


def addin_arg_name(name: str) -> str:
    """The name an argument has in the add-in (registry name unless it is a VBA keyword).

    Examples
    --------
    >>> addin_arg_name("close"), addin_arg_name("period")
    ('close_price', 'period')
    """
    if name.lower() not in VBA_KEYWORDS:
        return name
    return ARG_NAMES.get(name, f"{name}_value")


def _cut(text: str, limit: int = HELP_LIMIT) -> str:
    text = " ".join(text.split())
    if len(text) <= limit:
        return text
    return text[: limit - 3].rsplit(" ", 1)[0] + "..."


def function_help(func: Function, variant: Variant) -> str:
    """Help text for the function dialog (at most 255 characters)."""
    lead = {
        "column": "",
        "last": "Value on the last row of the ranges (fill down). ",
        "on": "Value on the last bar on or before a date. ",
    }[variant]
    return _cut(lead + func.summary + f" Returns {func.returns}.")


def argument_help(p: Param) -> str:
    """Help text for one argument (at most 255 characters)."""
    extra = p.describe_range()
    if not p.required:
        default = f'"{p.default}"' if isinstance(p.default, str) else f"{p.default}"
        extra += f"; default {default}"
    return _cut(f"{p.help} ({extra})")


def _message(text: str) -> str:
    first = text.strip().splitlines()[0] if text.strip() else "error"
    return _cut(first)


@contextlib.contextmanager
def _bulk_allocation() -> Iterator[None]:
    """Pause the cyclic garbage collector while a result's rows are built.

    A 100,000-row result is 100,000 small lists; with a big workbook's ranges
    alive, the collector's full passes triggered by those allocations cost
    more than the whole call (measured: median 66 ms with, 14 ms without, see
    ``benches/addin.py``). The rows hold no reference cycles, so nothing
    is lost by collecting after the call instead of during it.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def _to_excel(result: Any) -> Any:
    if isinstance(result, np.ndarray):
        if result.ndim == 2:
            return _convert.to_cells(result.reshape(-1), horizontal=result.shape[0] == 1)
        return _convert.to_cells(result)
    return _convert.to_cell(result)


def _parameters(names: list[str], params: tuple[Param, ...]) -> list[inspect.Parameter]:
    # A required argument after an optional one (SV_OUTCOME's stop after side) gets a
    # None default so that the signature is valid Python; the registry still reports it
    # as required when it is left out.
    out = []
    optional_seen = False
    for n, p in zip(names, params, strict=True):
        optional_seen = optional_seen or not p.required
        if p.required:
            default = None if optional_seen else inspect.Parameter.empty
        else:
            default = p.default
        out.append(inspect.Parameter(n, inspect.Parameter.POSITIONAL_OR_KEYWORD, default=default))
    return out


def make_udf(
    name: str,
    func: Function,
    variant: Variant,
    *,
    decorators: tuple[Callable[..., Any], Callable[..., Any], Callable[..., Any]] | None = None,
) -> Callable[..., Any]:
    """Build the worksheet function ``name`` and apply the xlwings decorators to it.

    Parameters
    ----------
    name : str
        Worksheet name, e.g. ``"SV_ATR_LAST"``.
    func : Function
        Its registry entry.
    variant : {"column", "last", "on"}
        Which form.
    decorators : tuple, optional
        ``(func, arg, ret)`` decorators; xlwings' own by default. Tests pass
        xlwings' Windows implementations to check what registration sees.

    Returns
    -------
    callable
        A function with the registry's signature (add-in argument names),
        ``__name__``, ``__doc__`` (the help text) and a ``__sheetvol__`` dict
        recording what was asked of xlwings.

    Examples
    --------
    >>> from sheetvol.functions.registry import get
    >>> f = make_udf("SV_STOP", get("SV_STOP"), "column")
    >>> f(100.0, 2.0)
    96.0
    """
    deco_func, deco_arg, deco_ret = decorators or (_FUNC, _ARG, _RET)
    params = variant_params(func, variant)
    names = [addin_arg_name(p.name) for p in params]
    signature = inspect.Signature(_parameters(names, params))
    spills = func.shape == "series" and variant == "column"

    def udf(*args: Any, **kwargs: Any) -> Any:
        try:
            try:
                bound = signature.bind(*args, **kwargs)
            except TypeError as exc:  # only Python callers can get the count wrong
                return _message(f"{name}: takes at most {len(names)} arguments ({exc})")
            bound.apply_defaults()
            with _bulk_allocation():
                return _to_excel(call_worksheet(name, list(bound.arguments.values())))
        except ArgumentError as exc:
            return _message(str(exc))
        except Exception as exc:  # never a traceback in a cell
            return _message(f"{name}: {exc or type(exc).__name__}")

    udf.__name__ = udf.__qualname__ = name
    udf.__module__ = __name__
    udf.__doc__ = function_help(func, variant)
    udf.__signature__ = signature  # type: ignore[attr-defined]

    arg_opts: dict[str, dict[str, Any]] = {}
    for n, p in zip(names, params, strict=True):
        opts: dict[str, Any] = {"doc": argument_help(p)}
        if p.is_column:
            opts["ndim"] = 2  # keep a one-column range a column (xlwings flattens 1-D ranges)
        arg_opts[n] = opts
    ret_opts: dict[str, Any] = {"expand": "table"} if spills and LEGACY_ARRAYS else {}
    func_opts = {"category": CATEGORY, "call_in_wizard": False, "volatile": False}
    udf.__sheetvol__ = {  # type: ignore[attr-defined]
        "function": func.name, "variant": variant, "func": func_opts, "args": arg_opts,
        "ret": ret_opts, "spills": spills,
    }
    for n in reversed(names):
        udf = deco_arg(n, **arg_opts[n])(udf)
    if ret_opts:
        udf = deco_ret(**ret_opts)(udf)
    return deco_func(**func_opts)(udf)


def make_udfs(
    decorators: tuple[Callable[..., Any], Callable[..., Any], Callable[..., Any]] | None = None,
) -> dict[str, Callable[..., Any]]:
    """Build every worksheet function of the registry, keyed by worksheet name."""
    return {
        name: make_udf(name, func, variant, decorators=decorators)
        for name, func, variant in worksheet_names()
    }


UDFS = make_udfs()
# xlwings' Import Functions looks for decorated functions among the module's globals.
globals().update(UDFS)
__all__ = ["UDFS", "XLWINGS", "addin_arg_name", "make_udf", "make_udfs", *UDFS]
