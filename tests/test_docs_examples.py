"""Every example in README.md and docs/*.md, run as written.

The examples are found in the text, not listed here, so an example added to a
guide is picked up by itself:

* fenced ``python`` blocks are executed (in a copy of the project's
  ``workbooks/`` folder, so nothing in the checkout changes);
* shell commands (fenced ``bash`` blocks, untagged blocks of commands, and
  inline ``sheetvol fill FILE ...`` / ``sheetvol functions`` commands) are run
  on copies in ``tmp_path``; a file the command names that the project does not
  have (``desk.xlsx``, ``workbook.xlsx``) is a copy of the demo desk;
* fenced ``toml`` recipes are written to the file their first comment names
  and run with the command the guide gives for them;
* untagged blocks of terminal output are compared line by line with the
  output of the command that makes them (the demo fill, or a workbook built
  from the inputs the block states);
* worksheet formulas (``=SV_...`` in code, fenced or inline) are evaluated
  headless on the workbook the guide uses (the demo desk, or the template for
  the add-in guide) and must give a value; a result the guide states beside the
  formula (a column of N values, blank on the first K rows; the message for a
  typo) is checked; the trade-log guide's table of cell formulas is typed into
  the demo log's first trade and compared with the figures its text gives.

Not run, and why (each is named by the test that meets it): installing
(``python3 -m venv``, ``pip install``; CI runs the README's two commands, and
the extras named must exist), ``xlwings addin install`` (needs Excel on
Windows), benchmarks (``python -m benches.*``: minutes on a million bars; the
module must exist), and the test suite itself.
"""

from __future__ import annotations

import datetime as dt
import math
import os
import re
import shlex
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import openpyxl
import pytest

from sheetvol.functions.evaluator import (
    ArgumentMessage,
    FormulaError,
    evaluate,
    evaluate_cells,
    mentions_sheetvol,
    package_resolver,
)
from sheetvol.workbook.package import Package

try:  # Python 3.11+
    import tomllib
except ModuleNotFoundError:  # 3.10: the backport the package depends on there
    import tomli as tomllib

ROOT = Path(__file__).resolve().parent.parent
DOCS = [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))]
DEMO = ROOT / "workbooks" / "demo-desk.xlsx"
TEMPLATE = ROOT / "workbooks" / "template.xlsx"
COMMAND_WORDS = ("sheetvol", "python", "python3", "pip", ".venv/", "xlwings")


@dataclass(frozen=True)
class Block:
    doc: str
    line: int
    lang: str
    text: str
    after: str  # the text that follows, up to the next heading (states results)

    @property
    def id(self) -> str:
        return f"{self.doc}:{self.line}"


def _blocks() -> list[Block]:
    out = []
    for path in DOCS:
        lines = path.read_text(encoding="utf-8").splitlines()
        i = 0
        while i < len(lines):
            m = re.match(r"^(\s*)```(\w*)\s*$", lines[i])
            if not m:
                i += 1
                continue
            indent, lang = len(m[1]), m[2]
            j = i + 1
            while j < len(lines) and not re.match(r"^\s*```\s*$", lines[j]):
                j += 1
            body = "\n".join(line[indent:] for line in lines[i + 1:j])
            k = j + 1
            while k < len(lines) and not lines[k].startswith("#"):
                k += 1
            out.append(Block(path.relative_to(ROOT).as_posix(), i + 1, lang, body,
                             "\n".join(lines[j + 1:k])))
            i = j + 1
    return out


def _inline(pattern: str) -> list[tuple[str, int, str]]:
    """Inline code spans matching ``pattern``: (doc, line, text)."""
    found = []
    for path in DOCS:
        for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
            for code in re.findall(r"`([^`\n]+)`", line):
                if re.match(pattern, code):
                    found.append((path.relative_to(ROOT).as_posix(), n, code))
    return found


def kind(block: Block) -> str:
    lines = [x for x in block.text.splitlines() if x.strip()]
    if block.lang == "python":
        return "python"
    if block.lang == "toml":
        return "recipe"
    if block.lang in ("bash", "sh", "shell", "console"):
        return "shell"
    if block.lang == "text":
        return "diagram"  # a drawing of the layout: its module names are checked below
    if block.lang:
        return "unknown"
    if lines and all(x.lstrip().startswith("=") for x in lines):
        return "formula"
    if lines and all(x.startswith("  ") for x in lines):
        return "output"
    if lines and all(re.fullmatch(r"SV_\w+\(.*\)", x.strip()) for x in lines):
        return "signature"  # how a function is called, in the generated reference
    if lines and all(re.fullmatch(r"[A-Za-z0-9_.\-]+(==[\w.]+)?|https://\S+\.whl", x.strip())
                     for x in lines):
        return "requirement"  # lines of a requirements file
    if lines and all(x.strip().startswith(COMMAND_WORDS) for x in lines):
        return "shell"
    return "unknown"


