"""``matcher evaluate``: a self-check of the house library by resampling it."""

from __future__ import annotations

import json
from typing import Annotated, Optional

import typer

from .common import DbOption, JsonFlag, say

EXAMPLE = """
Examples

    matcher evaluate                      # every class with entries
    matcher evaluate --class polar --noise 3 --json
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "evaluate",
        help="Measure how far your library's shortlists can be trusted: hold observations out and query them, "
        "remove compounds to test the not-in-library answer, and list the pairs your columns cannot tell apart.",
        epilog=EXAMPLE,
    )
    def evaluate_cmd(
        phase_class: Annotated[Optional[str], typer.Option("--class", metavar="CLASS", help="Evaluate one class only.")] = None,
        noise: Annotated[float, typer.Option(metavar="UNITS", help="Add Gaussian noise of this many index units to every query.")] = 0.0,
        window: Annotated[Optional[float], typer.Option(metavar="UNITS", help="Half-width of the window (default: the class default).")] = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from ..api import evaluate

        report = evaluate(db, phase_class=phase_class, noise=noise, window=window).to_dict()
        if as_json:
            say(json.dumps(report, indent=2, ensure_ascii=False, allow_nan=False, default=lambda v: None))
            return
        say(render(report))


def _pct(v) -> str:
    return "-" if v is None else f"{100 * v:.1f} %"


def render(report: dict) -> str:
    from ..textable import format_table

    rows = []
    for cls, r in report["classes"].items():
        q = r.get("queries", {})
        mi = r.get("with_mol_ion", {})
        rows.append([cls, r.get("entries", 0), q.get("leave_one_out", 0), _pct(r.get("top1")), _pct(r.get("top3")),
                     _pct(mi.get("top1")), _pct(r.get("coverage")),
                     "-" if r.get("ece") is None else f"{r['ece']:.3f}", _pct(r.get("not_in_library_detection"))])
    out = [format_table(["class", "entries", "held out", "first", "in top 3", "first with M+", "in window",
                         "calibration error", "absent detected"], rows, align="lrrrrrrrr")]
    for cls, r in report["classes"].items():
        pairs = r.get("confusable_pairs") or []
        if pairs:
            out.append(f"\n{cls}: pairs inside each other's window with the same nominal mass (need a second column or a standard)")
            out.append(format_table(["compound", "index", "compound", "index", "gap", "mass"],
                                    [[p["a"], p["ri_a"], p["b"], p["ri_b"], p["gap"], p["nominal_mass"]] for p in pairs[:10]],
                                    align="lrlrrr"))
    out.append(f"\nnoise added: {report['noise']:g} index units; queries: {report['queries']['leave_one_out']} held out, "
               f"{report['queries']['removed']} removed")
    return "\n".join(out)
