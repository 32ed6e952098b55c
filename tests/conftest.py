"""Shared test data: invented random walks (no market data is needed by the tests)."""

from __future__ import annotations

import numpy as np
import pytest


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
