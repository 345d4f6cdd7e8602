"""price(): European against closed forms, American against identities and published tables."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from stopline import GridSpec, InputError, Market, Option, ProjectedSOR, Result, price

from ._bsm import bsm

PRESET_TOL = {"fast": 1e-4, "standard": 1e-6, "fine": 1e-8}

# A parameter grid over the "typical contracts" of the presets' definition.
EURO_GRID = list(
    itertools.product(
        ("put", "call"),
        (75.0, 100.0, 125.0),  # spot, strike 100
        (0.1, 1.0, 2.5),  # expiry
        (0.15, 0.45),  # vol
        ((0.05, 0.0), (0.02, 0.06)),  # (rate, yield)
    )
)


@pytest.mark.parametrize("accuracy", ["fast", "standard"])
def test_european_matches_black_scholes_merton(accuracy: str) -> None:
    # Source: Black-Scholes (1973) / Merton (1973) closed form, scipy.stats.norm.
    worst = 0.0
    for kind, s, t, v, (r, q) in EURO_GRID:
        res = price(Option(kind, 100.0, t, style="european"), Market(s, r, v, q), accuracy=accuracy)
        worst = max(worst, abs(res.price - bsm(kind, s, 100.0, t, r, q, v)["price"]) / 100.0)
    assert worst <= PRESET_TOL[accuracy]


def test_european_fine_matches_black_scholes_merton() -> None:
    # Source: Black-Scholes (1973) / Merton (1973) closed form; a sample of the grid (cost).
    for kind, s, t, v, (r, q) in EURO_GRID[::7]:
        res = price(Option(kind, 100.0, t, style="european"), Market(s, r, v, q), accuracy="fine")
        assert abs(res.price - bsm(kind, s, 100.0, t, r, q, v)["price"]) <= 1e-8 * 100.0


def test_result_type_is_always_the_same() -> None:
    # common practice: one result type whatever the options
    a = price(Option("put", 100, 0.5), Market(100, 0.05, 0.2), accuracy="fast")
    b = price(Option("call", 100, 0.5, style="european"), Market(100, 0.05, 0.2), method="psor")
    c = price(Option("put", 100, 0.0), Market(90, 0.05, 0.2))
    assert type(a) is type(b) is type(c) is Result
    assert c.price == pytest.approx(10.0) and c.stats.space_points == 0


def test_put_call_parity_european() -> None:
    # Source: put-call parity, C - P = S e^{-qT} - K e^{-rT} (Stoll 1969); common practice.
    s, k, t, r, q, v = 97.0, 100.0, 0.8, 0.04, 0.015, 0.3
    c = price(Option("call", k, t, "european"), Market(s, r, v, q)).price
    p = price(Option("put", k, t, "european"), Market(s, r, v, q)).price
    assert c - p == pytest.approx(s * math.exp(-q * t) - k * math.exp(-r * t), abs=2e-6 * k)


@pytest.mark.parametrize("s", [80.0, 100.0, 120.0])
def test_american_call_without_dividends_is_european(s: float) -> None:
    # Source: Merton (1973): never exercise a call early on a non-paying stock.
    am = price(Option("call", 100.0, 1.0), Market(s, 0.05, 0.2)).price
    eu = bsm("call", s, 100.0, 1.0, 0.05, 0.0, 0.2)["price"]
    assert am == pytest.approx(eu, abs=1e-6 * 100.0)


def test_merton_value_of_reference_call() -> None:
    # Source: REFERENCE_VALUES.md, closed form S=K=100, r=5%, vol 20%, T=1: 10.45058.
    assert price(Option("call", 100.0, 1.0), Market(100.0, 0.05, 0.2)).price == pytest.approx(10.45058, abs=1e-5)


def test_american_put_bounds(rng: np.random.Generator) -> None:
    # Source: no-arbitrage bounds (Merton 1973): American >= European, >= intrinsic, <= strike.
    for _ in range(12):
        s, t, r, q, v = rng.uniform(70, 130), rng.uniform(0.05, 3), rng.uniform(0, 0.1), rng.uniform(0, 0.08), rng.uniform(0.1, 0.6)
        am = price(Option("put", 100.0, t), Market(s, r, v, q), accuracy="fast").price
        eu = bsm("put", s, 100.0, t, r, q, v)["price"]
        assert am >= eu - 1e-4 * 100
        assert am >= max(100.0 - s, 0.0) - 1e-12
        assert am <= 100.0


@pytest.mark.parametrize("s,k,r,q,v,t", [(110.0, 100.0, 0.03, 0.07, 0.3, 1.0), (90.0, 100.0, 0.06, 0.01, 0.25, 0.5)])
def test_mcdonald_schroder_symmetry(s: float, k: float, r: float, q: float, v: float, t: float) -> None:
    # Source: McDonald & Schroder (1998), J. Comput. Finance 1(3): C(S,K,r,q) = P(K,S,q,r).
    c = price(Option("call", k, t), Market(s, r, v, q)).price
    p = price(Option("put", s, t), Market(k, q, v, r)).price
    assert c == pytest.approx(p, abs=2e-6 * k)


def test_symmetry_published_value() -> None:
    # Source: REFERENCE_VALUES.md (McDonald-Schroder 1998 example): 15.79702 both sides.
    c = price(Option("call", 100.0, 1.0), Market(110.0, 0.03, 0.3, 0.07)).price
    assert c == pytest.approx(15.79702, abs=2e-5)


@pytest.mark.parametrize("q,vol,star,value", [(0.0, 0.2, 71.4286, 12.3200), (0.02, 0.3, 47.3828, 26.8545)])
def test_perpetual_put_approached_at_long_expiry(q: float, vol: float, star: float, value: float) -> None:
    # Source: Merton (1973) perpetual American put; values in REFERENCE_VALUES.md. Finite
    # expiries rise towards it from below, the gap shrinking; at 50 years it is under 0.6 %.
    prices = [price(Option("put", 100.0, t), Market(100.0, 0.05, vol, q)) for t in (10.0, 20.0, 50.0)]
    values = [p.price for p in prices]
    assert values[0] < values[1] < values[2] <= value + 1e-4
    assert value - values[2] < 0.5 * (value - values[1])
    assert value - values[2] < 0.006 * value
    assert prices[-1].boundary.spot[-1] == pytest.approx(star, rel=5e-3)


@pytest.mark.parametrize("r,q,t", [(0.05, 0.0, 0.5), (0.03, 0.06, 0.5), (0.02, 0.08, 1.0)])
def test_put_boundary_at_expiry_limit(r: float, q: float, t: float) -> None:
    # Source: Kim (1990), the put's critical spot tends to K min(1, r/q) as time to expiry -> 0.
    # The grid ends "fine"'s width_sd (5) standard deviations below the strike, and where the
    # exercise region lies beyond it the boundary is NaN: the limit K/4 (ln 1/4 = -1.39) is
    # 6.5 sd below the strike at T = 0.5, vol 0.3, so that case takes T = 1 (4.6 sd).
    res = price(Option("put", 100.0, t), Market(100.0, r, 0.3, q), accuracy="fine")
    limit = 100.0 * min(1.0, r / q) if q > 0 else 100.0
    tau, sstar = res.boundary.time_to_expiry, res.boundary.spot
    near = tau < 2e-4
    assert near.any()
    # the boundary approaches the limit from below like sqrt(tau log tau); 1.5 % at tau < 2e-4
    assert np.all(np.abs(sstar[near] / limit - 1.0) < 0.02)
    assert np.all(sstar[near] <= limit * 1.001)


def test_textbook_american_put() -> None:
    # Source: Hull, Options, Futures, and Other Derivatives, numerical procedures chapter
    # (from memory): S = K = 50, r = 10 %, vol 40 %, 5 months; accurate value 4.2842 (+-1e-4).
    res = price(Option("put", 50.0, 5 / 12), Market(50.0, 0.10, 0.40))
    assert res.price == pytest.approx(4.2842, abs=1e-4)


# Source: Geske & Johnson (1984), J. Finance 39(5), Table I, "true" values (from memory,
# cross-checked with a fine binomial tree per REFERENCE_VALUES.md; +-1e-4).
GESKE_JOHNSON = [
    (35, 0.2, 0.0833, 0.0062), (35, 0.2, 0.3333, 0.2004), (35, 0.2, 0.5833, 0.4328),
    (40, 0.2, 0.0833, 0.8522), (40, 0.2, 0.3333, 1.5798), (40, 0.2, 0.5833, 1.9904),
    (45, 0.2, 0.0833, 5.0000), (45, 0.2, 0.3333, 5.0883), (45, 0.2, 0.5833, 5.2670),
    (35, 0.3, 0.0833, 0.0774), (35, 0.3, 0.3333, 0.6975), (35, 0.3, 0.5833, 1.2198),
    (40, 0.3, 0.0833, 1.3099), (40, 0.3, 0.3333, 2.4825), (40, 0.3, 0.5833, 3.1696),
    (45, 0.3, 0.0833, 5.0597), (45, 0.3, 0.3333, 5.7056), (45, 0.3, 0.5833, 6.2436),
    (35, 0.4, 0.0833, 0.2466), (35, 0.4, 0.3333, 1.3460), (35, 0.4, 0.5833, 2.1549),
    (40, 0.4, 0.0833, 1.7681), (40, 0.4, 0.3333, 3.3874),
    # recalled entry 1.1e-4 below the converged 4.35271 (Leisen-Reimer and BBSR trees of
    # stopline.reference agree to 2e-6): kept at the stated tolerance, expected to fail
    pytest.param(40, 0.4, 0.5833, 4.3526, marks=pytest.mark.xfail(strict=True, reason="recalled value off by 1.1e-4")),
    (45, 0.4, 0.0833, 5.2868),
    # recalled 6.5099 sits 1.0e-4 above the converged 6.50980 (which rounds to 6.5098): at the
    # edge of the stated tolerance; the case is checked against an independent tree below
    pytest.param(45, 0.4, 0.3333, 6.5099, marks=pytest.mark.xfail(strict=False, reason="recalled value at the tolerance edge")),
    (45, 0.4, 0.5833, 7.3830),
]


@pytest.mark.parametrize("k,vol,t,expected", GESKE_JOHNSON)
def test_geske_johnson_table(k: float, vol: float, t: float, expected: float) -> None:
    res = price(Option("put", float(k), t), Market(40.0, 0.0488, vol))
    assert res.price == pytest.approx(expected, abs=1.0e-4)


@pytest.mark.parametrize("k,vol,t", [(45.0, 0.4, 0.3333), (40.0, 0.4, 0.5833)])
def test_geske_johnson_doubtful_entries_against_tree(k: float, vol: float, t: float) -> None:
    # Source: Leisen & Reimer (1996) binomial tree with two-step extrapolation
    # (stopline.reference, independent of the PDE), 2001 steps: ~1e-6 relative.
    from stopline.reference import lr_extrapolated_price

    tree = lr_extrapolated_price("put", "american", 40.0, k, t, 0.0488, 0.0, vol, 2001)
    assert price(Option("put", k, t), Market(40.0, 0.0488, vol)).price == pytest.approx(tree, abs=2e-5)


@pytest.mark.parametrize("s,expected", [(90.0, 11.4927), (100.0, 6.0904), (110.0, 2.9865), (120.0, 1.3671)])
def test_kim_ma_choe_converged_values(s: float, expected: float) -> None:
    # Source: Kim, Ma & Choe (2013), J. Appl. Math. art. 128025, converged binomial column
    # (REFERENCE_VALUES.md, seen; +-1e-4).
    assert price(Option("put", 100.0, 1.0), Market(s, 0.05, 0.2)).price == pytest.approx(expected, abs=1e-4)


@pytest.mark.parametrize("kind,r,q", [("put", 0.05, 0.0), ("call", 0.03, 0.07), ("put", 0.02, 0.05)])
def test_direct_and_psor_agree_on_the_same_grid(kind: str, r: float, q: float) -> None:
    # common practice: both solve the same discrete complementarity problem exactly.
    opt, mkt = Option(kind, 100.0, 0.75), Market(95.0, r, 0.3, q)
    d = price(opt, mkt, grid=GridSpec(301, 80))
    p = price(opt, mkt, grid=GridSpec(301, 80), method=ProjectedSOR(tol=1e-13))
    assert p.price == pytest.approx(d.price, abs=1e-8 * 100.0)
    assert p.stats.psor_iterations > 0 and d.stats.psor_iterations == 0


def test_psor_reports_convergence_failure() -> None:
    # common practice: an iteration cap that is hit is an error, not a silent answer.
    from stopline import ConvergenceError

    with pytest.raises(ConvergenceError, match="PSOR did not converge"):
        price(Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.2), method=ProjectedSOR(max_iter=2))


def test_error_estimate_bounds_actual_error_on_european() -> None:
    # Source: Black-Scholes-Merton closed form; the two-grid estimate should not be optimistic.
    for kind, s, t, v, (r, q) in EURO_GRID[::5]:
        res = price(Option(kind, 100.0, t, style="european"), Market(s, r, v, q), accuracy="fast")
        assert abs(res.price - bsm(kind, s, 100.0, t, r, q, v)["price"]) <= max(res.error_estimate, 1e-7)


def test_expiry_as_date_uses_act365() -> None:
    # common practice: ACT/365 fixed year fraction from the valuation date.
    import datetime as dt

    res = price(Option("put", 100.0, "2027-06-01"), Market(100.0, 0.05, 0.2, valuation_date=dt.date(2026, 12, 1)))
    assert res.time_to_expiry == pytest.approx(182 / 365)
    same = price(Option("put", 100.0, 182 / 365), Market(100.0, 0.05, 0.2))
    assert res.price == pytest.approx(same.price, abs=1e-12)


def test_grid_greeks_skip_the_bumped_solves() -> None:
    # common practice: what the grid holds is identical either way; vega and rho are NaN
    opt, mkt = Option("put", 100.0, 0.5), Market(95.0, 0.05, 0.3, 0.01)
    full = price(opt, mkt)
    grid = price(opt, mkt, greeks="grid")
    assert (grid.price, grid.delta, grid.gamma, grid.theta) == (full.price, full.delta, full.gamma, full.theta)
    assert math.isnan(grid.vega) and math.isnan(grid.rho)
    assert math.isfinite(full.vega) and full.vega > 0 and full.rho < 0
    with pytest.raises(InputError, match="greeks"):
        price(opt, mkt, greeks="some")


def test_expert_grid_width_does_not_follow_the_presets(monkeypatch: pytest.MonkeyPatch) -> None:
    # Design rule (pricing.CUSTOM_WIDTH_SD): a GridSpec grid spans its own fixed width, so the
    # benchmarks' reference grids do not move when a preset is tuned.
    import dataclasses

    from stopline import pricing

    opt, mkt = Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.3)
    before = price(opt, mkt, grid=GridSpec(401, 100), greeks="grid")
    wide = dataclasses.replace(pricing.PRESETS["standard"], width_sd=9.0)
    monkeypatch.setitem(pricing.PRESETS, "standard", wide)
    after = price(opt, mkt, grid=GridSpec(401, 100), greeks="grid")
    assert after.stats.domain == before.stats.domain
    assert after.price == before.price
    # the domain reaches CUSTOM_WIDTH_SD standard deviations beyond the strike on either side
    sd = 0.3
    assert math.log(before.stats.domain[0] / 100.0) <= -pricing.CUSTOM_WIDTH_SD * sd + 1e-12
    assert math.log(before.stats.domain[1] / 100.0) >= pricing.CUSTOM_WIDTH_SD * sd - 1e-12
