"""Throughput of the cross-check: American quotes checked per second, by number of workers.

Each row costs one price, a vega (two more prices when the Result has no vega), an implied
vol (4 to 6 prices) and, for a mismatch, a few alternative prices. The book is the clean
American rows of the demo book, repeated to ``--rows`` rows. Prints rows per second of wall
time (pool start-up included) for each worker count.

    python benchmarks/crosscheck_throughput.py --rows 480 --workers 1 2
"""

from __future__ import annotations

import argparse
import csv
import tempfile
import time
from pathlib import Path

from stopline.crosscheck import CheckSettings, run_crosscheck

ROOT = Path(__file__).resolve().parent.parent


def american_book(n: int, path: Path) -> Path:
    with (ROOT / "examples" / "demo_quotes.csv").open(newline="") as fh:
        reader = csv.DictReader(fh)
        cols = reader.fieldnames
        rows = [r for r in reader if r["style"] == "american" and r["planted"] == ""]
    with path.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=cols)
        w.writeheader()
        for i in range(n):
            r = dict(rows[i % len(rows)])
            r["id"] = f"{r['id']}#{i}"
            w.writerow(r)
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=480)
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--accuracy", default="standard")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        book = american_book(args.rows, Path(tmp) / "book.csv")
        run_crosscheck(book, Path(tmp) / "warm", workers=1)  # numba cache, imports
        for n in args.workers:
            t0 = time.perf_counter()
            run = run_crosscheck(book, Path(tmp) / f"w{n}", workers=n,
                                 settings=CheckSettings(accuracy=args.accuracy))
            wall = time.perf_counter() - t0
            print(f"{n} worker(s): {args.rows} American rows in {wall:.2f} s wall "
                  f"= {args.rows / wall:.0f} rows/s ({run.counts()})")


if __name__ == "__main__":
    main()
