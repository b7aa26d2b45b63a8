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

def _readable_arguments() -> None:
    """Arguments shown by their metavar alone (``RESULTS``), not ``{results}`` or ``RESULTS <str>``.

    The installed Typer prints a type placeholder beside every argument and braces around required
    ones in the usage line; a chromatographer reads neither. Every argument and option of matcher has
    a readable metavar (tests/test_cli_help.py checks the help texts), so the type is not shown.
    """
    core = getattr(typer, "core", None)
    cls = getattr(core, "TyperArgument", None)
    if cls is None or getattr(cls, "_matcher_readable", False):
        return

    def display_type(self, ctx):  # noqa: ARG001 - the metavar says what to give
        return None

    def usage_name(self):
        name = self.metavar or self.name.upper()
        name = name if self.required else f"[{name}]"
        return name + ("..." if self.nargs != 1 and not name.endswith("...") else "")

    if hasattr(cls, "display_type"):
        cls.display_type = display_type
    if hasattr(cls, "_usage_display_name"):
        cls._usage_display_name = usage_name
    cls._matcher_readable = True


_readable_arguments()

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
        "    matcher demo -o demo-output\n\n"
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
        "peaks_cmds",
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
        if isinstance(exc, ModuleNotFoundError) and exc.name in ("psycopg", "psycopg2", "psycopg_binary", "psycopg_c"):
            from matcher.store.database import POSTGRES_INSTALL

            typer.echo(f"error: the PostgreSQL driver is not installed ({exc.name}); install it with: "
                       f"{POSTGRES_INSTALL}", err=True)
            sys.exit(2)
        from matcher.location import mask_secrets

        from matcher.safe_text import terminal_text

        msg = terminal_text(mask_secrets(" ".join(f"{type(exc).__name__}: {exc}".split())))
        typer.echo(f"error: unexpected problem ({msg}); set MATCHER_DEBUG=1 to see details", err=True)
        sys.exit(1)


if __name__ == "__main__":  # pragma: no cover
    run()
