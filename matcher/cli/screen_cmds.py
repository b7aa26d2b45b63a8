"""``matcher screen``: every peak of one or more runs against the house library."""

from __future__ import annotations

from typing import Annotated, List, Optional

import typer

from matcher import CAUTION
from matcher.cli.common import CLASS_HELP, DbOption, note, parse_map, say

EXAMPLE = """
Examples

  A run with retention times, converted with the batch ladder:

    matcher screen run-042.csv --ladder alkanes.csv --class slightly-polar -o shortlist.csv --report run-042.html

  A batch of three runs, each with its own saved calibration, corrected adaptively:

    matcher screen a.csv b.csv c.csv --calibration a.json --calibration b.json --calibration c.json
        --class polar --adaptive -o batch.json

  A peak table whose time column is called 'Ret.Time':

    matcher screen export.csv --ladder alkanes.csv --class nonpolar --map rt=Ret.Time -o out.xlsx

  A run with its peaks' mass spectra (JCAMP-DX blocks titled by peak id), compared with the library's spectra:

    matcher screen run-042.csv --ladder alkanes.csv --spectra run-042.jdx --class slightly-polar -o shortlist.csv
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "screen",
        help="Shortlist every peak of one or more runs against the house library and flag what needs review. "
        "A peak table with an 'ri' column needs no ladder or calibration.\n\n" + CAUTION,
        epilog=EXAMPLE,
    )
    def screen_cmd(
        peaks: Annotated[List[str], typer.Argument(metavar="PEAKS.csv...", help="Peak table(s): CSV, TSV or XLSX; one per run.")],
        phase_class: Annotated[str, typer.Option("--class", metavar="CLASS", help=CLASS_HELP)],
        out: Annotated[str, typer.Option("-o", "--out", metavar="OUT", help="Shortlist file: .csv, .json or .xlsx.")],
        calibration: Annotated[Optional[List[str]], typer.Option("--calibration", metavar="CAL.json", help="Saved calibration (from 'matcher calibrate'); once for all runs or once per run.")] = None,
        ladder: Annotated[Optional[List[str]], typer.Option("--ladder", metavar="LADDER.csv", help="Ladder CSV to calibrate with; once for all runs or once per run.")] = None,
        mode: Annotated[str, typer.Option(metavar="MODE", help="Ladder mode when --ladder is given: programmed or isothermal.")] = "programmed",
        dead_time: Annotated[Optional[float], typer.Option("--dead-time", metavar="MIN", help="Hold-up time in minutes (isothermal ladders).")] = None,
        rt_unit: Annotated[Optional[str], typer.Option("--rt-unit", metavar="UNIT", help="Unit of retention times: min or s (default: read from the header, else minutes).")] = None,
        header_map: Annotated[Optional[List[str]], typer.Option("--map", metavar="COLUMN=HEADER", help="Name a column yourself: column=header, e.g. --map rt='Ret.Time' (repeatable).")] = None,
        report: Annotated[Optional[str], typer.Option("--report", metavar="REPORT.html", help="Also write a self-contained HTML report here.")] = None,
        top: Annotated[Optional[int], typer.Option(metavar="K", help="Keep at most this many candidates per peak.")] = None,
        window: Annotated[Optional[float], typer.Option(metavar="UNITS", help="Half-width of the window in index units (default: the class default).")] = None,
        window_percent: Annotated[Optional[float], typer.Option("--window-percent", metavar="PCT", help="Half-width as a percentage of the index instead.")] = None,
        adaptive: Annotated[bool, typer.Option("--adaptive", help="Correct each run's indices from its confident matches (Zenkevich 2025) and estimate its own scatter.")] = False,
        anchors: Annotated[Optional[str], typer.Option("--anchors", metavar="ANCHORS.csv", help="CSV naming known peaks (columns peak and name or ri) to use as anchors instead.")] = None,
        fallback: Annotated[bool, typer.Option("--fallback", help="Look in the neighbouring class for peaks with no good candidate.")] = False,
        homologues: Annotated[bool, typer.Option("--homologues", help="Propose missing members of homologous series (flagged predicted).")] = False,
        sd: Annotated[Optional[float], typer.Option("--sd", metavar="UNITS", help="Index scatter of your runs (default: 0.3 x the class window; estimated with --adaptive).")] = None,
        crowding: Annotated[Optional[str], typer.Option("--crowding", metavar="TYPE|N", help="How crowded the sample is with compounds not in the library, as a prior: sparse, moderate (default), crowded, dense, or unlisted peaks per 100 index units. The run's own peaks refine it.")] = None,
        split_peaks: Annotated[bool, typer.Option("--split-peaks", help="Let one compound explain several peaks (split or overloaded peaks); by default a compound explains at most one peak of a run.")] = False,
        spectra: Annotated[Optional[List[str]], typer.Option("--spectra", metavar="RUN.jdx", help="The peaks' mass spectra: a JCAMP-DX file per run (in the order of the runs), each block titled by its peak id. A 'spectrum' column of the peak table is read without it.")] = None,
        quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress bar and no summary.")] = False,
        db: DbOption = None,
    ) -> None:
        import sys

        from matcher.api import screen
        from matcher.io.atomic import guard_outputs
        from matcher.rules import check_report_path, check_shortlist_path
        from matcher.report.files import sidecar_path, write_results

        check_shortlist_path(out)  # before the work: nothing is screened for a file that cannot be written
        if report is not None:
            check_report_path(report)
        csv_out = out.lower().endswith(".csv")
        outputs = [("-o", out)] + ([("-o (its provenance sidecar)", str(sidecar_path(out)))] if csv_out else [])
        guard_outputs(outputs + [("--report", report)], db=db,
                      inputs=[("the peak table", p) for p in peaks] + [("the calibration", c) for c in calibration or []]
                      + [("the ladder", x) for x in ladder or []] + [("the anchors file", anchors)]
                      + [("the spectra file", x) for x in spectra or []])

        bar = None
        progress = None
        if not quiet and sys.stderr.isatty():
            bar = typer.progressbar(length=1, label="screening", file=sys.stderr)
            bar.__enter__()
            seen = [0]

            def progress(k: int) -> None:  # noqa: F811 - the callback given to the engine
                seen[0] += k
                bar.length = max(bar.length, seen[0])
                bar.update(k)
        try:
            result = screen(peaks, phase_class=phase_class, library=db, calibration=calibration, ladder=ladder, mode=mode,
                            dead_time=dead_time, rt_unit=rt_unit, header_map=parse_map(header_map) or None,
                            window=window, window_percent=window_percent, top=top, fallback=fallback,
                            homologues=homologues, adaptive=adaptive, anchors=anchors, measurement_sd=sd,
                            crowding=crowding, split_peaks=split_peaks, spectra=spectra or None, progress=progress)
        finally:
            if bar is not None:
                bar.__exit__(None, None, None)
        written = write_results(result, out)
        if report:
            from matcher.report.html import write_report

            write_report(result, report)
            written = list(written) + [report]
        if not quiet:
            say(summary(result))
            for p in written:
                say(f"wrote {p}")
            say("")
            say(CAUTION)
        for run in result.runs:
            for n in run.notices:
                if n:
                    note(f"{run.label}: {n}")


def summary(result) -> str:
    """A short per-run table: peaks, with a candidate, ranked first with p ≥ 0.9, to review."""
    from matcher.identify.flags import has_flag
    from matcher.report.terminal import format_table

    rows = []
    for run in result.runs:
        t = run.table
        first = t[t["rank"] == 1]
        peaks = t["peak"].nunique()
        review = t.loc[has_flag(t["flags"].to_numpy(), "review"), "peak"].nunique()
        corr = run.correction
        corr_text = "-" if not corr else (f"a={corr['a']:+.4f} b={corr['b']:+.2f}" if corr.get("applied") else "skipped")
        rows.append([run.label, peaks, int(len(first)), int((first["probability"] >= 0.9).sum()), review,
                     f"{run.measurement_sd:.2f}" if run.measurement_sd is not None else "-", corr_text])
    return format_table(["run", "peaks", "with candidate", "confident (p>=0.9)", "to review", "index sd", "adaptive fit"],
                        rows, align="lrrrrrl")
