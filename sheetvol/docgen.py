"""Generate ``docs/functions.md`` from the registry.

Run ``python -m sheetvol.docgen`` after changing the registry; a test fails
while the committed file differs from what this module produces.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from sheetvol.functions.registry import FUNCTIONS, Function, Param, variant_params

GROUP_TITLES = {
    "averages": "Averages and price basis",
    "dispersion": "Dispersion",
    "ranges": "True range and ATR",
    "bands": "Bands",
    "returns": "Returns-based volatility (annualised)",
    "regime": "Regime",
    "trade": "Trade levels, sizing and review",
}

DOC_PATH = Path(__file__).resolve().parent.parent / "docs" / "functions.md"


def _default(p: Param) -> str:
    if p.required:
        return "required"
    if isinstance(p.default, str):
        return f'`"{p.default}"`'
    return f"`{p.default}`"


def _signature(name: str, params: tuple[Param, ...]) -> str:
    parts = [p.name if p.required else f"[{p.name}]" for p in params]
    return f"{name}({', '.join(parts)})"


def _function_section(f: Function) -> list[str]:
    lines = [f"### {f.name}", "", f.summary, ""]
    lines += ["```", _signature(f.name, f.params), "```", ""]
    lines += ["| argument | kind | default | valid values | meaning |", "|---|---|---|---|---|"]
    for p in f.params:
        lines.append(f"| {p.name} | {p.kind} | {_default(p)} | {p.describe_range()} | {p.help} |")
    lines += ["", f"Returns: {f.returns}.", ""]
    if f.shape == "series":
        lines += [
            "Also as "
            f"`{_signature(f.name + '_LAST', f.params)}` "
            "(the value on the last row, for filling down) and "
            f"`{_signature(f.name + '_ON', variant_params(f, 'on'))}` "
            "(the value on the last bar on or before `date`).",
            "",
        ]
    if f.notes:
        lines += [f.notes, ""]
    if f.example:
        lines += [f"Example: `{f.example}`", ""]
    lines.append(f"Kernel: `{f.kernel.replace(':', '.')}`")
    lines.append("")
    return lines


def render() -> str:
    """Return the Markdown text of the function reference."""
    lines = [
        "# Worksheet function reference",
        "",
        "Generated from `sheetvol/registry.py` by `python -m sheetvol.docgen`; "
        "do not edit by hand.",
        "",
        "Column arguments take a range (oldest bar first; blank and error cells are skipped, see "
        "[conventions](conventions.md)). Options are plain words or numbers; a bad option gives a "
        "message in the cell that names the function and the argument.",
        "",
        "Every column function comes in three forms: `NAME` returns a column as tall as its input "
        "(blank until enough history), `NAME_LAST` returns only the value on the last row, and "
        "`NAME_ON(date, dates, ...)` returns the value on the last bar on or before `date`.",
        "",
    ]
    groups: dict[str, list[Function]] = {}
    for f in FUNCTIONS:
        groups.setdefault(f.group, []).append(f)
    lines.append("## Contents")
    lines.append("")
    for group, funcs in groups.items():
        names = ", ".join(f"[{f.name}](#{f.name.lower()})" for f in funcs)
        lines.append(f"- {GROUP_TITLES.get(group, group)}: {names}")
    lines.append("")
    for group, funcs in groups.items():
        lines += [f"## {GROUP_TITLES.get(group, group)}", ""]
        for f in funcs:
            lines += _function_section(f)
    return "\n".join(lines).rstrip() + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m sheetvol.docgen", description="Write docs/functions.md from the registry."
    )
    parser.add_argument("--check", action="store_true", help="exit 1 if the file is stale")
    parser.add_argument("--path", type=Path, default=DOC_PATH)
    args = parser.parse_args(argv)
    text = render()
    if args.check:
        current = args.path.read_text(encoding="utf-8") if args.path.exists() else ""
        if current != text:
            print(f"{args.path} is stale: run python -m sheetvol.docgen", file=sys.stderr)
            return 1
        return 0
    args.path.write_text(text, encoding="utf-8")
    print(f"wrote {args.path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
