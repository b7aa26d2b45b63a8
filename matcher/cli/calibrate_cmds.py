"""``matcher calibrate`` (fit and check a ladder) and ``matcher ri`` (times to indices)."""

from __future__ import annotations

from typing import Annotated, List, Optional

import typer

from matcher.cli.common import JsonFlag, MinSnrOption, emit_data, note, parse_map, say

CALIBRATE_EXAMPLE = """\b
Example (the distillery lab's n-alkane ladder, programmed oven):
    matcher calibrate alkanes_2024-05-14.csv -o cal.json
\b
Isothermal run, hold-up time by least squares (the default there):
    matcher calibrate alkanes_iso.csv --mode isothermal -o cal_iso.json
\b
Ladder file (times in minutes unless --rt-unit s or the header says [s]):
    rt,carbons,name
    4.12,8,octane
    6.30,9,nonane
\b
The ladder's own GC-MS run (ASTM E2077 netCDF or mzML): the n-alkanes are found
and numbered from their molecular ions (14n + 2), or give the first and last:
    matcher calibrate alkanes_0514.cdf -o cal.json
    matcher calibrate alkanes_0514.cdf --carbons 8-20 -o cal.json
"""

RI_EXAMPLE = """\b
Example: convert three times, or a whole peak table to a CSV file
    matcher ri --calibration cal.json 5.21 7.80 12.03
    matcher ri --calibration cal.json --peaks run_0514.csv -o run_0514_ri.csv
\b
Output columns: peak, rt, ri, extrapolated (true for times outside the ladder,
computed from the nearest pair of standards).
"""


def qc_table(cal) -> str:
    """The ladder's QC table, one row per standard."""
    from matcher.report.terminal import format_table
    from matcher.report.wording import format_time

    qc = cal.qc
    ratio = [None] + list(qc["spacing_ratio"])
    rows = []
    for k in range(len(cal.rt)):
        fit = qc["fit_residual"][k] if qc["fit_residual"] else None
        given = cal.rt_decimals[k] if k < len(cal.rt_decimals or []) else None
        rows.append([cal.names[k], format_time(cal.rt[k], given), round(float(cal.index[k]), 2),
                     None if ratio[k] is None else round(ratio[k], 2),
                     None if qc["loo_residual"][k] is None else round(qc["loo_residual"][k], 1),
                     None if fit is None else round(fit, 2), qc["flags"][k]])
    headers = ["standard", "time (min)", "index", "spacing vs trend", "leave-one-out dev.", "line dev.", "check"]
    if cal.mode != "isothermal":
        headers.pop(5)
        rows = [r[:5] + r[6:] for r in rows]
        align = "lrrrrl"
    else:
        align = "lrrrrrl"
    return format_table(headers, rows, align=align)


def found_table(cal) -> str:
    """The alkanes found in a ladder run: peak, apex time, carbon number and how it was known."""
    from matcher.report.terminal import format_table

    run = cal.source["run"]
    rows = [[t["peak"], round(t["rt"], 4), f"C{t['carbons']}", t["carbons_from"],
             "" if t.get("mol_ion") is None else t["mol_ion"]] for t in run["taken"]]
    head = (f"run file: {run['format']}, {run['scans']} scans, {run['peaks_detected']} peaks detected, "
            f"{run['alkane_like']} with an n-alkane spectrum, {len(run['taken'])} taken")
    return head + "\n" + format_table(["peak", "apex (min)", "alkane", "numbered from", "M+ seen"], rows,
                                      align="lrlll")


def summary(cal) -> str:
    from matcher.report.wording import format_time, gap_text
    from matcher.retention.calibration import FORMULA
    from matcher.retention.series import SERIES

    lo, hi = cal.index_range
    t0, t1 = cal.rt_range
    lines = [
        f"series: {SERIES[cal.series].label} ({SERIES[cal.series].scale}); {len(cal.rt)} standards",
        f"mode: {cal.mode} ({FORMULA[cal.mode]})",
        f"covers index {lo:g} to {hi:g} ({format_time(t0)} to {format_time(t1)} min); outside that, indices are extrapolated and flagged",
        f"ladder times in {cal.source.get('rt_unit', 'min')}, decided by {cal.source.get('rt_unit_source', '')}",
    ]
    if cal.holdup is not None:
        use = "" if cal.holdup_used else " (recorded only; it cancels in programmed mode)"
        lines.append(f"hold-up time: {cal.holdup.value:.4f} min, method {cal.holdup.method}: {cal.holdup.detail}{use}")
    for gap in cal.qc.get("gaps", []):
        lines.append(f"gap: {gap_text(gap)}")
    return "\n".join(lines)


