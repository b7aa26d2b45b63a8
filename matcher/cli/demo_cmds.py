"""``matcher demo``: the whole daily workflow on the bundled, invented demo data."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from matcher import CAUTION
from matcher.cli.common import say

EXAMPLE = """
Example

    matcher demo -o demo-output

Then open demo-output/report.html in a browser, or read demo-output/shortlist.csv.
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "demo",
        help="Run the demo end to end: build the demo house library, calibrate the example ladder, screen the "
        "example run (juniper-berry oil on a 5 % phenyl column; invented numbers) and write a shortlist and a report; "
        "then screen it together with the same injection on a polyethylene-glycol column (two-column confirmation).\n\n"
        + CAUTION,
        epilog=EXAMPLE,
    )
    def demo_cmd(
        out: Annotated[str, typer.Option("-o", "--output", metavar="DIR", help="Folder for the demo files (created if needed).")] = "matcher-demo",
        old_out: Annotated[Optional[str], typer.Option("--out", hidden=True, metavar="DIR")] = None,
    ) -> None:
        out = old_out if old_out is not None else out
        from matcher.demo import run_demo
        from matcher.cli.screen_cmds import summary

        outcome = run_demo(out)
        run = outcome.result.runs[0]
        say("matcher demo: lot JB-0412 of juniper-berry oil, 5 % phenyl column (slightly-polar class). "
            "All numbers are invented for the demo.\n")
        say(summary(outcome.result))
        say("")
        t = run.table
        first = t[t["rank"] == 1].head(12)
        from matcher.report.terminal import format_table

        say("first peaks, best candidate:")
        say(format_table(["peak", "index", "best candidate", "probability", "flags"],
                         [[r.peak, f"{r.ri:.1f}", r.name, f"{r.probability:.3f}", r.flags] for r in first.itertuples()],
                         align="rrlrl"))
        say("")
        from matcher.cli.screen_cmds import pairing_line

        say("the same injection on a polyethylene-glycol column (polar class), both columns scored together:")
        say(pairing_line(outcome.two_columns_result.runs[0]))
        say("")
        for label, path in (("library", outcome.library), ("calibration", outcome.calibration),
                            ("shortlist", outcome.shortlist), ("report", outcome.report),
                            ("two columns", outcome.two_columns), ("its report", outcome.two_columns_report)):
            say(f"{label:12s} {path}")
        say("")
        say(CAUTION)
