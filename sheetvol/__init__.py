"""sheetvol: volatility, bands, stops and sizes for people who work in spreadsheets.

The Python API is the kernels (numpy arrays in, numpy arrays out, oldest bar
first, NaN for warm-up rows and gaps), a pandas helper that adds registry
columns to a DataFrame of OHLC bars, and the trade-log review. The same
kernels back the worksheet functions (``sheetvol.registry``), the add-in and
``sheetvol fill``.

Examples
--------
>>> import numpy as np, sheetvol
>>> close = np.array([10.0, 11.0, 12.0, 11.0, 10.0])
>>> sheetvol.dispersion(close, period=3).round(4).tolist()
[nan, nan, 0.8165, 0.4714, 0.8165]
"""

from sheetvol._version import __version__
from sheetvol.frame import add_columns
from sheetvol.kernels.averages import moving_average
from sheetvol.kernels.bands import atr_bands, bandwidth, deviation_bands, envelope, percent_b
from sheetvol.kernels.dispersion import dispersion
from sheetvol.kernels.estimators import (
    close_to_close,
    garman_klass,
    parkinson,
    rogers_satchell,
    yang_zhang,
)
from sheetvol.kernels.prices import price_basis
from sheetvol.kernels.ranges import atr_percent, average_true_range, true_range
from sheetvol.kernels.regime import deviation_to_atr, percentile_rank
from sheetvol.kernels.risk import (
    position_size,
    review_trade,
    size_with_reason,
    stop_price,
    target_price,
    trailing_stop,
)

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
