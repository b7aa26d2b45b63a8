"""Screening speed: matcher against a plain NumPy floor and per-peak SQL, in one process.

Run:  python tests/benchmarks/bench_screen.py [--peaks 200000] [--entries 5000] [--top 5]

Builds a synthetic library (invented numbers) in a temporary SQLite store and a
synthetic run, then measures, in the same process run:

* matcher: read the peak file, read the library snapshot, shortlist every peak
  (evidence, posteriors, flags), top-K, write the CSV;
* floor: the same reading, window search, Gaussian scoring with a
  not-in-library term, normalisation, top-K and CSV writing in bare NumPy and pandas;
* per-peak SQL: the straightforward approach, one bound SELECT per peak through the
  store's SQLAlchemy engine, scored and written in Python (timed on a sample, scaled
  to all peaks).

Prints seconds and the ratios; targets: ≤ 3× the floor, ≥ 100× faster than per-peak SQL,
largest process under 2 GB.
"""

from __future__ import annotations

import argparse
import os
import resource
import sqlite3
import tempfile
import time

import numpy as np
import pandas as pd


def build(tmp: str, n_peaks: int, n_entries: int):
    rng = np.random.default_rng(5)
    ri = np.round(rng.uniform(700, 3500, n_entries), 2)
    masses = rng.choice(np.arange(80, 500, 2), n_entries)
    lib = pd.DataFrame({"name": [f"synthetic compound {i}" for i in range(n_entries)], "phase_class": "nonpolar",
                        "ri": ri, "formula": [f"C{int(m // 14)}H{int(m - 12 * (m // 14))}" for m in masses]})
    lib_csv = os.path.join(tmp, "lib.csv")
    lib.to_csv(lib_csv, index=False)
    db = os.path.join(tmp, "lib.sqlite")
    from matcher.store.database import init_library
    from matcher.store.library_io import import_library

    init_library(db)
    import_library(db, lib_csv)
    truth = rng.integers(0, n_entries, n_peaks)
    peaks = pd.DataFrame({"peak": np.arange(1, n_peaks + 1), "ri": np.round(ri[truth] + rng.normal(0, 3, n_peaks), 2)})
    peaks_csv = os.path.join(tmp, "peaks.csv")
    peaks.to_csv(peaks_csv, index=False)
    return db, peaks_csv


def run_matcher(db, peaks_csv, out, top):
    from matcher.identify.screening import screen
    from matcher.report.files import write_results

    result = screen([peaks_csv], "nonpolar", db=db, top=top)
    write_results(result, out)
    return sum(len(r.table) for r in result.runs)


def run_floor(db, peaks_csv, out, top, w=10.0, sd=4.0):
    peaks = pd.read_csv(peaks_csv)
    x = peaks["ri"].to_numpy(float)
    con = sqlite3.connect(db)
    lib = con.execute("SELECT c.name, o.ri FROM observations o JOIN compounds c ON c.id = o.compound_id "
                      "WHERE o.phase_class = 'nonpolar' AND o.active = 1").fetchall()
    con.close()
    names = np.array([r[0] for r in lib], dtype=object)
    mu = np.array([r[1] for r in lib], float)
    o = np.argsort(mu)
    mu, names = mu[o], names[o]
    lo = np.searchsorted(mu, x - w, "left")
    hi = np.searchsorted(mu, x + w, "right")
    cnt = hi - lo
    p = np.repeat(np.arange(len(x)), cnt)
    e = np.repeat(lo, cnt) + (np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt))
    z = (mu[e] - x[p]) / sd
    lw = -0.5 * z * z
    wgt = np.exp(lw)
    den = np.bincount(p, weights=wgt, minlength=len(x)) + 0.05
    prob = wgt / den[p]
    order = np.lexsort((-prob, p))
    p, e, prob = p[order], e[order], prob[order]
    rank = np.arange(len(p)) - (np.cumsum(cnt) - cnt)[p] + 1
    k = rank <= top
    kk = np.flatnonzero(k)
    pk, ek = p[kk], e[kk]
    df = pd.DataFrame({"peak": peaks["peak"].to_numpy()[pk], "rt": np.nan, "ri": x[pk], "class": "nonpolar",
                       "rank": rank[kk], "name": names[ek], "cas": "", "library_ri": mu[ek], "delta_ri": x[pk] - mu[ek],
                       "score": lw[order][kk], "probability": prob[kk], "flags": "in-window", "run": "peaks",
                       "ri_measured": x[pk], "not_in_library": (0.05 / den)[pk], "formula": "", "nominal_mass": np.nan,
                       "library_spread": sd, "library_observations": 1, "mol_ion": np.nan, "hit": "", "hit_match": np.nan,
                       "evidence_index": lw[order][kk], "evidence_mol_ion": 0.0, "evidence_ions": 0.0, "evidence_hit": 0.0})
    df.to_csv(out, index=False, float_format="%.4f")
    return len(df)


