"""Throughput of the cross-check: American quotes checked per second, by number of workers.

Each row costs one price with its vega (a tangent marched with the solution, through the
dividend jumps with cash dividends; no rho), the implied vol of the quote started at
that price with that vega (one or two prices for a quote near the model), and, for a
mismatch, a few alternative prices. The book is the clean American rows of the demo book,
repeated to ``--rows`` rows. Prints, for each worker count, rows per second of wall time
(pool start-up included; kernels already loaded, as on a warm Dask worker or after the
first chunk), the best of ``--repeats`` runs (slower repeats measure other load on the
machine), the speed-up over one worker, and rows per CPU-second (this process and its
workers), which other load on the machine changes little. The price() calls per row are
counted in a separate pass.

    python benchmarks/bench_crosscheck.py --rows 2400 --workers 1 2   # steady state
    python benchmarks/bench_crosscheck.py --rows 480 --workers 1 2    # pool start-up weighs
    python benchmarks/bench_crosscheck.py --cold     # also a run in a fresh interpreter
"""

from __future__ import annotations

import argparse
import csv
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from stopline.crosscheck import CheckSettings, check_rows, read_book, run_crosscheck

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


def cpu_seconds() -> float:
    """CPU time of this process and of its finished children (the pool's workers)."""
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def count_work(book: Path, settings: CheckSettings) -> dict[str, float]:
    """price() calls per row, by what they compute, counted by wrapping price() (not timed).

    Each call solves one Richardson pair of grids; ``"vega"`` (and ``"full"``) ones also
    march the vol tangent with it (``"full"`` also rho's).
    """
    import stopline.crosscheck as cc
    import stopline.pricing as pricing

    counts = {"price": 0, "vega": 0, "dividends": 0}
    real = pricing.price
    real_value = pricing._value_and_error  # the implied-vol search's prices (greeks="grid")

    def price(option, market, **kw):
        counts["price"] += 1
        counts["vega"] += kw.get("greeks", "full") != "grid"
        counts["dividends"] += bool(market.dividends)
        return real(option, market, **kw)

    def value(option, market, accuracy):
        counts["price"] += 1
        counts["dividends"] += bool(market.dividends)
        return real_value(option, market, accuracy)

    _, rows = read_book(book)
    pricing.price = cc.price = price
    pricing._value_and_error = value
    try:
        check_rows(list(enumerate(rows)), settings)
    finally:
        pricing.price = cc.price = real
        pricing._value_and_error = real_value
    return {k: v / len(rows) for k, v in counts.items()}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=480)
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--accuracy", default="standard")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--dask", type=int, default=0,
                    help="also time a local Dask cluster (127.0.0.1) with this many workers")
    ap.add_argument("--cold", action="store_true",
                    help="also time one run with the largest worker count in a fresh "
                         "interpreter (imports and kernel loading included)")
    args = ap.parse_args()
    settings = CheckSettings(accuracy=args.accuracy)
    with tempfile.TemporaryDirectory() as tmp:
        book = american_book(args.rows, Path(tmp) / "book.csv")
        run_crosscheck(book, Path(tmp) / "warm", workers=1)  # numba cache, imports
        base = None
        for n in args.workers:
            best, cpu = math.inf, math.inf
            for r in range(args.repeats):
                c0, t0 = cpu_seconds(), time.perf_counter()
                run = run_crosscheck(book, Path(tmp) / f"w{n}-{r}", workers=n, settings=settings)
                best = min(best, time.perf_counter() - t0)
                cpu = min(cpu, cpu_seconds() - c0)
            rate = args.rows / best
            base = base or rate
            print(f"{n} worker(s): {args.rows} American rows in {best:.2f} s wall "
                  f"= {rate:.0f} rows/s, x{rate / base:.2f}; {args.rows / cpu:.0f} rows per "
                  f"CPU-second ({run.counts()})")
        work = count_work(book, settings)
        print(f"per row: {work['price']:.2f} price() calls ({work['vega']:.2f} asking for vega, "
              f"{work['dividends']:.2f} with cash dividends)")
        if args.cold:
            n = max(args.workers)
            code = ("import sys, time; t0 = time.perf_counter(); "
                    "from stopline.crosscheck import run_crosscheck; "
                    f"run_crosscheck(sys.argv[1], sys.argv[2], workers={n}); "
                    "print(time.perf_counter() - t0)")
            out = subprocess.run([sys.executable, "-c", code, str(book), str(Path(tmp) / "cold")],
                                 capture_output=True, text=True, check=True)
            secs = float(out.stdout.strip())
            print(f"cold, {n} worker(s), fresh interpreter (imports, kernel loading): "
                  f"{secs:.2f} s = {args.rows / secs:.0f} rows/s")
        if args.dask:
            from distributed import LocalCluster

            with LocalCluster(n_workers=args.dask, threads_per_worker=1, processes=True,
                              host="127.0.0.1", dashboard_address=None) as cluster:
                run_crosscheck(book, Path(tmp) / "dask-warm", scheduler=cluster.scheduler_address)
                best = math.inf
                for r in range(args.repeats):
                    t0 = time.perf_counter()
                    run_crosscheck(book, Path(tmp) / f"dask-{r}", scheduler=cluster.scheduler_address,
                                   settings=settings)
                    best = min(best, time.perf_counter() - t0)
            rate = args.rows / best
            print(f"Dask, {args.dask} local worker(s): {rate:.0f} rows/s, x{rate / base:.2f}")


if __name__ == "__main__":
    main()
