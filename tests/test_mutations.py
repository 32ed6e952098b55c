"""Damaged copies of the demo workbook: the fill refuses in words or loses nothing.

Each case changes one part of the demo desk the way damaged or hand-edited files
differ from what spreadsheet programs write (a cell's type, reference or value, a
row number, a cut-off part, a removed part, merged blocks, a formula), fills it,
and checks the contract: either a refusal the command line shows as one line
(one of the fill's own errors), or an output in which every cell of the input
still holds its value (read back with openpyxl's read-only reader). The draws are
seeded, so a failure reproduces; the cases first found this way have their own
tests in ``test_hostile.py`` and ``test_trade_inputs.py``.
"""

from __future__ import annotations

import random
import re
import warnings
import zipfile
from pathlib import Path

import openpyxl
import pytest

from sheetvol.fill.job import USER_ERRORS, FillOptions, fill_file

DEMO = Path(__file__).resolve().parents[1] / "workbooks" / "demo-desk.xlsx"
TYPES = ["s", "b", "e", "str", "inlineStr", "n", "d", "zz"]
VALUES = ["", "nan", "inf", "1e400", "abc", "99999999999", "-1", "0", "1,5", " 3 ", "TRUE"]
REFS = ["A1", "XFD1048576", "XFE1", "A0", "a5", "", "A1048577", "ZZ9", "B2B"]
EXTRAS = ['<mergeCells count="1"><mergeCell ref="F1:Z40"/></mergeCells>',
          '<mergeCells count="1"><mergeCell ref="ZZZ9:A1"/></mergeCells>',
          '<autoFilter ref="bogus"/>']


def _mutate(rng: random.Random, parts: dict[str, bytes]) -> tuple[dict[str, bytes], str]:
    parts = dict(parts)
    name = rng.choice(sorted(n for n in parts if "worksheets/sheet" in n))
    data = parts[name].decode()
    cells = list(re.finditer(r"<c [^>]*?(/>|>.*?</c>)", data))
    kind = rng.randrange(8)
    if kind == 0:
        data = data[: rng.randrange(len(data))]
    elif kind == 1 and cells:
        m = rng.choice(cells)
        new = re.sub(r' t="[^"]*"', "", m[0]).replace("<c ", f'<c t="{rng.choice(TYPES)}" ', 1)
        data = data[: m.start()] + new + data[m.end():]
    elif kind == 2 and cells:
        m = rng.choice(cells)
        new = re.sub(r"<v>[^<]*</v>", f"<v>{rng.choice(VALUES)}</v>", m[0])
        data = data[: m.start()] + new + data[m.end():]
    elif kind == 3 and cells:
        m = rng.choice(cells)
        new = re.sub(r' r="[^"]*"', f' r="{rng.choice(REFS)}"', m[0])
        data = data[: m.start()] + new + data[m.end():]
    elif kind == 4:
        del parts[rng.choice(sorted(parts))]
        return parts, "a part removed"
    elif kind == 5:
        data = data.replace("</sheetData>", "</sheetData>" + rng.choice(EXTRAS), 1)
    elif kind == 6 and cells:
        m = rng.choice(cells)
        new = m[0].replace("<v>", "<f>SV_ATR(C:C,D:D,E:E)</f><v>", 1)
        data = data[: m.start()] + new + data[m.end():]
    else:
        rows = list(re.finditer(r"<row [^>]*>", data))
        if rows:
            m = rng.choice(rows)
            new = re.sub(r' r="[^"]*"', f' r="{rng.choice(["0", "-3", "1048577", "x", "2"])}"',
                         m[0])
            data = data[: m.start()] + new + data[m.end():]
    parts[name] = data.encode()
    return parts, f"kind {kind} on {name}"


def _cells(book: Path) -> dict[tuple[str, str], object] | None:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wb = openpyxl.load_workbook(book, read_only=True)
            out = {(ws.title, c.coordinate): c.value for ws in wb.worksheets
                   for row in ws.iter_rows() for c in row
                   if getattr(c, "value", None) is not None}
            wb.close()
    except Exception:  # the damaged input itself may be unreadable to openpyxl
        return None
    return out


@pytest.mark.parametrize("seed", range(16))
def test_a_damaged_demo_is_refused_in_words_or_filled_without_loss(tmp_path, seed):
    with zipfile.ZipFile(DEMO) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    damaged, what = _mutate(random.Random(seed), parts)
    src = tmp_path / "damaged.xlsx"
    with zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, data in damaged.items():
            zf.writestr(name, data)
    try:
        report = fill_file(src, FillOptions(output=tmp_path / "out.xlsx"))
    except USER_ERRORS as exc:  # anything else fails the test
        assert str(exc).strip() and "Traceback" not in str(exc), what
        assert not (tmp_path / "out.xlsx").exists()
        return
    before, after = _cells(src), _cells(report.output)
    assert after is not None, f"{what}: the output does not open"
    if before is not None:
        lost = {k: (v, after.get(k)) for k, v in before.items()
                if after.get(k) != v and not (isinstance(v, str) and "SV_" in v.upper())}
        assert not lost, (what, list(lost.items())[:3])