BLOCKS = _blocks()


def _of(k: str) -> list[Block]:
    return [b for b in BLOCKS if kind(b) == k]


def test_every_example_block_is_recognised():
    unknown = [f"{b.id} ({b.lang or 'untagged'})" for b in BLOCKS if kind(b) == "unknown"]
    assert unknown == [], "a documented block this test does not know how to run"


# -- running commands ----------------------------------------------------------------------
@pytest.fixture(scope="session")
def project(tmp_path_factory) -> Path:
    """A throw-away copy of the project's workbooks/ folder to run examples in."""
    where = tmp_path_factory.mktemp("project")
    shutil.copytree(ROOT / "workbooks", where / "workbooks")
    return where


_RUNS: dict[tuple[str, str], subprocess.CompletedProcess] = {}


def run_sheetvol(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    """``sheetvol ARGS`` as the user types it (this checkout first on the path); files it
    names that do not exist are copies of the demo desk. Identical commands run once."""
    key = (str(cwd), shlex.join(args))
    if key in _RUNS:
        return _RUNS[key]
    for a in args:
        if re.fullmatch(r"[\w./-]+\.(xlsx|xlsm)", a) and not (cwd / a).exists():
            (cwd / a).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy(DEMO, cwd / a)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    done = subprocess.run([sys.executable, "-m", "sheetvol", *args], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=600)
    _RUNS[key] = done
    return done


def _commands(text: str) -> list[str]:
    out = []
    for line in text.splitlines():
        line = re.sub(r"\s+#.*$", "", line).strip()
        if line and not line.startswith("#"):
            out.extend(part.strip() for part in line.split("&&"))
    return out


def _run_command(command: str, cwd: Path) -> str:
    """Run one documented command; returns what was done, for the failure message."""
    words = shlex.split(command)
    head = words[0].removeprefix(".venv/bin/")
    if head in ("python3", "python") and words[1:3] == ["-m", "venv"]:
        return "install: skipped (CI runs the README's commands)"
    if head == "pip" or (head in ("python", "python3") and words[1:3] == ["-m", "pip"]):
        for spec in words:
            extras = re.search(r"\[([\w,]+)\]", spec)
            for extra in (extras[1].split(",") if extras else []):
                assert extra in PYPROJECT["project"]["optional-dependencies"], command
        return "install: extras checked"
    if head == "xlwings":
        return "needs Excel on Windows: skipped"
    if head in ("python", "python3") and words[1:3] == ["-m", "pytest"]:
        return "the test suite itself"
    if head in ("python", "python3") and len(words) > 2 and words[1] == "-m" \
            and words[2].startswith("benches."):
        assert (ROOT / (words[2].replace(".", "/") + ".py")).exists(), command
        return "benchmark: module exists; run by hand"
    if head == "sheetvol":
        done = run_sheetvol(words[1:], cwd)
        assert done.returncode == 0, f"{command}\n{done.stderr}"
        return "ran"
    if head in ("python", "python3") and words[1].endswith(".py"):
        done = subprocess.run([sys.executable, *words[1:]], cwd=cwd, capture_output=True,
                              text=True, timeout=600,
                              env={**os.environ, "PYTHONPATH": str(ROOT)})
        assert done.returncode == 0, f"{command}\n{done.stderr}"
        return "ran"
    if head in ("python", "python3") and words[1] == "-m":
        done = subprocess.run([sys.executable, *words[1:]], cwd=cwd, capture_output=True,
                              text=True, timeout=600,
                              env={**os.environ, "PYTHONPATH": str(ROOT)})
        assert done.returncode == 0, f"{command}\n{done.stderr}"
        return "ran"
    raise AssertionError(f"{command}: not a command this test knows how to run")


PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))


@pytest.mark.slow
@pytest.mark.parametrize("block", _of("shell"), ids=lambda b: b.id)
def test_shell_blocks_run(block, project):
    for command in _commands(block.text):
        _run_command(command, project)


INLINE_COMMANDS = _inline(r"sheetvol (fill \S+\.(xlsx|xlsm|csv)\b|functions\b)")


