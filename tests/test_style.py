"""The code base stays ruff-clean (configuration in pyproject.toml)."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def _ruff() -> list[str] | None:
    exe = shutil.which("ruff") or str(Path(sys.executable).with_name("ruff"))
    return [exe] if Path(exe).exists() else None


def test_ruff_check_is_clean():
    ruff = _ruff()
    if ruff is None:
        pytest.skip("ruff is not installed (it comes with the test extras)")
    result = subprocess.run(
        [*ruff, "check", "sheetvol", "tests", "workbooks", "benches"],
        cwd=ROOT, capture_output=True, text=True,
    )
    assert result.returncode == 0, result.stdout + result.stderr
