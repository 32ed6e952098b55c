"""The one description of every sheetvol worksheet function.

Each :class:`Function` entry says what a worksheet function is called, what it
takes (with types, defaults, valid ranges and help), what it returns and which
pure kernel computes it. The add-in wrappers (``sheetvol.addin``), the headless
formula evaluator (``sheetvol.functions.evaluator``), the command line, argument
validation and ``docs/functions.md`` are all generated from this table, so
adding a function means: one entry here, its kernel, its tests.

Series functions (``shape="series"``) take price columns and return a column
of the same height. Each one also exists in two derived forms, generated here
and not written by hand:

* ``<NAME>_LAST`` returns only the value on the last row of the given ranges,
  for filling a formula down a column like any built-in function;
* ``<NAME>_ON`` takes a date and a dates column first and returns the value on
  the last bar on or before that date (never a later bar), for trade logs.
"""

from __future__ import annotations

import importlib
import sys
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from sheetvol.core import bounds
from sheetvol.core.averages import KINDS, SEEDS
from sheetvol.core.bounds import Bound
from sheetvol.core.dispersion import DIVISORS
from sheetvol.core.estimators import PER_YEAR
from sheetvol.core.levels import SIDES, STOP_MULTIPLE, TARGET_MULTIPLE, TRAIL_MULTIPLE
from sheetvol.core.prices import BASES, DERIVED_FORMULAS
from sheetvol.core.ranges import FIRST_BAR, SMOOTHING
from sheetvol.core.review import MEASURE, MEASURES, OUTCOME_FIELDS, PERIOD
from sheetvol.functions import cells

ParamKind = Literal["series", "dates", "date", "whole", "number", "choice", "text"]
Shape = Literal["series", "scalar"]
Unit = Literal["price", "percent", "ratio", "quantity", "date", "text", "number"]
Variant = Literal["column", "last", "on"]


class ArgumentError(ValueError):
    """A worksheet argument that cannot be used; the message is cell-ready."""


class _Required:
    def __repr__(self) -> str:
        return "REQUIRED"


REQUIRED: Any = _Required()


@dataclass(frozen=True)
class Param:
    """One argument of a worksheet function.

    ``kind`` is one of: ``series`` (a price or value column), ``dates`` (a
    column of dates), ``date`` (one date), ``whole`` (a whole number),
    ``number``, ``choice`` (one of ``choices``) or ``text``.
    """

    name: str
    kind: ParamKind
    help: str
    default: Any = REQUIRED
    low: float | None = None
    high: float | None = None
    choices: tuple[str, ...] = ()
    # Accept the upper/lower bound itself (True) or only values strictly inside.
    low_inclusive: bool = True

    @property
    def required(self) -> bool:
        return self.default is REQUIRED

    @property
    def is_column(self) -> bool:
        return self.kind in ("series", "dates")

    @property
    def bound(self) -> Bound:
        """The range of a number argument, in the core's terms (words and checks are there)."""
        return Bound(self.low, self.high, low_open=not self.low_inclusive,
                     whole=self.kind == "whole")

    def describe_range(self) -> str:
        """Plain-words description of the valid values, used in messages and docs."""
        if self.kind == "choice":
            return "one of " + ", ".join(f'"{c}"' for c in self.choices)
        if self.kind in ("whole", "number"):
            return self.bound.words()
        return {
            "series": "a column of numbers",
            "dates": "a column of dates",
            "date": "a date",
            "text": "text",
        }[self.kind]


def bounded(name: str, help: str, default: Any, bound: Bound) -> Param:
    """A number argument whose range is stated in the core (:mod:`sheetvol.core.bounds`)."""
    return Param(name, "number", help, default, bound.low, bound.high,
                 low_inclusive=not bound.low_open)


