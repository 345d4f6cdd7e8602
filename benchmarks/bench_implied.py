"""Cost of one implied vol in prices, at each accuracy preset (target: at most 8 at "standard").

Two measures, both side by side in one run:

1. Time. For a few typical contracts, the time of ``implied_vol`` (from a quote that stopline
   itself priced) divided by the time of one ``price`` call at the quoted vol, each the
   fastest of several repeats (as ``timeit`` advises: slower repeats measure other load on
   the machine). Two denominators: ``price()`` as a user calls it (default Greeks, including
   vega) and the cheaper ``price(..., greeks="grid")`` the search itself calls. The second
   ratio is the strict one; the target is judged on its median.
2. Count. The number of price calls the search makes over a wide grid of contracts
   (moneyness 0.5-2, expiries 2 days to 5 years, vols 5 % to 250 %, a yield above the rate,
   puts and calls): median, 90th percentile, maximum and how many exceed 8. Quotes at their
   lower bound (the vol is not unique, refused after 1 to 3 prices) are left out.

Run: ``python benchmarks/bench_implied.py`` (``-v`` prints each timed contract;
``--quick`` fewer repeats and a smaller grid).
"""

from __future__ import annotations

import functools
import itertools
import statistics
import time

from stopline import ImpliedVolError, Market, Option, implied_vol_detail, price

#: The cost target of the implied-vol issue: one implied vol at "standard" costs no more
#: than this many prices.
TARGET_PRICES = 8.0

CONTRACTS = [
    (Option("put", 100.0, 0.5), Market(100.0, 0.05, 0.25)),
    (Option("put", 100.0, 1.0), Market(80.0, 0.05, 0.30)),
    (Option("call", 100.0, 0.25), Market(110.0, 0.03, 0.40, 0.07)),
    (Option("put", 100.0, 0.05), Market(95.0, 0.04, 0.50)),
    (Option("call", 100.0, 2.0), Market(90.0, 0.02, 0.20, 0.01)),
    (Option("put", 100.0, 1.0, "european"), Market(105.0, 0.03, 0.35)),
]


def _grid(quick: bool) -> list[tuple[Option, Market]]:
    moneyness = (0.6, 0.9, 1.0, 1.1, 1.6) if quick else (0.5, 0.7, 0.9, 1.0, 1.1, 1.4, 2.0)
    expiries = (0.02, 0.5, 5.0) if quick else (0.005, 0.02, 0.1, 0.5, 2.0, 5.0)
    vols = (0.15, 1.0) if quick else (0.05, 0.15, 0.4, 1.0, 2.5)
    rates = ((0.05, 0.0), (0.01, 0.06)) if quick else ((0.05, 0.0), (0.01, 0.06), (0.03, 0.03))
    return [(Option(kind, 100.0, t), Market(100.0 * m, r, v, q))
            for kind, m, t, v, (r, q) in itertools.product(("put", "call"), moneyness,
                                                          expiries, vols, rates)]


def _best_time(fn, repeats: int) -> float:  # noqa: ANN001
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def timing(acc: str, repeats: int, verbose: bool) -> dict[str, float]:
    """Median time ratios (implied vol over one price) for :data:`CONTRACTS` at ``acc``."""
    vs_user, vs_grid, calls = [], [], []
    for opt, mkt in CONTRACTS:
        quote = price(opt, mkt, accuracy=acc).price  # also warms the compiled kernels
        t_price = _best_time(functools.partial(price, opt, mkt, accuracy=acc), repeats)
        t_grid = _best_time(functools.partial(price, opt, mkt, accuracy=acc, greeks="grid"),
                            repeats)
        t_iv = _best_time(functools.partial(implied_vol_detail, opt, mkt, quote, accuracy=acc),
                          repeats)
        vs_user.append(t_iv / t_price)
        vs_grid.append(t_iv / t_grid)
        calls.append(implied_vol_detail(opt, mkt, quote, accuracy=acc).price_calls)
        if verbose:
            print(f"  {opt} {mkt}: price {1e3 * t_price:.2f} ms (grid Greeks only "
                  f"{1e3 * t_grid:.2f} ms), implied vol {1e3 * t_iv:.2f} ms, {calls[-1]} calls")
    print(f"{acc:8s} implied vol time / price time: median {statistics.median(vs_user):.2f} "
          f"(range {min(vs_user):.2f}-{max(vs_user):.2f}); / price with grid Greeks only: "
          f"median {statistics.median(vs_grid):.2f} (range {min(vs_grid):.2f}-"
          f"{max(vs_grid):.2f}); price calls {calls}")
    return {"vs_user": statistics.median(vs_user), "vs_grid": statistics.median(vs_grid),
            "vs_grid_max": max(vs_grid)}


def call_counts(quick: bool) -> dict[str, float]:
    """Price calls per implied vol at "standard" over :func:`_grid`."""
    calls, refused = [], 0
    for opt, mkt in _grid(quick):
        quote = price(opt, mkt, greeks="grid").price
        try:
            calls.append(implied_vol_detail(opt, mkt, quote).price_calls)
        except ImpliedVolError:
            refused += 1
    calls.sort()
    over = sum(c > TARGET_PRICES for c in calls)
    out = {"n": len(calls), "median": statistics.median(calls),
           "p90": calls[int(0.9 * (len(calls) - 1))], "max": calls[-1], "over": over}
    print(f"standard price calls over {len(calls)} contracts ({refused} quotes at their lower "
          f"bound refused): median {out['median']:g}, 90th percentile {out['p90']}, max "
          f"{out['max']}; {over} ({100.0 * over / len(calls):.1f} %) above {TARGET_PRICES:g}")
    return out


def main(repeats: int = 15, verbose: bool = False, quick: bool = False) -> None:
    results = {}
    for acc in ("fast", "standard", "fine"):
        reps = repeats if acc != "fine" else max(3, repeats // 5)
        results[acc] = timing(acc, reps, verbose)
    counts = call_counts(quick)
    std = results["standard"]
    verdict = "met" if std["vs_grid"] <= TARGET_PRICES else "NOT met"
    print(f"target: one implied vol at standard costs <= {TARGET_PRICES:g} prices: {verdict} "
          f"(median {std['vs_grid']:.2f} prices with grid Greeks only, "
          f"{std['vs_user']:.2f} prices as price() is called by default; median "
          f"{counts['median']:g} price calls over the grid, "
          f"{counts['over']} of {counts['n']} contracts above {TARGET_PRICES:g})")


if __name__ == "__main__":
    import sys

    args = sys.argv[1:]
    main(repeats=5 if "--quick" in args else 15, verbose="-v" in args, quick="--quick" in args)
