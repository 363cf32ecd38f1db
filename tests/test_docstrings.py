"""Every example in a public docstring of the library runs and gives what it shows."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import models

# models.fitting.build needs PyMC to import and has no examples; the rest run without it.
MODULES = sorted(
    info.name
    for info in pkgutil.walk_packages(models.__path__, prefix="models.")
    if info.name != "models.fitting.build"
)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name: str) -> None:
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
