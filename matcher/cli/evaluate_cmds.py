"""``matcher evaluate``: a self-check of the house library by resampling it."""

from __future__ import annotations

import json
from typing import Annotated, Optional

import typer

from matcher.cli.common import DbOption, JsonFlag, say

EXAMPLE = """
Examples

    matcher evaluate                      # every class with entries
    matcher evaluate --class polar --noise 3 --json
    matcher evaluate --crowded --offset 4   # half the library removed, everything screened as one run
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "evaluate",
        help="Measure how far your library's shortlists can be trusted: hold observations out and query them, "
        "remove compounds to test the not-in-library answer, and list the pairs your columns cannot tell apart.",
        epilog=EXAMPLE,
    )
    def evaluate_cmd(
        phase_class: Annotated[Optional[str], typer.Option("--class", metavar="CLASS", help="Evaluate one polarity class only (default: every class of the library).")] = None,
        noise: Annotated[float, typer.Option(metavar="UNITS", help="Add Gaussian noise of this many index units to every query.")] = 0.0,
        window: Annotated[Optional[float], typer.Option(metavar="UNITS", help="Half-width of the window (default: the class default).")] = None,
        crowded: Annotated[bool, typer.Option("--crowded", help="Crowded-sample check: remove every other compound along the index scale and screen all of them together as one run, plain and adaptive.")] = False,
        offset: Annotated[float, typer.Option(metavar="UNITS", help="With --crowded: shift the whole run by this many index units.")] = 4.0,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import evaluate
        from matcher.errors import MatcherError
        from matcher.rules import check_noise

        noise = check_noise(noise)
        if crowded:
            from matcher.identify.evaluation import evaluate_crowded_all
            from matcher.store.snapshot_loader import load_snapshot

            if abs(offset) > 100:
                raise MatcherError("--offset must be between -100 and 100 index units")
            report = evaluate_crowded_all(load_snapshot(db), phase_class, offset=offset, noise=noise or None)
            if as_json:
                say(json.dumps(report, indent=2, ensure_ascii=False, allow_nan=False, default=lambda v: None))
            else:
                say(render_crowded(report))
            return
        report = evaluate(db, phase_class=phase_class, noise=noise, window=window).to_dict()
        if as_json:
            say(json.dumps(report, indent=2, ensure_ascii=False, allow_nan=False, default=lambda v: None))
            return
        say(render(report))


def _pct(v) -> str:
    return "-" if v is None else f"{100 * v:.1f} %"


def render(report: dict) -> str:
    from matcher.report.terminal import format_table

    rows = []
    for cls, r in report["classes"].items():
        q = r.get("queries", {})
        mi = r.get("with_mol_ion", {})
        rows.append([cls, r.get("entries", 0), q.get("leave_one_out", 0), _pct(r.get("top1")), _pct(r.get("top3")),
                     _pct(mi.get("top1")), _pct(r.get("coverage")),
                     "-" if r.get("ece") is None else f"{r['ece']:.3f}", _pct(r.get("not_in_library_detection"))])
    out = [format_table(["class", "entries", "held out", "first", "in top 3", "first with M+", "in window",
                         "probability error", "not in library answered"], rows, align="lrrrrrrrr")]
    for cls, r in report["classes"].items():
        pairs = r.get("confusable_pairs") or []
        if pairs:
            out.append(f"\n{cls}: pairs inside each other's window with the same nominal mass (need a second column or a standard)")
            out.append(format_table(["compound", "index", "compound", "index", "gap", "mass"],
                                    [[p["a"], p["ri_a"], p["b"], p["ri_b"], p["gap"], p["nominal_mass"]] for p in pairs[:10]],
                                    align="lrlrrr"))
    spec = report.get("with_spectra")
    if spec:
        q = spec["queries_with_spectrum"]
        out.append("\nwith spectra (index and spectrum, no molecular ion; a held-out replicate spectrum per query):")
        out.append(format_table(["", "first", "in top 3", "calibration error", "absent detected"],
                                [["index only", _pct(report.get("top1")), _pct(report.get("top3")),
                                  "-" if report.get("ece") is None else f"{report['ece']:.3f}",
                                  _pct(report.get("not_in_library_detection"))],
                                 ["with spectra", _pct(spec.get("top1")), _pct(spec.get("top3")),
                                  "-" if spec.get("ece") is None else f"{spec['ece']:.3f}",
                                  _pct(spec.get("not_in_library_detection"))]], align="lrrrr"))
        out.append(f"queries carrying a spectrum: {q['leave_one_out']} held out, {q['removed']} removed "
                   "(a compound with a single spectrum is queried without one)")
    out.append(f"\nnoise added: {report['noise']:g} index units; queries: {report['queries']['leave_one_out']} held out, "
               f"{report['queries']['removed']} removed")
    return "\n".join(out)


def render_crowded(report: dict) -> str:
    from matcher.report.terminal import format_table

    rows = []
    for cls, r in report["classes"].items():
        for how in ("plain", "adaptive"):
            e = r[how]
            if "peaks" not in e:
                continue
            rows.append([cls, how, e["peaks"], e["removed"], e["confident_calls"], _pct(e["confident_precision"]),
                         _pct(e["listed_first"]), f"{e['mean_top_probability_removed']:.3f}", f"{e['ece']:.3f}"])
    return (format_table(["class", "screen", "peaks", "not in library", "calls p>=0.9", "of them right", "listed first",
                          "mean p of not in library", "probability error"], rows, align="llrrrrrrr")
            + f"\nrun shifted by {report['offset']:+g} index units; every other compound along the scale removed from the library")
