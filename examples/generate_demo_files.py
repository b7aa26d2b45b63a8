"""Regenerate the demo run and ladder from the demo library (invented numbers).

Run from the project folder:  python examples/generate_demo_files.py
The scenario: a distillery's QC lab checks an incoming lot of juniper-berry
oil on its 5 % phenyl column (slightly-polar class). The times are invented;
peaks are drawn from the demo library with a small systematic offset, a few
compounds the library does not hold, and mass-spectral hints on most peaks.
"""

from __future__ import annotations

import csv
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
HEADER = ("# matcher demo: incoming lot JB-0412 of juniper-berry oil, 5 % phenyl column, oven programmed.\n"
          "# INVENTED NUMBERS FOR THE DEMO, not measurements.\n")


def ladder_time(index: np.ndarray) -> np.ndarray:
    """Invented oven-programme mapping from index to minutes (monotone, gently curved)."""
    u = (np.asarray(index, float) - 700.0) / 100.0
    return 2.10 + 2.05 * u - 0.028 * u**2


def main() -> None:
    from matcher.chem.formula import nominal_mass
    from matcher.store.snapshot import CompoundTable, build_snapshot
    from matcher.store.library_io import read_rows

    rows, _ = read_rows(os.path.join(HERE, "..", "library", "demo_library.csv"))
    rng = np.random.default_rng(412)
    carbons = np.arange(7, 23)
    with open(os.path.join(HERE, "ladder.csv"), "w", newline="", encoding="utf-8") as fh:
        fh.write(HEADER)
        w = csv.writer(fh)
        w.writerow(["rt", "carbons", "name"])
        for c, t in zip(carbons, ladder_time(100.0 * carbons)):
            w.writerow([f"{t:.3f}", c, f"n-C{c}"])

    byname: dict[str, list] = {}
    for r in rows:
        if r.phase_class == "slightly-polar" and not r.name.startswith("n-") and (r.series or "") != "n-alkanes":
            byname.setdefault(r.name, []).append(r)
    names = sorted(byname)
    chosen = list(rng.choice(names, size=min(38, len(names)), replace=False))
    peaks = []
    for name in chosen:
        obs = byname[name]
        centre = float(np.median([o.ri for o in obs]))
        peaks.append((centre + 3.0 + rng.normal(0, 1.5), name, obs[0].formula))
    # compounds the demo library does not hold (invented positions)
    for ri, formula, hit in [(1114.0, "C10H16O", "unknown monoterpenoid"), (1398.0, "C15H24", ""),
                             (1611.0, "C15H26O", "")]:
        peaks.append((ri, None, formula))
    peaks.sort()
    with open(os.path.join(HERE, "run.csv"), "w", newline="", encoding="utf-8") as fh:
        fh.write(HEADER)
        w = csv.writer(fh)
        w.writerow(["Peak #", "Ret. time (min)", "M+", "Library hit", "Match", "Area"])
        for k, (ri, name, formula) in enumerate(peaks, start=1):
            t = float(np.interp(ri, 100.0 * carbons, ladder_time(100.0 * carbons)))
            mol = nominal_mass(formula) if formula and rng.random() < 0.85 else ""
            hit, score = "", ""
            if name and rng.random() < 0.5:
                hit, score = name, int(rng.integers(72, 96))
            w.writerow([k, f"{t:.3f}", mol, hit, score, int(rng.integers(2_000, 900_000))])


if __name__ == "__main__":
    main()
