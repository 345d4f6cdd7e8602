"""Accuracy and speed of every preset over the whole supported input domain.

Run from the repository root::

    python benchmarks/domain_study.py              # ~500 contracts, a few minutes on 2 cores
    python benchmarks/domain_study.py --n 200      # fewer random contracts
    python benchmarks/domain_study.py --refresh    # recompute the cached references

The domain (issue 3): expiry 1 day to 50 years, vol 1 % to 500 %, spot / strike 0.01 to 100,
strike 0.01 to 1e6, rate -5 % to 25 %, yield 0 to 25 %; puts and calls, American and
European. Contracts are drawn at random (log-uniform in expiry, vol, moneyness and strike,
uniform in rate and yield; seeded) and every corner of the box is added (moneyness also at
1). Each is priced at "fast", "standard" and "fine" (``greeks="grid"``, warm, one process
per core) and compared with a reference:

- European: the Black-Scholes-Merton closed form (``stopline.reference.bsm_price``);
- American never exercised early (put with ``r <= 0 <= q``, call with ``q <= 0 <= r``): the
  same closed form (Merton 1973);
- American whose closed-form bounds (``stopline.perpetual.american_bounds``) pin the value
  to 1e-10 of the strike: their midpoint;
- other American: a grid twice as fine as "fine" in space and time with a wider domain (preset
  "study-ref" registered in the worker processes only, default solver), checked against an
  independent
  Leisen-Reimer tree with Richardson extrapolation (``lr_extrapolated_price``, 2001 and 4003
  steps) and, where ``vol sqrt(T)`` is tiny, against the zero-volatility limit; the table
  lists the largest disagreements between the two references so that a reference can be
  trusted only where they agree.

Errors are absolute and divided by the strike. A price is called negligible when it is
below ``NEGLIGIBLE`` (1e-6) of the strike; the table gives the worst error per preset over
all contracts and over those whose price is not negligible, next to the preset's target,
and the slowest prices. References are cached in a JSON file under /tmp keyed by the
contract, so reruns cost only the presets.
"""

from __future__ import annotations

import argparse
import functools
import itertools
import json
import math
import os
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT / "src"))

import numpy as np  # noqa: E402

SEED = 20261202
NEGLIGIBLE = 1e-6
CACHE = Path(tempfile.gettempdir()) / "stopline_domain_refs_fitted.json"
PRESET_NAMES = ("fast", "standard", "fine")
DOMAIN = {
    "moneyness": (0.01, 100.0),
    "expiry": (1 / 365, 50.0),
    "vol": (0.01, 5.0),
    "rate": (-0.05, 0.25),
    "div_yield": (0.0, 0.25),
    "strike": (0.01, 1e6),
}


def _loguniform(rng: np.random.Generator, lo: float, hi: float) -> float:
    return float(math.exp(rng.uniform(math.log(lo), math.log(hi))))


