"""Every example in a public docstring of the library runs and gives what it shows."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import models

MODULES = sorted(
    f"models.{info.name}" for info in pkgutil.iter_modules(models.__path__) if info.name != "build"
)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name: str) -> None:
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