def register(app: typer.Typer) -> None:
    @app.command(
        "calibrate",
        help="Fit and check a reference ladder (n-alkanes, FAMEs, PAHs or your own series), print its QC table "
        "and save the calibration for 'matcher ri' and 'matcher screen'. The ladder is a table, or the ladder's "
        "GC-MS run file, in which the n-alkanes are found. A ladder whose times go backwards, with "
        "duplicate or fractional chain lengths, or with fewer than two standards is refused and nothing is written.",
        epilog=CALIBRATE_EXAMPLE,
    )
    def calibrate_cmd(
        ladder: Annotated[str, typer.Argument(metavar="LADDER", help="Ladder CSV (or .xlsx): rt plus carbons or index, optional name; or the ladder's run file (ASTM E2077 netCDF, mzML).")],
        output: Annotated[str, typer.Option("-o", "--output", metavar="OUT", help="Where to save the calibration (JSON).")],
        mode: Annotated[str, typer.Option("--mode", metavar="MODE", help="programmed (van den Dool & Kratz) or isothermal (Kovats).")] = "programmed",
        dead_time: Annotated[Optional[float], typer.Option("--dead-time", metavar="MIN", help="Hold-up time in minutes, if you know it.")] = None,
        marker: Annotated[Optional[float], typer.Option("--marker", metavar="MIN", help="Time in minutes of an unretained marker peak (e.g. methane).")] = None,
        holdup: Annotated[Optional[str], typer.Option("--holdup", metavar="METHOD", help="Hold-up method: given, marker, peterson-hirsch or fit (isothermal default: fit, unless --dead-time/--marker).")] = None,
        series: Annotated[Optional[str], typer.Option("--series", metavar="SERIES", help="Reference series: alkanes, fame, pah or custom (default: alkanes with a carbons column, custom with an index column).")] = None,
        rt_unit: Annotated[Optional[str], typer.Option("--rt-unit", metavar="UNIT", help="Unit of the ladder's times: min or s (default: from the header, else min).")] = None,
        mapping: Annotated[Optional[List[str]], typer.Option("--map", metavar="COLUMN=HEADER", help="Use this header for a column, e.g. --map rt='Time of apex'. Repeatable.")] = None,
        carbons: Annotated[Optional[str], typer.Option("--carbons", metavar="FIRST-LAST", help="Run files: chain lengths of the first and last alkane, e.g. 8-20 (needed when no molecular ion is visible).")] = None,
        min_snr: MinSnrOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        import json

        from matcher.api import calibrate
        from matcher.io.atomic import guard_output

        guard_output(output, inputs=[("the ladder", ladder)], db=None, allow_stream=True)
        cal = calibrate(ladder, mode=mode, holdup=holdup, dead_time=dead_time, marker=marker, series=series,
                        rt_unit=rt_unit, header_map=parse_map(mapping), carbons=carbons, min_snr=min_snr)
        cal.save(output)
        if as_json:
            say(json.dumps(cal.to_dict(), indent=2, ensure_ascii=False))
        else:
            if "run" in cal.source:
                say(found_table(cal))
                say()
            say(qc_table(cal))
            say()
            say(summary(cal))
        for w in cal.warnings:
            note(f"warning: {w}")
        note(f"saved calibration to {output}")

    @app.command(
        "ri",
        help="Convert retention times to retention indices with a saved calibration. Times outside the ladder "
        "are computed from the nearest pair of standards and marked extrapolated=true.",
        epilog=RI_EXAMPLE,
    )
    def ri_cmd(
        calibration: Annotated[str, typer.Option("--calibration", "-c", metavar="CAL.json", help="Calibration file from 'matcher calibrate'.")],
        times: Annotated[Optional[List[str]], typer.Argument(metavar="TIME...", help="Retention times (minutes unless --rt-unit s).", show_default=False)] = None,
        peaks: Annotated[Optional[str], typer.Option("--peaks", metavar="PEAKS.csv", help="Peak table CSV (or .xlsx) with a time column.")] = None,
        rt_unit: Annotated[Optional[str], typer.Option("--rt-unit", metavar="UNIT", help="Unit of the times: min or s (peak tables: default from the header, else min).")] = None,
        output: Annotated[Optional[str], typer.Option("-o", "--output", metavar="OUT", help="Write the CSV here instead of standard output.")] = None,
        mapping: Annotated[Optional[List[str]], typer.Option("--map", metavar="COLUMN=HEADER", help="Use this header for a peak-table column, e.g. --map rt='Time of apex'.")] = None,
        as_json: JsonFlag = False,
    ) -> None:
        import json

        from matcher.retention.calibration import Calibration, atomic_write_text
        from matcher.errors import MatcherError
        from matcher.report.index_files import convert_times, ri_csv, ri_document

        if bool(times) == bool(peaks):
            raise MatcherError("give retention times as arguments or --peaks FILE (one of the two)")
        if output:
            from matcher.io.atomic import guard_output

            guard_output(output, inputs=[("the calibration", calibration), ("the peak table", peaks)], db=None,
                         allow_stream=True)
        cal = Calibration.load(calibration)
        result = convert_times(cal, times=times, peaks=peaks, rt_unit=rt_unit, overrides=parse_map(mapping))
        text = json.dumps(ri_document(cal, calibration, result), indent=2, ensure_ascii=False) + "\n" if as_json else ri_csv(result)
        if output and output != "-":
            atomic_write_text(output, text)
            n_ext = int(result["extrapolated"].sum())
            note(f"wrote {len(result['peak'])} indices to {output}" + (f"; {n_ext} extrapolated" if n_ext else ""))
        else:
            emit_data(text)
