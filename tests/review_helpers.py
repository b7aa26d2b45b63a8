"""Shared pieces of the review tests: a screened demo run (every number in the demo is invented)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

PORT = 48123  # the port the test client pretends to be served on (no socket is opened)


def demo_outputs(folder: Path) -> Path:
    """Run the bundled demo once into ``folder``; returns the folder (shortlist.csv, its sidecar, the library)."""
    from matcher.demo import run_demo

    run_demo(str(folder))
    return folder


def copy_result(demo: Path, target: Path, name: str = "shortlist.csv") -> Path:
    """A private copy of the demo shortlist (and its sidecar) in ``target``."""
    target.mkdir(parents=True, exist_ok=True)
    shutil.copy(demo / "shortlist.csv", target / name)
    shutil.copy(demo / "shortlist.csv.meta.json", target / (name + ".meta.json"))
    return target / name


def copy_library(demo: Path, target: Path) -> Path:
    """A consistent copy of the demo's library (the online backup: the demo's write-ahead log may not be
    checkpointed yet while its engine is open in this process)."""
    import matcher

    matcher.open_library(str(demo / "demo-library.sqlite")).backup(str(target))
    return target


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo screened once per test module."""
    return demo_outputs(tmp_path_factory.mktemp("demo"))


@pytest.fixture
def result(demo, tmp_path):
    """A fresh copy of the demo's shortlist (with its sidecar) for one test."""
    return copy_result(demo, tmp_path)
