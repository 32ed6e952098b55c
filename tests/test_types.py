"""The package type-checks with zero errors (mypy settings in pyproject.toml)."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def _mypy() -> list[str] | None:
    exe = shutil.which("mypy") or str(Path(sys.executable).with_name("mypy"))
    return [exe] if Path(exe).exists() else None


@pytest.mark.slow
def test_mypy_finds_no_errors():
    mypy = _mypy()
    if mypy is None:
        pytest.skip("mypy is not installed (it comes with the test extras)")
    # No cache: a stale cache from another checkout must not hide an error.
    result = subprocess.run(
        [*mypy, "--no-incremental", "--cache-dir", os.devnull],
        cwd=ROOT, capture_output=True, text=True,
    )
    assert result.returncode == 0, result.stdout + result.stderr
    assert "Success: no issues found" in result.stdout, result.stdout
