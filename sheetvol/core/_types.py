"""Array type names used in kernel signatures."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]
"""A one-dimensional float64 array aligned with the input bars; NaN marks a blank."""
