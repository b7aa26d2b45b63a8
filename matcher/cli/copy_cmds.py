"""``matcher library copy SRC DST``: move a whole library between backends, audit trail included."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from matcher.cli.common import say, library_group

EX_COPY = (
    "Example: move the lab's SQLite library to the shared server (password from $PGPASSWORD or ~/.pgpass),\n"
    "then keep a file copy of it as a backup\n\n"
    "    matcher library copy lab.sqlite postgresql+psycopg://curator@db.lab/ri\n\n"
    "    matcher library copy postgresql+psycopg://curator@db.lab/ri backup-2024-06.sqlite --overwrite"
)




def register(app: typer.Typer) -> None:
    lib = library_group(app)

    @lib.command(
        "copy",
        help="Copy a whole library (every compound, observation, phase, the audit log and the revision) "
        "from SRC to DST, e.g. a SQLite file to a PostgreSQL server or back. Refuses a destination "
        "that already holds a library unless --overwrite; one transaction, so a failed copy changes nothing.",
        epilog=EX_COPY,
    )
    def copy_cmd(
        src: Annotated[str, typer.Argument(metavar="SRC", help="Source library: a file path (SQLite) or an SQLAlchemy URL.")],
        dst: Annotated[Optional[str], typer.Argument(metavar="DST", help="Destination library: a file path (SQLite) or an SQLAlchemy URL (or give -o).", show_default=False)] = None,
        output: Annotated[Optional[str], typer.Option("-o", "--output", metavar="DST", help="Destination library, as the argument DST.")] = None,
        replace: Annotated[bool, typer.Option("--overwrite", help="Overwrite a destination that already holds a library.")] = False,
        old_replace: Annotated[bool, typer.Option("--replace", hidden=True)] = False,
    ) -> None:
        replace = replace or old_replace
        from matcher.errors import MatcherError

        if dst is not None and output is not None and dst != output:
            raise MatcherError("give the destination once: as the argument DST or as -o/--output")
        dst = dst if dst is not None else output
        if dst is None:
            raise MatcherError("where should the library go? give DST or -o/--output DST")
        from matcher.api import open_library

        say(open_library(src).copy_to(dst, replace=replace).summary())
