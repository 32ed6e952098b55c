"""The test configuration hides only the warnings the test run expects.

openpyxl (used by the tests to read files back) drops worksheet extensions it does not
model (sparklines, newer conditional formats) and says so on every read; those lines
are filtered in pyproject.toml so that any other warning stands out.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import pytest
from _pytest.config import parse_warning_filter

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

xlsxwriter = pytest.importorskip("xlsxwriter")
openpyxl = pytest.importorskip("openpyxl")
ROOT = Path(__file__).resolve().parent.parent


def configured_filters() -> list[str]:
    with open(ROOT / "pyproject.toml", "rb") as fh:
        return tomllib.load(fh)["tool"]["pytest"]["ini_options"].get("filterwarnings", [])


def test_openpyxl_extension_warnings_are_filtered_and_others_are_not(tmp_path):
    path = tmp_path / "spark.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet()
    ws.write_row(0, 0, [1, 3, 2, 5])
    ws.add_sparkline("E1", {"range": "Sheet1!A1:D1"})  # an extension openpyxl drops
    wb.close()
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        for text in configured_filters():  # as pytest applies the ini list (last wins)
            warnings.filterwarnings(*parse_warning_filter(text, escape=False))
        openpyxl.load_workbook(path)
        warnings.warn("a real warning", UserWarning, stacklevel=1)
    messages = [str(w.message) for w in seen]
    assert messages == ["a real warning"], messages
