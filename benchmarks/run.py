"""stopline's speed, measured side by side in one run and printed as one table.

Run from the repository root::

    python benchmarks/run.py            # full: about 3-4 minutes (plus references, first time)
    python benchmarks/run.py --quick    # fewer repeats and smaller side studies, about 1 minute

What it measures (all on this machine, in this run):

- time per American price at each accuracy preset (warm, one thread; median over repeats of
  the mean over a fixed seeded set of typical contracts) and the max and median error over
  that set against a very fine reference;
- the ratio of that time to bare Thomas solves on the same grids (one tridiagonal solve per
  time level and nothing else; ``stopline._kernels.thomas_repeat``);
- the ratio of the best binomial tree's time, at the same max error on a subset, to ours;
- PSOR's time over the direct sweep's at equal accuracy (same grids, same answers);
- batch throughput with 1 and 2 worker processes; implied volatility over price, when
  ``stopline.implied`` exists;
- the start of ``stopline price`` in a fresh process: cold (empty numba cache: every kernel
  compiled) and warm (kernels loaded from the on-disk cache).

The references are cached in ``benchmarks/references/`` under a key of the case set and the
reference grid, so only the first run pays for them. Results also go to
``benchmarks/results/latest.json`` (written atomically) so successive runs can be compared.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
# benchmark the checkout this script sits in, not whatever copy is installed
sys.path.insert(0, str(ROOT / "src"))
sys.path.insert(0, str(HERE))

import numpy as np  # noqa: E402

import stopline  # noqa: E402
from stopline import DirectSweep, GridSpec, Market, Option, _kernels, price  # noqa: E402
from stopline.batch import price_many  # noqa: E402
from stopline.grid import build_time_grid  # noqa: E402

SEED = 20261201
N_CASES = 200
STRIKE = 100.0
REF_GRID = (12001, 6000)  # the reference: fine grid of the Richardson pair
CHECK_GRID = (8001, 4000)  # a second very fine grid: how accurate is the reference itself
PRESET_NAMES = ("fast", "standard", "fine")
TARGETS = {  # (max error / strike, time per price in ms)
    "fast": (1e-4, 0.05),
    "standard": (1e-6, 0.3),
    "fine": (1e-8, 5.0),
}


# ---------------------------------------------------------------------------------------------
# cases and references
# ---------------------------------------------------------------------------------------------


def make_cases(n: int = N_CASES, seed: int = SEED) -> list[dict]:
    """Typical American contracts: K = 100, S ~ U[70, 130], vol ~ U[0.1, 0.6], T ~ U[0.05, 3],
    r ~ U[0, 0.1], q ~ U[0, 0.08]; puts and calls alternate."""
    rng = np.random.default_rng(seed)
    cases = []
    for i in range(n):
        cases.append({
            "kind": "put" if i % 2 == 0 else "call",
            "spot": float(rng.uniform(70.0, 130.0)),
            "vol": float(rng.uniform(0.1, 0.6)),
            "expiry": float(rng.uniform(0.05, 3.0)),
            "rate": float(rng.uniform(0.0, 0.1)),
            "div_yield": float(rng.uniform(0.0, 0.08)),
        })
    return cases


def to_objects(case: dict, style: str = "american") -> tuple[Option, Market]:
    opt = Option(case["kind"], STRIKE, case["expiry"], style=style)
    mkt = Market(case["spot"], case["rate"], case["vol"], div_yield=case["div_yield"])
    return opt, mkt


def bsm(case: dict) -> float:
    """Black-Scholes-Merton European price (closed form)."""
    s, k, t = case["spot"], STRIKE, case["expiry"]
    r, q, v = case["rate"], case["div_yield"], case["vol"]
    sq = v * math.sqrt(t)
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * t) / sq
    d2 = d1 - sq

    def n(x: float) -> float:
        return 0.5 * math.erfc(-x / math.sqrt(2.0))

    if case["kind"] == "put":
        return k * math.exp(-r * t) * n(-d2) - s * math.exp(-q * t) * n(-d1)
    return s * math.exp(-q * t) * n(d1) - k * math.exp(-r * t) * n(d2)


#: The references are solved without the fitted boundary (plain projected Crank-Nicolson on very
#: fine grids): a discretisation independent of the default solver being measured.
PLAIN = DirectSweep(fitted=False)


def _reference_row(case: dict) -> dict:
    opt, mkt = to_objects(case)
    ref = price(opt, mkt, grid=GridSpec(*REF_GRID), method=PLAIN).price
    chk = price(opt, mkt, grid=GridSpec(*CHECK_GRID), method=PLAIN).price
    eopt, _ = to_objects(case, "european")
    eur = price(eopt, mkt, grid=GridSpec(*REF_GRID), method=PLAIN).price
    return {"ref": float(ref), "check": float(chk), "european": float(eur)}


def references(cases: list[dict], workers: int) -> list[dict]:
    """Reference prices, from the cache file when the case set and grids match."""
    key = hashlib.sha256(
        json.dumps({"cases": cases, "ref": REF_GRID, "check": CHECK_GRID}, sort_keys=True).encode()
    ).hexdigest()[:16]
    path = HERE / "references" / f"american_{len(cases)}_{key}.json"
    if path.exists():
        return json.loads(path.read_text())["rows"]
    print(f"computing {len(cases)} references on {REF_GRID[0]}x{REF_GRID[1]} grids "
          f"(once; cached in {path.relative_to(ROOT)}) ...", flush=True)
    t0 = time.perf_counter()
    with ProcessPoolExecutor(max_workers=workers) as pool:
        rows = list(pool.map(_reference_row, cases, chunksize=4))
    print(f"  done in {time.perf_counter() - t0:.0f} s", flush=True)
    _write_json(path, {"cases": cases, "ref_grid": REF_GRID, "check_grid": CHECK_GRID,
                       "rows": rows})
    return rows


def _write_json(path: Path, obj: object) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".tmp")
    with os.fdopen(fd, "w") as fh:
        json.dump(obj, fh, indent=1)
    os.replace(tmp, path)


# ---------------------------------------------------------------------------------------------
# timing helpers
# ---------------------------------------------------------------------------------------------


#: Per-call times are CPU seconds of this process (``time.process_time``): on a shared machine
#: they do not count the time other programs hold the core, which wall time would. Wall time
#: is kept alongside in the JSON.
WALL: dict[str, float] = {}


def time_per_call(fn, items: list, repeats: int, tag: str = "") -> float:  # noqa: ANN001
    """Median over ``repeats`` of the mean CPU seconds per item of ``fn(item)``, after a
    warm-up; the median wall time per item is stored in ``WALL[tag]``."""
    for it in items[: min(len(items), 4)]:
        fn(it)
    per, wall = [], []
    for _ in range(repeats):
        w0 = time.perf_counter()
        t0 = time.process_time()
        for it in items:
            fn(it)
        per.append((time.process_time() - t0) / len(items))
        wall.append((time.perf_counter() - w0) / len(items))
    if tag:
        WALL[tag] = statistics.median(wall)
    return statistics.median(per)


def preset_study(cases, objs, refs, name, repeats, method="direct", greeks="grid"):  # noqa: ANN001, ANN201
    """Prices (``greeks="grid"``: price, delta, gamma, theta; no vega/rho re-solves), their
    errors against the references, and the CPU time per price."""
    results = [price(o, m, accuracy=name, method=method, greeks=greeks) for o, m in objs]
    errs = np.array([abs(r.price - ref["ref"]) / STRIKE for r, ref in zip(results, refs, strict=True)])
    t = time_per_call(
        lambda om: price(om[0], om[1], accuracy=name, method=method, greeks=greeks), objs,
        repeats, tag=f"{name}/{method}/{greeks}/{len(objs)}",
    )
    return results, errs, t


def thomas_time(results, repeats: int, kernel=None) -> float:  # noqa: ANN001
    """Seconds per option of bare Thomas solves on the same fine and coarse grids."""
    kernel = kernel or _kernels.thomas_repeat
    dims = []
    for r in results:
        st = r.stats
        coarse_steps = build_time_grid(r.time_to_expiry, st.coarse_time_levels).dt.shape[0]
        dims.append(((st.space_points, st.time_steps), (st.coarse_space_points, coarse_steps)))
    bufs = {}

    def run(d):  # noqa: ANN001, ANN202
        for n, steps in d:
            if n not in bufs:
                bufs[n] = (np.ones(n), np.empty(n))
            rhs, out = bufs[n]
            kernel(rhs, -1.0, 3.0, -1.0, steps, out)

    return time_per_call(run, dims, repeats)


# ---------------------------------------------------------------------------------------------
# binomial trees
# ---------------------------------------------------------------------------------------------


def tree_methods() -> tuple[str, dict]:
    """The project's trees if present, else the minimal one in benchmarks/_tree.py."""
    try:
        from stopline.reference import trees  # type: ignore[attr-defined]

        # plain Cox-Ross-Rubinstein: "a binomial tree" as a desk would write one
        methods = {"CRR": (trees.crr_price, lambda n: n), "BBSR": (trees.bbsr_price, lambda n: n)}
        if hasattr(trees, "lr_extrapolated_price"):
            methods["LR-extrap"] = (trees.lr_extrapolated_price, lambda n: n // 2 - 1)
        return "stopline.reference.trees", methods
    except ImportError:
        from _tree import bbsr_price

        return "benchmarks/_tree.py (minimal numba CRR)", {"BBSR": (bbsr_price, lambda n: n)}


def tree_study(cases, refs, fd_err: float, fd_time: float, max_steps: int):  # noqa: ANN001, ANN201
    """Smallest doubling of steps at which a tree's max error on ``cases`` is <= ``fd_err``;
    time per price there (or extrapolated as steps^2 beyond ``max_steps``)."""
    source, methods = tree_methods()
    best = None
    every: dict[str, dict] = {}
    for label, (fn, steps_of) in methods.items():
        def run(c, n, fn=fn, steps_of=steps_of):  # noqa: ANN001, ANN202
            return fn(c["kind"], "american", c["spot"], STRIKE, c["expiry"], c["rate"],
                      c["div_yield"], c["vol"], steps_of(n))

        n = 64
        run(cases[0], n)  # compile
        prev = None
        while True:
            t0 = time.process_time()
            vals = [run(c, n) for c in cases]
            t = (time.process_time() - t0) / len(cases)
            err = max(abs(v - r["ref"]) / STRIKE for v, r in zip(vals, refs, strict=True))
            if err <= fd_err:
                row = {"tree": label, "steps": n, "max_error": err, "time_s": t,
                       "extrapolated": False}
                break
            if n >= max_steps:
                # error ~ C n^-p from the last two levels; time ~ n^2
                p = math.log(prev[1] / err, 2) if prev and prev[1] > err else 1.0
                p = max(p, 0.5)
                need = n * (err / fd_err) ** (1.0 / p)
                row = {"tree": label, "steps": int(need), "max_error": fd_err,
                       "time_s": t * (need / n) ** 2, "extrapolated": True, "order": p}
                break
            prev = (n, err)
            n *= 2
        row["ratio"] = row["time_s"] / fd_time
        every[label] = row
        if best is None or row["time_s"] < best["time_s"]:
            best = row
    best = dict(best)
    best["source"] = source
    best["all"] = every
    return best


# ---------------------------------------------------------------------------------------------
# batch, implied volatility, CLI start
# ---------------------------------------------------------------------------------------------


def batch_study(objs, n_options: int) -> dict:  # noqa: ANN001
    rows = [objs[i % len(objs)] for i in range(n_options)]
    opts = [o for o, _ in rows]
    mkts = [m for _, m in rows]
    out = {}
    for w in (1, 2):
        price_many(opts[:8], mkts[:8], workers=w, greeks="grid")  # warm-up
        c0 = os.times()
        t0 = time.perf_counter()
        price_many(opts, mkts, accuracy="standard", workers=w, greeks="grid")
        wall = time.perf_counter() - t0
        c1 = os.times()
        cpu = (c1.user + c1.system - c0.user - c0.system) + (
            c1.children_user + c1.children_system - c0.children_user - c0.children_system)
        # wall: what this run got; cpu: what w free cores would give (CPU seconds spread on w)
        out[w] = {"wall": n_options / wall, "cpu_bound": w * n_options / cpu}
    return out


def implied_study(objs, repeats: int) -> dict | None:  # noqa: ANN001
    try:
        from stopline import implied  # type: ignore[attr-defined]
    except ImportError:
        return None
    fn = getattr(implied, "implied_vol", None) or getattr(implied, "implied_volatility", None)
    if fn is None:
        return {"skipped": "stopline.implied has no implied_vol()"}
    from stopline.errors import StoplineError

    quotes = []
    for o, m in objs[:40]:
        q = price(o, m).price
        try:
            fn(o, m, q)
        except TypeError as exc:
            return {"skipped": f"implied_vol signature not recognised: {exc}"}
        except StoplineError:  # e.g. a quote at intrinsic value inside the exercise region
            continue
        quotes.append((o, m, q))
        if len(quotes) == 20:
            break
    t_iv = time_per_call(lambda x: fn(x[0], x[1], x[2]), quotes, repeats)
    t_px = time_per_call(lambda x: price(x[0], x[1], greeks="grid"), quotes, repeats)
    return {"time_iv_ms": 1e3 * t_iv, "time_price_ms": 1e3 * t_px, "ratio": t_iv / t_px,
            "n_quotes": len(quotes)}


CLI_ARGS = ["price", "--kind", "put", "--spot", "95", "--strike", "100", "--expiry", "0.75",
            "--rate", "0.04", "--vol", "0.3", "--div-yield", "0.01"]


def cli_study(warm_runs: int) -> dict:
    """Wall time of ``stopline price`` in a new process, on a copy of ``src`` whose numba cache
    starts empty (cold: every kernel compiled and written to the cache) and then on the same
    copy again (warm: kernels loaded from the cache)."""
    env = {k: v for k, v in os.environ.items() if k != "NUMBA_CACHE_DIR"}
    code = "from stopline.cli import main; main()"
    with tempfile.TemporaryDirectory() as tmp:
        shutil.copytree(ROOT / "src", Path(tmp) / "src",
                        ignore=shutil.ignore_patterns("__pycache__", "*.nbi", "*.nbc"))
        env["PYTHONPATH"] = str(Path(tmp) / "src")

        def run() -> float:
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-c", code, *CLI_ARGS], env=env, check=True,
                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=tmp)
            return time.perf_counter() - t0

        cold = run()
        warm = statistics.median(run() for _ in range(warm_runs))
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-c", "import numpy, numba"], env=env, check=True,
                       cwd=tmp)
        floor = time.perf_counter() - t0
    return {"cold_s": cold, "warm_s": warm, "import_numpy_numba_s": floor}


