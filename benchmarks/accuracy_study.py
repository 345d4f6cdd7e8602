"""How accurate the presets are over a large random set of typical American contracts.

Run from the repository root::

    python benchmarks/accuracy_study.py              # 1000 typical + 100 short + 100 near-the-money
    python benchmarks/accuracy_study.py --n 300      # a smaller typical set
    python benchmarks/accuracy_study.py --method direct   # one solver only
                                                     # (default: direct and direct-plain)

The contracts are drawn with a seed of their own (not the one of ``benchmarks/run.py``), from
the ranges the presets promise: K = 100, S ~ U[70, 130], vol ~ U[0.1, 0.6],
T ~ U[0.05, 3], r ~ U[0, 0.1], q ~ U[0, 0.08], puts and calls alternating; plus two
stress subsets drawn alike except T ~ U[0.05, 0.1] ("short") and S ~ U[97, 103] ("atm").

The references are ``price(grid=GridSpec(12001, 6000), method=DirectSweep(fitted=False))`` (the
same as ``benchmarks/run.py``: plain projected Crank-Nicolson, independent of the default),
computed over worker processes once and cached under ``/tmp`` by a key of the case set and
the reference grid. For the first 100 cases a second reference on ``GridSpec(8001, 4000)``
shows how accurate the reference itself is.

Printed, per preset and subset: max, 99th percentile and median of ``|price - ref| / K``,
how many contracts miss the preset's target, and how often the true error exceeds the
reported ``error_estimate`` (the estimate should bound or at least track the error), and by
how much at most, relative to the target.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "src"))

import numpy as np  # noqa: E402

from stopline import DirectSweep, GridSpec, Market, Option, price  # noqa: E402

SEED = 7_310_442
STRIKE = 100.0
REF_GRID = (12001, 6000)
CHECK_GRID = (8001, 4000)
N_CHECK = 100
PRESETS = ("fast", "standard", "fine")
TARGETS = {"fast": 1e-4, "standard": 1e-6, "fine": 1e-8}
CACHE = Path(os.environ.get("STOPLINE_STUDY_CACHE", tempfile.gettempdir()))


def make_cases(n: int, n_short: int, n_atm: int, seed: int = SEED) -> list[dict]:
    """Typical contracts, then the short-expiry and near-the-money subsets."""
    rng = np.random.default_rng(seed)
    cases = []
    for group, count in (("typical", n), ("short", n_short), ("atm", n_atm)):
        for i in range(count):
            spot = rng.uniform(97.0, 103.0) if group == "atm" else rng.uniform(70.0, 130.0)
            expiry = rng.uniform(0.05, 0.1) if group == "short" else rng.uniform(0.05, 3.0)
            cases.append({
                "group": group,
                "kind": "put" if i % 2 == 0 else "call",
                "spot": float(spot),
                "vol": float(rng.uniform(0.1, 0.6)),
                "expiry": float(expiry),
                "rate": float(rng.uniform(0.0, 0.1)),
                "div_yield": float(rng.uniform(0.0, 0.08)),
            })
    return cases


def objects(case: dict) -> tuple[Option, Market]:
    opt = Option(case["kind"], STRIKE, case["expiry"])
    mkt = Market(case["spot"], case["rate"], case["vol"], div_yield=case["div_yield"])
    return opt, mkt


#: Solvers by name: the default, and the plain projected Crank-Nicolson sweep (no fitted
#: boundary), which also solves the references (a discretisation independent of the default).
SOLVERS = {"direct": "direct", "psor": "psor", "direct-plain": DirectSweep(fitted=False)}


def _reference(args: tuple[dict, bool]) -> dict:
    case, check = args
    opt, mkt = objects(case)
    plain = SOLVERS["direct-plain"]
    row = {"ref": price(opt, mkt, grid=GridSpec(*REF_GRID), greeks="grid", method=plain).price}
    if check:
        row["check"] = price(opt, mkt, grid=GridSpec(*CHECK_GRID), greeks="grid",
                             method=plain).price
    return row


def references(cases: list[dict], workers: int) -> list[dict]:
    """Reference prices, cached under ``CACHE`` by a key of the cases and the grids."""
    key = hashlib.sha256(
        json.dumps({"cases": cases, "ref": REF_GRID, "check": CHECK_GRID, "n_check": N_CHECK},
                   sort_keys=True).encode()
    ).hexdigest()[:16]
    path = CACHE / f"stopline_accuracy_study_{len(cases)}_{key}.json"
    if path.exists():
        return json.loads(path.read_text())["rows"]
    print(f"computing {len(cases)} references on {REF_GRID[0]}x{REF_GRID[1]} grids over "
          f"{workers} workers (cached in {path}) ...", flush=True)
    t0 = time.perf_counter()
    with ProcessPoolExecutor(max_workers=workers) as pool:
        rows = list(pool.map(_reference, [(c, i < N_CHECK) for i, c in enumerate(cases)],
                             chunksize=4))
    print(f"  done in {time.perf_counter() - t0:.0f} s", flush=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".tmp")
    with os.fdopen(fd, "w") as fh:
        json.dump({"cases": cases, "rows": rows}, fh)
    os.replace(tmp, path)
    return rows


def study(cases: list[dict], refs: list[dict], presets: tuple[str, ...],
          method: str = "direct") -> dict:
    """Errors / strike, error estimates / strike (shape (n_cases,) each) and node-steps per
    preset (:func:`node_steps`, summed over the cases)."""
    out = {}
    for name in presets:
        err, est, work = [], [], 0.0
        for case, ref in zip(cases, refs, strict=True):
            opt, mkt = objects(case)
            r = price(opt, mkt, accuracy=name, method=SOLVERS[method], greeks="grid")
            err.append(abs(r.price - ref["ref"]) / STRIKE)
            est.append(r.error_estimate / STRIKE)
            work += node_steps(r.stats)
        out[name] = (np.array(err), np.array(est), work)
    return out


def node_steps(stats) -> float:  # noqa: ANN001 - a SolveStats
    """Space nodes times time steps over both grids of the pair, a machine-independent
    measure of the work of a price (the coarse grid's steps are its levels scaled by the
    fine grid's ratio of steps to levels, i.e. its Rannacher half steps counted alike)."""
    per_level = stats.time_steps / stats.time_levels
    return (stats.space_points * stats.time_steps
            + stats.coarse_space_points * stats.coarse_time_levels * per_level)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, default=1000, help="typical contracts (default 1000)")
    ap.add_argument("--short", type=int, default=100, help="short-expiry contracts")
    ap.add_argument("--atm", type=int, default=100, help="near-the-money contracts")
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--presets", default=",".join(PRESETS))
    ap.add_argument("--method", default="direct,direct-plain",
                    help="solvers to study, comma separated: direct, psor, direct-plain "
                         "(default: direct,direct-plain)")
    ap.add_argument("--worst", type=int, default=0, help="list the worst contracts per preset")
    args = ap.parse_args(argv)
    cases = make_cases(args.n, args.short, args.atm)
    refs = references(cases, args.workers)
    checks = [abs(r["ref"] - r["check"]) / STRIKE for r in refs if "check" in r]
    presets = tuple(args.presets.split(","))
    methods = tuple(args.method.split(","))
    res = {(m, p): v for m in methods for p, v in study(cases, refs, presets, m).items()}
    groups = np.array([c["group"] for c in cases])
    kinds = np.array([c["kind"] for c in cases])
    print(f"\naccuracy study: {len(cases)} American contracts (seed {SEED}); "
          f"reference price(grid=GridSpec{REF_GRID}, plain sweep), within {max(checks):.1e} x K of "
          f"GridSpec{CHECK_GRID} on the first {len(checks)}")
    head = (f"| {'method':12} | {'preset':8} | {'subset':12} | {'n':>5} | {'max err/K':>9} | {'p99':>8} | "
            f"{'median':>8} | {'> target':>8} | {'err > est':>9} | {'miss/target':>11} |")
    print(head)
    print("|" + "|".join("-" * (len(c)) for c in head.split("|")[1:-1]) + "|")
    subsets = [("all", np.ones(len(cases), bool))]
    subsets += [(g, groups == g) for g in ("typical", "short", "atm") if (groups == g).any()]
    subsets += [(k + "s", kinds == k) for k in ("put", "call")]
    for method, name in res:
        err, est, work = res[(method, name)]
        for label, mask in subsets:
            e, s = err[mask], est[mask]
            miss = int((e > TARGETS[name]).sum())
            under = int((e > s).sum())
            ratio = float(np.max(np.maximum(e - s, 0.0))) / TARGETS[name]
            print(f"| {method:12} | {name:8} | {label:12} | {mask.sum():5d} | {e.max():9.1e} | "
                  f"{np.percentile(e, 99):8.1e} | {np.median(e):8.1e} | {miss:8d} | "
                  f"{under:9d} | {ratio:11.2f} |")
        print(f"    {method} {name}: node-steps (space nodes x time steps, both grids) "
              f"{work:.4g} in all, {work / len(cases):.4g} per contract")
        if args.worst:
            order = np.argsort(-err)[: args.worst]
            for i in order:
                c = cases[i]
                print(f"    {c['group']:7} {c['kind']:4} S={c['spot']:.2f} T={c['expiry']:.3f} "
                      f"r={c['rate']:.4f} q={c['div_yield']:.4f} vol={c['vol']:.4f}: "
                      f"err {err[i]:.2e}, estimate {est[i]:.2e}")
    print("\n'err > est': contracts whose true error exceeds the reported error_estimate; "
          "'miss/target': the largest excess of the error over the estimate, relative to the "
          "preset's target.")


if __name__ == "__main__":
    main()
