"""The fill's input and output path: what it loads, how often it inflates a sheet, and
that its speed-ups leave what it writes unchanged."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

xlsxwriter = pytest.importorskip("xlsxwriter")

ROOT = Path(__file__).resolve().parent.parent


def price_book(path: Path, rows: int = 60, text_dates: bool = False) -> Path:
    """A small export: Date, High, Low, Close; dates as date cells or as text."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Prices")
    date_fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
    ws.write_row(0, 0, ["Date", "High", "Low", "Close"])
    close = 100 + np.cumsum(np.random.default_rng(5).normal(0, 1, rows))
    for i in range(rows):
        if text_dates:
            ws.write_string(i + 1, 0, f"2025-{1 + i // 28:02d}-{1 + i % 28:02d}")
        else:
            ws.write_number(i + 1, 0, 45658 + i, date_fmt)
        ws.write_row(i + 1, 1, [close[i] + 1, close[i] - 1, close[i]])
    wb.close()
    return path


def loaded_after_fill(src: Path, out: Path) -> list[str]:
    """Heavy libraries in ``sys.modules`` after a fill run in a fresh interpreter."""
    code = ("import sys\n"
            "from pathlib import Path\n"
            "from sheetvol.fill.job import FillOptions, fill_file\n"
            f"fill_file({str(src)!r}, FillOptions(output=Path({str(out)!r})))\n"
            "print(' '.join(m for m in ('pandas', 'openpyxl', 'xlsxwriter') "
            "if m in sys.modules))\n")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT, check=True)
    return proc.stdout.split()


def test_a_fill_of_dated_prices_does_not_load_pandas(tmp_path):
    # pandas costs about 0.3 s to import; prices with date cells never need it
    src = price_book(tmp_path / "prices.xlsx")
    assert loaded_after_fill(src, tmp_path / "out.xlsx") == []
    assert (tmp_path / "out.xlsx").is_file()


def test_text_dates_still_load_pandas_when_they_need_it(tmp_path):
    # the stand-in imports pandas on first use, and text dates parse as before
    import datetime as dt

    from sheetvol.fill.job import FillOptions, fill_file

    src = price_book(tmp_path / "prices.xlsx", text_dates=True)
    assert loaded_after_fill(src, tmp_path / "out.xlsx") == ["pandas"]
    report = fill_file(src, FillOptions(output=tmp_path / "again.xlsx"))
    # day numbers of the 1900 date system count from 1899-12-30 (Python's datetime)
    first = (dt.date(2025, 1, 1) - dt.date(1899, 12, 30)).days
    assert report.sheets[0].table.dates[:2].tolist() == [first, first + 1]
