"""``matcher phases ...``: the stationary-phase catalog and McReynolds classification."""

from __future__ import annotations

import json
from typing import Annotated

import typer

from matcher.cli.common import JsonFlag, say

EX_LIST = "Example:\n\n    matcher phases list\n\n    matcher phases list --json"
EX_CLASSIFY = (
    "Example: a 50 % phenyl phase (McReynolds constants x' y' z' u' s')\n\n"
    "    matcher phases classify 119 158 162 243 202\n\n"
    "Class boundaries on the sum (common practice, approximate): nonpolar < 250, slightly-polar < 450, "
    "mid-polar < 1600, polar < 3000, highly-polar above."
)


def register(app: typer.Typer) -> None:
    grp = typer.Typer(help="Stationary phases: generic compositions, polarity classes and McReynolds constants.",
                      epilog="Example:\n\n    matcher phases list\n\n    matcher phases classify 119 158 162 243 202",
                      no_args_is_help=True, rich_markup_mode=None)
    app.add_typer(grp, name="phases")

    @grp.command("list", help="List the shipped stationary-phase catalog (generic compositions only).", epilog=EX_LIST)
    def list_cmd(as_json: JsonFlag = False) -> None:
        from matcher.retention.phases import catalog
        from matcher.report.terminal import format_table

        phases = catalog()
        if as_json:
            say(json.dumps([{"name": p.name, "class": p.phase_class, "mcreynolds": list(p.constants) if p.constants else None,
                             "sum": p.mcreynolds_sum, "source": p.source} for p in phases], indent=2, ensure_ascii=False))
            return
        rows = []
        for p in phases:
            c = p.constants
            rows.append([p.name, p.phase_class] + ([int(v) if float(v).is_integer() else v for v in c] if c else [None] * 5)
                        + [p.mcreynolds_sum])
        say(format_table(["composition", "class", "x'", "y'", "z'", "u'", "s'", "sum"], rows, align="llrrrrrr"))
        say("McReynolds constants after McReynolds, J. Chromatogr. Sci. 8, 685 (1970); see the source column of "
            "library/phases.csv (values marked 'from memory').")

    @grp.command("classify", help="Polarity class from five McReynolds constants (x' y' z' u' s').", epilog=EX_CLASSIFY)
    def classify_cmd(
        x: Annotated[float, typer.Argument(metavar="X", help="x' (benzene)")],
        y: Annotated[float, typer.Argument(metavar="Y", help="y' (1-butanol)")],
        z: Annotated[float, typer.Argument(metavar="Z", help="z' (2-pentanone)")],
        u: Annotated[float, typer.Argument(metavar="U", help="u' (1-nitropropane)")],
        s: Annotated[float, typer.Argument(metavar="S", help="s' (pyridine)")],
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.retention.phases import classify, mcreynolds_sum

        cls, total = classify(x, y, z, u, s), mcreynolds_sum(x, y, z, u, s)
        if as_json:
            say(json.dumps({"class": cls, "sum": total}))
        else:
            say(f"{cls} (McReynolds sum {total:g}; boundaries are common practice, approximate)")
