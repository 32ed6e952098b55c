"""pandas loaded on first use, so that paths which never touch it do not pay for it.

Importing pandas takes about 0.3 s, most of a small fill's whole run. The fill and the
cell conversions need it only for some inputs (dates written as text, a trade log), so
their modules bind ``pd`` to :data:`pandas`, a stand-in that imports pandas the first
time one of its attributes is asked for and forwards to the real module from then on.
"""

from __future__ import annotations

from types import ModuleType
from typing import TYPE_CHECKING, Any


class LazyPandas:
    """Stands in for the ``pandas`` module until an attribute is first used.

    Examples
    --------
    >>> pd = LazyPandas()
    >>> pd.Timestamp("2025-03-14").day
    14
    """

    def __getattr__(self, name: str) -> Any:
        # only called for names not yet copied onto this object: the first use of each
        value = getattr(self.module(), name)
        setattr(self, name, value)
        return value

    @staticmethod
    def module() -> ModuleType:
        """The real pandas module (imported now if it was not yet)."""
        import pandas

        return pandas


#: Use as ``from sheetvol.functions._lazy import pandas as pd``.
if TYPE_CHECKING:
    # The type checker reads the stand-in as the real module, so ``pd.DataFrame`` in an
    # annotation and every ``pd.`` call are checked against pandas' own types.
    import pandas as pandas
else:
    pandas = LazyPandas()

__all__ = ["LazyPandas", "pandas"]
