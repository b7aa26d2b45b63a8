"""Run the worked examples in every module's docstrings (on the installed package)."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import matcher

MODULES = sorted(
    m.name for m in pkgutil.walk_packages(matcher.__path__, prefix="matcher.") if not m.name.endswith("__main__")
)


@pytest.mark.parametrize("name", MODULES)
def test_doctests(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0, f"{result.failed} worked example(s) failed in {name}"
