"""Memory of a large screen: the largest resident size of one `matcher screen` process.

Run:  python tests/benchmarks/bench_memory.py [--peaks 1000000] [--entries 5000]

Builds a synthetic library and run (invented numbers) in a temporary folder, then runs
``matcher screen RUN --class nonpolar --db LIB -o out.csv`` in a child process and prints
its largest resident set size (``ru_maxrss`` of the child), beside a child that only
imports the package and reads the peak table (the baseline, measured in the same run).
Target: under 1,024 MB for 1,000,000 peaks.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from bench_screen import build  # noqa: E402


def child_rss(args: list[str]) -> tuple[float, float]:
    """Run a child; return (seconds, its largest resident size in MB)."""
    t0 = time.perf_counter()
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    proc = subprocess.run(args, capture_output=True, text=True)
    if proc.returncode:
        raise SystemExit(f"child failed ({proc.returncode}): {proc.stderr[-2000:]}")
    used = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return time.perf_counter() - t0, max(used, before) / 1024


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--peaks", type=int, default=1_000_000)
    ap.add_argument("--entries", type=int, default=5_000)
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        db, peaks_csv = build(tmp, a.peaks, a.entries)
        # ru_maxrss of RUSAGE_CHILDREN is the largest child so far: run the small one first
        t_base, rss_base = child_rss([sys.executable, "-c",
                                      f"from matcher.io.peak_tables import read_peaks; read_peaks({peaks_csv!r})"])
        out = os.path.join(tmp, "out.csv")
        t_scr, rss_scr = child_rss([sys.executable, "-m", "matcher", "screen", peaks_csv, "--class", "nonpolar",
                                    "--db", db, "-o", out])
        size = os.path.getsize(out) / 1e6
    print(f"peaks {a.peaks:,}  entries {a.entries:,}")
    print(f"read the peak table only   {t_base:7.1f} s   largest resident size {rss_base:7,.0f} MB")
    print(f"matcher screen -o CSV      {t_scr:7.1f} s   largest resident size {rss_scr:7,.0f} MB "
          f"({rss_scr / rss_base:.1f}x the reading baseline; target < 1,024 MB); output {size:,.0f} MB")


if __name__ == "__main__":
    main()
