"""Time of one implied vol relative to one price, at each accuracy preset.

For a few contracts: the time of ``implied_vol`` (from a quote that stopline itself priced)
divided by the time of one ``price`` call at the quoted vol, each the fastest of several
repeats (as ``timeit`` advises: slower repeats measure other load on the machine), and the
number of price calls the search made. The line printed is the median ratio over the
contracts. Run: ``python benchmarks/bench_implied.py``.
"""

from __future__ import annotations

import functools
import statistics
import time

from stopline import Market, Option, implied_vol_detail, price

CONTRACTS = [
    (Option("put", 100.0, 0.5), Market(100.0, 0.05, 0.25)),
    (Option("put", 100.0, 1.0), Market(80.0, 0.05, 0.30)),
    (Option("call", 100.0, 0.25), Market(110.0, 0.03, 0.40, 0.07)),
    (Option("put", 100.0, 0.05), Market(95.0, 0.04, 0.50)),
    (Option("call", 100.0, 2.0), Market(90.0, 0.02, 0.20, 0.01)),
    (Option("put", 100.0, 1.0, "european"), Market(105.0, 0.03, 0.35)),
]


def _best_time(fn, repeats: int) -> float:  # noqa: ANN001
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(repeats: int = 15, verbose: bool = False) -> None:
    for acc in ("fast", "standard", "fine"):
        reps = repeats if acc != "fine" else max(3, repeats // 5)
        ratios, calls = [], []
        for opt, mkt in CONTRACTS:
            quote = price(opt, mkt, accuracy=acc).price  # also warms the compiled kernels
            one_price = functools.partial(price, opt, mkt, accuracy=acc)
            one_vol = functools.partial(implied_vol_detail, opt, mkt, quote, accuracy=acc)
            t_price = _best_time(one_price, reps)
            t_iv = _best_time(one_vol, reps)
            ratios.append(t_iv / t_price)
            if verbose:
                print(f"  {opt} {mkt}: price {1e3 * t_price:.2f} ms, implied vol {1e3 * t_iv:.2f} ms")
            calls.append(implied_vol_detail(opt, mkt, quote, accuracy=acc).price_calls)
        print(f"{acc:8s} implied vol / price time: median {statistics.median(ratios):.2f} "
              f"(range {min(ratios):.2f}-{max(ratios):.2f}); price calls {calls}")


if __name__ == "__main__":
    import sys

    main(verbose="-v" in sys.argv[1:])
