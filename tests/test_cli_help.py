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


#: Placeholders a help text must not show: a type in angle brackets, an argument in braces, a bare type name.
RAW_PLACEHOLDER = r"<(?:str|int|float|bool|path|text)>|\{\w+\}|(?<![\w-])(?:TEXT|FLOAT|INTEGER|BOOLEAN)(?![\w-])"
#: Header spellings of instrument exports, which help examples must not copy (a neutral one is used instead).
EXPORT_SPELLINGS = ("Ret.Time", "R.Time", "Ret. Time", "Peak#", "Area%")
#: Commands that write a file, each with -o/--output.
WRITERS = ["calibrate", "ri", "screen", "demo", "library export", "library backup", "library copy"]


@pytest.mark.parametrize("path, command", TREE, ids=IDS)
def test_help_shows_readable_metavars_and_no_export_spellings(path, command):
    import re

    out = runner.invoke(app, path + ["--help"], terminal_width=200).output
    assert not re.findall(RAW_PLACEHOLDER, out), re.findall(RAW_PLACEHOLDER, out)
    assert not [s for s in EXPORT_SPELLINGS if s in out]
    # columns are named by generic composition, never by a product code (common practice of this project)
    assert not re.search(r"\b(?:db|hp|rtx|zb|vf|sp|cp)-?\d+\b", out, flags=re.IGNORECASE)


@pytest.mark.parametrize("name", WRITERS)
def test_every_file_writing_command_has_output(name):
    out = runner.invoke(app, name.split() + ["--help"], terminal_width=200).output
    assert "-o, --output" in out


def test_qc_record_and_identity_options():
    screen = runner.invoke(app, ["screen", "--help"], terminal_width=200).output
    for opt in ("--sample", "--analyst", "--instrument", "--column", "--index-scatter"):
        assert opt in screen
    import re

    assert not re.search(r"--sd\b|--out\b", screen)  # the old spellings work but are hidden
    confirm = runner.invoke(app, ["confirm", "--help"], terminal_width=200).output
    for opt in ("--cas", "--formula", "--phase"):
        assert opt in confirm
    for name in ("library retire", "library merge"):
        text = runner.invoke(app, name.split() + ["--help"], terminal_width=200).output
        assert "Who makes the change" in text and "Who confirmed it" not in text
