"""Every command and command group, found by walking the Typer tree (no hand-kept list), has a help text
with a worked example and answers ``--help`` cleanly."""

from __future__ import annotations

import pytest
import typer.main
from typer.testing import CliRunner

from matcher import CAUTION
from matcher.cli.main import app

runner = CliRunner()


def _walk(command, path):
    yield path, command
    for name, sub in sorted((getattr(command, "commands", None) or {}).items()):
        yield from _walk(sub, path + [name])


TREE = list(_walk(typer.main.get_command(app), []))
IDS = [" ".join(p) or "(root)" for p, _ in TREE]


def test_the_walk_finds_every_group_and_their_commands():
    groups = {" ".join(p) for p, c in TREE if getattr(c, "commands", None)}
    assert {"", "library", "phases"} <= groups
    assert len(TREE) >= 25  # 3 groups and at least 22 commands today; the walk is not a list to keep


@pytest.mark.parametrize("path, command", TREE, ids=IDS)
def test_help_has_a_worked_example_and_exits_cleanly(path, command):
    epilog = command.epilog or ""
    assert "Example" in epilog, f"{IDS[TREE.index((path, command))]}: no worked example in the epilog"
    # the example runs this very command (a group's example runs one of its commands)
    assert "matcher " + " ".join(path) in epilog
    assert (command.help or "").strip(), "no help text"
    res = runner.invoke(app, path + ["--help"])
    assert res.exit_code == 0, res.output
    assert res.exception is None
    assert "Traceback" not in res.output
    first_example_line = next(ln.strip() for ln in epilog.splitlines() if ln.strip().startswith("matcher "))
    assert " ".join(first_example_line.split()) in " ".join(res.output.split())  # the example is shown


@pytest.mark.parametrize("name", ["query", "screen", "demo"])
def test_screening_commands_carry_the_caution(name):
    res = runner.invoke(app, [name, "--help"])
    assert " ".join(CAUTION.split()) in " ".join(res.output.split())
