"""The installed package carries every shipped data file and every dependency.

CI installs the project non-editable, so these checks fail when a data file
is left out of the package or a dependency is missing from pyproject.toml.
"""

from __future__ import annotations

import importlib
import importlib.metadata
import importlib.resources
import re
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
SHIPPED = {"library": "matcher.shipped", "schema": "matcher.schemas", "examples": "matcher.examples"}


@pytest.mark.parametrize("folder", sorted(SHIPPED))
def test_every_data_file_is_in_the_installed_package(folder):
    package = SHIPPED[folder]
    wanted = sorted(p.name for p in (REPO / folder).iterdir() if p.is_file() and p.suffix != ".py")
    assert wanted, f"{folder}/ holds no data files"
    installed = importlib.resources.files(package)
    missing = [name for name in wanted if not installed.joinpath(name).is_file()]
    assert not missing, f"not in the installed package {package}: {missing}"


def test_every_declared_dependency_imports():
    import_names = {"pyyaml": "yaml", "psycopg": "psycopg", "sqlalchemy": "sqlalchemy"}
    for req in importlib.metadata.requires("matcher") or []:
        if "extra ==" in req:
            continue
        name = re.split(r"[\s<>=~!\[;]", req, maxsplit=1)[0].lower()
        importlib.import_module(import_names.get(name, name.replace("-", "_")))


def test_console_script_is_declared():
    eps = importlib.metadata.entry_points(group="console_scripts")
    assert any(ep.name == "matcher" and ep.value == "matcher.cli.main:run" for ep in eps)