@dataclass(frozen=True)
class Function:
    """One worksheet function: its name, arguments, result and kernel.

    ``kernel`` is ``"module:callable"``, imported on first use so that reading
    the registry stays cheap. Registry parameter names are the kernel's
    keyword names; a test checks this against the kernel signatures. When the
    kernel returns a tuple of arrays, ``outputs`` names them and the
    ``select`` parameter says which one the worksheet function returns.
    """

    name: str
    group: str
    summary: str
    params: tuple[Param, ...]
    kernel: str
    returns: str
    shape: Shape = "series"
    unit: Unit = "price"
    outputs: tuple[str, ...] = ()
    select: str | None = None
    example: str = ""
    notes: str = ""

    # -- introspection -----------------------------------------------------
    @property
    def columns(self) -> tuple[Param, ...]:
        return tuple(p for p in self.params if p.is_column)

    @property
    def options(self) -> tuple[Param, ...]:
        return tuple(p for p in self.params if not p.is_column)

    def param(self, name: str) -> Param:
        for p in self.params:
            if p.name == name:
                return p
        raise KeyError(f"{self.name} has no argument {name!r}")

    def resolve_kernel(self) -> Callable[..., Any]:
        module, _, attr = self.kernel.partition(":")
        # A module already imported is taken as it is (per-cell calls ask on every cell);
        # the attribute is looked up each time, so a replaced kernel is seen.
        loaded = sys.modules.get(module)
        return getattr(loaded if loaded is not None else importlib.import_module(module), attr)

    # -- validation ----------------------------------------------------------
    def bind(self, args: tuple[Any, ...] = (), kwargs: Mapping[str, Any] | None = None) -> dict:
        """Match positional and keyword arguments to parameters, fill defaults.

        Column arguments are passed through untouched (the caller converts
        spreadsheet values at its edge); options are validated and coerced.
        Raises :class:`ArgumentError` with a message naming this function.
        """
        kwargs = dict(kwargs or {})
        if len(args) > len(self.params):
            raise ArgumentError(
                f"{self.name}: takes at most {len(self.params)} arguments, got {len(args)}"
            )
        bound: dict[str, Any] = {}
        for p, a in zip(self.params, args, strict=False):
            bound[p.name] = a
        for k, v in kwargs.items():
            if k in bound:
                raise ArgumentError(f"{self.name}: {k} given twice")
            self.param(k)  # raises KeyError for unknown names
            bound[k] = v
        out: dict[str, Any] = {}
        for p in self.params:
            value = bound.get(p.name)
            if _is_blank(value):
                if p.required:
                    raise ArgumentError(f"{self.name}: {p.name} is required ({p.help})")
                value = p.default
                if p.is_column:
                    out[p.name] = value
                    continue
            out[p.name] = value if p.is_column else self.check(p, value)
        return out

    def check(self, p: Param, value: Any) -> Any:
        """Validate and coerce one option value; raise a cell-ready message."""
        if p.kind == "choice":
            text = str(value).strip().lower()
            if text not in p.choices:
                # A number where a word belongs is usually an argument in the wrong slot.
                order = (
                    f" (argument order: {self.name}({', '.join(q.name for q in self.params)}))"
                    if _as_number(value) is not None
                    else ""
                )
                raise ArgumentError(
                    f"{self.name}: {p.name} must be {p.describe_range()}, got {_show(value)}"
                    + order
                )
            return text
        if p.kind in ("whole", "number"):
            number = _as_number(value)
            if number is None or not p.bound.holds(number):
                raise ArgumentError(
                    f"{self.name}: {p.name} must be {p.describe_range()}, got {_show(value)}"
                )
            return int(number) if p.kind == "whole" else float(number)
        if p.kind == "text":
            return str(value)
        return value  # "date": converted at the edge

    def __call__(self, *args: Any, **kwargs: Any) -> Any:
        """Validate the arguments and call the kernel (Python-level use)."""
        bound = self.bind(args, kwargs)
        return self.compute(bound)

    def compute(self, bound: Mapping[str, Any]) -> Any:
        """Call the kernel with already-bound arguments and pick the output."""
        kernel = self.resolve_kernel()
        call_args = {k: v for k, v in bound.items() if k != self.select}
        result = kernel(**call_args)
        if self.select is not None:
            return result[self.outputs.index(bound[self.select])]
        return result


