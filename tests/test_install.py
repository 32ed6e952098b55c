"""What an install without extras needs: every runtime import declared in pyproject.toml,
the CSV path free of test-only packages, and CI running such an install."""

from __future__ import annotations

import ast
import importlib.metadata as md
import re
import subprocess
import sys
from pathlib import Path

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ROOT = Path(__file__).resolve().parent.parent
PROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]


def _name(requirement: str) -> str:
    """Distribution name of a requirement, normalised (PEP 503)."""
    return re.sub(r"[-_.]+", "-", re.match(r"[A-Za-z0-9._-]+", requirement)[0]).lower()


def _imports(path: Path) -> set[str]:
    """Top-level modules a file imports, lazy imports inside functions included."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            found.add(node.module.split(".")[0])
    return found - set(sys.stdlib_module_names) - {"sheetvol"}


def test_every_runtime_import_is_declared():
    runtime = {_name(r) for r in PROJECT["dependencies"]}
    addin = runtime | {_name(r) for r in PROJECT["optional-dependencies"]["addin"]}
    dists = md.packages_distributions()  # import name -> distributions that provide it
    # pywin32 installs only on Windows (where xlwings' COM path needs it): its import names.
    dists = {**dists, "pythoncom": ["pywin32"], "win32com": ["pywin32"]}
    missing = []
    for path in sorted((ROOT / "sheetvol").rglob("*.py")):
        allowed = addin if path.name == "addin.py" else runtime
        for module in _imports(path):
            names = {_name(d) for d in dists.get(module, [module])}
            if module == "tomllib" or not names & allowed:
                if module != "tomllib":
                    missing.append(f"{path.relative_to(ROOT)}: {module}")
    assert not missing, missing


def test_a_csv_fill_needs_no_test_only_package(tmp_path):
    # The CSV path runs with the test extras' writer library made unimportable.
    csv = tmp_path / "prices.csv"
    rows = ["Date,High,Low,Close"] + [
        f"2025-01-{d:02d},{101 + d % 3},{99 - d % 2},{100 + d % 5 * 0.5}" for d in range(1, 29)]
    csv.write_text("\n".join(rows) + "\n", encoding="utf-8")
    code = ("import sys; sys.modules['xlsxwriter'] = None\n"
            "from sheetvol.cli import main\n"
            f"raise SystemExit(main(['fill', {str(csv)!r}, '-q']))")
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True,
                          text=True, timeout=120, env={"PYTHONPATH": str(ROOT)})
    assert proc.returncode == 0, proc.stderr
    import openpyxl

    ws = openpyxl.load_workbook(tmp_path / "prices-filled.xlsx")["prices"]
    assert ws["A2"].is_date and ws["A2"].value.day == 1  # dates stay dates
    assert ws["D2"].value == 100.5  # 100 + 1 % 5 * 0.5, numbers stay numbers
    assert ws.cell(1, 5).value and ws.cell(1, 5).font.b  # a new column with its header


def test_ci_runs_a_minimal_install_with_the_readme_demo_command():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    demo = re.findall(r"```bash\n(.*?)```", readme, flags=re.S)[0].strip()
    assert "pip install -q . " in demo  # no extras
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    minimal = ci[ci.index("minimal=$(mktemp -d)"):ci.index('rm -rf "$minimal"')]
    assert demo in minimal
    assert ".venv/bin/sheetvol fill prices.csv" in minimal
