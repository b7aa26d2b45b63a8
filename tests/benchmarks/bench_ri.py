"""Convert 1,000,000 retention times with a calibration; compare with a bare numpy.interp.

Run: python tests/benchmarks/bench_ri.py   (invented ladder; prints seconds and the ratio)
"""

from __future__ import annotations

import time

import numpy as np

from matcher.retention.calibration import Calibration


def best(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    rng = np.random.default_rng(1)
    t_std = np.cumsum(rng.uniform(1.0, 2.5, 30)) + 2.0
    i_std = 100.0 * np.arange(6, 36)
    x = rng.uniform(1.0, t_std[-1] + 5.0, 1_000_000)
    prog = Calibration("alkanes", "programmed", t_std, i_std, [f"C{n}" for n in range(6, 36)])
    base = best(lambda: np.interp(x, t_std, i_std))
    ours = best(lambda: prog.convert(x))
    ri, _ = prog.convert(x)
    inside = (x >= t_std[0]) & (x <= t_std[-1])
    assert np.allclose(ri[inside], np.interp(x[inside], t_std, i_std))
    print(f"programmed: 1,000,000 times in {ours:.3f} s; numpy.interp baseline {base:.3f} s; ratio {ours / base:.1f}x")
    from matcher.retention.holdup import HoldUp

    iso = Calibration("alkanes", "isothermal", t_std, i_std, [], holdup=HoldUp(1.0, "given"), holdup_used=True)
    ours_iso = best(lambda: iso.convert(x))
    print(f"isothermal: 1,000,000 times in {ours_iso:.3f} s; ratio {ours_iso / base:.1f}x")


if __name__ == "__main__":
    main()
