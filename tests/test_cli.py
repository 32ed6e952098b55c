"""The ``sheetvol`` command line, through ``main([...])`` and one real subprocess."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from openpyxl import load_workbook
from test_messy_exports import DEV, assert_deviation_on_rows, ohlc, write_book

from sheetvol import __version__
from sheetvol.cli import main
from sheetvol.functions import registry

ROOT = Path(__file__).resolve().parent.parent


def test_version(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"sheetvol {__version__}"


def test_top_level_help(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    assert "fill" in out and "functions" in out


def test_fill_help_is_complete(capsys):
    assert main(["fill", "--help"]) == 0
    out = capsys.readouterr().out
    for flag in ("--sheet", "--header-row", "--date-col", "--open-col", "--high-col",
                 "--low-col", "--close-col", "--recipe", "--decimal-comma", "--dayfirst",
                 "--in-place", "--keep-formulas", "--chart", "--quiet", "--out-dir", "-o"):
        assert flag in out, flag
    assert "examples:" in out and "sheetvol fill prices.xlsx" in out
    assert "[[column]]" in out and "{ period = 20" in out
    assert DEV in out and "SV_CLOSEVOL period=20, per_year=from the dates" in out


def test_functions_lists_every_registry_function(capsys):
    assert main(["functions"]) == 0
    out = capsys.readouterr().out
    for f in registry.FUNCTIONS:
        assert f"{f.name} " in out and f.summary in out


def test_functions_shows_one_with_arguments(capsys):
    assert main(["functions", "sv_atr"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("SV_ATR(high, low, close, [period], [smoothing], [seed], [first_bar])")
    assert "period       a whole number from 1 to 5000 (default 14)" in out
    assert main(["functions", "SV_ATR_ON"]) == 0
    assert capsys.readouterr().out.startswith("SV_ATR_ON(date, dates, high,")
    assert main(["functions", "SV_NOPE"]) == 1
    assert "no function named 'SV_NOPE'" in capsys.readouterr().err


def test_fill_prints_a_summary(tmp_path, capsys):
    src = tmp_path / "prices.xlsx"
    df = ohlc(40)
    rows = write_book(src, df, extra_rows=[["Total", None, None, None, 1.0, None]])
    assert main(["fill", str(src)]) == 0
    out = capsys.readouterr().out
    assert f"prices.xlsx -> {tmp_path / 'prices-filled.xlsx'}" in out
    assert "rows read: 41; 40 bars (2024-01-02 to 2024-02-26), oldest first" in out
    assert "rows skipped: 1 summary or footer row" in out
    assert "columns written: G Std dev 14 (simple, close), H ATR 14 (Wilder)" in out
    assert "Not advice; see the notes sheet" in out
    assert len(out.splitlines()) <= 24  # one screen
    assert_deviation_on_rows(tmp_path / "prices-filled.xlsx", df, rows)


def test_quiet_prints_nothing(tmp_path, capsys):
    src = tmp_path / "prices.xlsx"
    write_book(src, ohlc(30))
    assert main(["fill", "--quiet", str(src)]) == 0
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""
    assert (tmp_path / "prices-filled.xlsx").exists()


def test_several_inputs_one_bad(tmp_path, capsys):
    good1, good2, bad = tmp_path / "a.xlsx", tmp_path / "b.xlsx", tmp_path / "c.xlsx"
    write_book(good1, ohlc(30, seed=1))
    write_book(bad, ohlc(30).drop(columns=["Close"]))
    write_book(good2, ohlc(30, seed=2))
    out_dir = tmp_path / "filled"
    out_dir.mkdir()
    code = main(["fill", str(good1), str(bad), str(good2), "--out-dir", str(out_dir)])
    captured = capsys.readouterr()
    assert code == 1
    assert sorted(p.name for p in out_dir.iterdir()) == ["a-filled.xlsx", "b-filled.xlsx"]
    assert "sheetvol: error: c.xlsx" in captured.err and "no Close column" in captured.err
    assert captured.err.count("error") == 1
    assert "2 of 3 files filled" in captured.out


def test_missing_file_and_wrong_kind(tmp_path, capsys):
    (tmp_path / "old.xls").write_bytes(b"\xd0\xcf\x11\xe0")
    assert main(["fill", str(tmp_path / "nope.xlsx"), str(tmp_path / "old.xls")]) == 1
    err = capsys.readouterr().err
    assert "nope.xlsx: no such file" in err
    assert "old .xls format; save it as .xlsx" in err


def test_output_option_takes_one_input(tmp_path, capsys):
    assert main(["fill", "a.xlsx", "b.xlsx", "-o", str(tmp_path / "x.xlsx")]) == 2
    assert "-o/--output takes one input" in capsys.readouterr().err


def test_flags_reach_the_fill(tmp_path, capsys):
    src = tmp_path / "odd.xlsx"
    df = ohlc(30).rename(columns={"Close": "Settle value"})  # not a header the search knows
    write_book(src, df, title_rows=2, sheet="Daily")
    recipe = tmp_path / "r.toml"
    recipe.write_text('[[column]]\nfunction = "SV_DEVIATION"\n', encoding="utf-8")
    out = tmp_path / "out.xlsx"
    code = main(["fill", str(src), "-o", str(out), "--sheet", "daily", "--header-row", "3",
                 "--close-col", "E", "--recipe", str(recipe)])
    assert code == 0, capsys.readouterr().err
    ws = load_workbook(out)["Daily"]
    assert [c.value for c in ws[3]][-1] == DEV


def test_bad_recipe_is_reported(tmp_path, capsys):
    recipe = tmp_path / "r.toml"
    recipe.write_text('[[column]]\nfunction = "SV_DEVIATION"\noptions = { period = 1 }\n',
                      encoding="utf-8")
    assert main(["fill", "x.xlsx", "--recipe", str(recipe)]) == 1
    assert ("r.toml, column 1: SV_DEVIATION: period must be a whole number from 2 to 5000, "
            "got 1") in capsys.readouterr().err


def test_python_dash_m_sheetvol(tmp_path):
    src = tmp_path / "prices.xlsx"
    df = ohlc(30)
    rows = write_book(src, df, newest_first=True)
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    done = subprocess.run([sys.executable, "-m", "sheetvol", "fill", str(src)], env=env,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "prices-filled.xlsx" in done.stdout
    assert done.stderr == ""  # no progress bar when stderr is not a terminal
    assert_deviation_on_rows(tmp_path / "prices-filled.xlsx", df, rows)
    bad = subprocess.run([sys.executable, "-m", "sheetvol", "fill", str(tmp_path / "no.xlsx")],
                         env=env, capture_output=True, text=True, timeout=120)
    assert bad.returncode == 1 and "no.xlsx: no such file" in bad.stderr


@pytest.mark.parametrize("argv", [["fill"], ["bogus"]])
def test_usage_errors_exit_2(argv, capsys):
    assert main(argv) == 2
    assert "usage:" in capsys.readouterr().err


def test_wildcards_and_sheet_choice(tmp_path, capsys):
    for name, seed in (("x1.xlsx", 1), ("x2.xlsx", 2)):
        write_book(tmp_path / name, ohlc(30, seed=seed), sheet="Bars")
    # a quoted pattern reaches the program unexpanded, as on Windows shells
    assert main(["fill", str(tmp_path / "x*.xlsx"), "--sheet", "BARS", "-q"]) == 0
    assert (tmp_path / "x1-filled.xlsx").exists() and (tmp_path / "x2-filled.xlsx").exists()
    assert main(["fill", str(tmp_path / "x1.xlsx"), "--sheet", "Nope", "-q"]) == 1
    assert "no sheet 'Nope'; its sheets are 'Bars'" in capsys.readouterr().err
    assert main(["fill", str(tmp_path / "x1.xlsx"), "--sheet", "Bars", "--frobnicate"]) == 2