def _is_blank(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, str) and value.strip() == "":
        return True
    return False


def _as_number(value: Any) -> float | None:
    """An option as a number (text numbers read as in cells), or None."""
    if isinstance(value, bool) or not isinstance(value, (int, float, np.number, str)):
        return None
    try:
        return cells.to_number(value)
    except cells.CellValueError:
        return None


def _show(value: Any) -> str:
    # Spreadsheets pass whole numbers as floats: show 1.0 as the user typed it, 1.
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return repr(value) if isinstance(value, str) else str(value)


# -- shared parameter definitions ---------------------------------------------
AVERAGES = KINDS
LINES = ("upper", "middle", "lower")


def _prices(name: str = "prices", help: str = "price column, oldest bar first") -> Param:
    return Param(name, "series", help)


def whole(name: str, help: str, default: Any, bound: Bound) -> Param:
    """A whole-number argument (a window in bars) whose range is stated in the core."""
    return Param(name, "whole", help, default, bound.low, bound.high)


def _period(default: int, help: str = "bars in the window",
            bound: Bound = bounds.PERIOD) -> Param:
    """The window of a function: :data:`~sheetvol.core.bounds.PERIOD`, or
    :data:`~sheetvol.core.bounds.SPREAD_PERIOD` for a spread (the kernel checks the same)."""
    return whole("period", help, default, bound)


def _average(default: str = "simple", name: str = "average") -> Param:
    return Param(name, "choice", "moving average to measure from", default, choices=AVERAGES)


_DIVISOR = Param(
    "divisor",
    "choice",
    "population divides by N (the trade's usual choice); sample divides by N-1",
    "population",
    choices=DIVISORS,
)
_PER_YEAR = bounded(
    "per_year",
    f"bars per year for annualising ({PER_YEAR} trading days; 365 for 24/7 markets)",
    PER_YEAR,
    bounds.BARS_PER_YEAR,
)
_OPEN = Param("open", "series", "opening prices, oldest bar first")
_HIGH = Param("high", "series", "high prices, oldest bar first")
_LOW = Param("low", "series", "low prices, oldest bar first")
_CLOSE = Param("close", "series", "closing prices, oldest bar first")
_SEED = Param(
    "seed",
    "choice",
    "start of exponential/Wilder averages: simple average of the first N bars, or the first bar",
    "average",
    choices=SEEDS,
)
_FIRST_BAR = Param(
    "first_bar",
    "choice",
    "the first bar has no previous close: use its high-low, or leave it blank",
    "high-low",
    choices=FIRST_BAR,
)
_SMOOTHING = Param(
    "smoothing",
    "choice",
    "how true ranges are averaged",
    "wilder",
    choices=SMOOTHING,
)
_WIDTH = bounded("width", "band half-width in deviations", 2.0, bounds.WIDTH)
_SIDE = Param("side", "choice", "trade direction", "long", choices=tuple(SIDES))
_TICK = "price increment; the {} is rounded {} to it (0 = no rounding)"
_VOL = bounded("volatility", "volatility in price units (ATR or deviation)", REQUIRED,
               bounds.VOLATILITY)
_MEASURE = Param("measure", "choice",
                 "volatility measure: ATR (Wilder) or standard deviation of the close",
                 MEASURE, choices=MEASURES)

_DATES = Param("dates", "dates", "dates of the bars, oldest first")
_ENTRY_DATE = Param(
    "entry_date",
    "date",
    "entry date (the trade is entered at the close of the last bar on or before it)",
)
_ENTRY_PRICE = Param("entry_price", "number", "entry price")

_K = "sheetvol.core"