@pytest.mark.slow
@pytest.mark.parametrize("where", INLINE_COMMANDS, ids=lambda w: f"{w[0]}:{w[1]}")
def test_inline_commands_run(where, project, tmp_path):
    doc, _, command = where
    if command.startswith("sheetvol fill") and "--recipe" in command:
        # The recipe is the guide's own block, written where the command expects it.
        name = shlex.split(command)[shlex.split(command).index("--recipe") + 1]
        recipe = next(b for b in _of("recipe") if b.doc == doc
                      and b.text.lstrip().startswith(f"# {name}"))
        (tmp_path / name).write_text(recipe.text, encoding="utf-8")
        _run_command(command, tmp_path)
        return
    _run_command(command, project)


@pytest.mark.slow
@pytest.mark.skipif(not _inline(r"python workbooks/make_demo\.py$"),
                    reason="no guide mentions the demo's script")
def test_the_demo_is_made_again_from_its_seed(tmp_path):
    # trade-log.md: "python workbooks/make_demo.py writes it again from a fixed seed".
    out = tmp_path / "demo-desk.xlsx"
    subprocess.run([sys.executable, str(ROOT / "workbooks" / "make_demo.py"), "--out", str(out)],
                   check=True, capture_output=True, timeout=600,
                   env={**os.environ, "PYTHONPATH": str(ROOT)})
    a, b = openpyxl.load_workbook(DEMO), openpyxl.load_workbook(out)
    assert a.sheetnames == b.sheetnames
    for ws in a.worksheets:
        assert list(ws.iter_rows(values_only=True)) == \
            list(b[ws.title].iter_rows(values_only=True)), ws.title


@pytest.mark.parametrize("block", _of("signature"), ids=lambda b: b.id)
def test_signatures_are_the_registry_s(block):
    from sheetvol.functions.registry import get, variant_params

    for line in block.text.strip().splitlines():
        name, args = re.fullmatch(r"(SV_\w+)\((.*)\)", line.strip()).groups()
        shown = [a.strip() for a in args.split(",")]
        params = variant_params(get(name), "column")
        assert shown == [p.name if p.required else f"[{p.name}]" for p in params], line


@pytest.mark.parametrize("block", _of("requirement"), ids=lambda b: b.id)
def test_requirement_lines_name_the_distribution(block):
    # A requirements line names this project (or its wheel, by name and version) or a
    # library pinned to the version the tests ran with.
    import importlib.metadata

    name = PYPROJECT["project"]["name"]
    version = importlib.metadata.version(name)
    for line in block.text.strip().splitlines():
        line = line.strip()
        if line.startswith("https://"):
            assert line.endswith(f"/{name}-{version}-py3-none-any.whl"), line
        elif "==" in line:
            dist, pinned = line.split("==")
            assert pinned == importlib.metadata.version(dist), line
        else:
            assert line == name, line


# -- Python --------------------------------------------------------------------------------
@pytest.mark.slow
@pytest.mark.parametrize("block", _of("python"), ids=lambda b: b.id)
def test_python_blocks_run(block, project, monkeypatch, capsys):
    monkeypatch.chdir(project)
    exec(compile(block.text, block.id, "exec"), {"__name__": "__doc_example__"})


# -- recipes -------------------------------------------------------------------------------
@pytest.mark.parametrize("block", _of("recipe"), ids=lambda b: b.id)
def test_recipes_read(block, tmp_path):
    from sheetvol.fill.recipe import read_recipe

    first = block.text.lstrip().splitlines()[0]
    name = re.match(r"#\s*(\S+\.toml)", first)
    assert name, f"{block.id}: a recipe's first line names its file (# desk.toml)"
    path = tmp_path / name[1]
    path.write_text(block.text, encoding="utf-8")
    read_recipe(path)  # raises with the file, table and key when a line is wrong
    # The guide gives the command that uses it (run by test_inline_commands_run).
    assert any("--recipe " + name[1] in c for _, _, c in INLINE_COMMANDS), block.id


# -- terminal output -----------------------------------------------------------------------
def _demo_summary(project: Path) -> list[str]:
    done = run_sheetvol(["fill", "workbooks/demo-desk.xlsx"], project)
    assert done.returncode == 0, done.stderr
    return (done.stdout + done.stderr).splitlines()


