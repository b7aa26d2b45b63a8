"""``matcher peaks``: detect the peaks of a GC-MS run file and write them as an editable peak table."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from matcher.cli.common import MinSnrOption, note, say

EXAMPLE = """\b
Example (the distillery lab's run exported as ASTM E2077 netCDF):
    matcher peaks run-042.cdf -o run-042-peaks.csv
    matcher peaks run-042.cdf -o run-042-peaks.csv --spectra-out run-042.jdx --min-snr 8
\b
The CSV has peak, rt (minutes), area, height, sn, start, end, resolved (tic, or
ions when a co-eluting compound was resolved on extracted ions), model_ion,
mol_ion (a hint) and spectrum (m/z:intensity pairs). Edit it and screen it
like any peak table, or screen the run file directly:
    matcher screen run-042.cdf --calibration cal.json --class nonpolar -o shortlist.csv
"""


def register(app: typer.Typer) -> None:
    @app.command(
        "peaks",
        help="Detect the peaks of a GC-MS run file (ASTM E2077 netCDF or mzML, recognised by content): "
        "apex time, area, height, signal-to-noise and the background-subtracted apex spectrum of each, "
        "co-eluting compounds resolved on extracted ions. Writes a peak table you can look at and edit.",
        epilog=EXAMPLE,
    )
    def peaks_cmd(
        run: Annotated[str, typer.Argument(metavar="RUN", help="Run file: ASTM E2077 netCDF (netCDF-3 or -4) or mzML.")],
        output: Annotated[str, typer.Option("-o", "--output", metavar="PEAKS.csv", help="Where to write the peak table (CSV; - for standard output).")],
        spectra_out: Annotated[Optional[str], typer.Option("--spectra-out", metavar="SPECTRA.jdx", help="Also write every peak's spectrum as one JCAMP-DX file.")] = None,
        min_snr: MinSnrOption = None,
        no_deconvolve: Annotated[bool, typer.Option("--no-deconvolve", help="Keep co-eluting compounds as one TIC peak.")] = False,
    ) -> None:
        from matcher.api import detect_peaks
        from matcher.io.atomic import guard_outputs

        guard_outputs([("-o", output), ("--spectra-out", spectra_out)], inputs=[("the run file", run)], db=False,
                      allow_stream=True)
        table = detect_peaks(run, min_snr=min_snr, deconvolve=not no_deconvolve)
        if output == "-":
            from matcher.signal.run_peaks import peaks_csv
            from matcher.cli.common import emit_data

            emit_data(peaks_csv(table))
        else:
            table.to_csv(output)
        if spectra_out:
            table.to_jcamp(spectra_out)
        det = table.detection
        resolved = int(det.split.sum())
        note(f"{len(table)} peaks in {run} ({table.run_format}, {len(det.time_s)} scans, noise {det.noise:.4g}, "
             f"typical width {det.fwhm_s:.2f} s at half height)" + (f"; {resolved} resolved on extracted ions" if resolved else ""))
        if output != "-":
            note(f"wrote {output}" + (f" and {spectra_out}" if spectra_out else ""))
