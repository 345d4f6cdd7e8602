"""Throughput of the cross-check: American quotes checked per second, by number of workers.

Each row costs one price, a vega (two more prices when the Result has no vega), an implied
vol (4 to 6 prices) and, for a mismatch, a few alternative prices. The book is the clean
American rows of the demo book, repeated to ``--rows`` rows. Prints rows per second of wall
time (pool start-up included) for each worker count, the best of ``--repeats`` runs (slower
repeats measure other load on the machine), and the speed-up over one worker.

    python benchmarks/bench_crosscheck.py --rows 480 --workers 1 2
"""

from __future__ import annotations

import argparse
import csv
import math
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
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--dask", type=int, default=0,
                    help="also time a local Dask cluster (127.0.0.1) with this many workers")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        book = american_book(args.rows, Path(tmp) / "book.csv")
        run_crosscheck(book, Path(tmp) / "warm", workers=1)  # numba cache, imports
        base = None
        for n in args.workers:
            best = math.inf
            for r in range(args.repeats):
                t0 = time.perf_counter()
                run = run_crosscheck(book, Path(tmp) / f"w{n}-{r}", workers=n,
                                     settings=CheckSettings(accuracy=args.accuracy))
                best = min(best, time.perf_counter() - t0)
            rate = args.rows / best
            base = base or rate
            print(f"{n} worker(s): {args.rows} American rows in {best:.2f} s wall "
                  f"= {rate:.0f} rows/s, x{rate / base:.2f} ({run.counts()})")
        if args.dask:
            from distributed import LocalCluster

            with LocalCluster(n_workers=args.dask, threads_per_worker=1, processes=True,
                              host="127.0.0.1", dashboard_address=None) as cluster:
                run_crosscheck(book, Path(tmp) / "dask-warm", scheduler=cluster.scheduler_address)
                best = math.inf
                for r in range(args.repeats):
                    t0 = time.perf_counter()
                    run_crosscheck(book, Path(tmp) / f"dask-{r}", scheduler=cluster.scheduler_address,
                                   settings=CheckSettings(accuracy=args.accuracy))
                    best = min(best, time.perf_counter() - t0)
            rate = args.rows / best
            print(f"Dask, {args.dask} local worker(s): {rate:.0f} rows/s, x{rate / base:.2f}")

if __name__ == "__main__":
    main()
