"""Peak detection speed: a 30-minute, 10,000-scan invented run with 150 compounds, read and detected.

Run: python tests/benchmarks/bench_peaks.py
Prints seconds for reading the ASTM E2077 file, for detection (TIC, baseline, extracted-ion
deconvolution, spectra) and the ratio to a baseline measured in the same run: the least any
detection does, one Savitzky-Golay smoothing plus scipy.signal.find_peaks on the summed TIC.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from run_factory import Compound, invented_spectrum, simulate, write_e2077  # noqa: E402


def best(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main() -> None:
    from scipy.signal import find_peaks, savgol_filter

    from matcher.io.run_files import read_run
    from matcher.signal.run_peaks import detect_run

    rng = np.random.default_rng(3)
    comps = [Compound(f"c{k}", float(t), float(rng.uniform(1e4, 5e5)), invented_spectrum(rng, int(rng.integers(60, 200)) * 2),
                      sigma_s=float(rng.uniform(0.8, 1.6)))
             for k, t in enumerate(np.sort(rng.uniform(120, 1750, 150)))]
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.cdf"
        write_e2077(path, simulate(comps, minutes=30, scans=10_000, seed=3))
        size = path.stat().st_size
        read_s, run = best(lambda: read_run(path))
        detect_s, table = best(lambda: detect_run(path, run=run))
        base_s, _ = best(lambda: find_peaks(savgol_filter(run.tic, 11, 2), prominence=5 * np.std(np.diff(run.tic))))
    print(f"run: 10,000 scans, {len(run.mz):,} points, {size / 1e6:.1f} MB, 150 compounds written")
    print(f"read {read_s:.3f} s; detect {detect_s:.3f} s ({len(table)} peaks, "
          f"{int(table.detection.split.sum())} resolved on extracted ions); total {read_s + detect_s:.3f} s")
    print(f"baseline (smooth + find_peaks on the TIC) {base_s * 1000:.1f} ms; detection/baseline ratio "
          f"{detect_s / base_s:.0f}x")


if __name__ == "__main__":
    main()
