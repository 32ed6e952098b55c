"""The public Python API: what `import sheetvol` gives, and what it must not need."""

from __future__ import annotations

import doctest
import subprocess
import sys

import numpy as np
import pytest

import sheetvol
from sheetvol.functions import cells, registry


def test_import_needs_neither_excel_nor_xlwings_nor_openpyxl():
    code = (
        "import sys, sheetvol; "
        "print(sorted(m for m in ('xlwings', 'openpyxl') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_everything_public_is_documented():
    for name in sheetvol.__all__:
        if name == "__version__":
            continue
        doc = getattr(sheetvol, name).__doc__ or ""
        assert "Parameters" in doc and "Returns" in doc, name


@pytest.mark.parametrize("module", [sheetvol, cells, registry], ids=lambda m: m.__name__)
def test_docstring_examples_run(module):
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0


def test_registry_call_equals_the_kernel_it_names():
    # The worksheet path (validated registry call) and the Python path give the same array.
    x = 100 + np.cumsum(np.random.default_rng(7).normal(0, 1, 300))
    via_registry = registry.get("SV_DEVIATION")(x, 14, "exponential", "sample")
    direct = sheetvol.dispersion(x, period=14, average="exponential", divisor="sample")
    np.testing.assert_array_equal(via_registry, direct)
