"""Two measurements behind the cross-check's cost per row (what could be cut, and why not).

1. ``--ex-dates``: a cash-dividend grid restarts its grading (and the Rannacher half steps)
   at every ex-date, its levels shared by the square root of each segment's length
   (:func:`stopline.solve.time_grid_for`, :func:`stopline.grid.split_levels`), so a row with
   four ex-dates has about twice the steps of a flat one. The study prices random American
   contracts with cash dividends at "standard" on those grids and on grids without the
   restart (the same ex-date levels, Rannacher only at expiry, levels shared by length),
   and compares both with the "fine" preset on the current grids (checked against "fine"
   on the other grids: they agree to about 1e-8 of the strike).
2. ``--fixed-grid``: the implied-vol search's first step from a row's own price is Halley's
   with the exact (tangent) vega of the discrete solution on that price's grid, but the
   price at the new vol is solved on a grid re-sized for it. For the flat American rows of
   the demo book, the residual of that step against the quote is measured on the re-sized
   grid (what ``price()`` gives) and on the grid held at the start's layout, in units of
   the search's tolerance (1e-10 x strike at "standard").

    python benchmarks/crosscheck_time_study.py --ex-dates --fixed-grid

Both monkeypatch pricing internals for the alternative; nothing is changed on disk.
"""

from __future__ import annotations

import argparse
import csv
import tempfile
from dataclasses import replace
from pathlib import Path

import numpy as np

import stopline.implied as imp
import stopline.pricing as pricing
import stopline.solve as solve
from stopline import Market, Option, price
from stopline.crosscheck import parse_quote, read_book
from stopline.grid import build_segmented_time_grid, split_levels

ROOT = Path(__file__).resolve().parent.parent
_CURRENT = solve.time_grid_for


def _no_restart(problem, levels):
    """Ex-date levels kept; Rannacher only at expiry; later segments graded, shared by length."""
    expiry = problem.expiry
    ex = problem.dividend_tau if problem.has_events else ()
    ends = sorted(t for t in ex if 1e-12 < t < expiry * (1.0 - 1e-12))
    if not ends or problem.curves is not None:
        return _CURRENT(problem, levels)
    bounds = (*ends, expiry)
    restart = (True,) + (False,) * len(ends)
    return build_segmented_time_grid(bounds, restart, split_levels(bounds, levels, restart))


def _use(grids) -> None:
    pricing.time_grid_for = grids
    pricing._event_time_grids.cache_clear()


def ex_dates(seed: int, n: int, scale: float) -> None:
    rng = np.random.default_rng(seed)
    cases = []
    for i in range(n):
        kind = ("put", "call")[i % 2]
        t = float(rng.choice([0.05, 0.1, 0.25, 0.5, 1.0, 2.0, 5.0]))
        nd = int(rng.integers(1, 6))
        when = np.sort(np.clip(rng.uniform(0.0, 1.0, nd), 0.005, 0.995)) * t
        divs = tuple((float(w), float(rng.uniform(0.05, 1.0) * scale)) for w in when)
        mkt = Market(100.0, float(rng.uniform(-0.01, 0.10)), float(rng.uniform(0.08, 0.8)),
                     float(rng.choice([0.0, 0.0, 0.02])), dividends=divs,
                     dividend_model="escrowed" if i % 3 == 0 else "spot")
        cases.append((Option(kind, float(rng.uniform(60, 160)), t), mkt))
    _use(_CURRENT)
    ref = np.array([price(o, m, accuracy="fine", greeks="grid").price for o, m in cases])
    strikes = np.array([o.strike for o, _ in cases])
    calls = np.array([not o.is_put for o, _ in cases])
    for name, grids in (("restart at ex-dates (current)", _CURRENT),
                        ("no restart", _no_restart)):
        _use(grids)
        res = [price(o, m, greeks="grid") for o, m in cases]
        err = np.abs(np.array([r.price for r in res]) - ref) / strikes
        steps = np.mean([r.stats.time_steps for r in res])
        print(f"  {name:30s} steps {steps:4.0f}; error / K: max puts {err[~calls].max():.1e}, "
              f"calls {err[calls].max():.1e}; above 1e-6: {int((err > 1e-6).sum())}/{n}")
    _use(_CURRENT)


def fixed_grid() -> None:
    with (ROOT / "examples" / "demo_quotes.csv").open(newline="") as fh:
        raw = [r for r in csv.DictReader(fh) if r["style"] == "american" and r["planted"] == ""]
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "book.csv"
        with path.open("w", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=list(raw[0]))
            w.writeheader()
            w.writerows(raw)
        lines = [parse_quote(r) for r in read_book(path)[1]]
    lines = [ln for ln in lines if not ln.market.dividends]
    real = pricing._preset_layout

    def at_layout(o, m, vol, layout_vol):
        def held(x_spot, t, r, q, v, american, preset, frame="x"):
            return real(x_spot, t, r, q, layout_vol, american, preset, frame)
        pricing._preset_layout = held
        try:
            t = o.time_to_expiry(m.valuation_date)
            return pricing._price_pair(o, replace(m, vol=vol), t, "standard", "grid",
                                       pricing.DirectSweep()).price
        finally:
            pricing._preset_layout = real

    resized, held = [], []
    for ln in lines:
        o, m, q = ln.option, ln.market, ln.quote
        start = price(o, m, greeks="vega")
        t = start.time_to_expiry
        s_eff, r_avg, q_avg = imp._flat_equivalents(m, t)
        euro = imp._EuropeanModel(o.is_put, s_eff, o.strike, t, r_avg, q_avg)
        v1 = imp._halley(m.vol, start.price - q, start.vega, euro)
        ftol = imp.PRICE_TOLERANCE["standard"] * o.strike
        resized.append(abs(price(o, replace(m, vol=v1), greeks="grid").price - q) / ftol)
        held.append(abs(at_layout(o, m, v1, m.vol) - q) / ftol)
    for name, r in (("re-sized grid (price())", resized), ("grid held at the start", held)):
        r = np.array(r)
        print(f"  {name:26s}: first step misses the tolerance on {int((r > 1).sum())}/{r.size} "
              f"rows; largest residual {r.max():.0f} x tolerance")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--ex-dates", action="store_true")
    ap.add_argument("--fixed-grid", action="store_true")
    ap.add_argument("--contracts", type=int, default=120)
    args = ap.parse_args()
    if args.ex_dates:
        for seed, scale in ((1, 1.0), (2, 6.0)):
            print(f"ex-dates: {args.contracts} American contracts, dividends up to "
                  f"{scale:g} per 100 of spot each (seed {seed}); 'standard' against 'fine'")
            ex_dates(seed, args.contracts, scale)
    if args.fixed_grid:
        print("implied vol, Halley's first step from the row's price (flat American rows of "
              "the demo book):")
        fixed_grid()
    if not (args.ex_dates or args.fixed_grid):
        ap.print_help()


if __name__ == "__main__":
    main()