def _gappy_export(path: Path, block: str) -> Path:
    """An export with the rows and gaps the fill guide's sample summary states."""
    rows = int(re.search(r"rows read: (\d+)", block)[1])
    first = dt.datetime.fromisoformat(re.search(r"\((\d{4}-\d\d-\d\d) to", block)[1])
    days = [first + dt.timedelta(days=d) for d in range(rows * 2)
            if (first + dt.timedelta(days=d)).weekday() < 5][:rows]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = re.search(r'sheet "([^"]+)"', block)[1]
    ws.append(["Date", "Open", "High", "Low", "Close", "Volume"])
    rng = np.random.default_rng(3)
    close = 100 + np.cumsum(rng.normal(0, 1, rows))
    for i, day in enumerate(days):
        c = float(close[i])
        ws.append([day, c - 0.2, c + 1.0, c - 1.0, c, 1000])
    # Rows 10 and 20: a holiday (date, no prices) and a row of error values and blank words.
    for col in range(2, 7):
        ws.cell(row=10, column=col).value = None
    for col, v in zip(range(2, 7), ("#N/A", "n/a", "n/a", "#N/A", None), strict=True):
        ws.cell(row=20, column=col).value = v
    # Gaps: #N/A in Close; "n/a" in High; "n/a" in High with #N/A in Close; a blank Low.
    ws.cell(row=40, column=5).value = "#N/A"
    ws.cell(row=50, column=3).value = "n/a"
    ws.cell(row=60, column=3).value = "n/a"
    ws.cell(row=60, column=5).value = "#N/A"
    ws.cell(row=70, column=4).value = None
    wb.save(path)
    return path


@pytest.mark.slow
@pytest.mark.parametrize("block", _of("output"), ids=lambda b: b.id)
def test_output_blocks_match_a_real_run(block, project, tmp_path):
    wanted = [x for x in block.text.splitlines() if x.strip()]
    names = set(re.findall(r'(?:sheet|trade log) "([^"]+)"', block.text))
    demo_sheets = set(openpyxl.load_workbook(DEMO, read_only=True).sheetnames)
    if names <= demo_sheets:
        got = _demo_summary(project)
    else:
        src = _gappy_export(tmp_path / "export.xlsx", block.text)
        done = run_sheetvol(["fill", str(src)], tmp_path)
        assert done.returncode == 0, done.stderr
        got = (done.stdout + done.stderr).splitlines()
    missing = [x for x in wanted if x not in got]
    assert missing == [], "\n".join(got)


# -- worksheet formulas ----------------------------------------------------------------------
FORMULA_CELL_TABLE = re.compile(r"^\|[^|]*\|\s*`(=SV_[^`]+)`\s*\|$")


def _formulas() -> list[tuple[str, int, str, str]]:
    """(doc, line, formula, text around it) for each sheetvol formula in the guides,
    except those of a table of cell formulas (test_cell_formula_tables_give_the_stated_figures)."""
    found = []
    for b in _of("formula"):
        for f in b.text.splitlines():
            found.append((b.doc, b.line, f.strip(), b.after))
    for path in DOCS:
        lines = path.read_text(encoding="utf-8").splitlines()
        for n, line in enumerate(lines, start=1):
            if FORMULA_CELL_TABLE.match(line.strip()):
                continue
            for code in re.findall(r"`(=[^`\n]+)`", line):
                found.append((path.relative_to(ROOT).as_posix(), n, code,
                              " ".join(lines[n - 1:n + 2])))
    return [f for f in found if mentions_sheetvol(f[2]) and "..." not in f[2]]


FORMULAS = _formulas()


@pytest.fixture(scope="session")
def books() -> dict[str, Package]:
    return {"demo": Package.open(DEMO), "template": Package.open(TEMPLATE)}


def _book_for(doc: str, formula: str, books: dict[str, Package]) -> tuple[Package, str]:
    """The workbook the guide's formula is written for, and the sheet it is typed on."""
    named = set(re.findall(r"(\w+)!", formula))
    for pkg in ([books["template"], books["demo"]] if doc == "docs/addin.md"
                else [books["demo"], books["template"]]):
        sheets = {s.name for s in pkg.sheets}
        if named <= sheets:
            prices = [s for s in ("Prices", "KESTREL") if s in sheets]
            typed_on = "Trades" if named else prices[0]
            return pkg, typed_on
    raise AssertionError(f"{doc}: {formula} names sheets of neither workbook: {named}")


