"""Shared fixtures. Store tests use ``library_url``: parametrised by backend so
that a PostgreSQL variant can be added later (issue 9) without touching them."""

from __future__ import annotations

import importlib.resources
import os

import pytest

BACKENDS = ["sqlite"]


@pytest.fixture(params=BACKENDS)
def library_url(request, tmp_path):
    """The URL of a fresh, initialised, empty house library."""
    from matcher.store.database import dispose_all, init_library

    if request.param == "sqlite":
        url = "sqlite:///" + os.path.join(str(tmp_path), "library.sqlite")
    else:  # pragma: no cover - future backends
        pytest.skip(f"backend {request.param} not available")
    init_library(url)
    yield url
    dispose_all()


@pytest.fixture
def demo_csv(tmp_path):
    """A copy of the shipped demo library file (from the installed package)."""
    text = importlib.resources.files("matcher.shipped").joinpath("demo_library.csv").read_text(encoding="utf-8")
    p = tmp_path / "demo_library.csv"
    p.write_text(text, encoding="utf-8")
    return p