FUNCTIONS: tuple[Function, ...] = (
    # ---- averages and price basis ------------------------------------------
    Function(
        "SV_AVERAGE",
        "averages",
        "Moving average of a price column: simple, linearly weighted, exponential or Wilder.",
        (
            _prices(),
            _period(14),
            Param("kind", "choice", "which moving average", "simple", choices=AVERAGES),
            _SEED,
        ),
        f"{_K}.averages:moving_average",
        "the average on each bar; blank until a full window",
        example='=SV_AVERAGE(E2:E400, 20, "exponential")',
    ),
    Function(
        "SV_PRICE",
        "averages",
        "Price basis of each bar: open, high, low, close, median, typical, weighted close or bar average.",
        (
            _OPEN,
            _HIGH,
            _LOW,
            _CLOSE,
            Param("basis", "choice", "which price of the bar; " + ", ".join(
                f"{k} {v}" for k, v in DERIVED_FORMULAS.items()), "typical", choices=BASES),
        ),
        f"{_K}.prices:price_basis",
        "one price per bar",
        example='=SV_PRICE(B2:B400, C2:C400, D2:D400, E2:E400, "typical")',
    ),
    # ---- dispersion -----------------------------------------------------------
    Function(
        "SV_DEVIATION",
        "dispersion",
        "Rolling standard deviation of the last N prices about the current value of a moving average.",
        (_prices(), _period(14, bound=bounds.SPREAD_PERIOD), _average(), _DIVISOR, _SEED),
        f"{_K}.dispersion:dispersion",
        "deviation in price units; blank until a full window",
        example='=SV_DEVIATION(E2:E400, 14, "simple")',
        notes="With the simple average this is the ordinary rolling standard deviation.",
    ),
    # ---- ranges ---------------------------------------------------------------
    Function(
        "SV_TRUERANGE",
        "ranges",
        "True range of each bar: the largest of high-low, |high-previous close|, |low-previous close|.",
        (
            _HIGH,
            _LOW,
            _CLOSE,
            _FIRST_BAR,
        ),
        f"{_K}.ranges:true_range",
        "true range in price units",
    ),
    Function(
        "SV_ATR",
        "ranges",
        "Average true range: true ranges averaged over N bars (Wilder smoothing by default).",
        (_HIGH, _LOW, _CLOSE, _period(14), _SMOOTHING, _SEED, _FIRST_BAR),
        f"{_K}.ranges:average_true_range",
        "ATR in price units; blank until a full window",
        example="=SV_ATR(C2:C400, D2:D400, E2:E400, 14)",
    ),
    Function(
        "SV_ATRPCT",
        "ranges",
        "Average true range as a percentage of the close.",
        (_HIGH, _LOW, _CLOSE, _period(14), _SMOOTHING, _SEED, _FIRST_BAR),
        f"{_K}.ranges:atr_percent",
        "ATR divided by close (format as %)",
        unit="percent",
    ),
    # ---- bands ----------------------------------------------------------------
    Function(
        "SV_BAND",
        "bands",
        "Bollinger Bands: a moving average plus or minus a number of standard deviations.",
        (
            _prices(),
            Param("line", "choice", "which line of the bands", "upper", choices=LINES),
            _period(20, bound=bounds.SPREAD_PERIOD),
            _WIDTH,
            _average(),
            _DIVISOR,
        ),
        f"{_K}.bands:deviation_bands",
        "the chosen band line in price units",
        outputs=("middle", "upper", "lower"),
        select="line",
        example='=SV_BAND(E2:E400, "lower", 20, 2)',
    ),
    Function(
        "SV_PCTB",
        "bands",
        "%b: where the price sits within its bands (0 at the lower band, 1 at the upper).",
        (_prices(), _period(20, bound=bounds.SPREAD_PERIOD), _WIDTH, _average(), _DIVISOR),
        f"{_K}.bands:percent_b",
        "%b as a fraction",
        unit="ratio",
    ),
    Function(
        "SV_BANDWIDTH",
        "bands",
        "Bandwidth: distance between the upper and lower band divided by the middle line.",
        (_prices(), _period(20, bound=bounds.SPREAD_PERIOD), _WIDTH, _average(), _DIVISOR),
        f"{_K}.bands:bandwidth",
        "bandwidth as a fraction of the middle line",
        unit="percent",
    ),
    Function(
        "SV_ATRBAND",
        "bands",
        "Bands at an exponential average of the close plus or minus a multiple of ATR (Keltner-type).",
        (
            _HIGH,
            _LOW,
            _CLOSE,
            Param("line", "choice", "which line of the bands", "upper", choices=LINES),
            _period(20, "bars in the middle average"),
            _WIDTH,
            whole("atr_period", "bars in the ATR", 10, bounds.PERIOD),
        ),
        f"{_K}.bands:atr_bands",
        "the chosen band line in price units",
        outputs=("middle", "upper", "lower"),
        select="line",
    ),
    Function(
        "SV_ENVELOPE",
        "bands",
        "Percentage envelope: a moving average plus or minus a fixed percentage.",
        (
            _prices(),
            Param("line", "choice", "which line of the envelope", "upper", choices=LINES),
            _period(20),
            bounded("percent", "envelope half-width in percent of the average", 2.5,
                    bounds.PERCENT),
            _average(),
        ),
        f"{_K}.bands:envelope",
        "the chosen envelope line in price units",
        outputs=("middle", "upper", "lower"),
        select="line",
    ),
    # ---- returns-based volatility ------------------------------------------------
    Function(
        "SV_CLOSEVOL",
        "returns",
        "Close-to-close volatility: sample standard deviation of log returns, annualised.",
        (_CLOSE, _period(20, "returns in the window", bounds.SPREAD_PERIOD), _PER_YEAR),
        f"{_K}.estimators:close_to_close",
        "annualised volatility (format as %)",
        unit="percent",
        example="=SV_CLOSEVOL(E2:E400, 20, 252)",
    ),
    Function(
        "SV_PARKINSON",
        "returns",
        "Parkinson volatility from the high-low range, annualised.",
        (_HIGH, _LOW, _period(20), _PER_YEAR),
        f"{_K}.estimators:parkinson",
        "annualised volatility (format as %)",
        unit="percent",
    ),
    Function(
        "SV_GARMANKLASS",
        "returns",
        "Garman-Klass volatility from open, high, low and close, annualised.",
        (_OPEN, _HIGH, _LOW, _CLOSE, _period(20), _PER_YEAR),
        f"{_K}.estimators:garman_klass",
        "annualised volatility (format as %)",
        unit="percent",
    ),
    Function(
        "SV_ROGERSSATCHELL",
        "returns",
        "Rogers-Satchell volatility (allows for drift), annualised.",
        (_OPEN, _HIGH, _LOW, _CLOSE, _period(20), _PER_YEAR),
        f"{_K}.estimators:rogers_satchell",
        "annualised volatility (format as %)",
        unit="percent",
    ),
    Function(
        "SV_YANGZHANG",
        "returns",
        "Yang-Zhang volatility (overnight, open-to-close and Rogers-Satchell parts), annualised.",
        (_OPEN, _HIGH, _LOW, _CLOSE, _period(20, bound=bounds.SPREAD_PERIOD), _PER_YEAR),
        f"{_K}.estimators:yang_zhang",
        "annualised volatility (format as %)",
        unit="percent",
    ),
    # ---- regime ---------------------------------------------------------------
    Function(
        "SV_VOLRANK",
        "regime",
        "Where today's reading stands among its own last N readings: the share at or below it (1 = highest).",
        (
            Param("values", "series", "a volatility column, oldest first"),
            whole("lookback", "readings to compare against", 252, bounds.LOOKBACK),
        ),
        f"{_K}.regime:percentile_rank",
        "percentile rank as a fraction (format as %)",
        unit="percent",
        example="=SV_VOLRANK(SV_DEVIATION(E2:E900, 20), 252)",
    ),
    Function(
        "SV_DEVATR",
        "regime",
        "Ratio of the close's standard deviation to ATR over the same period.",
        (_HIGH, _LOW, _CLOSE, _period(14, bound=bounds.SPREAD_PERIOD)),
        f"{_K}.regime:deviation_to_atr",
        "ratio (around 0.5 to 2 on most markets)",
        unit="ratio",
    ),
    # ---- trade levels (scalar) -------------------------------------------------------
    Function(
        "SV_STOP",
        "trade",
        "Stop level a multiple of volatility away from entry, below for long and above for short.",
        (
            Param("entry", "number", "entry price"),
            _VOL,
            bounded("multiple", "volatility units between entry and stop", STOP_MULTIPLE,
                    bounds.MULTIPLE),
            _SIDE,
            bounded("tick", _TICK.format("stop", "away from entry"), 0.0, bounds.TICK),
        ),
        f"{_K}.levels:stop_price",
        "stop price",
        shape="scalar",
        example='=SV_STOP(105.2, 1.8, 2, "long")',
    ),
    Function(
        "SV_TARGET",
        "trade",
        "Target level a multiple of volatility away from entry, above for long and below for short.",
        (
            Param("entry", "number", "entry price"),
            _VOL,
            bounded("multiple", "volatility units between entry and target", TARGET_MULTIPLE,
                    bounds.MULTIPLE),
            _SIDE,
            bounded("tick", _TICK.format("target", "toward entry"), 0.0, bounds.TICK),
        ),
        f"{_K}.levels:target_price",
        "target price",
        shape="scalar",
    ),
    Function(
        "SV_SIZE",
        "trade",
        "Position size that risks a set share of equity between entry and stop, rounded down to the lot step.",
        (
            bounded("equity", "account equity in account currency", REQUIRED, bounds.EQUITY),
            bounded("risk", "share of equity to risk per trade, e.g. 0.01 for 1% (at most 0.25)",
                    REQUIRED, bounds.RISK),
            Param("entry", "number", "entry price"),
            Param("stop", "number", "stop price"),
            bounded("point_value", "money per 1.0 price move per unit, in instrument currency",
                    1.0, bounds.POINT_VALUE),
            bounded("lot_step", "smallest tradable increment", 1.0, bounds.LOT_STEP),
            bounded("min_qty", "smallest allowed size (0 = none)", 0.0, bounds.QUANTITY),
            bounded("max_qty", "largest allowed size (0 = no limit)", 0.0, bounds.QUANTITY),
            bounded("fx_rate", "account currency per unit of instrument currency", 1.0,
                    bounds.FX_RATE),
        ),
        "sheetvol.functions.worksheet:size_or_reason",
        "quantity (units or contracts)",
        shape="scalar",
        unit="quantity",
        example="=SV_SIZE(250000, 0.01, 105.2, 101.6, 1, 1)",
    ),
    Function(
        "SV_RMULTIPLE",
        "trade",
        "A price's distance from entry in units of the initial risk (entry to stop), "
        "positive when in the trade's favour.",
        (
            Param("entry", "number", "entry price"),
            Param("stop", "number", "initial stop price"),
            Param(
                "price", "number", "the price to express in R: a target, an exit or the last close"
            ),
            _SIDE,
        ),
        f"{_K}.levels:r_multiple",
        "R multiple (blank when the stop equals the entry)",
        shape="scalar",
        unit="ratio",
        example='=SV_RMULTIPLE(100, 98, 106, "long")',
    ),
    Function(
        "SV_TRAIL",
        "trade",
        "Trailing stop after the last bar: best price since entry less a multiple of current "
        "volatility; never loosens.",
        (
            _DATES,
            _HIGH,
            _LOW,
            _CLOSE,
            _ENTRY_DATE,
            _ENTRY_PRICE,
            _SIDE,
            bounded("multiple", "volatility units between the best price since entry and the stop",
                    TRAIL_MULTIPLE, bounds.MULTIPLE),
            _period(PERIOD, "bars in the volatility window", bounds.SPREAD_PERIOD),
            _MEASURE,
            bounded("tick", _TICK.format("stop", "away from the price"), 0.0, bounds.TICK),
        ),
        "sheetvol.functions.worksheet:current_trail",
        "trailing stop price in force for the next bar",
        shape="scalar",
        example='=SV_TRAIL(A2:A400, C2:C400, D2:D400, E2:E400, DATE(2025,3,14), 105.2, "long")',
        notes="The entry bar's own high and low came before the entry and do not move the stop.",
    ),
    Function(
        "SV_OUTCOME",
        "trade",
        "Outcome of a trade from the bars after entry: which level was hit first, exit price "
        "and date, R, bars held, excursions.",
        (
            _DATES,
            _OPEN,
            _HIGH,
            _LOW,
            _CLOSE,
            _ENTRY_DATE,
            _ENTRY_PRICE,
            _SIDE,
            Param("stop", "number", "initial stop price"),
            Param("target", "number", "target price"),
            Param("field", "choice", "which figure to return", OUTCOME_FIELDS[0],
                  choices=OUTCOME_FIELDS),
            bounded("trail_multiple", "trailing stop in volatility units (0 = no trailing stop)",
                    TRAIL_MULTIPLE, bounds.TRAIL),
            _period(PERIOD, "bars in the volatility window of the trailing stop",
                    bounds.SPREAD_PERIOD),
            _MEASURE,
            Param(
                "exit_date", "date", "exit date from the trade log (blank = no recorded exit)", ""
            ),
            Param(
                "exit_price",
                "number",
                "exit price from the trade log (0 = no recorded exit)",
                0.0,
                0,
            ),
            bounded("tick", _TICK.format("trailing stop", "away from entry"), 0.0, bounds.TICK),
        ),
        "sheetvol.functions.worksheet:trade_outcome",
        'result: "stop", "target", "trail", "closed", "open" or "ambiguous"; exit_date: a date; '
        "r, bars, adverse, favourable: numbers; trail: the trailing stop in force at the end "
        "of the review (at the exit)",
        shape="scalar",
        unit="number",
        select="field",
        outputs=OUTCOME_FIELDS,
        example="=SV_OUTCOME(A2:A400, B2:B400, C2:C400, D2:D400, E2:E400, DATE(2025,3,14), "
        '105.2, "long", 101.6, 110.6, "r")',
        notes='A bar that reaches both stop and target is "ambiguous" unless it opens beyond '
        "one of them; a gap through the stop fills at the open.",
    ),
)

