"""The sheetvol worksheet functions as xlwings user-defined functions.

Point the xlwings add-in at this module (``UDF Modules: sheetvol.addin``) and
press *Import Functions*; see ``docs/addin.md``. Every name a user can type
(``SV_ATR``, ``SV_ATR_LAST``, ``SV_ATR_ON``, ...) is generated here from
:mod:`sheetvol.functions.registry` at import time, so the registry, this module and
``docs/functions.md`` cannot drift apart (a test compares them).

What each generated function does:

* takes the arguments the way xlwings passes them: on the classic Windows
  path the COM layer's own values, untouched (``convert="raw"``: tuples of
  rows, None for blanks, error cells as ints, pywin32 datetimes), cleaned by
  sheetvol in numpy; in the in-Excel runtime (xlwings Lite) the library's
  cleaned lists of rows;
* calls :func:`sheetvol.functions.calling.call_worksheet`, the same code the headless
  evaluator uses;
* returns a column as rows, or one value. Rows without a value (warm-up,
  gaps) hold the "no value" marker of :func:`blanks_policy`: by default the #N/A
  error value, which line charts skip and ``ISNA`` tests; ``"empty"`` gives
  empty text instead. A spreadsheet function cannot return a true blank on
  either path (xlwings writes None as empty text);
* never raises: any problem comes back as a short message starting with the
  function name, which the cell shows.

On a machine without xlwings (or on Linux and macOS, where xlwings' own
decorators do nothing), the module still imports; the functions are then
plain Python functions with the same behaviour, and None marks "no value".
"""

from __future__ import annotations

import contextlib
import gc
import inspect
import os
import sys
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
# Read when this module is imported, i.e. at every start of the UDF server.
LEGACY_ARRAYS = os.environ.get("SHEETVOL_LEGACY_ARRAYS", "") == "1"

# What a cell without a value (warm-up, gap, no bar yet) shows:
#   "na"    the #N/A error value: "no value here"; line charts leave the point out,
#           ISNA() is TRUE, and formulas over it give #N/A unless wrapped in IFNA();
#   "empty" empty text: looks blank, but ISTEXT() is TRUE and a line chart plots 0.
BLANKS_CHOICES = ("na", "empty")
BLANKS_DEFAULT = "na"
BLANKS_VARIABLE = "SHEETVOL_BLANKS"

# Which xlwings path calls the functions: the classic Windows add-in (COM), the in-Excel
# runtime (xlwings Lite, Python compiled to WebAssembly), or plain Python.
RUNTIMES = ("classic", "lite", "python")


def _detect_runtime() -> str:
    if sys.platform == "emscripten":  # Pyodide: the only place xlwings Lite runs
        return "lite"
    if "xlwings.com_server" in sys.modules:
        # xlwings' UDF server (Windows) imports this module from its COM server, for
        # Import Functions and for every call; plain Python on Windows is "python".
        return "classic"
    return "python"


RUNTIME = _detect_runtime()


def blanks_policy() -> str:
    """The "no value" policy in force: ``SHEETVOL_BLANKS`` if set, else ``"na"``.

    Raises
    ------
    ValueError
        For a value of ``SHEETVOL_BLANKS`` outside :data:`BLANKS_CHOICES`.

    Examples
    --------
    >>> blanks_policy() in BLANKS_CHOICES
    True
    """
    policy = os.environ.get(BLANKS_VARIABLE, "").strip().lower() or BLANKS_DEFAULT
    if policy not in BLANKS_CHOICES:
        raise ValueError(
            f"{BLANKS_VARIABLE}={policy!r} is not one of {', '.join(BLANKS_CHOICES)}"
        )
    return policy


