"""Regenerate the demo run and ladder from the demo library (invented numbers).

Run from the project folder:  python examples/generate_demo_files.py
The scenario: a distillery's QC lab checks an incoming lot of juniper-berry
oil on its 5 % phenyl column (slightly-polar class). The composition is made to
look like that oil (α-pinene the main peak, then myrcene and sabinene, a
monoterpene-rich front and a smaller sesquiterpene tail); the percentages are
rough values of our own, not measurements of any oil and not taken from a
published analysis. The times are invented; each peak sits at its compound's
library centre plus a small systematic offset and noise; three compounds the
library does not hold are added, and mass-spectral hints on most peaks.

The same injection split to a second column, polyethylene glycol (polar class),
with a flame-ionisation detector (no mass hints) gives ``run_polar.csv`` and its
ladder ``ladder_polar.csv``: each compound at its polar library centre (or, for
the six the demo library lists on 5 % phenyl only, at an invented polar index)
plus offset and noise, the three unlisted compounds at invented polar indices,
areas 0.8 × the first column's with 5 % scatter, peaks numbered in their own
elution order.
"""

from __future__ import annotations

import csv
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
HEADER = ("# matcher demo: incoming lot JB-0412 of juniper-berry oil, 5 % phenyl column, oven programmed.\n"
          "# INVENTED NUMBERS FOR THE DEMO, not measurements.\n")


#: The oil's invented composition: (library name, area %), monoterpene hydrocarbons first. Rough shares of
#: our own that make the run look like juniper-berry oil to a practitioner; NOT measured values.
COMPOSITION: list[tuple[str, float]] = [
    ("α-thujene", 1.2), ("α-pinene", 36.0), ("camphene", 0.6), ("sabinene", 9.0), ("β-pinene", 3.2),
    ("myrcene", 12.5), ("δ-3-carene", 1.1), ("α-terpinene", 0.9), ("limonene", 4.8), ("(E)-β-ocimene", 0.5),
    ("γ-terpinene", 1.6), ("terpinolene", 1.0), ("trans-sabinene hydrate", 0.3), ("linalool", 0.5),
    ("camphor", 0.2), ("borneol", 0.3), ("terpinen-4-ol", 2.8), ("α-terpineol", 0.6), ("bornyl acetate", 0.5),
    ("α-cubebene", 0.6), ("α-copaene", 0.4), ("β-elemene", 0.8), ("β-caryophyllene", 2.6), ("α-humulene", 1.5),
    ("germacrene D", 4.2), ("α-muurolene", 0.5), ("γ-cadinene", 0.9), ("δ-cadinene", 1.6), ("elemol", 0.3),
    ("caryophyllene oxide", 0.4), ("α-cadinol", 0.3),
]
#: Summed peak area of the run (invented detector counts).
TOTAL_AREA = 40_000_000
#: Invented polar indices of the compounds the demo library lists on 5 % phenyl only, and of the three unlisted
#: compounds (by their 5 % phenyl index); invented for the demo, not reference values.
POLAR_INVENTED = {"α-pinene": 1019.0, "sabinene": 1118.0, "γ-terpinene": 1241.0, "germacrene D": 1702.0,
                  "δ-cadinene": 1751.0, "elemol": 2080.0, 1114.0: 1498.0, 1398.0: 1562.0, 1611.0: 2015.0}
POLAR_HEADER = ("# matcher demo: incoming lot JB-0412 of juniper-berry oil, the same injection split to a\n"
                "# polyethylene-glycol column (flame-ionisation detector), oven programmed.\n"
                "# INVENTED NUMBERS FOR THE DEMO, not measurements.\n")


def polar_ladder_time(index: np.ndarray) -> np.ndarray:
    """Invented oven-programme mapping of the polar column from index to minutes."""
    u = (np.asarray(index, float) - 800.0) / 100.0
    return 2.60 + 1.85 * u - 0.020 * u**2


def ladder_time(index: np.ndarray) -> np.ndarray:
    """Invented oven-programme mapping from index to minutes (monotone, gently curved)."""
    u = (np.asarray(index, float) - 700.0) / 100.0
    return 2.10 + 2.05 * u - 0.028 * u**2


