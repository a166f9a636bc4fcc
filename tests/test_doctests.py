"""The examples in core's docstrings run as written (STYLE.md: every public function has one)."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import core

MODULES = sorted(m.name for m in pkgutil.iter_modules(core.__path__, "core."))


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