# ---------------------------------------------------------------------------------------------
# main
# ---------------------------------------------------------------------------------------------


def machine() -> dict:
    cpu = platform.processor() or ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    import numba

    try:
        usable = len(os.sched_getaffinity(0))
    except AttributeError:
        usable = os.cpu_count()
    return {"cores": os.cpu_count(), "usable_cores": usable, "cpu": cpu,
            "python": platform.python_version(), "numpy": np.__version__,
            "numba": numba.__version__, "stopline": stopline.__version__}


def fmt_ms(s: float) -> str:
    ms = 1e3 * s
    return f"{ms:.3f}" if ms < 1 else f"{ms:.2f}" if ms < 100 else f"{ms:.0f}"


def main(argv: list[str] | None = None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer repeats, smaller side studies")
    ap.add_argument("--out", type=Path, default=HERE / "results" / "latest.json")
    args = ap.parse_args(argv)
    quick = args.quick
    repeats = 3 if quick else 7
    n_tree = 12 if quick else 24
    tree_max = 4096 if quick else 16384
    n_psor = 12 if quick else 40
    n_batch = 600 if quick else 3000
    mach = machine()
    load0 = os.getloadavg()

    cases = make_cases()
    refs = references(cases, workers=mach["usable_cores"] or 1)
    objs = [to_objects(c) for c in cases]
    ref_self = max(abs(r["ref"] - r["check"]) for r in refs) / STRIKE
    ref_eur = max(abs(r["european"] - bsm(c)) for r, c in zip(refs, cases, strict=True)) / STRIKE

    rows: dict[str, dict] = {}
    for name in PRESET_NAMES:
        print(f"timing {name} ...", flush=True)
        results, errs, t = preset_study(cases, objs, refs, name, repeats)
        _, _, t_full = preset_study(cases, objs, refs, name, max(repeats // 2, 1), greeks="full")
        _, errs_plain, t_plain = preset_study(cases, objs, refs, name, repeats, method=PLAIN)
        t_thomas = thomas_time(results, repeats)
        t_fixed = thomas_time(results, repeats, _kernels.thomas_repeat_fixed_point)
        sub = slice(0, n_psor)
        _, errs_p, t_p = preset_study(cases[sub], objs[sub], refs[sub], name, max(repeats // 2, 1),
                                      method="psor")
        _, _, t_d_sub = preset_study(cases[sub], objs[sub], refs[sub], name, max(repeats // 2, 1))
        sub_t = slice(0, n_tree)
        t_fd_tree = time_per_call(
            lambda om, nm=name: price(om[0], om[1], accuracy=nm, greeks="grid"), objs[sub_t],
            repeats,
        )
        fd_err_tree = float(errs[sub_t].max())
        print(f"  binomial tree at max error {fd_err_tree:.1e} ...", flush=True)
        tree = tree_study(cases[sub_t], refs[sub_t], fd_err_tree, t_fd_tree, tree_max)
        sizes = [(r.stats.space_points, r.stats.time_steps) for r in results]
        rows[name] = {
            "time_ms": 1e3 * t,
            "time_full_greeks_ms": 1e3 * t_full,
            "max_error": float(errs.max()),
            "plain_time_ms": 1e3 * t_plain,
            "plain_max_error": float(errs_plain.max()),
            "plain_p99_error": float(np.quantile(errs_plain, 0.99)),
            "median_error": float(np.median(errs)),
            "p99_error": float(np.quantile(errs, 0.99)),
            "worst_case": cases[int(errs.argmax())],
            "fine_grid_median": [int(np.median([s[0] for s in sizes])),
                                 int(np.median([s[1] for s in sizes]))],
            "thomas_ms": 1e3 * t_thomas,
            "ratio_thomas": t / t_thomas,
            "thomas_fixed_point_ms": 1e3 * t_fixed,
            "ratio_thomas_fixed_point": t / t_fixed,
            "tree": tree,
            "psor_over_direct": t_p / t_d_sub,
            "psor_max_error": float(errs_p.max()),
            "direct_max_error_same_subset": float(errs[sub].max()),
        }

    print("batch ...", flush=True)
    batch = batch_study(objs, n_batch)
    print("implied volatility ...", flush=True)
    implied = implied_study(objs, repeats)
    print("command-line start ...", flush=True)
    cli = cli_study(3)

    report = {
        "machine": mach, "quick": quick, "repeats": repeats, "n_cases": len(cases),
        "seed": SEED, "reference": {"grid": REF_GRID, "check_grid": CHECK_GRID,
                                    "max_diff_two_grids": ref_self,
                                    "max_european_error_vs_closed_form": ref_eur},
        "presets": rows, "batch_options_per_s": batch, "implied": implied, "cli": cli,
        "n_tree_cases": n_tree, "n_psor_cases": n_psor, "n_batch": n_batch,
        "wall_time_per_call_s": WALL, "load_average": {"start": load0, "end": os.getloadavg()},
    }
    print()
    print(render(report))
    _write_json(args.out, report)
    print(f"\n(written to {args.out.relative_to(ROOT) if args.out.is_relative_to(ROOT) else args.out})")
    return report


def _ratio(x: float) -> str:
    return f"{x:.0f}x" if x >= 10 else f"{x:.2g}x"


def render(rep: dict) -> str:
    m = rep["machine"]
    P = rep["presets"]
    lines = [
        f"stopline {m['stopline']} benchmark - {m['cpu']}, {m['cores']} cores "
        f"({m['usable_cores']} usable), Python {m['python']}, numpy {m['numpy']}, "
        f"numba {m['numba']}",
        f"{rep['n_cases']} seeded typical American contracts (K=100, S~U[70,130], vol~U[.1,.6], "
        f"T~U[.05,3], r~U[0,.1], q~U[0,.08], puts and calls); times are CPU time, medians of "
        f"{rep['repeats']} repeats, warm, one thread; load average "
        f"{rep['load_average']['start'][0]:.1f} at start, {rep['load_average']['end'][0]:.1f} at end.",
        "",
    ]
    header = f"| {'measure':<46} | {'fast':>11} | {'standard':>11} | {'fine':>11} | {'target':<22} |"
    sep = "|" + "-" * 48 + "|" + ("-" * 13 + "|") * 3 + "-" * 24 + "|"
    lines += [header, sep]

    def row(label: str, vals: list[str], target: str = "") -> None:
        lines.append(f"| {label:<46} | " + " | ".join(f"{v:>11}" for v in vals)
                     + f" | {target:<22} |")

    row("time per American price, ms (greeks='grid')",
        [fmt_ms(P[n]["time_ms"] / 1e3) for n in PRESET_NAMES], "0.05 / 0.3 / 5")
    row("  with vega and rho (greeks='full'), ms",
        [fmt_ms(P[n]["time_full_greeks_ms"] / 1e3) for n in PRESET_NAMES])
    row("max error / strike (all cases)", [f"{P[n]['max_error']:.1e}" for n in PRESET_NAMES],
        "1e-4 / 1e-6 / 1e-8")
    row("99th percentile error / strike", [f"{P[n]['p99_error']:.1e}" for n in PRESET_NAMES])
    row("median error / strike", [f"{P[n]['median_error']:.1e}" for n in PRESET_NAMES])
    if all("plain_time_ms" in P[n] for n in PRESET_NAMES):
        row("plain CN sweep (no fitting), ms",
            [fmt_ms(P[n]["plain_time_ms"] / 1e3) for n in PRESET_NAMES])
        row("  its max error / strike", [f"{P[n]['plain_max_error']:.1e}" for n in PRESET_NAMES],
            "1e-4 / 1e-6 / 1e-8")
        row("  its 99th percentile error / strike",
            [f"{P[n]['plain_p99_error']:.1e}" for n in PRESET_NAMES])
    row("fine grid of the pair (median nodes x steps)",
        [f"{P[n]['fine_grid_median'][0]}x{P[n]['fine_grid_median'][1]}" for n in PRESET_NAMES])
    row("bare Thomas solves on the same grids, ms", [fmt_ms(P[n]["thomas_ms"] / 1e3)
                                                     for n in PRESET_NAMES])
    row("price / bare Thomas solves", [f"{P[n]['ratio_thomas']:.2f}x" for n in PRESET_NAMES],
        "<= 2x")
    row("price / division-free Thomas solves (tighter)",
        [f"{P[n]['ratio_thomas_fixed_point']:.2f}x" for n in PRESET_NAMES])
    row("best tree at the same max error", [P[n]["tree"]["tree"] for n in PRESET_NAMES])
    row("  its steps (~ = extrapolated)", [("~" if P[n]["tree"]["extrapolated"] else "")
                                           + str(P[n]["tree"]["steps"]) for n in PRESET_NAMES])
    row("  tree time / our time", [("~" if P[n]["tree"]["extrapolated"] else "")
                                   + _ratio(P[n]["tree"]["ratio"]) for n in PRESET_NAMES],
        ">= 100x")
    if all("CRR" in P[n]["tree"].get("all", {}) for n in PRESET_NAMES):
        crr = [P[n]["tree"]["all"]["CRR"] for n in PRESET_NAMES]
        row("plain CRR tree: steps (~ = extrapolated)",
            [("~" if c["extrapolated"] else "") + str(c["steps"]) for c in crr])
        row("  CRR time / our time", [("~" if c["extrapolated"] else "") + _ratio(c["ratio"])
                                      for c in crr], ">= 100x")
    row("psor time / direct time (same answers)", [f"{P[n]['psor_over_direct']:.1f}x"
                                                   for n in PRESET_NAMES])
    row("  psor / direct max error on that subset",
        [f"{P[n]['psor_max_error']:.0e}/{P[n]['direct_max_error_same_subset']:.0e}"
         for n in PRESET_NAMES])
    b = {int(k): v for k, v in rep["batch_options_per_s"].items()}
    row("batch, standard, grid greeks, options/s: 1 / 2", ["", f"{b[1]['wall']:.0f}/{b[2]['wall']:.0f}",
                                                     ""], ">= 3000 on 2 workers")
    row("  same, from CPU time (w free cores)",
        ["", f"{b[1]['cpu_bound']:.0f}/{b[2]['cpu_bound']:.0f}", ""])
    imp = rep["implied"]
    if imp is None:
        row("implied vol time / price time", ["", "n/a", ""], "(no stopline.implied)")
    elif "skipped" in imp:
        row("implied vol time / price time", ["", "skipped", ""], imp["skipped"][:22])
    else:
        row("implied vol time / price time", ["", f"{imp['ratio']:.1f}x", ""],
            f"{imp['time_iv_ms']:.2f} ms per vol")
    c = rep["cli"]
    row("`stopline price` start, s: cold / warm", ["", f"{c['cold_s']:.2f}/{c['warm_s']:.2f}", ""],
        "warm <= 1.5 s")
    row("  of which importing numpy+numba, s", ["", f"{c['import_numpy_numba_s']:.2f}", ""])
    lines.append("")
    ref = rep["reference"]
    lines.append(
        f"Reference: price(grid=GridSpec{tuple(ref['grid'])}, method=DirectSweep(fitted=False)); it differs from "
        f"GridSpec{tuple(ref['check_grid'])} by at most {ref['max_diff_two_grids']:.1e} x K, and "
        f"the same grid prices the European twins within {ref['max_european_error_vs_closed_form']:.1e}"
        " x K of Black-Scholes-Merton."
    )
    t = P["standard"]["tree"]
    lines.append(
        f"Trees from {t['source']}, on the first {rep['n_tree_cases']} cases (our time there "
        f"measured alike); PSOR on the first {rep['n_psor_cases']}; batch of {rep['n_batch']} "
        "options including process start-up."
    )
    return "\n".join(lines)


if __name__ == "__main__":
    main()
