"""``matcher query``: the ranked shortlist for one unknown index."""

from __future__ import annotations

import json
from typing import Annotated, List, Optional

import typer

from matcher import CAUTION
from matcher.cli.common import CLASS_HELP, DbOption, JsonFlag, say

EXAMPLE = """
Example: a peak at index 1031 on a 5 % phenyl column with molecular ion 136

    matcher query 1031 --class slightly-polar --mol-ion 136

    matcher query 1031 --class slightly-polar --ions "68 93 136" --hit limonene --hit-match 88 --json

  With the peak's mass spectrum (a JCAMP-DX file of one block), compared with the library's spectra:

    matcher query 1031 --class slightly-polar --spectrum peak-17.jdx

  The same unknown measured on two columns of different polarity, scored with both indices:

    matcher query 1031 --class slightly-polar --second-ri 1211 --second-class polar
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "query",
        help="Rank library candidates for one retention index inside the class's tolerance window.\n\n"
        + CAUTION,
        epilog=EXAMPLE,
    )
    def query_cmd(
        ri: Annotated[float, typer.Argument(metavar="RI", help="Retention index of the unknown.")],
        phase_class: Annotated[str, typer.Option("--class", metavar="CLASS", help=CLASS_HELP)],
        window: Annotated[Optional[float], typer.Option(metavar="UNITS", help="Half-width of the window in index units (default: the class default).")] = None,
        window_percent: Annotated[Optional[float], typer.Option("--window-percent", metavar="PCT", help="Half-width as a percentage of the index instead.")] = None,
        mol_ion: Annotated[Optional[float], typer.Option("--mol-ion", metavar="M/Z", help="Nominal m/z of the molecular ion.")] = None,
        ions: Annotated[Optional[List[str]], typer.Option(metavar="IONS", help="Key ions seen in the spectrum, e.g. --ions '93 136' (repeatable).")] = None,
        hit: Annotated[Optional[str], typer.Option(metavar="NAME", help="Name proposed by your spectral search.")] = None,
        hit_match: Annotated[Optional[float], typer.Option("--hit-match", metavar="0-100", help="How well the spectrum matched that hit, 0-100 (your search program's match value).")] = None,
        top: Annotated[Optional[int], typer.Option(metavar="K", help="Show at most this many candidates.")] = None,
        fallback: Annotated[bool, typer.Option("--fallback", help="Also look in the neighbouring class when nothing good is found.")] = False,
        homologues: Annotated[bool, typer.Option("--homologues", help="Propose missing members of homologous series (flagged predicted).")] = False,
        sd: Annotated[Optional[float], typer.Option("--index-scatter", metavar="UNITS", help="Index scatter of your measurement: the standard deviation of a measured index around its true value (default: 0.3 x the class window).")] = None,
        old_sd: Annotated[Optional[float], typer.Option("--sd", hidden=True, metavar="UNITS")] = None,
        old_hit: Annotated[Optional[float], typer.Option("--hit-score", hidden=True, metavar="0-100")] = None,
        crowding: Annotated[Optional[str], typer.Option("--crowding", metavar="TYPE|N", help="How crowded the sample is with compounds not in the library: sparse, moderate (default), crowded, dense, or unlisted peaks per 100 index units.")] = None,
        spectrum: Annotated[Optional[str], typer.Option("--spectrum", metavar="ONE.jdx", help="The peak's mass spectrum: a JCAMP-DX file with one block; compared with the library's reference spectra.")] = None,
        second_ri: Annotated[Optional[float], typer.Option("--second-ri", metavar="RI", help="The unknown's index on a second column of another polarity (needs --second-class); both indices are scored jointly.")] = None,
        second_class: Annotated[Optional[str], typer.Option("--second-class", metavar="CLASS", help="Polarity class of the second column.")] = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import query

        sd = old_sd if sd is None else sd
        hit_match = old_hit if hit_match is None else hit_match

        result = query(ri, phase_class, library=db, window=window, window_percent=window_percent, mol_ion=mol_ion,
                       ions=ions or None, hit=hit, hit_match=hit_match, top=top, fallback=fallback,
                       homologues=homologues, index_scatter=sd, crowding=crowding, spectrum=spectrum,
                       second_ri=second_ri, second_class=second_class)
        doc = result.to_dict()
        if as_json:
            say(json.dumps(doc, indent=2, ensure_ascii=False))
            return
        say(render(doc))


def render(doc: dict) -> str:
    from matcher.report.terminal import format_table

    w = doc["window"]
    two = (doc.get("model") or {}).get("second")
    head = (f"index {doc['ri']:g} on {doc['class']}, window ±{w['half_width']:g}"
            + (f"; index {two['ri']:g} on {two['class']}, window ±{two['half_width']:g}" if two else "")
            + f"; {doc['candidates_in_window']} candidate(s) in window")
    if not doc["candidates"]:
        body = "no library entry inside the window (not in library: 1.00)"
    else:
        spectral = any(c.get("spectrum_similarity") is not None for c in doc["candidates"])
        def num(v, fmt):
            return "-" if v is None else format(v, fmt)

        rows = [[c["rank"], c["name"], f"{c['library_ri']:.1f}", f"{c['delta_ri']:+.1f}"]
                + ([num(c.get("second_library_ri"), ".1f"), num(c.get("second_delta_ri"), "+.1f")] if two else [])
                + [f"{c['probability']:.3f}"]
                + ([("-" if c.get("spectrum_similarity") is None else f"{c['spectrum_similarity']:.3f}")] if spectral else [])
                + [";".join(c["flags"])] for c in doc["candidates"]]
        heads = (["rank", "name", "library RI", "ΔRI"] + (["second library RI", "second ΔRI"] if two else [])
                 + ["probability"] + (["spectrum"] if spectral else []) + ["flags"])
        body = format_table(heads, rows, align="rlrr" + ("rr" if two else "") + "r" + ("r" if spectral else "") + "l")
        body += f"\nnot in library: {doc['not_in_library']:.3f}"
    notes = "".join(f"\nnote: {n}" for n in doc["notes"])
    return f"{head}\n\n{body}{notes}\n\n{doc['caution']}"