_BY_NAME: dict[str, Function] = {f.name: f for f in FUNCTIONS}


def get(name: str) -> Function:
    """Look a worksheet function up by name (case-insensitive, variants included)."""
    key = name.strip().upper()
    if key in _BY_NAME:
        return _BY_NAME[key]
    raise KeyError(f"no sheetvol function named {name!r}")


def variant_of(name: str) -> tuple[Function, Variant]:
    """Split a worksheet name into its base function and variant.

    >>> variant_of("SV_ATR_ON")[1]
    'on'
    """
    key = name.strip().upper()
    if key in _BY_NAME:
        return _BY_NAME[key], "column"
    suffixes: tuple[tuple[str, Variant], ...] = (("_LAST", "last"), ("_ON", "on"))
    for suffix, variant in suffixes:
        base = key.removesuffix(suffix)
        if base != key and base in _BY_NAME and _BY_NAME[base].shape == "series":
            return _BY_NAME[base], variant
    raise KeyError(f"no sheetvol function named {name!r}")


def worksheet_names() -> Iterator[tuple[str, Function, Variant]]:
    """Every name a user can type, with its base function and variant."""
    for f in FUNCTIONS:
        yield f.name, f, "column"
        if f.shape == "series":
            yield f"{f.name}_LAST", f, "last"
            yield f"{f.name}_ON", f, "on"


ON_PARAMS = (
    Param("date", "date", "the date to read the value on (the last bar on or before it is used)"),
    Param("dates", "dates", "the dates of the bars, one per row of the price columns"),
)


def variant_params(func: Function, variant: Variant) -> tuple[Param, ...]:
    """The argument list of a derived form: ``_ON`` takes date and dates first."""
    return (ON_PARAMS + func.params) if variant == "on" else func.params