def rows_by_name(rows, phase_class: str) -> dict[str, list]:
    """The demo library's observations of one class, by compound name."""
    out: dict[str, list] = {}
    for r in rows:
        if r.phase_class == phase_class:
            out.setdefault(r.name, []).append(r)
    return out


def write_ladder(name: str, header: str, carbons: np.ndarray, times: np.ndarray) -> None:
    """An n-alkane ladder file of the demo: one line per alkane (time in minutes, carbon number, name)."""
    with open(os.path.join(HERE, name), "w", newline="", encoding="utf-8") as fh:
        fh.write(header)
        w = csv.writer(fh)
        w.writerow(["rt", "carbons", "name"])
        for c, t in zip(carbons, times):
            w.writerow([f"{t:.3f}", c, f"n-C{c}"])


def main() -> None:
    from matcher.chem.formula import nominal_mass
    from matcher.store.snapshot import CompoundTable, build_snapshot
    from matcher.store.library_io import read_rows

    rows, _ = read_rows(os.path.join(HERE, "..", "library", "demo_library.csv"))
    rng = np.random.default_rng(412)
    carbons = np.arange(7, 23)
    write_ladder("ladder.csv", HEADER, carbons, ladder_time(100.0 * carbons))

    byname = rows_by_name(rows, "slightly-polar")
    peaks = []
    for name, percent in COMPOSITION:
        obs = byname[name]
        centre = float(np.median([o.ri for o in obs]))
        peaks.append((centre + 3.0 + rng.normal(0, 1.5), name, obs[0].formula, percent))
    # compounds the demo library does not hold (invented positions and shares)
    for ri, formula, percent in [(1114.0, "C10H16O", 0.4), (1398.0, "C15H24", 0.6), (1611.0, "C15H26O", 0.3)]:
        peaks.append((ri, None, formula, percent))
    peaks.sort()
    kept = []
    with open(os.path.join(HERE, "run.csv"), "w", newline="", encoding="utf-8") as fh:
        fh.write(HEADER)
        w = csv.writer(fh)
        w.writerow(["Peak #", "Ret. time (min)", "M+", "Library hit", "Match", "Area"])
        for k, (ri, name, formula, percent) in enumerate(peaks, start=1):
            t = float(np.interp(ri, 100.0 * carbons, ladder_time(100.0 * carbons)))
            mol = nominal_mass(formula) if formula and rng.random() < 0.85 else ""
            hit, score = "", ""
            if name and rng.random() < 0.5:
                hit, score = name, int(rng.integers(72, 96))
            area = int(round(TOTAL_AREA * percent / 100.0 * (1.0 + rng.normal(0, 0.04))))
            w.writerow([k, f"{t:.3f}", mol, hit, score, area])
            kept.append((ri, name, area))
    write_polar(rows, kept)


def write_polar(rows, peaks) -> None:
    """The second column's run and ladder (see the module doc); its own random numbers, so run.csv stays as it is."""
    rng = np.random.default_rng(413)
    carbons = np.arange(8, 26)
    write_ladder("ladder_polar.csv", POLAR_HEADER, carbons, polar_ladder_time(100.0 * carbons))
    polar = {name: [r.ri for r in obs] for name, obs in rows_by_name(rows, "polar").items()}
    second = []
    for ri, name, area in peaks:
        if name is None:
            centre = POLAR_INVENTED[ri]
        else:
            centre = float(np.median(polar[name])) if name in polar else POLAR_INVENTED[name]
        second.append((centre + 4.0 + rng.normal(0, 2.5), int(round(0.8 * area * (1.0 + rng.normal(0, 0.05))))))
    second.sort()
    with open(os.path.join(HERE, "run_polar.csv"), "w", newline="", encoding="utf-8") as fh:
        fh.write(POLAR_HEADER)
        w = csv.writer(fh)
        w.writerow(["Peak #", "Ret. time (min)", "Area"])
        for k, (ri, area) in enumerate(second, start=1):
            t = float(np.interp(ri, 100.0 * carbons, polar_ladder_time(100.0 * carbons)))
            w.writerow([f"W{k}", f"{t:.3f}", area])


if __name__ == "__main__":
    main()
