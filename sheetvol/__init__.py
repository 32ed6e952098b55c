"""sheetvol: volatility, bands, stops and sizes for spreadsheet users.

The public Python API is the kernels (numpy arrays in, arrays out); see
``sheetvol.kernels`` and ``docs/functions.md``.
"""

from sheetvol._version import __version__

__all__ = ["__version__"]
