"""Two-column screening against the one-column screen of the same run, in the same process.

Run: python tests/benchmarks/bench_two_columns.py   (invented library and runs; prints seconds and ratios)

The library: 800 invented compounds on two classes (slightly-polar 800-3000, polar 800-3600 units: a dense
library, one compound every 2.8 units on the first class). Each run draws n of them, scatters the indices
(3 and 6 units), splits the areas 1 : 0.5 with 10 % scatter and shuffles the second run. Reported per size:
the one-column screen, the two-column screen, their ratio, and the share of peaks paired with their own peak
and named right.
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd

import matcher
from matcher.store.snapshot import CompoundTable, build_snapshot


def main() -> None:
    rng = np.random.default_rng(0)
    m = 800
    a_ri = np.sort(rng.uniform(800, 3000, m))
    b_ri = a_ri + rng.uniform(0, 600, m)
    comp = CompoundTable.from_records([{"id": i + 1, "name": f"c{i}"} for i in range(m)])
    snap = build_snapshot(comp, np.r_[np.arange(1, m + 1), np.arange(1, m + 1)],
                          np.array(["slightly-polar"] * m + ["polar"] * m), np.r_[a_ri, b_ri])
    matcher.screen(pd.DataFrame({"peak": ["x"], "ri": [1000.0]}), phase_class="slightly-polar", library=snap)  # warm up
    for n in (100, 300, 700):
        pick = rng.choice(m, n, replace=False)
        area = np.exp(rng.normal(0, 1.2, n))
        first = pd.DataFrame({"peak": [f"A{i}" for i in range(n)], "ri": a_ri[pick] + rng.normal(0, 3, n), "area": area})
        perm = rng.permutation(n)
        second = pd.DataFrame({"peak": [f"B{k}" for k in range(n)], "ri": (b_ri[pick] + rng.normal(0, 6, n))[perm],
                               "area": (area * 0.5 * np.exp(rng.normal(0, 0.1, n)))[perm]})
        t0 = time.perf_counter()
        one = matcher.screen(first, phase_class="slightly-polar", library=snap)
        t1 = time.perf_counter()
        two = matcher.screen(first, phase_class="slightly-polar", library=snap, second=second, second_class="polar")
        t2 = time.perf_counter()
        lead = two.runs[0].table.groupby("peak", sort=False).head(1).set_index("peak")
        lead1 = one.runs[0].table.groupby("peak", sort=False).head(1).set_index("peak")
        own = {f"A{perm[k]}": f"B{k}" for k in range(n)}
        paired = np.mean([lead.loc[a, "second_peak"] == b for a, b in own.items()])
        named1 = np.mean([lead1.loc[f"A{i}", "name"] == f"c{pick[i]}" for i in range(n)])
        named2 = np.mean([lead.loc[f"A{i}", "name"] == f"c{pick[i]}" for i in range(n)])
        print(f"{n} peaks: one column {t1 - t0:.2f} s, two columns {t2 - t1:.2f} s, ratio {(t2 - t1) / (t1 - t0):.1f}x; "
              f"paired right {paired:.0%}; named right {named1:.0%} -> {named2:.0%}")


if __name__ == "__main__":
    main()
