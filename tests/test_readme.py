"""The README's promises: its commands are the ones CI runs, and its Python example works."""

from __future__ import annotations

import math
import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _blocks(lang: str) -> list[str]:
    return re.findall(rf"```{lang}\n(.*?)```", README, flags=re.S)


def test_ci_runs_exactly_the_readme_test_command():
    bash = [b.strip() for b in _blocks("bash")]
    assert len(bash) == 2, "the README gives exactly two set-up commands"
    demo, tests = bash
    assert "sheetvol fill workbooks/demo-desk.xlsx" in demo
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8").strip().splitlines()
    assert ci[-1].strip() == tests


def test_readme_starts_with_one_paragraph_then_the_commands():
    body = README.split("\n## ", 1)[0]
    paragraphs = [p for p in body.split("\n\n")[1:] if p.strip()]
    assert len(paragraphs) == 1
    assert README.index("## Set-up in two commands") < README.index("## Cautions")


def test_python_example_runs(monkeypatch):
    (code,) = _blocks("python")
    monkeypatch.chdir(ROOT)
    scope: dict = {}
    exec(compile(code, "README.md", "exec"), scope)
    stop = scope["stop"]
    assert stop == 1901.75 - 2 * scope["atr"][-1]
    # 1% of 250,000 over the loss per contract in account currency, rounded down (by hand).
    assert scope["size"] == math.floor(2500 / ((1901.75 - stop) * 10 * 1.08))
    assert list(scope["table"].columns[:5]) == ["Date", "Open", "High", "Low", "Close"]