def sample(n: int, seed: int = SEED) -> list[dict]:
    """``n`` random contracts plus every corner of the domain."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        out.append({
            "kind": str(rng.choice(["put", "call"])),
            "style": str(rng.choice(["american", "european"], p=[0.7, 0.3])),
            "moneyness": _loguniform(rng, *DOMAIN["moneyness"]),
            "expiry": _loguniform(rng, *DOMAIN["expiry"]),
            "vol": _loguniform(rng, *DOMAIN["vol"]),
            "rate": float(rng.uniform(*DOMAIN["rate"])),
            "div_yield": float(rng.uniform(*DOMAIN["div_yield"])),
            "strike": _loguniform(rng, *DOMAIN["strike"]),
        })
    for kind, style, m, t, v, r, q in itertools.product(
        ("put", "call"), ("american", "european"), (0.01, 1.0, 100.0), DOMAIN["expiry"],
        DOMAIN["vol"], DOMAIN["rate"], DOMAIN["div_yield"],
    ):
        out.append({"kind": kind, "style": style, "moneyness": m, "expiry": t, "vol": v,
                    "rate": r, "div_yield": q, "strike": 100.0})
    return out


def _key(c: dict) -> str:
    return "|".join(f"{c[k]!r}" for k in
                    ("kind", "style", "moneyness", "expiry", "vol", "rate", "div_yield", "strike"))


def _setup_worker() -> None:
    from stopline import pricing

    fine = pricing.PRESETS["fine"]
    pricing.PRESETS["study-ref"] = pricing.AccuracyPreset(
        "study-ref", fine.target / 4, 2 * fine.points_per_sd, fine.width_sd + 1.5,
        2 * fine.time_levels, fine.max_spacing / 2,
    )


def _objects(c: dict):  # noqa: ANN202
    from stopline import Market, Option

    k = c["strike"]
    return (Option(c["kind"], k, c["expiry"], style=c["style"]),
            Market(k * c["moneyness"], c["rate"], c["vol"], c["div_yield"]))


def reference(c: dict) -> dict:
    """Reference price(s) of one contract, in units of the strike."""
    from stopline import price
    from stopline.reference import bsm_price, lr_extrapolated_price

    k, s = c["strike"], c["strike"] * c["moneyness"]
    args = (c["kind"], s, k, c["expiry"], c["rate"], c["div_yield"], c["vol"])
    out: dict = {"key": _key(c)}
    t0 = time.perf_counter()
    r, q = c["rate"], c["div_yield"]
    never = (r <= 0.0 <= q) if c["kind"] == "put" else (q <= 0.0 <= r)
    if c["style"] == "european" or never:
        # an American put with r <= 0 <= q (call: q <= 0 <= r) is never exercised early and
        # equals the European (Merton 1973)
        out["ref"] = float(bsm_price(*args)) / k
        out["second"] = math.nan
    else:
        opt, mkt = _objects(c)
        # the default solver on grids twice as fine as "fine": its error is a smooth function
        # of the grid, so its pair extrapolates reliably (the plain scheme's near the boundary
        # does not: it was off by up to 1e-7 x K); checked against the trees below
        out["ref"] = price(opt, mkt, accuracy="study-ref", greeks="grid").price / k
        try:
            out["second"] = lr_extrapolated_price(c["kind"], "american", s, k, *args[3:],
                                                  2001) / k
        except Exception:  # noqa: BLE001 - a reference that fails is reported as NaN
            out["second"] = math.nan
    out["ref_seconds"] = time.perf_counter() - t0
    return out


def _solver(method: str):  # noqa: ANN202
    """A solver by name: "direct" and "psor" as ``price`` takes them, "direct-plain" the direct
    sweep without the fitted boundary."""
    from stopline import DirectSweep

    return DirectSweep(fitted=False) if method == "direct-plain" else method


#: Where the perpetual bounds of an American option (stopline.perpetual) are this close, in
#: units of the strike, their midpoint is the reference: then it is exact to that, while a grid
#: reference would meet the same node cap as the grid it checks.
BOUNDS_AS_REFERENCE = 1e-10


def _bounded(c: dict, ref: dict) -> dict:
    """The reference of one contract, replaced by the midpoint of the closed-form bounds
    (``stopline.perpetual.american_bounds``: the perpetual option or the spot above; the
    European value and the perpetual exercise rule cut off at expiry below, Merton 1973)
    where they pin the value to :data:`BOUNDS_AS_REFERENCE`."""
    from stopline.perpetual import american_bounds

    if c["style"] != "american":
        return ref
    b = american_bounds(c["kind"] == "put", c["moneyness"], c["expiry"], c["rate"],
                        c["div_yield"], c["vol"])
    if b is None or b.upper - b.lower > BOUNDS_AS_REFERENCE:
        return ref
    return {**ref, "ref": 0.5 * (b.upper + b.lower), "grid_ref": ref["ref"]}


def run_presets(c: dict, method: str = "direct") -> dict:
    """Prices of one contract at every preset, in units of the strike, with timings."""
    from stopline import price

    opt, mkt = _objects(c)
    out: dict = {"key": _key(c)}
    for name in PRESET_NAMES:
        t0 = time.perf_counter()
        try:
            res = price(opt, mkt, accuracy=name, greeks="grid", method=_solver(method))
            out[name] = res.price / c["strike"]
            out[name + "_warn"] = len(res.stats.warnings)
            out[name + "_nodes"] = res.stats.space_points
            out[name + "_steps"] = res.stats.time_steps
        except Exception as exc:  # noqa: BLE001 - every failure is a finding
            out[name] = math.nan
            out[name + "_error"] = repr(exc)
        out[name + "_seconds"] = time.perf_counter() - t0
    return out


def _warm() -> None:
    from stopline import Market, Option, price

    for style in ("american", "european"):
        for name in (*PRESET_NAMES, "study-ref"):
            price(Option("put", 100.0, 1.0, style=style), Market(100.0, 0.05, 0.01, 0.2),
                  accuracy=name, greeks="grid")
            price(Option("put", 100.0, 1.0, style=style), Market(100.0, 0.05, 0.3), accuracy=name,
                  greeks="grid")


def _init() -> None:
    _setup_worker()
    _warm()


def _describe(c: dict) -> str:
    return (f"{c['kind']:4s} {c['style'][:2]} S/K={c['moneyness']:<8.4g} T={c['expiry']:<8.4g} "
            f"vol={c['vol']:<7.4g} r={c['rate']:<7.3g} q={c['div_yield']:<6.3g} K={c['strike']:.3g}")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=300, help="random contracts (corners are added)")
    ap.add_argument("--seed", type=int, default=SEED)
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--refresh", action="store_true", help="recompute cached references")
    ap.add_argument("--top", type=int, default=8, help="rows in each worst-case list")
    ap.add_argument("--only-american", action="store_true")
    ap.add_argument("--method", default="direct", help="solver: direct (default), psor or direct-plain")
    ns = ap.parse_args(argv)
    contracts = sample(ns.n, ns.seed)
    if ns.only_american:
        contracts = [c for c in contracts if c["style"] == "american"]
    cache: dict = {}
    if CACHE.exists() and not ns.refresh:
        cache = json.loads(CACHE.read_text())
    todo = [c for c in contracts if _key(c) not in cache]
    t_start = time.perf_counter()
    with ProcessPoolExecutor(ns.workers, initializer=_init) as pool:
        if todo:
            print(f"computing {len(todo)} references ...", flush=True)
            for ref in pool.map(reference, todo, chunksize=1):
                cache[ref["key"]] = ref
            tmp = CACHE.with_suffix(".tmp")
            tmp.write_text(json.dumps(cache))
            os.replace(tmp, CACHE)
        results = list(pool.map(functools.partial(run_presets, method=ns.method), contracts,
                                chunksize=1))
    print(f"{len(contracts)} contracts ({ns.n} random + corners), method {ns.method!r}, "
          f"{ns.workers} workers, "
          f"{time.perf_counter() - t_start:.0f} s wall\n")
    rows = [(c, res, _bounded(c, cache[_key(c)])) for c, res in zip(contracts, results,
                                                                      strict=True)]
    dump = Path(tempfile.gettempdir()) / "stopline_domain_rows.json"
    dump.write_text(json.dumps(rows))
    _report(rows, ns.top)
    return 0


def _report(rows: list, top: int) -> None:
    from stopline.pricing import PRESETS

    print(f"errors / strike against the reference; 'negligible' = reference price < "
          f"{NEGLIGIBLE:g} x strike\n")
    print(f"{'preset':9s} {'target':>8s} {'worst all':>10s} {'worst non-negl':>15s} "
          f"{'>1e-5':>6s} {'>target':>8s} {'failed':>6s} {'max s':>7s} {'median s':>9s}")
    for name in PRESET_NAMES:
        target = PRESETS[name].target
        errs, errs_nn, secs, failed = [], [], [], 0
        for _c, res, ref in rows:
            secs.append(res[name + "_seconds"])
            if not math.isfinite(res[name]):
                failed += 1
                continue
            e = abs(res[name] - ref["ref"])
            errs.append(e)
            if ref["ref"] >= NEGLIGIBLE:
                errs_nn.append(e)
        over5 = sum(e > 1e-5 for e in errs)
        over_t = sum(e > target for e in errs_nn)
        print(f"{name:9s} {target:8.0e} {max(errs):10.2e} {max(errs_nn):15.2e} {over5:6d} "
              f"{over_t:8d} {failed:6d} {max(secs):7.2f} {float(np.median(secs)):9.4f}")
    for name in PRESET_NAMES:
        target = PRESETS[name].target
        worst = sorted(rows, key=lambda x: -_err(x, name))[:top]
        print(f"\nworst {name} (err/K, ref/K, preset's warnings, nodes, steps, seconds):")
        for c, res, ref in worst:
            flag = "" if ref["ref"] >= NEGLIGIBLE else " negl."
            if res.get(name + "_error"):
                print(f"  {_describe(c)}  FAILED {res[name + '_error']}")
                continue
            print(f"  {_describe(c)}  err {_err((c, res, ref), name):.2e} ref {ref['ref']:.3e}"
                  f" w{res[name + '_warn']} n{res[name + '_nodes']} m{res[name + '_steps']}"
                  f" {res[name + '_seconds']:.2f}s{flag}"
                  f"{'  > target' if _err((c, res, ref), name) > target and not flag else ''}")
    print("\nslowest prices (seconds at fast / standard / fine):")
    for c, res, _ in sorted(rows, key=lambda x: -max(x[1][n + "_seconds"] for n in PRESET_NAMES))[:top]:
        print(f"  {_describe(c)}  " + " / ".join(f"{res[n + '_seconds']:.3f}" for n in PRESET_NAMES))
    print("\nreference vs independent tree (American; LR 2001/4003 extrapolated), largest gaps")
    print("(perp.: the perpetual option's value, a close bound when the chance of reaching the")
    print("boundary late in the life is nil, e.g. vol 1 % with a drift away from exercise):")
    am = [(c, ref) for c, _, ref in rows if c["style"] == "american" and math.isfinite(ref["second"])]
    for c, ref in sorted(am, key=lambda x: -abs(x[1]["ref"] - x[1]["second"]))[:top]:
        print(f"  {_describe(c)}  grid {ref['ref']:.6e} tree {ref['second']:.6e} "
              f"gap {abs(ref['ref'] - ref['second']):.1e} perp. {_perpetual(c):.6e}")


def _perpetual(c: dict) -> float:
    """Perpetual American value / strike (Merton 1973), NaN where it does not exist."""
    from stopline.reference import perpetual_american

    try:
        k = c["strike"]
        return perpetual_american(c["kind"], k * c["moneyness"], k, c["rate"], c["div_yield"],
                                  c["vol"]).value / k
    except Exception:  # noqa: BLE001 - no perpetual value (exercise never optimal)
        return math.nan


def _err(row: tuple, name: str) -> float:
    _, res, ref = row
    v = res[name]
    return abs(v - ref["ref"]) if math.isfinite(v) else math.inf


if __name__ == "__main__":
    raise SystemExit(main())
