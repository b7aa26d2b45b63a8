"""Screening with mass spectra against screening by index alone, in one process.

Run:  python tests/benchmarks/bench_spectra.py [--peaks 200000] [--entries 5000] [--top 5]

Builds a synthetic library (invented indices, spectra CONSTRUCTED by tests/spectra_helpers.py,
not measured) of ``--entries`` compounds, each with one reference spectrum, in a temporary
SQLite store, and a synthetic run of ``--peaks`` peaks, each a noisy copy of its compound's
spectrum. Then measures, in the same process run:

* index only: ``screen`` of the peak table without spectra, CSV written (the baseline);
* with spectra from the table: the same table with a ``spectrum`` column (m/z:intensity pairs);
* with spectra from a JCAMP-DX file: the table without the column, ``spectra=`` a JCAMP-DX
  file of one block per peak (as ``matcher screen --spectra RUN.jdx``).

Prints seconds, the ratio of each spectral screen to the index-only one (target: within 2x
for the spectral scoring itself), the time spent reading the spectra, and how often the true
compound ranks first with and without spectra.
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time

import numpy as np
import pandas as pd

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))


def build(tmp: str, n_peaks: int, n_entries: int):
    from matcher.io.jcamp import JcampSpectrum, jcamp_text
    from matcher.io.spectrum_text import format_spectrum_text
    from matcher.store.database import init_library
    from matcher.store.library_io import import_library
    from matcher.store.spectra import import_spectra
    from spectra_helpers import constructed_spectrum, noisy_unknown

    rng = np.random.default_rng(5)
    ri = np.round(rng.uniform(700, 3500, n_entries), 2)
    carbons = rng.integers(8, 30, n_entries)
    formulas = [f"C{c}H{2 * c - 2 * int(rng.integers(0, 4))}" for c in carbons]  # isomer families share a formula
    names = [f"synthetic compound {i}" for i in range(n_entries)]
    lib = pd.DataFrame({"name": names, "phase_class": "nonpolar", "ri": ri, "formula": formulas})
    lib_csv = os.path.join(tmp, "lib.csv")
    lib.to_csv(lib_csv, index=False)
    db = os.path.join(tmp, "lib.sqlite")
    init_library(db)
    import_library(db, lib_csv)
    refs = [constructed_spectrum(n, f) for n, f in zip(names, formulas)]
    lib_jdx = os.path.join(tmp, "lib.jdx")
    with open(lib_jdx, "w", encoding="utf-8") as fh:
        fh.write(jcamp_text([JcampSpectrum(title=n, mz=s[0], intensity=s[1]) for n, s in zip(names, refs)]))
    import_spectra(db, lib_jdx)
    truth = rng.integers(0, n_entries, n_peaks)
    ids = np.arange(1, n_peaks + 1)
    x = np.round(ri[truth] + rng.normal(0, 3, n_peaks), 2)
    unknowns = [noisy_unknown(refs[t], formulas[t], rng) for t in truth]
    plain = os.path.join(tmp, "peaks.csv")
    pd.DataFrame({"peak": ids, "ri": x}).to_csv(plain, index=False)
    with_col = os.path.join(tmp, "peaks_spectra.csv")
    pd.DataFrame({"peak": ids, "ri": x, "spectrum": [format_spectrum_text(*u) for u in unknowns]}).to_csv(with_col, index=False)
    run_jdx = os.path.join(tmp, "run.jdx")
    with open(run_jdx, "w", encoding="utf-8") as fh:
        fh.write(jcamp_text([JcampSpectrum(title=str(p), mz=u[0], intensity=u[1]) for p, u in zip(ids, unknowns)]))
    return db, plain, with_col, run_jdx, np.array(names, dtype=object)[truth]


def timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--peaks", type=int, default=200_000)
    ap.add_argument("--entries", type=int, default=5_000)
    ap.add_argument("--top", type=int, default=5)
    a = ap.parse_args()
    from matcher.identify.screening import screen
    from matcher.io.jcamp import spectra_by_peak as peak_spectra
    from matcher.io.jcamp import read_jcamp
    from matcher.io.peak_tables import read_peaks
    from matcher.report.files import write_results

    with tempfile.TemporaryDirectory() as tmp:
        t_build, (db, plain, with_col, run_jdx, truth) = timed(lambda: build(tmp, a.peaks, a.entries))

        def go(table, **kw):
            res = screen([table], "nonpolar", db=db, top=a.top, split_peaks=True, **kw)  # each compound gives many peaks
            write_results(res, os.path.join(tmp, "out.csv"))
            return res

        def firsts(res):
            t = res.runs[0].table
            top = t[t["rank"] == 1]
            return float(np.mean(top["name"].to_numpy() == truth[top["peak"].astype(int).to_numpy() - 1]))

        go(plain)  # warm imports and caches
        t_plain, r_plain = timed(lambda: go(plain))
        t_col, r_col = timed(lambda: go(with_col))
        t_jdx, r_jdx = timed(lambda: go(plain, spectra=run_jdx))
        t_read_col, _ = timed(lambda: read_peaks(with_col))
        t_read_plain, _ = timed(lambda: read_peaks(plain))
        t_read_jdx, _ = timed(lambda: read_jcamp(run_jdx))
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    spectral_col = t_col - (t_read_col - t_read_plain)
    spectral_jdx = t_jdx - t_read_jdx
    print(f"peaks {a.peaks:,}  entries {a.entries:,} (one reference spectrum each)  top {a.top}  (built in {t_build:.0f} s)")
    print(f"index only                 {t_plain:8.2f} s   first right {firsts(r_plain):.3f}")
    print(f"spectra, table column      {t_col:8.2f} s   ratio {t_col / t_plain:5.2f}x   first right {firsts(r_col):.3f}")
    print(f"  reading the column       {t_read_col - t_read_plain:8.2f} s   scoring part ratio {spectral_col / t_plain:5.2f}x (target <= 2x)")
    print(f"spectra, JCAMP-DX file     {t_jdx:8.2f} s   ratio {t_jdx / t_plain:5.2f}x   first right {firsts(r_jdx):.3f}")
    print(f"  reading the file         {t_read_jdx:8.2f} s   scoring part ratio {spectral_jdx / t_plain:5.2f}x (target <= 2x)")
    print(f"largest resident size {rss:,.0f} MB")


if __name__ == "__main__":
    main()
