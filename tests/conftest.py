"""Shared test helpers: invented random walks, and LibreOffice as the stand-in spreadsheet."""

from __future__ import annotations

import shutil
import subprocess
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest

SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")


def make_walk(n: int, start: float = 100.0, step: float = 1.0, seed: int = 0) -> np.ndarray:
    """An arithmetic random walk: ``start`` plus cumulative normal moves of size ``step``."""
    rng = np.random.default_rng(seed)
    return start + np.cumsum(rng.normal(0.0, step, n))


@pytest.fixture(scope="session")
def walk():
    """Factory for random walks, so each test names its own size, level and move."""
    return make_walk


@pytest.fixture(scope="session")
def long_walk_1e7() -> np.ndarray:
    """1,000,000 bars near 1e7 with moves of about 0.01 (the issue's accuracy case)."""
    return make_walk(1_000_000, start=1e7, step=0.01, seed=20260101)


@pytest.fixture
def libreoffice(tmp_path: Path) -> Callable[..., Path]:
    """Convert a workbook with LibreOffice headless, as a user opening it would.

    Each test gets a throw-away user profile, so parallel or repeated runs never
    share LibreOffice's lock files. Skips, saying why, where LibreOffice is absent.
    LibreOffice exits 0 even on a damaged file: callers must compare content.
    """
    if SOFFICE is None:
        pytest.skip("LibreOffice (soffice) is not installed; .ci/run installs it")
    profile = (tmp_path / "lo-profile").as_uri()

    def convert(*paths: Path, to: str = "xlsx") -> Path | list[Path]:
        """Re-save ``paths`` (one start of the program); one path in, one path out."""
        out_dir = tmp_path / "lo-out"
        out_dir.mkdir(exist_ok=True)
        subprocess.run(
            [SOFFICE, f"-env:UserInstallation={profile}", "--headless", "--norestore",
             "--convert-to", to, "--outdir", str(out_dir), *map(str, paths)],
            check=True, capture_output=True, timeout=180,
        )
        got = [out_dir / (Path(p).stem + "." + to.split(":")[0]) for p in paths]
        missing = [g.name for g in got if not g.exists()]
        assert not missing, f"LibreOffice wrote nothing for {missing}"
        return got[0] if len(got) == 1 else got

    return convert
