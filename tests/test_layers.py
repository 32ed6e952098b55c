"""Imports go down the layers only; the core is numpy and the standard library.

The layers, bottom to top (docs/architecture.md draws them):

0. ``sheetvol.core``: numpy only, no text, dates, pandas or spreadsheet types
1. ``sheetvol.functions``: the registry, argument conversion, call forms, evaluator
2. ``sheetvol.workbook``: the .xlsx package
3. ``sheetvol.fill``: the fill job
4. the faces: ``sheetvol.cli``, ``sheetvol.addin``, ``sheetvol.frame``, ``sheetvol.docgen``
   and the package's ``__init__``

Every import statement counts, also one inside a function: a lazy import that climbs
is still a climb.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "sheetvol"

LAYERS = {"_version": 0, "core": 0, "functions": 1, "workbook": 2, "fill": 3}
FACE = 4
# Third-party imports each layer may use at all (at module level or lazily).
ALLOWED_THIRD_PARTY = {
    0: {"numpy"},
    1: {"numpy", "pandas", "openpyxl"},
    2: {"numpy", "defusedxml", "orjson"},
    3: {"numpy", "pandas", "defusedxml", "tqdm", "tomli", "xlsxwriter", "openpyxl"},
    4: {"numpy", "pandas", "xlwings", "pythoncom", "win32com"},  # pywin32: xlwings on Windows
}
STDLIB = set(sys.stdlib_module_names)


def _module_name(path: Path) -> str:
    parts = path.relative_to(ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _layer(module: str) -> int:
    parts = module.split(".")
    if len(parts) < 2:
        return FACE  # the package's own __init__
    return LAYERS.get(parts[1], FACE)


def _imports(path: Path) -> list[tuple[int, str]]:
    """(line, absolute module) for every import in the file."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = _module_name(path).rsplit(".", 1)[0] if path.name != "__init__.py" else (
        _module_name(path))
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            if mod.split(".")[0] == "sheetvol":
                # "from sheetvol.fill import job": job is a module when it has a file
                for a in node.names:
                    sub = ROOT.joinpath(*mod.split("."), a.name)
                    is_module = sub.with_suffix(".py").is_file() or sub.is_dir()
                    out.append((node.lineno, f"{mod}.{a.name}" if is_module else mod))
            else:
                out.append((node.lineno, mod))
    return out


def _sources() -> list[Path]:
    return sorted(PACKAGE.rglob("*.py"))


def test_the_package_has_the_layers():
    for name in ("core", "functions", "workbook", "fill"):
        assert (PACKAGE / name / "__init__.py").is_file(), name


@pytest.mark.parametrize("path", _sources(), ids=lambda p: str(p.relative_to(ROOT)))
def test_imports_go_down_only(path):
    me = _module_name(path)
    mine = _layer(me)
    climbs = []
    for line, mod in _imports(path):
        top = mod.split(".")[0]
        if top == "sheetvol":
            if _layer(mod) > mine:
                climbs.append(f"line {line}: {mod} (layer {_layer(mod)} above {mine})")
        elif top not in STDLIB and top != "__future__":
            if top not in ALLOWED_THIRD_PARTY[mine]:
                climbs.append(f"line {line}: third-party {top} not allowed in layer {mine}")
    assert not climbs, f"{me}:\n" + "\n".join(climbs)


def test_the_walker_sees_a_climb(tmp_path):
    # The check itself can fail: a core module importing the fill is reported.
    probe = PACKAGE / "core" / "_probe_for_layer_test.py"
    probe.write_text("def f():\n    from sheetvol.fill import job\n    import pandas\n")
    try:
        with pytest.raises(AssertionError, match=r"sheetvol\.fill\.job"):
            test_imports_go_down_only(probe)
    finally:
        probe.unlink()


def test_import_sheetvol_and_the_core_load_no_heavy_library():
    code = (
        "import sys\n"
        "import sheetvol, sheetvol.core.averages, sheetvol.core.bands, sheetvol.core.dispersion\n"
        "import sheetvol.core.estimators, sheetvol.core.prices, sheetvol.core.ranges\n"
        "import sheetvol.core.regime, sheetvol.core._windows\n"
        "import sheetvol.core.levels, sheetvol.core.sizing, sheetvol.core.review\n"
        "heavy = [m for m in ('pandas', 'openpyxl', 'xlwings', 'defusedxml') if m in sys.modules]\n"
        "print(','.join(heavy))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=ROOT)
    assert out.stdout.strip() == ""


def test_the_contributor_guide_lists_every_module():
    # DEVELOPERS.md's layout names each module of the package once, and nothing else:
    # a new or renamed module must be placed in it.
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    block = text[text.index("```text\nsheetvol/"):]
    block = block[: block.index("```", 8)]
    listed, folder = set(), ""
    for line in block.splitlines()[2:]:
        name = line.split()[0] if line.strip() else ""
        indent = len(line) - len(line.lstrip())
        if name.endswith("/") and indent == 2:
            folder = name
        elif name.endswith(".py"):
            listed.add(("" if indent == 2 else folder) + name)
        elif indent == 0 and name:
            break  # benches/, workbooks/...: outside the package
    modules = {str(p.relative_to(PACKAGE)) for p in PACKAGE.rglob("*.py")
               if p.name not in ("__init__.py", "__main__.py", "_version.py")}
    assert listed == modules, (sorted(modules - listed), sorted(listed - modules))
