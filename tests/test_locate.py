"""Finding the price sheet's header row and columns (sheetvol.fill.locate)."""

from __future__ import annotations

import re

import pytest
from openpyxl import Workbook
from openpyxl.utils import column_index_from_string, get_column_letter

from sheetvol.fill.locate import (
    ColumnFlagError,
    LocateError,
    col_letter,
    col_number,
    find_header,
    normalize_header,
    resolve_column,
    role_of,
)
from sheetvol.workbook import Package


def _rows(*header_rows: tuple[int, list[object]]) -> dict[int, dict[int, object]]:
    return {r: {c: v for c, v in enumerate(values, start=1) if v is not None}
            for r, values in header_rows}


@pytest.mark.parametrize("n", [1, 26, 27, 52, 702, 703, 16384])
def test_column_letters_agree_with_openpyxl(n):
    # Reference: openpyxl.utils' own conversion.
    assert col_letter(n) == get_column_letter(n)
    assert col_number(get_column_letter(n)) == column_index_from_string(get_column_letter(n))


@pytest.mark.parametrize(
    ("text", "role"),
    [
        ("Date", "date"), ("<DATE>", "date"), ("Trade Date", "date"), ("timestamp", "date"),
        ("OPEN", "open"), ("Open Price", "open"), ("High", "high"), ("hi", "high"),
        ("Low*", "low"), ("Close", "close"), ("Close*", "close"), ("Close/Last", "close"),
        ("Last Price", "close"), ("Closing price (USD)", "close"), ("<CLOSE>", "close"),
        ("Adj Close**", "close"), ("Vol.", "volume"), ("Volume", "volume"),
    ],
)
def test_usual_spellings(text, role):
    hit = role_of(text)
    assert hit is not None and hit[0] == role


@pytest.mark.parametrize(
    "text", ["Close vol 20 (ann.)", "Std dev 14 (simple, close)", "Upper band 20x2",
             "Closed", "Notes", "Change %", ""],
)
def test_our_headers_and_other_words_are_not_prices(text):
    assert role_of(text) is None


# Decorations a header may carry, each applied to plain trade words: the rule is general,
# not a list of one program's spellings (hand-made cases).
@pytest.mark.parametrize(
    ("text", "role"),
    [
        ("[Close]", "close"), ("{High}", "high"), ("**Low**", "low"), ("<<Open>>", "open"),
        ("CLOSE_PRICE", "close"), ("close-price", "close"), ("Close / Last", "close"),
        ("Last/Close", "close"), ("Px-High", "high"), ("PXLOW", "low"), ("Session High", "high"),
        ("Daily Low", "low"), ("Closing Price ($)", "close"), ("Open Price*", "open"),
        ("DATE_YYYYMMDD", "date"), ("Date (dd/mm/yyyy)", "date"), ("yyyy-mm-dd", "date"),
        ("UTC Time", "time"), ("Bar Time", "time"), ("TickVol", "volume"),
        ("Tick Volume", "volume"), ("Settlement Price", "close"), ("Adj. Close", "close"),
        ("'Volume'", "volume"), ("Hi.", "high"),
    ],
)
def test_headers_are_matched_by_a_general_normalisation(text, role):
    hit = role_of(text)
    assert hit is not None and hit[0] == role, text


@pytest.mark.parametrize("text", ["Open interest", "High-Low", "Close vs open", "Price change",
                                  "Day", "Time to close", "Last trade"])
def test_words_around_a_role_word_that_change_its_meaning(text):
    hit = role_of(text)
    # "Day" alone is a date (its own word); the others are no price column.
    assert (hit is not None and hit[0] == "date") if text == "Day" else hit is None, text


def test_the_word_lists_are_plain_trade_words():
    # Help and docs show plain words only: letters and spaces, no program's field codes.
    from sheetvol.fill.locate import SYNONYMS
    words = [w for names in SYNONYMS.values() for w in names]
    assert all(re.fullmatch(r"[a-z]+( [a-z]+)*", w) for w in words), words
    for odd in ("dtyyyymmdd", "tickvol", "px last", "px open", "close last", "gmt time"):
        assert odd not in words


def test_help_and_docs_show_plain_header_words():
    from pathlib import Path

    from sheetvol import cli
    root = Path(__file__).resolve().parents[1]
    texts = [cli.FILL_DESCRIPTION, (root / "docs" / "fill.md").read_text(encoding="utf-8"),
             (root / "README.md").read_text(encoding="utf-8")]
    for spelling in ("<CLOSE>", "Close/Last", "Close*", "PX_LAST", "DTYYYYMMDD", "TICKVOL"):
        assert not any(spelling.lower() in t.lower() for t in texts), spelling