@pytest.mark.parametrize("where", FORMULAS, ids=lambda w: f"{w[0]}:{w[1]}")
def test_formulas_give_what_the_guide_says(where, books):
    doc, _, formula, around = where
    pkg, sheet = _book_for(doc, formula, books)
    resolver = package_resolver(pkg)
    if re.search(r"shows the message", around):
        with pytest.raises(ArgumentMessage) as err:
            evaluate(formula, resolver, current_sheet=sheet, date1904=pkg.date1904)
        assert err.value.text.startswith("SV_")
        return
    try:
        value = evaluate(formula, resolver, current_sheet=sheet, date1904=pkg.date1904)
    except FormulaError as exc:
        raise AssertionError(f"{doc}: {formula} on {sheet!r}: {exc}") from None
    spill = re.search(r"(?:column of|spills) (\d+) (?:values|rows)", around)
    if spill:
        column = np.asarray(value, dtype=np.float64)
        assert column.shape == (int(spill[1]),), formula
    warm = re.search(r"blank on the first (\d+) rows|the first (\d+) are \*\*empty\*\*", around)
    if warm:
        k = int(warm[1] or warm[2])
        column = np.asarray(value, dtype=np.float64)
        assert np.isnan(column[:k]).all() and math.isfinite(column[k]), formula


def _cell_tables() -> list[tuple[str, str, list[str]]]:
    """(doc, text, formulas) for each table of cell formulas."""
    out = []
    for path in DOCS:
        text = path.read_text(encoding="utf-8")
        rows = [m[1] for m in map(FORMULA_CELL_TABLE.match, text.splitlines()) if m]
        if rows:
            out.append((path.relative_to(ROOT).as_posix(), text, rows))
    return out


@pytest.mark.parametrize("table", _cell_tables(), ids=lambda t: t[0])
def test_cell_formula_tables_give_the_stated_figures(table, tmp_path):
    doc, text, formulas = table
    # "the new cells going into J2 (volatility), ..." on the log's row; the table's rows
    # go into that cell and the ones to its right, in order.
    start = re.search(r"going into ([A-Z]+)(\d+)", text)
    assert start, f"{doc}: say which cell the first formula goes into"
    from openpyxl.utils import column_index_from_string, get_column_letter
    col0, row = column_index_from_string(start[1]), int(start[2])
    src = tmp_path / "demo-desk.xlsx"
    shutil.copy(DEMO, src)
    pkg = Package.open(src)

    class Typed:
        def __init__(self, col: int, formula: str) -> None:
            self.sheet, self.row, self.col, self.formula = "Trades", row, col, formula[1:]

    cells = [Typed(col0 + i, f) for i, f in enumerate(formulas)]
    got = evaluate_cells(cells, package_resolver(pkg), date1904=pkg.date1904)
    values = {get_column_letter(c.col): got[("Trades", row, c.col)] for c in cells}
    bad = {k: v for k, v in values.items() if isinstance(v, Exception)}
    assert bad == {}
    # The figures the guide reads off the first trade ("Read the first row: ...").
    atr = re.search(r"ATR was (\d+(?:\.\d+)?)", text)[1]
    stop = re.search(r"rounded\s+down to [^:]*: (\d+(?:\.\d+)?)\)", text)[1]
    target = re.search(r"rounded\s+toward entry: (\d+(?:\.\d+)?)\)", text)[1]
    size = re.search(r"lot step of [\d,]+: ([\d,]+)", text)[1].replace(",", "")
    letters = [get_column_letter(col0 + i) for i in range(4)]
    decimals = len(atr.split(".")[1])
    assert round(values[letters[0]], decimals) == float(atr)
    assert values[letters[1]] == pytest.approx(float(stop), abs=1e-12)
    assert values[letters[2]] == pytest.approx(float(target), abs=1e-12)
    assert values[letters[3]] == float(size)


def test_diagrams_name_modules_that_exist():
    # A drawing of the layout names folders ("fill/") and their modules ("job, locate"),
    # or top-level modules ("cli.py"): each must exist, so the drawing cannot go stale.
    package = ROOT / "sheetvol"
    checked = 0
    for block in _of("diagram"):
        folder = None
        for line in block.text.splitlines():
            left = line[:64]
            first = left.split()[0] if left.split() else ""
            if first.endswith("/"):
                folder = package / first.rstrip("/")
                assert folder.is_dir(), f"{block.id}: no folder {first}"
                names = left.split(None, 1)[1] if len(left.split(None, 1)) > 1 else ""
            elif first == "faces":  # the top-level modules
                folder, names = None, left.split(None, 1)[1]
            else:
                names = left if folder is not None else ""
            for word in re.findall(r"[A-Za-z_]+(?:\.py)?", names):
                path = (folder or package) / (word if word.endswith(".py") else word + ".py")
                assert path.is_file(), f"{block.id}: {path.relative_to(ROOT)} does not exist"
                checked += 1
    assert checked >= 30