def run_sql(db, peaks_csv, out, sample, top, w=10.0, sd=4.0):
    """The straightforward approach: one bound SELECT per peak through the store's engine, scored in Python."""
    import csv
    import math

    from sqlalchemy import text

    from matcher.store.database import open_library

    x = pd.read_csv(peaks_csv)["ri"].to_numpy(float)[:sample]
    engine = open_library(db)
    q = text("SELECT c.name, c.cas, c.formula, o.ri FROM observations o JOIN compounds c ON c.id = o.compound_id "
             "WHERE o.phase_class = :cls AND o.active = 1 AND o.ri BETWEEN :lo AND :hi")
    t0 = time.perf_counter()
    with engine.connect() as conn, open(out, "w", newline="") as fh:
        wr = csv.writer(fh)
        for k, v in enumerate(x):
            rows = conn.execute(q, {"cls": "nonpolar", "lo": v - w, "hi": v + w}).all()
            scored = [(math.exp(-0.5 * ((r.ri - v) / sd) ** 2), r) for r in rows]
            den = sum(s for s, _ in scored) + 0.05
            scored.sort(key=lambda t: -t[0])
            for rank, (s, r) in enumerate(scored[:top], start=1):
                wr.writerow([k + 1, f"{v:.2f}", rank, r.name, r.cas, f"{r.ri:.2f}", f"{v - r.ri:.2f}", f"{s / den:.6f}"])
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--peaks", type=int, default=200_000)
    ap.add_argument("--entries", type=int, default=5_000)
    ap.add_argument("--top", type=int, default=5)
    ap.add_argument("--sql-sample", type=int, default=2_000)
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        db, peaks_csv = build(tmp, a.peaks, a.entries)
        run_floor(db, peaks_csv, os.path.join(tmp, "warm.csv"), a.top)  # warm caches and imports
        t0 = time.perf_counter()
        rows_f = run_floor(db, peaks_csv, os.path.join(tmp, "floor.csv"), a.top)
        t_floor = time.perf_counter() - t0
        t0 = time.perf_counter()
        rows_m = run_matcher(db, peaks_csv, os.path.join(tmp, "matcher.csv"), a.top)
        t_matcher = time.perf_counter() - t0
        t_sql_sample = run_sql(db, peaks_csv, os.path.join(tmp, "sql.csv"), a.sql_sample, a.top)
        t_sql = t_sql_sample * a.peaks / a.sql_sample
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peaks {a.peaks:,}  entries {a.entries:,}  top {a.top}")
    print(f"numpy floor      {t_floor:8.2f} s  ({rows_f:,} rows)")
    print(f"matcher screen   {t_matcher:8.2f} s  ({rows_m:,} rows)   ratio to floor {t_matcher / t_floor:5.2f}x  (target <= 3x)")
    print(f"per-peak SQL     {t_sql:8.2f} s  (from {a.sql_sample:,} peaks)   matcher is {t_sql / t_matcher:6.1f}x faster (target >= 100x)")
    print(f"largest resident size {rss:,.0f} MB (target < 2,048 MB)")


if __name__ == "__main__":
    main()