def test_normalize_strips_units_and_decorations():
    assert normalize_header("  Close* (USD) ") == "close"
    assert normalize_header("PX_LAST") == "px last"


def test_header_below_a_title_is_found():
    rows = _rows(
        (1, ["ACME Corp daily prices"]),
        (2, ["Exported 2024-05-01"]),
        (4, ["Date", "Open", "High", "Low", "Close", "Volume"]),
        (5, [45292.0, 1.0, 2.0, 0.5, 1.5, 100.0]),
    )
    m = find_header(rows)
    assert m.row == 4
    assert m.columns == {"date": 1, "open": 2, "high": 3, "low": 4, "close": 5, "volume": 6}
    assert m.describe() == "Date = A, Open = B, High = C, Low = D, Close = E, Volume = F"


def test_plain_close_beats_adjusted_and_price():
    rows = _rows((1, ["Date", "Price", "Adj Close", "Close", "High", "Low"]))
    assert find_header(rows).columns["close"] == 4
    rows = _rows((1, ["Date", "Price", "Adj Close", "High", "Low"]))
    assert find_header(rows).columns["close"] == 3


def test_refill_output_headers_do_not_confuse_the_search():
    rows = _rows((1, ["Date", "Open", "High", "Low", "Close", "Std dev 14 (simple, close)",
                      "Close vol 20 (ann.)"]))
    assert find_header(rows).columns["close"] == 5


def test_overrides_by_letter_and_by_header_text():
    rows = _rows((3, ["When", "Settle", "Top", "Bottom", "Close"]))
    m = find_header(rows, overrides={"date": "When", "close": "b", "high": "Top",
                                     "low": "D"})
    assert m.row == 3
    assert m.columns == {"date": 1, "close": 2, "high": 3, "low": 4}


def test_override_that_matches_nothing_names_the_headers():
    rows = _rows((1, ["Date", "Close"]))
    with pytest.raises(ColumnFlagError) as err:
        find_header(rows, overrides={"high": "Maximum price"}, file="p.xlsx", sheet="Daily")
    # the flag comes first, then where it looked and what it saw
    assert str(err.value).startswith(
        'p.xlsx: --high-col "Maximum price": no column headed "Maximum price" on sheet '
        "\"Daily\" (headers found in row 1: A 'Date', B 'Close')")


def test_missing_close_lists_the_headers_found():
    rows = _rows((2, ["Date", "Open", "High", "Low", "Volume"]))
    with pytest.raises(LocateError) as err:
        find_header(rows, where='p.xlsx, sheet "Data"')
    msg = str(err.value)
    assert 'p.xlsx, sheet "Data"' in msg and "no Close column" in msg
    assert "A 'Date'" in msg and "E 'Volume'" in msg and "--close-col" in msg


def test_given_header_row_is_used():
    rows = _rows((1, ["Date", "Close"]), (6, ["Day", "Last"]))
    assert find_header(rows, header_row=6).columns == {"date": 1, "close": 2}
    with pytest.raises(LocateError, match="row 3 has no Close column"):
        find_header(rows, header_row=3)


def test_one_column_taken_twice_is_refused():
    rows = _rows((1, ["Date", "Close", "High", "Low"]))
    with pytest.raises(LocateError, match="both"):
        find_header(rows, overrides={"high": "B"})


def test_resolve_column_prefers_header_text_over_letter():
    # A header literally called "C" (some exports abbreviate Close so) wins over column C.
    assert resolve_column("C", {5: "C"}, role="close", row=1) == 5
    assert resolve_column("c", {5: "Last"}, role="close", row=1) == 3


def test_on_a_real_workbook(tmp_path):
    wb = Workbook()
    ws = wb.active
    ws.title = "Daily"
    ws["A1"] = "Instrument: invented"
    ws.append([])
    ws.append(["Date", "Open", "High", "Low", "Close*"])
    ws.append([45292, 10, 11, 9, 10.5])
    path = tmp_path / "top.xlsx"
    wb.save(path)
    grid = Package.open(path).read_grid("Daily", max_rows=50)
    m = find_header(grid.rows)
    assert (m.row, m.columns["close"]) == (3, 5)
