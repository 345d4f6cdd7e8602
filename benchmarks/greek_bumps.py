"""Vega and rho: accuracy against cost of where the bumped prices are solved.

Run: ``python benchmarks/greek_bumps.py`` (from the repository, with stopline installed or
``PYTHONPATH=src``). Prints, at ``accuracy="standard"``:

- the cost of ``price()`` now (with vega and rho) against the two solves of the price alone;
- the worst vega / rho errors of two placements of the bumped solves:
  "pair" (the price's own coarse and fine grids; what ``price()`` does for American
  options) and "coarse+half" (the coarse grid and one with half its resolution; about 2x
  cheaper), on European contracts against the closed forms and on American ones against
  central differences of "fine" prices. (``price()`` gives Europeans their vega and rho from
  model identities instead, with no re-solve.)
"""

from __future__ import annotations

import dataclasses
import itertools
import math
import time

from scipy.stats import norm

from stopline import Market, Option, price
from stopline.exercise import get_method
from stopline.grid import SpaceGrid, build_time_grid
from stopline.pricing import _read, _resolve_grid
from stopline.solve import PDEProblem, solve

DIRECT = get_method("direct")


def bsm_vega_rho(kind: str, s: float, k: float, t: float, r: float, q: float, v: float):
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * t) / (v * math.sqrt(t))
    d2 = d1 - v * math.sqrt(t)
    vega = s * math.exp(-q * t) * norm.pdf(d1) * math.sqrt(t)
    rho = k * t * math.exp(-r * t) * (norm.cdf(d2) if kind == "call" else -norm.cdf(-d2))
    return vega, rho


def halved(space: SpaceGrid, levels: int, expiry: float):
    lo = -(-space.strike_index // 2)
    hi = -(-(space.n - 1 - space.strike_index) // 2)
    return SpaceGrid(-lo * 2 * space.h, 2 * space.h, lo + hi + 1, lo), build_time_grid(expiry, levels // 2)


def bumped(problem: PDEProblem, pair, field: str, d: float) -> float:
    out = []
    for sign in (1.0, -1.0):
        p = dataclasses.replace(problem, **{field: getattr(problem, field) + sign * d})
        lo, hi = (_read(solve(p, sg, tg, DIRECT), p, 100.0).value for sg, tg in pair)
        out.append(hi + (hi - lo) / 3.0)
    return (out[0] - out[1]) / (2.0 * d)


def placements(kind: str, s: float, t: float, r: float, q: float, v: float, american: bool):
    p = PDEProblem(kind == "put", american, t, r, q, v, math.log(s / 100.0))
    sc, tc, _ = _resolve_grid(p, "standard", None)
    pair = ((sc, tc), (sc.refined(), tc.refined()))
    half = (halved(sc, tc.levels, t), (sc, tc))
    res = {}
    for name, grids in (("pair", pair), ("coarse+half", half)):
        res[name] = (bumped(p, grids, "vol", 1e-2 * v), bumped(p, grids, "rate", 1e-3))
    return res


def main() -> None:
    euro = list(itertools.product(("put", "call"), (75.0, 100.0, 125.0), (0.1, 1.0, 2.5),
                                  (0.15, 0.45), ((0.05, 0.0), (0.02, 0.06))))
    worst = {"pair": 0.0, "coarse+half": 0.0}
    for kind, s, t, v, (r, q) in euro:
        ex = bsm_vega_rho(kind, s, 100.0, t, r, q, v)
        for name, got in placements(kind, s, t, r, q, v, False).items():
            for g, e in zip(got, ex, strict=True):
                worst[name] = max(worst[name], abs(g - e) / max(1e-3 * abs(e), 1e-3))
    print("European, worst error / (0.1 % or 1e-5 K):", {k: round(x, 3) for k, x in worst.items()})
    amer = [("put", 100.0, 1.0, 0.05, 0.0, 0.2), ("put", 90.0, 0.5, 0.08, 0.02, 0.35),
            ("call", 110.0, 1.0, 0.03, 0.07, 0.3), ("put", 100.0, 3.0, 0.05, 0.0, 0.25),
            ("put", 80.0, 0.25, 0.03, 0.0, 0.45), ("call", 100.0, 2.0, 0.02, 0.05, 0.15)]
    worst = {"pair": 0.0, "coarse+half": 0.0}
    for kind, s, t, r, q, v in amer:
        def fine(r_: float = r, v_: float = v, kind=kind, s=s, t=t, q=q) -> float:
            return price(Option(kind, 100.0, t), Market(s, r_, v_, q), accuracy="fine").price
        ref = ((fine(v_=v + 1e-3) - fine(v_=v - 1e-3)) / 2e-3, (fine(r_=r + 1e-3) - fine(r_=r - 1e-3)) / 2e-3)
        for name, got in placements(kind, s, t, r, q, v, True).items():
            for g, e in zip(got, ref, strict=True):
                worst[name] = max(worst[name], abs(g / e - 1.0))
    print("American, worst relative error vs fine differences:", {k: f"{x:.1e}" for k, x in worst.items()})
    opt = Option("put", 100.0, 1.0)
    price(opt, Market(100.0, 0.05, 0.2))
    n = 100
    t0 = time.perf_counter()
    for i in range(n):
        price(opt, Market(95.0 + 0.01 * i, 0.05, 0.2))
    full = (time.perf_counter() - t0) / n
    p = PDEProblem(True, True, 1.0, 0.05, 0.0, 0.2, 0.0)
    sc, tc, _ = _resolve_grid(p, "standard", None)
    sf, tf = sc.refined(), tc.refined()
    t0 = time.perf_counter()
    for _ in range(n):
        solve(p, sc, tc, DIRECT)
        solve(p, sf, tf, DIRECT)
    base = (time.perf_counter() - t0) / n
    print(f"standard American put: price() {1e3 * full:.2f} ms; its two base solves "
          f"{1e3 * base:.2f} ms; ratio {full / base:.1f}")


if __name__ == "__main__":
    main()
