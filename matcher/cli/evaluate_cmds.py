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
    matcher evaluate --class slightly-polar --second-class polar --runs 20 --seed 7

The last one is the two-column check: on the compounds your library lists on both
classes it simulates crowded runs of one injection split to both columns (a third
of each sample taken out of the library), screens each on the first column alone
and on both, and compares first-candidate rates, the pairing of the two runs'
peaks and how honest the probabilities are.
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
        second_class: Annotated[Optional[str], typer.Option("--second-class", metavar="CLASS", help="Two-column check: simulate runs of one sample on --class and on this class and screen them on one column and on both (needs compounds listed on both classes; --noise is then the run scatter on both columns, 0 = each class's default).")] = None,
        runs: Annotated[Optional[int], typer.Option(metavar="N", help="With --second-class: simulated runs (default 20).")] = None,
        seed: Annotated[Optional[int], typer.Option(metavar="N", help="With --second-class: seed of the simulation (the same seed gives the same numbers).")] = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import evaluate
        from matcher.errors import MatcherError
        from matcher.rules import check_noise

        noise = check_noise(noise)
        if second_class is not None:
            if crowded:
                raise MatcherError("--crowded and --second-class are two different checks: give one")
            doc = evaluate(db, phase_class=phase_class, noise=noise, window=window, second_class=second_class,
                           runs=runs, seed=seed).to_dict()
            if as_json:
                say(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False, default=lambda v: None))
            else:
                say(render_two_columns(doc))
            return
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
        for how in ("plain", "adaptive", "spectra"):
            e = r.get(how) or {}
            if "peaks" not in e:
                continue
            rows.append([cls, how, e["peaks"], e["removed"], e["confident_calls"], _pct(e["confident_precision"]),
                         _pct(e["listed_first"]), f"{e['mean_top_probability_removed']:.3f}", f"{e['ece']:.3f}"])
    return (format_table(["class", "screen", "peaks", "not in library", "calls p>=0.9", "of them right", "listed first",
                          "mean p of not in library", "probability error"], rows, align="llrrrrrrr")
            + f"\nrun shifted by {report['offset']:+g} index units; every other compound along the scale removed from the library"
            + ("; 'spectra': the plain screen with a spectrum per peak drawn from the library's own (a held-out replicate, "
               "or a removed compound's spectrum) instead of the molecular ion"
               if any("spectra" in r for r in report["classes"].values()) else ""))


def _p(v) -> str:
    return "-" if v is None else f"{v:.3f}"


def render_two_columns(doc: dict) -> str:
    """The two-column check (``evaluate --second-class``) as text: one column against two, pairing, flags, reliability."""
    from matcher.report.terminal import format_table

    a, b = doc["class"], doc["second_class"]
    head = f"two-column check: {a} with {b}; {doc['compounds_on_both']} compounds listed on both classes"
    if doc.get("notice"):
        return head + "\n" + doc["notice"]
    one, two = doc["one_column"], doc["two_columns"]
    rows = [[label, _pct(r["top1"]), r["confident_calls"], _pct(r["confident_precision"]),
             _p(r["mean_top_probability_unlisted"]), _p(r["ece"]), _p(r["overconfidence"])]
            for label, r in ((f"{a} alone", one), (f"{a} + {b}", two))]
    out = [head, f"{doc['runs']} simulated runs, {doc['peaks']} peaks ({doc['unlisted_peaks']} not in library), "
                 f"seed {doc['seed']}", "",
           format_table(["screen", "listed first", "calls p>=0.9", "of them right", "mean p of not in library",
                         "probability error", "of it over-confident"], rows, align="lrrrrrr")]
    out.append(f"\npairing: {_pct(two['pairing_accuracy'])} of the peaks paired with their own peak of the {b} run "
               f"(listed {_pct(two['pairing_accuracy_listed'])}, not in library {_pct(two['pairing_accuracy_unlisted'])}); "
               f"{_pct(two['paired'])} paired at all")
    out.append(f"wrong first candidates flagged second-column-disagrees: {_pct(two['wrong_top_flagged'])} of "
               f"{two['wrong_top']}; right ones flagged: {_pct(two['right_top_flagged'])} of {two['right_top']}")
    bins = {}
    for key, r in (("one", one), ("two", two)):
        for x in r["reliability"]:
            bins.setdefault((x["from"], x["to"]), {})[key] = x
    rel = []
    for (lo, hi), v in sorted(bins.items()):
        cells = [f"{lo:.1f}-{hi:.1f}"]
        for key in ("one", "two"):
            x = v.get(key)
            cells += ["-", "-", "-"] if x is None else [x["peaks"], f"{x['mean_probability']:.3f}", _pct(x["hit_rate"])]
        rel.append(cells)
    out.append("\nreliability of the first candidate's probability (peaks, mean probability, share right):")
    out.append(format_table(["probability", "peaks", "mean", "right", "peaks (2)", "mean (2)", "right (2)"], rel,
                            align="lrrrrrr"))
    s = doc["settings"]
    scatter = ", ".join(f"{k} {v:g}" for k, v in s["run_scatter"].items())
    out.append(f"\nrun scatter (index units): {scatter}; each peak also scatters by its entry's own spread; "
               f"areas split {s['split_range'][0]:g}-{s['split_range'][1]:g} to the second column with "
               f"{100 * s['area_scatter']:.0f} % scatter per peak. (2) = with the second column. Simulated runs "
               "flatter a real one (every compound gives a peak on both columns).")
    return "\n".join(out)
