"""Calls solved through puts: put-call symmetry (American) and parity (European).

A call's grid values grow like the spot; once ``vol^2 T`` is large, or the spot is far above
the strike, the call's own grid loses the price (a European call at vol 500 % over 50 years
came out as 0 with an error estimate of 1e52). :mod:`stopline.symmetry` solves the put
instead and maps it back.
"""

from __future__ import annotations

import math

import pytest

from stopline import Market, Option, price
from stopline.solve import problem_from_market
from stopline.symmetry import SYMMETRY_MIN_SD, use_parity, use_symmetry

from ._bsm import bsm


@pytest.mark.parametrize("m", [0.01, 1.0, 100.0])
@pytest.mark.parametrize("r,q", [(0.25, 0.0), (-0.05, 0.25)])
def test_european_call_at_huge_variance_matches_black_scholes(m: float, r: float, q: float) -> None:
    # Source: Black-Scholes-Merton closed form (tests/_bsm.py); 1e-6 of the strike is the
    # "standard" preset's target
    k, s, t, v = 100.0, 100.0 * m, 50.0, 5.0
    res = price(Option("call", k, t, style="european"), Market(s, r, v, q))
    ex = bsm("call", s, k, t, r, q, v)
    assert res.price == pytest.approx(ex["price"], abs=1e-6 * k)
    assert res.delta == pytest.approx(ex["delta"], abs=1e-6)
    assert math.isfinite(res.error_estimate) and res.error_estimate < 1e-6 * k


@pytest.mark.parametrize("m,t,v,r,q", [(32.2, 11.55, 0.6412, 0.004, 0.196), (3.0, 1.0, 0.3, 0.05, 0.02)])
def test_deep_in_the_money_european_call_by_parity(m: float, t: float, v: float, r: float, q: float) -> None:
    # Source: Black-Scholes-Merton closed form (tests/_bsm.py). The first case, found by the
    # domain study, was 1.35e-5 of the strike off at "standard" on the call's own grid.
    k = 100.0
    s = k * m
    opt = Option("call", k, t, style="european")
    assert use_parity(problem_from_market(opt, Market(s, r, v, q), t))
    res = price(opt, Market(s, r, v, q))
    ex = bsm("call", s, k, t, r, q, v)
    assert res.price == pytest.approx(ex["price"], abs=1e-6 * k)
    assert res.delta == pytest.approx(ex["delta"], abs=1e-6)
    assert res.gamma == pytest.approx(ex["gamma"], rel=1e-4)
    # parity holds to rounding against the put solved on the same grid
    put = price(Option("put", k, t, style="european"), Market(s, r, v, q))
    fwd = s * math.exp(-q * t) - k * math.exp(-r * t)
    assert res.price - put.price == pytest.approx(fwd, abs=1e-9 * k)


@pytest.mark.parametrize("m,t,v,r,q", [(1.0, 10.0, 1.2, 0.05, 0.08), (0.5, 36.4, 1.12, -0.015, 0.204)])
def test_american_call_equals_symmetric_put_on_the_same_grid(
    m: float, t: float, v: float, r: float, q: float
) -> None:
    # McDonald and Schroder (1998), J. Comput. Finance 1(3): C(S, K, r, q) = P(K, S, q, r),
    # exact; with S <= K the call is solved on the put's own nodes (no refinement by
    # sqrt(S / K)), so the two differ only by the
    # read-off, which interpolates e^x p(-x) instead of p (measured 1.6e-8 of the strike)
    k = 100.0
    s = k * m
    assert v * math.sqrt(t) >= SYMMETRY_MIN_SD
    opt = Option("call", k, t)
    assert use_symmetry(problem_from_market(opt, Market(s, r, v, q), t))
    c = price(opt, Market(s, r, v, q), greeks="grid")
    p = price(Option("put", s, t), Market(k, q, v, r), greeks="grid")
    assert c.price == pytest.approx(p.price, abs=1e-7 * k)
    # the call's delta against a central difference of its own prices in the spot
    ds = 1e-3 * s
    up = price(opt, Market(s + ds, r, v, q), greeks="grid").price
    dn = price(opt, Market(s - ds, r, v, q), greeks="grid").price
    assert c.delta == pytest.approx((up - dn) / (2 * ds), abs=1e-4)
    # a boundary above the strike, non-decreasing in time to expiry where it is finite
    b = c.boundary.spot[math.isfinite(c.boundary.spot[0]):]
    finite = b[[math.isfinite(x) for x in b]]
    assert finite.size and (finite > k).all()
    assert (finite[1:] >= finite[:-1]).all()


def test_symmetric_american_call_greeks_match_the_put() -> None:
    # McDonald and Schroder (1998): vega is the same for C(S, K, r, q) and P(K, S, q, r); the
    # put's vega is a tangent (no bump), the call's a bumped re-solve on the swapped grids.
    # Rho against a central difference of the call's own prices (bump 1e-3 each way).
    k, s, t, v, r, q = 100.0, 120.0, 20.0, 0.8, 0.03, 0.04
    c = price(Option("call", k, t), Market(s, r, v, q))
    p = price(Option("put", s, t), Market(k, q, v, r))
    assert c.vega == pytest.approx(p.vega, rel=1e-3)
    up = price(Option("call", k, t), Market(s, r + 1e-3, v, q), greeks="grid").price
    dn = price(Option("call", k, t), Market(s, r - 1e-3, v, q), greeks="grid").price
    assert c.rho == pytest.approx((up - dn) / 2e-3, rel=1e-2)
    assert all(math.isfinite(x) for x in (c.theta, c.gamma, c.delta))


def test_deep_in_the_money_american_call_on_a_refined_put_grid() -> None:
    # found by the domain study: a call 3.6 times in the money at vol sqrt(T) = 6.8 was
    # 1.7e-4 of the strike off at "fast"; the put's grid is now refined by sqrt(S / K).
    # Reference: the same call at "fine" (the study's twice-finer grid agrees with it to
    # 1.1e-6 of the strike, and with the perpetual value, a close bound here, to 1e-7)
    k, t, v, r, q = 100.0, 36.43, 1.1215, -0.01475, 0.2041
    s = 3.6417 * k
    ref = price(Option("call", k, t), Market(s, r, v, q), accuracy="fine", greeks="grid").price
    for acc, tol in (("fast", 1e-4), ("standard", 1e-5)):
        res = price(Option("call", k, t), Market(s, r, v, q), accuracy=acc, greeks="grid")
        assert res.price == pytest.approx(ref, abs=tol * k), acc
