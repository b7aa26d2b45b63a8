"""Options and helpers shared by the command modules."""

from __future__ import annotations

import sys
from typing import Annotated, Optional

import typer

from matcher.rules import PHASE_CLASSES

#: Help text of every ``--class`` option (the names come from :data:`matcher.rules.PHASE_CLASSES`).
CLASS_HELP = "Polarity class of the column: " + ", ".join(PHASE_CLASSES) + "."

#: ``--min-snr`` of the commands that read GC-MS run files (peaks, calibrate, screen): one declaration.
MinSnrOption = Annotated[
    Optional[float],
    typer.Option("--min-snr", metavar="K", help="Run files: a peak needs a prominence of K x the run's noise (default 5).",
                 show_default=False),
]

DbOption = Annotated[
    Optional[str],
    typer.Option(
        "--db",
        envvar="MATCHER_DB",
        metavar="PATH_OR_URL",
        help="House library: a file path (SQLite) or an SQLAlchemy URL. "
        "Default: $MATCHER_DB, else a file in your user data directory.",
        show_default=False,
    ),
]

JsonFlag = Annotated[bool, typer.Option("--json", help="Print JSON for programs instead of a table.")]


def say(text: str = "") -> None:
    """Print to standard output, control and bidi characters shown escaped (terminal or not)."""
    from matcher.safe_text import terminal_text

    typer.echo(terminal_text(text))


def note(text: str) -> None:
    """Print a notice to standard error (keeps stdout clean for data), escaped like :func:`say`."""
    from matcher.safe_text import terminal_text

    typer.echo(terminal_text(text), err=True)


def emit_data(text: str) -> None:
    """A data file's text (CSV) on standard output: byte for byte what ``-o FILE`` writes, except on a
    terminal, where control and bidi characters are shown escaped instead of acting on it."""
    out = sys.stdout
    if out.isatty():
        from matcher.safe_text import terminal_text

        text = terminal_text(text)
    out.write(text)
    out.flush()


def is_terminal() -> bool:
    return sys.stdin.isatty() and sys.stdout.isatty()


def library_group(app: typer.Typer) -> typer.Typer:
    """The ``library`` command group (added by :mod:`matcher.cli.library_cmds`), for modules that extend it."""
    for info in app.registered_groups:
        if info.name == "library" and info.typer_instance is not None:
            return info.typer_instance
    lib = typer.Typer(help="Manage the house library.", no_args_is_help=True, rich_markup_mode=None)
    app.add_typer(lib, name="library")
    return lib


def parse_map(items: list[str] | None) -> dict[str, str]:
    """``--map column=header`` options as a dict."""
    from matcher.errors import MatcherError

    out: dict[str, str] = {}
    for item in items or []:
        if "=" not in item:
            raise MatcherError(f"--map expects column=header, got {item!r}")
        k, v = item.split("=", 1)
        out[k.strip()] = v.strip()
    return out
