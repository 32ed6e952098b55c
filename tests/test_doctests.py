"""Every docstring example in the package runs and shows what it says.

The examples are the first thing a reader tries; this collects them for every module
of ``sheetvol`` (the add-in's examples need no Excel: its functions are plain Python).
"""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import sheetvol

MODULES = sorted(m.name for m in pkgutil.walk_packages(sheetvol.__path__, "sheetvol.")
                 if m.name != "sheetvol.__main__")


def test_every_module_is_collected():
    # The walk sees the layers' modules, so a new module is collected without a list to edit.
    for name in ("sheetvol.core.averages", "sheetvol.functions.registry",
                 "sheetvol.workbook.package", "sheetvol.fill.job", "sheetvol.cli"):
        assert name in MODULES


@pytest.mark.parametrize("name", ["sheetvol", *MODULES])
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE
                             | doctest.ELLIPSIS)
    assert result.failed == 0, f"{name}: {result.failed} of {result.attempted} examples failed"
