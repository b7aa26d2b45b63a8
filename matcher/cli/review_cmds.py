"""``matcher review``: the local review page for a screened run, or its reviewed list exported.

A thin layer over :func:`matcher.api.serve_review` / :func:`matcher.api.open_review`.
"""

from __future__ import annotations

import os
from typing import Annotated, Optional

import typer

from matcher import CAUTION
from matcher.cli.common import DbOption, note, say

EXAMPLE = """
Examples

  Work through this morning's shortlist in the browser (the address carries a session token):

    matcher review shortlist.csv --reviewer ana --db lab.sqlite --open

  The reviewed list for the QC record, and a report with the review section:

    matcher review shortlist.csv --export review.csv

    matcher review shortlist.csv --export review.html

Decisions are kept in shortlist.csv.review.json beside the result, written at once; starting
matcher review again shows them. Peaks accepted and marked as confirmed with an authentic
standard go into the library from the page (with --db) or with
matcher confirm --review shortlist.csv.review.json --source "std lot ...".
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "review",
        help="Review a screened run peak by peak in your browser (served on 127.0.0.1 only) and keep every "
        "decision, with who and when, beside the result. Accepting a candidate is a putative annotation, "
        "not a confirmation.\n\n" + CAUTION,
        epilog=EXAMPLE,
    )
    def review_cmd(
        result: Annotated[str, typer.Argument(metavar="RESULT", help="Screening output of matcher screen: OUT.csv (with its .meta.json) or OUT.json.")],
        db: DbOption = None,
        port: Annotated[Optional[int], typer.Option("--port", metavar="PORT", help="Port on 127.0.0.1 (default: a free one).")] = None,
        reviewer: Annotated[Optional[str], typer.Option("--reviewer", metavar="NAME", help="Your name, kept with each decision (default: your login).")] = None,
        open_browser: Annotated[bool, typer.Option("--open", help="Open the page in the default browser.")] = False,
        export: Annotated[Optional[str], typer.Option("--export", metavar="FILE", help="Write the reviewed list (.csv, or .html with the review section) and exit; no server.")] = None,
    ) -> None:
        from matcher.api import open_review, serve_review

        if export is not None:
            if port is not None or open_browser:
                from matcher.errors import MatcherError

                raise MatcherError("--export writes the reviewed list and exits; leave out --port and --open")
            path = open_review(result, reviewer=reviewer).export(export)
            say(f"reviewed list written to {path}")
            note(CAUTION)
            return

        library = db if db is not None else os.environ.get("MATCHER_DB") or None

        def announce(url: str) -> None:
            say(f"review page: {url}")
            note("served on 127.0.0.1 only; the address holds this session's token, keep it to yourself. "
                 "Press Ctrl+C to stop; every decision is already saved.")
            note(CAUTION)

        serve_review(result, library=library, port=port, reviewer=reviewer, open_browser=open_browser,
                     announce=announce)
