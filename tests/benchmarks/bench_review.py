"""Review speed on a large result: opening, listing the peaks, taking one decision.

Run:  python tests/benchmarks/bench_review.py [--peaks 5000] [--decisions 200]

Builds a shortlist by repeating the demo's rows under new peak ids (invented numbers) in a
temporary folder, then times, each beside a baseline measured in the same run:

* opening the review (reading the whole result and its checksum) against ``csv.DictReader`` over the file;
* ``GET /api/peaks`` through the framework's test client against ``json.dumps`` of the same peaks;
* one decision written (record re-read, changed, written atomically) against a plain
  ``json.dump`` of the same record to a file, with the record holding ``--decisions`` earlier ones.
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import sys
import tempfile
import warnings
from pathlib import Path


def build(folder: Path, peaks: int) -> Path:
    from matcher.demo import run_demo

    run_demo(str(folder / "demo"))
    src = folder / "demo" / "shortlist.csv"
    with open(src, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    header = list(rows[0])
    ids = list(dict.fromkeys(r["peak"] for r in rows))
    out = folder / "big.csv"
    with open(out, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, header, lineterminator="\n")
        w.writeheader()
        k = 0
        while k < peaks:
            for pid in ids:
                if k >= peaks:
                    break
                k += 1
                for r in rows:
                    if r["peak"] == pid:
                        w.writerow({**r, "peak": str(k)})
    (folder / "big.csv.meta.json").write_text((folder / "demo" / "shortlist.csv.meta.json").read_text(encoding="utf-8"),
                                              encoding="utf-8")
    return out


def best(fn, repeat: int = 3) -> float:
    """The best of ``repeat`` timings (the same helper as bench_ri.py's)."""
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from bench_ri import best as _best

    return _best(fn, repeat)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--peaks", type=int, default=5000)
    ap.add_argument("--decisions", type=int, default=200)
    args = ap.parse_args()
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*httpx.*")
        from starlette.testclient import TestClient

    from matcher.review.server import create_app
    from matcher.review.session import open_review

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        result = build(folder, args.peaks)
        size = os.path.getsize(result) / 1e6

        def read_plain():
            with open(result, newline="", encoding="utf-8") as fh:
                for _ in csv.DictReader(fh):
                    pass

        t_base = best(read_plain)
        t_open = best(lambda: open_review(result, reviewer="bench"))
        print(f"result: {args.peaks} peaks, {size:.1f} MB")
        print(f"open the review      {t_open:8.3f} s   csv.DictReader {t_base:8.3f} s   ratio {t_open / t_base:6.1f}")

        review = open_review(result, reviewer="bench")
        client = TestClient(create_app(review, token="b", port=1), base_url="http://127.0.0.1:1")
        t_json = best(lambda: json.dumps(review.peaks()))
        t_api = best(lambda: client.get("/api/peaks", headers={"X-Review-Token": "b"}).json())
        print(f"GET /api/peaks       {t_api:8.3f} s   json.dumps     {t_json:8.3f} s   ratio {t_api / t_json:6.1f}")

        for k in range(args.decisions):
            review.decide({"run": "run", "peak": str(k % args.peaks + 1), "decision": "unsure"})
        plain = folder / "plain.json"

        def write_plain():
            with open(plain, "w", encoding="utf-8") as fh:
                json.dump(review.record, fh, indent=1, ensure_ascii=False)

        t_plain = best(write_plain, 10)
        n = iter(range(10**6))
        t_dec = best(lambda: review.decide({"run": "run", "peak": str(next(n) % args.peaks + 1),
                                            "decision": "reject"}), 10)
        print(f"one decision written {t_dec * 1000:8.1f} ms  json.dump      {t_plain * 1000:8.1f} ms  "
              f"ratio {t_dec / t_plain:6.1f}  ({len(review.record['history'])} in the history)")


if __name__ == "__main__":
    sys.exit(main())
