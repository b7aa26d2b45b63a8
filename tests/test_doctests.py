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


#: Functions implementing a published method, documented in the function itself (parameters with units,
#: returns, the equation, an example with its source, numbered references).
PUBLISHED_METHODS = [
    ("matcher.retention.kovats", "kovats"), ("matcher.retention.kovats", "kovats_index"),
    ("matcher.retention.linear_index", "van_den_dool_kratz"), ("matcher.retention.linear_index", "linear_index"),
    ("matcher.retention.holdup", "peterson_hirsch"), ("matcher.retention.holdup", "fit_holdup"),
    ("matcher.retention.phases", "classify"), ("matcher.chem.cas", "check_digit"), ("matcher.chem.formula", "nominal_mass"),
    ("matcher.retention.series", "assigned_index"), ("matcher.retention.series", "lee_index"),
    ("matcher.signal.chromatogram", "detect_peaks"),
]


@pytest.mark.parametrize("module, name", PUBLISHED_METHODS, ids=[f"{m}.{n}" for m, n in PUBLISHED_METHODS])
def test_published_method_is_documented_in_the_function(module, name):
    fn = getattr(importlib.import_module(module), name)
    doc = fn.__doc__ or ""
    for section in ("Parameters", "Returns", "Examples", "References"):
        assert f"\n    {section}\n    " in doc, f"{module}.{name}: no {section} section"
    assert ".. [1]" in doc and "[1]_" in doc, "numbered references, cited in the text"
    tests = doctest.DocTestFinder().find(fn, name)
    assert sum(len(t.examples) for t in tests) >= 1, "the example must run"
    assert all(ex.want.strip() for t in tests for ex in t.examples if not ex.source.startswith(("ri, ext", "h ="))), \
        "every example shows its result"


@pytest.mark.parametrize("name", sorted({m for m, _ in PUBLISHED_METHODS}))
def test_method_modules_run_real_examples(name):
    result = doctest.testmod(importlib.import_module(name), optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 5 and result.failed == 0
