"""``matcher screen``: every peak of one or more runs against the house library."""

from __future__ import annotations

import math
from typing import Annotated, List, Optional

import typer

from matcher import CAUTION
from matcher.cli.common import CLASS_HELP, DbOption, MinSnrOption, note, parse_map, say

EXAMPLE = """
Examples

  A run with retention times, converted with the batch ladder:

    matcher screen run-042.csv --ladder alkanes.csv --class slightly-polar -o shortlist.csv --report run-042.html

  A batch of three runs, each with its own saved calibration, corrected adaptively:

    matcher screen a.csv b.csv c.csv --calibration a.json --calibration b.json --calibration c.json
        --class polar --adaptive -o batch.json

  Two runs of different samples in one batch, with the facts for the QC record (an export's preamble fills
  what is not given):

    matcher screen lot7-phenyl.csv lot8-peg.csv --calibration phenyl.json --calibration peg.json
        --class slightly-polar --class polar --sample "lot 7" --analyst ana --instrument "GC-2"
        --column "5 % phenyl 30 m x 0.25 mm x 0.25 um" -o lot7.xlsx --report lot7.html

  One sample on two columns of different polarity (one injection split to both), confirmed jointly: each
  peak of the first run is paired with a peak of the second and scored with both indices:

    matcher screen lot7-phenyl.csv --ladder alkanes-phenyl.csv --class slightly-polar
        --second lot7-peg.csv --second-ladder alkanes-peg.csv --second-class polar -o lot7.csv --report lot7.html

  A peak table whose time column has a header of its own:

    matcher screen export.csv --ladder alkanes.csv --class nonpolar --map rt="Time of apex" -o out.json

  The GC-MS run file itself (ASTM E2077 netCDF or mzML), calibrated with the ladder's run:

    matcher calibrate alkanes_0514.cdf -o cal.json
    matcher screen run-042.cdf --calibration cal.json --class nonpolar -o shortlist.csv --report run-042.html

  A run with its peaks' mass spectra (JCAMP-DX blocks titled by peak id), compared with the library's spectra:

    matcher screen run-042.csv --ladder alkanes.csv --spectra run-042.jdx --class slightly-polar -o shortlist.csv
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "screen",
        help="Shortlist every peak of one or more runs against the house library and flag what needs review. "
        "A run is a peak table or the GC-MS run file itself (ASTM E2077 netCDF or mzML, told by content), whose "
        "peaks, spectra and molecular-ion hints are detected. "
        "A peak table with an 'ri' column needs no ladder or calibration.\n\n" + CAUTION,
        epilog=EXAMPLE,
    )
    def screen_cmd(
        peaks: Annotated[List[str], typer.Argument(metavar="PEAKS.csv|RUN...", help="Peak table(s) (CSV, TSV or XLSX) or GC-MS run files (ASTM E2077 netCDF, mzML); one per run, mixed freely.")],
        phase_class: Annotated[List[str], typer.Option("--class", metavar="CLASS", help=CLASS_HELP + " Once for all runs or once per run, in order.")],
        out: Annotated[Optional[str], typer.Option("-o", "--output", metavar="OUT", help="Shortlist file: .csv, .json or .xlsx (required).", show_default=False)] = None,
        calibration: Annotated[Optional[List[str]], typer.Option("--calibration", metavar="CAL.json", help="Saved calibration (from 'matcher calibrate'); once for all runs or once per run.")] = None,
        ladder: Annotated[Optional[List[str]], typer.Option("--ladder", metavar="LADDER.csv", help="Ladder CSV, or the ladder's run file, to calibrate with; once for all runs or once per run.")] = None,
        mode: Annotated[str, typer.Option(metavar="MODE", help="Ladder mode when --ladder is given: programmed or isothermal.")] = "programmed",
        dead_time: Annotated[Optional[float], typer.Option("--dead-time", metavar="MIN", help="Hold-up time in minutes (isothermal ladders).")] = None,
        rt_unit: Annotated[Optional[str], typer.Option("--rt-unit", metavar="UNIT", help="Unit of retention times: min or s (default: read from the header, else minutes).")] = None,
        header_map: Annotated[Optional[List[str]], typer.Option("--map", metavar="COLUMN=HEADER", help="Name a column yourself: column=header, e.g. --map rt='Time of apex' (repeatable).")] = None,
        report: Annotated[Optional[str], typer.Option("--report", metavar="REPORT.html", help="Also write a self-contained HTML report here.")] = None,
        top: Annotated[Optional[int], typer.Option(metavar="K", help="Keep at most this many candidates per peak.")] = None,
        window: Annotated[Optional[float], typer.Option(metavar="UNITS", help="Half-width of the window in index units (default: the class default).")] = None,
        window_percent: Annotated[Optional[float], typer.Option("--window-percent", metavar="PCT", help="Half-width as a percentage of the index instead.")] = None,
        adaptive: Annotated[bool, typer.Option("--adaptive", help="Correct each run's indices from its confident matches (Zenkevich 2025) and estimate its own scatter.")] = False,
        anchors: Annotated[Optional[str], typer.Option("--anchors", metavar="ANCHORS.csv", help="CSV naming known peaks (columns peak and name or ri) to use as anchors instead.")] = None,
        fallback: Annotated[bool, typer.Option("--fallback", help="Look in the neighbouring class for peaks with no good candidate.")] = False,
        homologues: Annotated[bool, typer.Option("--homologues", help="Propose missing members of homologous series (flagged predicted).")] = False,
        sd: Annotated[Optional[float], typer.Option("--index-scatter", metavar="UNITS", help="Index scatter of your runs: the standard deviation of a measured index around its true value (default: 0.3 x the class window; estimated with --adaptive).")] = None,
        old_sd: Annotated[Optional[float], typer.Option("--sd", hidden=True, metavar="UNITS")] = None,
        old_out: Annotated[Optional[str], typer.Option("--out", hidden=True, metavar="OUT")] = None,
        crowding: Annotated[Optional[str], typer.Option("--crowding", metavar="TYPE|N", help="How crowded the sample is with compounds not in the library, as a prior: sparse, moderate (default), crowded, dense, or unlisted peaks per 100 index units. The run's own peaks refine it.")] = None,
        split_peaks: Annotated[bool, typer.Option("--split-peaks", help="Let one compound explain several peaks (split or overloaded peaks); by default a compound explains at most one peak of a run.")] = False,
        min_snr: MinSnrOption = None,
        spectra: Annotated[Optional[List[str]], typer.Option("--spectra", metavar="RUN.jdx", help="The peaks' mass spectra: a JCAMP-DX file per run (in the order of the runs), each block titled by its peak id. A 'spectrum' column of the peak table is read without it.")] = None,
        quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress bar and no summary.")] = False,
        sample: Annotated[Optional[str], typer.Option("--sample", metavar="SAMPLE", help="Sample or lot, for the QC record (default: from the peak table's preamble).")] = None,
        analyst: Annotated[Optional[str], typer.Option("--analyst", metavar="WHO", help="Who ran and reviewed the screen, for the QC record.")] = None,
        instrument: Annotated[Optional[str], typer.Option("--instrument", metavar="INSTRUMENT", help="The GC (and detector) the run was made on, for the QC record.")] = None,
        column: Annotated[Optional[str], typer.Option("--column", metavar="COLUMN", help="The column: phase, length x inner diameter x film, for the QC record.")] = None,
        second: Annotated[Optional[str], typer.Option("--second", metavar="PEAKS.csv|RUN", help="The same sample run on a second column of another polarity (two-column confirmation): its peaks are paired with the first run's and every peak is scored with both indices. Needs --second-class.")] = None,
        second_class: Annotated[Optional[str], typer.Option("--second-class", metavar="CLASS", help="Polarity class of the second column.")] = None,
        second_calibration: Annotated[Optional[str], typer.Option("--second-calibration", metavar="CAL.json", help="Saved calibration of the second column.")] = None,
        second_ladder: Annotated[Optional[str], typer.Option("--second-ladder", metavar="LADDER.csv", help="Ladder CSV, or the ladder's run file, of the second column.")] = None,
        second_spectra: Annotated[Optional[str], typer.Option("--second-spectra", metavar="RUN.jdx", help="The second run's peak spectra (JCAMP-DX blocks titled by peak id); used to pair the peaks.")] = None,
        db: DbOption = None,
    ) -> None:
        import sys

        from matcher.errors import MatcherError

        if out is not None and old_out is not None and out != old_out:
            raise MatcherError("give the shortlist file once: -o/--output OUT")
        out = out if out is not None else old_out
        if out is None:
            raise MatcherError("where should the shortlist go? give -o/--output OUT (.csv, .json or .xlsx)")
        sd = old_sd if sd is None else sd

        from matcher.api import screen

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
            result = screen(peaks, phase_class=phase_class[0] if len(phase_class) == 1 else phase_class, library=db, calibration=calibration, ladder=ladder, mode=mode,
                            dead_time=dead_time, rt_unit=rt_unit, header_map=parse_map(header_map) or None,
                            window=window, window_percent=window_percent, top=top, fallback=fallback,
                            homologues=homologues, adaptive=adaptive, anchors=anchors, index_scatter=sd,
                            crowding=crowding, split_peaks=split_peaks, sample=sample, analyst=analyst,
                            instrument=instrument, column=column, spectra=spectra or None, progress=progress, min_snr=min_snr,
                            output=out, report=report, second=second, second_class=second_class,
                            second_calibration=second_calibration, second_ladder=second_ladder,
                            second_spectra=second_spectra)
        finally:
            if bar is not None:
                bar.__exit__(None, None, None)
        from matcher.io.result_files import sidecar_path

        written = [out] + ([str(sidecar_path(out))] if out.lower().endswith(".csv") else []) + ([report] if report else [])
        if not quiet:
            say(summary(result))
            for run in result.runs:
                if run.second:
                    say(pairing_line(run))
            for p in written:
                say(f"wrote {p}")
            say("")
            say(CAUTION)
        for run in result.runs:
            for n in run.notices:
                if n:
                    note(f"{run.label}: {n}")


def pairing_line(run) -> str:
    """One line on a two-column run's pairing: how many peaks paired, the split factor of the areas."""
    two, info = run.second, run.second.get("pairing") or {}
    area = info.get("area")
    return (f"{run.label} + {two['label']} ({two['class']}): {info.get('paired', 0)} of {run.peak_count} peaks paired, "
            f"{info.get('uncertain_pairs', 0)} of them uncertain (pair probability < 0.9); "
            f"{info.get('unpaired_second', 0)} peak(s) of the second run unpaired"
            + (f"; area ratio second/first {math.exp(area['log_factor']):.3g}" if area else ""))


def summary(result) -> str:
    """A short per-run table: peaks, with a candidate, ranked first with p ≥ 0.9, to review."""
    from matcher.report.summary import summary_of
    from matcher.report.terminal import format_table

    rows = []
    for run in result.runs:
        s = summary_of(run)
        corr = run.correction
        corr_text = "-" if not corr else (f"ΔRI = {corr['slope']:+.4f}·RI {corr['offset']:+.2f}" if corr.get("applied") else "not applied")
        rows.append([run.label, s["peaks"], s["with_candidates"], s["confident"], s["review"],
                     f"{run.index_scatter:.2f}" if run.index_scatter is not None else "-", corr_text])
    return format_table(["run", "peaks", "with candidate", "confident (p>=0.9)", "to review", "index scatter",
                         "adaptive fit (measured - library)"],
                        rows, align="lrrrrrl")
