"""Cold start of one `matcher query` against `python -c "import numpy, sqlite3"`, in one run.

Run:  python tests/benchmarks/bench_query_startup.py [--repeat 10]

Builds the demo library in a temporary folder, then times fresh processes of
both commands alternately and prints the medians and their ratio (aim: ≤ 3×).
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time


def timed(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=10)
    a = ap.parse_args()
    exe = shutil.which("matcher") or os.path.join(os.path.dirname(sys.executable), "matcher")
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([exe, "demo", "--output", tmp], check=True, stdout=subprocess.DEVNULL)
        db = os.path.join(tmp, "demo-library.sqlite")
        query = [exe, "query", "1031", "--class", "slightly-polar", "--mol-ion", "136", "--db", db]
        base = [sys.executable, "-c", "import numpy, sqlite3"]
        timed(query), timed(base)  # warm the file cache
        q, b = [], []
        for _ in range(a.repeat):
            q.append(timed(query))
            b.append(timed(base))
    mq, mb = statistics.median(q), statistics.median(b)
    print(f"matcher query (cold process)   median {mq * 1000:7.1f} ms")
    print(f"python -c 'import numpy, sqlite3' median {mb * 1000:7.1f} ms")
    print(f"ratio {mq / mb:.2f}x (aim <= 3x)")


if __name__ == "__main__":
    main()