def no_value_marker(runtime: str, policy: str) -> Any:
    """What a result cell without a value holds when handed to xlwings on ``runtime``.

    * classic, ``"na"``: pywin32's typed variant for the #N/A error (VT_ERROR,
      0x800A07FA), which pywin32 passes to Excel as an error value; xlwings'
      ``raw`` converter leaves it untouched.
    * lite, ``"na"``: the text ``"#N/A"``, which the runtime's writer turns
      into the error value.
    * ``"empty"``: empty text (classic) or None, which xlwings writes as empty text (lite).
    * plain Python: None.

    Examples
    --------
    >>> no_value_marker("lite", "na"), no_value_marker("python", "na")
    ('#N/A', None)
    """
    if runtime == "python":
        return None
    if runtime == "lite":
        return "#N/A" if policy == "na" else None
    if policy == "empty":
        return ""
    import pythoncom  # part of pywin32, which xlwings needs on Windows
    from win32com.client import VARIANT

    return VARIANT(pythoncom.VT_ERROR, _convert.COM_NA)

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


def _to_excel(result: Any, blank: Any) -> Any:
    if isinstance(result, np.ndarray):
        horizontal = result.ndim == 2 and result.shape[0] == 1
        return _convert.to_cells(result.reshape(-1), horizontal=horizontal, blank=blank)
    cell = _convert.to_cell(result)
    return blank if cell is None else cell


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
    runtime: str | None = None,
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
    runtime : {"classic", "lite", "python"}, optional
        The xlwings path the function is built for (:data:`RUNTIME`, detected
        at import, by default): it decides how arguments are converted and
        which "no value" marker is returned.

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
    runtime = runtime or RUNTIME
    if runtime not in RUNTIMES:
        raise ValueError(f"runtime must be one of {', '.join(RUNTIMES)}, got {runtime!r}")
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
            blank = no_value_marker(runtime, blanks_policy())
            with _bulk_allocation():
                return _to_excel(call_worksheet(name, list(bound.arguments.values())), blank)
        except ArgumentError as exc:
            return _message(str(exc))
        except Exception as exc:  # never a traceback in a cell
            return _message(f"{name}: {exc or type(exc).__name__}")

    udf.__name__ = udf.__qualname__ = name
    udf.__module__ = __name__
    udf.__doc__ = function_help(func, variant)
    # attributes set on a function object (read by inspect and by the add-in's
    # registration), which the checker does not model
    udf.__signature__ = signature  # type: ignore[attr-defined]

    arg_opts: dict[str, dict[str, Any]] = {}
    for n, p in zip(names, params, strict=True):
        opts: dict[str, Any] = {"doc": argument_help(p)}
        if runtime == "classic":
            # The COM layer's values as they come (tuples of rows): xlwings' cell-by-cell
            # cleaning cost more than the whole computation; sheetvol cleans in numpy.
            opts["convert"] = "raw"
        elif p.is_column:
            opts["ndim"] = 2  # keep a one-column range a column (xlwings flattens 1-D ranges)
        arg_opts[n] = opts
    ret_opts: dict[str, Any] = {"expand": "table"} if spills and LEGACY_ARRAYS else {}
    if runtime == "classic":
        # Rows go to COM as built (floats, text, the #N/A variant): xlwings' default writer
        # would turn every value over again and None into empty text.
        ret_opts["convert"] = "raw"
    func_opts = {"category": CATEGORY, "call_in_wizard": False, "volatile": False}
    udf.__sheetvol__ = {  # type: ignore[attr-defined]  # as __signature__ above
        "function": func.name, "variant": variant, "func": func_opts, "args": arg_opts,
        "ret": ret_opts, "spills": spills, "runtime": runtime,
    }
    for n in reversed(names):
        udf = deco_arg(n, **arg_opts[n])(udf)
    if ret_opts:
        udf = deco_ret(**ret_opts)(udf)
    return deco_func(**func_opts)(udf)


def make_udfs(
    decorators: tuple[Callable[..., Any], Callable[..., Any], Callable[..., Any]] | None = None,
    runtime: str | None = None,
) -> dict[str, Callable[..., Any]]:
    """Build every worksheet function of the registry, keyed by worksheet name."""
    return {
        name: make_udf(name, func, variant, decorators=decorators, runtime=runtime)
        for name, func, variant in worksheet_names()
    }


UDFS = make_udfs()
# xlwings' Import Functions looks for decorated functions among the module's globals.
globals().update(UDFS)
__all__ = ["BLANKS_CHOICES", "RUNTIME", "UDFS", "XLWINGS", "addin_arg_name", "blanks_policy",
           "make_udf", "make_udfs", "no_value_marker", *UDFS]
