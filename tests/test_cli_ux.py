"""Command-line details a new user meets: percent risk, the fill's own usage, short
function names, a closed pipe, and text in a price cell named by its cell."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from test_messy_exports import ohlc, write_book

from sheetvol.cli import main

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize(("given", "share"), [("1%", 0.01), ("0.5 %", 0.005), ("0.02", 0.02)])
def test_risk_takes_a_percent_sign(given, share, monkeypatch):
    seen = {}

    def fake_fill(src, options):  # the options the command line built, nothing filled
        seen["risk"] = options.trades.risk
        raise SystemExit(0)

    monkeypatch.setattr("sheetvol.cli.fill_file", fake_fill)
    assert main(["fill", "x.xlsx", "--risk", given]) == 0
    assert seen["risk"] == pytest.approx(share)  # 1% is one hundredth (by definition)


@pytest.mark.parametrize("given", ["2", "30%", "abc"])
def test_a_bad_risk_prints_the_fill_usage_and_how_to_write_it(given, capsys):
    assert main(["fill", "x.xlsx", "--risk", given]) == 2
    err = capsys.readouterr().err
    assert err.startswith("usage: sheetvol fill ")  # the fill's usage, not the top level
    assert "--risk" in err and given in err and "1%" in err and "0.01" in err


def test_other_fill_usage_errors_print_the_fill_usage(capsys):
    assert main(["fill", "x.xlsx", "--header-row", "0"]) == 2
    assert capsys.readouterr().err.startswith("usage: sheetvol fill ")


@pytest.mark.parametrize("name", ["atr", "ATR", "sv_atr", "atr_on"])
def test_functions_finds_a_name_without_its_prefix(name, capsys):
    assert main(["functions", name]) == 0
    out = capsys.readouterr().out
    assert out.startswith("SV_ATR(" if "on" not in name else "SV_ATR_ON(")


def test_functions_into_a_closed_pipe_ends_quietly():
    # `sheetvol functions | head -1`: the reader goes away after one line
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.run(
        f'"{sys.executable}" -m sheetvol functions | head -1', shell=True, cwd=ROOT, env=env,
        capture_output=True, text=True, timeout=60)
    assert proc.stdout.count("\n") == 1
    assert "Traceback" not in proc.stderr and "BrokenPipe" not in proc.stderr, proc.stderr


def test_text_in_a_price_cell_is_named_by_its_cell(tmp_path, capsys):
    df = ohlc(60)
    src = tmp_path / "p.xlsx"
    bad = {7: "n/a", 12: "-", 20: "n/a", 30: "n/a", 40: "n/a", 50: "n/a", 55: "n/a"}

    def cell(name, v, row=[0]):  # noqa: B006 - counts the Close cells written, in order
        if name != "Close":
            return v
        row[0] += 1
        return bad.get(row[0], v)

    write_book(src, df, cell=cell)
    assert main(["fill", str(src)]) == 0
    out = capsys.readouterr().out
    line = next(ln for ln in out.splitlines() if "cells to fix" in ln)
    # header in row 1, so Close value k sits in row k + 1; Close is column E (Date, OHLC)
    assert line.endswith('E8 "n/a", E13 "-", E21 "n/a", E31 "n/a", E41 "n/a" and 2 more'), line
