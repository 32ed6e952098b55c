"""sheetvol: volatility, bands, stops and sizes for people who work in spreadsheets.

The Python API is the kernels (numpy arrays in, numpy arrays out, oldest bar
first, NaN for warm-up rows and gaps), a pandas helper that adds registry
columns to a DataFrame of OHLC bars, and the trade-log review. The same
kernels back the worksheet functions (``sheetvol.functions.registry``), the add-in and
``sheetvol fill``.

Examples
--------
>>> import numpy as np, sheetvol
>>> close = np.array([10.0, 11.0, 12.0, 11.0, 10.0])
>>> sheetvol.dispersion(close, period=3).round(4).tolist()
[nan, nan, 0.8165, 0.4714, 0.8165]
"""

from sheetvol._version import __version__
from sheetvol.core.averages import moving_average
from sheetvol.core.bands import atr_bands, bandwidth, deviation_bands, envelope, percent_b
from sheetvol.core.dispersion import dispersion
from sheetvol.core.estimators import (
    close_to_close,
    garman_klass,
    parkinson,
    rogers_satchell,
    yang_zhang,
)
from sheetvol.core.levels import stop_price, target_price, trailing_stop
from sheetvol.core.prices import price_basis
from sheetvol.core.ranges import atr_percent, average_true_range, true_range
from sheetvol.core.regime import deviation_to_atr, percentile_rank
from sheetvol.core.review import review_trade
from sheetvol.core.sizing import position_size, size_with_reason


def __getattr__(name: str) -> object:
    # The pandas helper loads pandas; import it only when asked for, so that
    # ``import sheetvol`` stays numpy-only.
    if name == "add_columns":
        from sheetvol.frame import add_columns

        return add_columns
    raise AttributeError(f"module 'sheetvol' has no attribute {name!r}")


__all__ = [
    "__version__",
    "add_columns",
    "atr_bands",
    "atr_percent",
    "average_true_range",
    "bandwidth",
    "close_to_close",
    "deviation_bands",
    "deviation_to_atr",
    "dispersion",
    "envelope",
    "garman_klass",
    "moving_average",
    "parkinson",
    "percent_b",
    "percentile_rank",
    "position_size",
    "price_basis",
    "review_trade",
    "rogers_satchell",
    "size_with_reason",
    "stop_price",
    "target_price",
    "trailing_stop",
    "true_range",
    "yang_zhang",
]
