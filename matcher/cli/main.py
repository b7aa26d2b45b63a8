"""Entry point of the ``matcher`` console script.

Each command group lives in its own module with a ``register(app)`` function;
command bodies parse options, call one library function and render. Heavy
modules are imported inside the command functions so that ``matcher query``
starts quickly.
"""

from __future__ import annotations

import os
import sys

import typer

from matcher import CAUTION, __version__

app = typer.Typer(
    name="matcher",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    help=(
        "Identify GC peaks from retention indices against your own house library.\n\n"
        "Typical day: calibrate the ladder, screen the run, review the flagged peaks, "
        "add compounds you confirmed with a standard.\n\n" + CAUTION
    ),
    context_settings={"help_option_names": ["-h", "--help"]},
    epilog=(
        "Example: the whole workflow on the bundled demo (invented numbers)\n\n"
        "    matcher demo --out demo-output\n\n"
        "    matcher screen run.csv --ladder alkanes.csv --class slightly-polar -o shortlist.csv --report run.html"
    ),
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"matcher {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Show the version and exit."),
) -> None:
    """Identify GC peaks from retention indices against your own house library."""


def _register_all() -> None:
    import importlib

    for name in (
        "calibrate_cmds",
        "library_cmds",
        "copy_cmds",
        "phases_cmds",
        "query_cmds",
        "screen_cmds",
        "curate_cmds",
        "evaluate_cmds",
        "demo_cmds",
        "review_cmds",
    ):
        try:
            mod = importlib.import_module(f"{__package__}.{name}")
        except ModuleNotFoundError as exc:  # a command group not built yet
            if exc.name == f"{__package__}.{name}":
                continue
            raise
        mod.register(app)


_register_all()


def run() -> None:
    """Run the CLI; user errors become one line on stderr and a non-zero exit."""
    from matcher.errors import MatcherError

    try:
        app()
    except MatcherError as exc:
        from matcher.safe_text import terminal_text
        from matcher.location import mask_secrets

        typer.echo(terminal_text(mask_secrets(f"error: {' '.join(str(exc).split())}")), err=True)
        sys.exit(exc.exit_code)
    except KeyboardInterrupt:
        typer.echo("interrupted; nothing half-written was kept", err=True)
        sys.exit(130)
    except Exception as exc:  # last resort: never a traceback at the bench
        if os.environ.get("MATCHER_DEBUG"):
            raise
        from matcher.location import mask_secrets

        from matcher.safe_text import terminal_text

        msg = terminal_text(mask_secrets(" ".join(f"{type(exc).__name__}: {exc}".split())))
        typer.echo(f"error: unexpected problem ({msg}); set MATCHER_DEBUG=1 to see details", err=True)
        sys.exit(1)


if __name__ == "__main__":  # pragma: no cover
    run()
