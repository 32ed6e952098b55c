"""Reading and writing .xlsx/.xlsm packages without losing anything.

``Package.open`` opens a workbook safely; ``write_package`` writes a copy with only
sheetvol's edits applied, every other part byte for byte as it was.
"""

from sheetvol.workbook.edits import (
    CellResult,
    LineChart,
    NewColumn,
    NewSheet,
    SpillResult,
    Styled,
    ValueResult,
)
from sheetvol.workbook.errors import WorkbookError
from sheetvol.workbook.package import (
    CellError,
    Column,
    FormulaCell,
    Grid,
    Package,
    SheetInfo,
    TableInfo,
)
from sheetvol.workbook.writer import write_package

__all__ = [
    "CellError",
    "CellResult",
    "Column",
    "FormulaCell",
    "Grid",
    "LineChart",
    "NewColumn",
    "NewSheet",
    "Package",
    "SheetInfo",
    "SpillResult",
    "Styled",
    "TableInfo",
    "ValueResult",
    "WorkbookError",
    "write_package",
]
