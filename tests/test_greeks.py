"""Greeks of price(): European against closed forms, American against fine-grid differences."""

from __future__ import annotations

import functools
import itertools
import math

import numpy as np
import pytest

from stopline import DirectSweep, Market, Option, price
from stopline.greeks import fd_weights

from ._bsm import bsm

# Typical contracts (strike 100): the preset's definition of "typical".
EURO_GRID = list(
    itertools.product(
        ("put", "call"),
        (75.0, 100.0, 125.0),  # spot
        (0.1, 1.0, 2.5),  # expiry
        (0.15, 0.45),  # vol
        ((0.05, 0.0), (0.02, 0.06)),  # (rate, yield)
    )
)


def _close(num: float, exact: float, strike: float = 100.0) -> bool:
    # the tolerance: 0.1 % relative or 1e-5 x strike, whichever is larger
    return abs(num - exact) <= max(1e-3 * abs(exact), 1e-5 * strike)


@pytest.mark.parametrize("method", ["direct", "psor"])
def test_european_greeks_match_black_scholes_merton_at_standard(method: str) -> None:
    # Source: Black-Scholes (1973) / Merton (1973) closed-form Greeks (tests/_bsm.py).
    bad = []
    for kind, s, t, v, (r, q) in EURO_GRID:
        res = price(Option(kind, 100.0, t, style="european"), Market(s, r, v, q), method=method)
        ex = bsm(kind, s, 100.0, t, r, q, v)
        if abs(res.delta - ex["delta"]) > 5e-5:
            bad.append((kind, s, t, v, r, q, "delta", res.delta, ex["delta"]))
        for name in ("gamma", "theta", "vega", "rho"):
            if not _close(getattr(res, name), ex[name]):
                bad.append((kind, s, t, v, r, q, name, getattr(res, name), ex[name]))
        # 1e-5 x strike is a floor for money amounts; gamma is money per money squared, so
        # its floor in kind is 1e-5 / strike (far stricter than the literal one: measured
        # within 0.15 of it over a wider spread of 480 contracts)
        if abs(res.gamma - ex["gamma"]) > max(1e-3 * ex["gamma"], 1e-5 / 100.0):
            bad.append((kind, s, t, v, r, q, "gamma (scaled floor)", res.gamma, ex["gamma"]))
    assert not bad


#: Both solvers of the early-exercise constraint (the same fitted Crank-Nicolson scheme).
METHODS = ["direct", "psor"]

# A spread of typical American contracts: (kind, spot, strike, expiry, rate, yield, vol).
AMERICAN = [
    ("put", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2),
    ("put", 90.0, 100.0, 0.5, 0.08, 0.02, 0.35),
    ("call", 110.0, 100.0, 1.0, 0.03, 0.07, 0.3),
    ("put", 110.0, 100.0, 0.25, 0.06, 0.0, 0.25),
    ("put", 85.0, 100.0, 2.0, 0.04, 0.01, 0.3),
    ("put", 100.0, 100.0, 0.1, 0.10, 0.0, 0.45),
    ("call", 95.0, 100.0, 0.5, 0.02, 0.05, 0.2),
    ("call", 120.0, 100.0, 2.5, 0.05, 0.08, 0.4),
    ("put", 95.0, 100.0, 3.0, 0.07, 0.03, 0.15),
    ("put", 120.0, 100.0, 1.5, 0.03, 0.0, 0.6),
]
#: Before the boundary was fitted, plain projected Crank-Nicolson missed the 0.2 % on two of
#: these (measured at "standard"): the 2.5-year call's gamma by 1.7 % and theta by 4.5 %, the
#: three-year put's theta by 0.22 %; ``test_plain_crank_nicolson_misses_where_fitting_does_not``
#: keeps that visible.
PLAIN_MISSES = {
    ("call", 120.0, 100.0, 2.5, 0.05, 0.08, 0.4): "gamma 1.7 %, theta 4.5 % off",
    ("put", 95.0, 100.0, 3.0, 0.07, 0.03, 0.15): "theta 0.22 % off",
}


@functools.cache
def _fine_differences(kind: str, s: float, k: float, t: float, r: float, q: float, v: float
                      ) -> dict[str, float]:
    # common practice: central differences of "fine" prices (error ~1e-8 x strike, default
    # solver) in spot, time, vol and rate; the bumps keep their truncation error below 1e-4
    # relative, and the fine prices' error divided by the bumps stays below 1e-4 relative.
    def p(s_: float = s, t_: float = t, r_: float = r, v_: float = v) -> float:
        return price(Option(kind, k, t_), Market(s_, r_, v_, q), accuracy="fine").price

    ds, dt, dv, dr = 0.01 * s, 1e-3, 1e-3, 1e-3
    up, mid, dn = p(s_=s + ds), p(), p(s_=s - ds)
    d1, d2 = (up - dn) / (2 * ds), (p(s_=s + ds / 2) - p(s_=s - ds / 2)) / ds
    return {
        "delta": d2 + (d2 - d1) / 3,  # Richardson on the step: truncation O(ds^4)
        "gamma": (up - 2 * mid + dn) / ds**2,
        "theta": -(p(t_=t + dt) - p(t_=t - dt)) / (2 * dt),
        "vega": (p(v_=v + dv) - p(v_=v - dv)) / (2 * dv),
        "rho": (p(r_=r + dr) - p(r_=r - dr)) / (2 * dr),
    }


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("kind,s,k,t,r,q,v", AMERICAN)
def test_american_greeks_match_fine_differences(
    kind: str, s: float, k: float, t: float, r: float, q: float, v: float, method: str
) -> None:
    # the tolerance: within 0.2 % of central differences of "fine" prices, at the
    # "standard" preset, every Greek, all from one call of price().
    ref = _fine_differences(kind, s, k, t, r, q, v)
    res = price(Option(kind, k, t), Market(s, r, v, q), method=method)
    for name, want in ref.items():
        assert getattr(res, name) == pytest.approx(want, rel=2e-3), name


@pytest.mark.parametrize("case", list(PLAIN_MISSES))
def test_plain_crank_nicolson_misses_where_fitting_does_not(case: tuple) -> None:
    # Own computation (why the boundary is fitted): the plain projected Crank-Nicolson sweep
    # misses the 0.2 % on these contracts, against the same fine differences.
    kind, s, k, t, r, q, v = case
    ref = _fine_differences(kind, s, k, t, r, q, v)
    res = price(Option(kind, k, t), Market(s, r, v, q), method=DirectSweep(fitted=False))
    worst = max(abs(getattr(res, name) / want - 1) for name, want in ref.items())
    assert worst > 2e-3


@pytest.mark.parametrize("method", METHODS)
def test_gamma_is_smooth_near_the_strike_at_short_expiry(method: str) -> None:
    # Source: Black-Scholes (1973) gamma of a one-week at-the-money put; common practice for
    # ringing: a spot sweep across several grid nodes must give one positive, single-peaked
    # curve whose second differences are those of the exact gamma (a jump where the read-off
    # stencil shifts, or Crank-Nicolson ringing, would show up in them).
    t, r, v = 7 / 365, 0.05, 0.2
    spots = np.linspace(97.0, 103.0, 121)
    for style in ("european", "american"):
        g = np.array([price(Option("put", 100.0, t, style=style), Market(s, r, v), method=method).gamma
                      for s in spots])
        assert np.all(g > 0)
        peak = int(np.argmax(g))
        assert np.all(np.diff(g[: peak + 1]) > 0) and np.all(np.diff(g[peak:]) < 0)
        exact = np.array([bsm("put", s, 100.0, t, r, 0.0, v)["gamma"] for s in spots])
        d2, d2_exact = np.diff(g, 2), np.diff(exact, 2)
        if style == "european":
            assert np.max(np.abs(g / exact - 1)) < 1e-4
            assert np.max(np.abs(d2 - d2_exact)) < 0.02 * np.max(np.abs(d2_exact))
        else:  # early exercise lowers gamma a little near the money but keeps its shape
            assert np.max(np.abs(d2 - d2_exact)) < 0.2 * np.max(np.abs(d2_exact))


# Contracts whose exercise boundary lies well inside the grid: (kind, expiry, rate, yield, vol).
NEAR_BOUNDARY = [
    ("put", 1.0, 0.05, 0.0, 0.2),
    ("put", 0.5, 0.08, 0.02, 0.35),
    ("put", 3.0, 0.07, 0.03, 0.15),
    ("call", 1.0, 0.03, 0.07, 0.3),
    ("call", 2.5, 0.05, 0.08, 0.4),
]


@pytest.mark.parametrize("method", METHODS)
def test_gamma_next_to_the_boundary_follows_from_the_equation(method: str) -> None:
    # Source: on the boundary V = K - S (put), V_S = -1 (smooth pasting) and V_t = 0 (the
    # value stays the payoff as the boundary moves), so the Black-Scholes equation leaves
    # 1/2 vol^2 S*^2 gamma = r K - q S* (put) or q S* - r K (call) just inside the hold region
    # (common practice: derived here from the equation). At a spot 0.1 % inside, gamma's own
    # slope moves it by up to 0.52 % (measured at "fine" with the fitted solver; it halves
    # with the distance), so 1 %. Across the first 30 % of the hold region gamma is positive
    # (the value is convex in spot where the option is held).
    bad = []
    for kind, t, r, q, v in NEAR_BOUNDARY:
        opt, k = Option(kind, 100.0, t), 100.0
        star = price(opt, Market(k, r, v, q), method=method).boundary.spot[-1]
        side = 1.0 if kind == "put" else -1.0
        edge = price(opt, Market(star * (1.0 + 0.001 * side), r, v, q), method=method).gamma
        want = 2.0 * side * (r * k - q * star) / (v * v * star * star)
        if abs(edge / want - 1.0) > 0.01:
            bad.append((kind, t, "edge", edge, want))
        spots = star * np.exp(side * np.linspace(0.002, 0.3, 40))
        g = np.array([price(opt, Market(s, r, v, q), method=method).gamma for s in spots])
        if not np.all(g > 0.0):
            bad.append((kind, t, "sign", float(g.min())))
    assert not bad


def test_fd_weights_reproduce_polynomial_derivatives() -> None:
    # Source: Fornberg (1988): weights on p nodes are exact for polynomials of degree < p.
    x = np.arange(6, dtype=float)
    w = fd_weights(2.3, x, 2)
    f = 1.5 - 0.7 * x + 0.2 * x**2 - 0.05 * x**3 + 0.01 * x**5
    z = 2.3
    assert w[0] @ f == pytest.approx(1.5 - 0.7 * z + 0.2 * z**2 - 0.05 * z**3 + 0.01 * z**5, abs=1e-12)
    assert w[1] @ f == pytest.approx(-0.7 + 0.4 * z - 0.15 * z**2 + 0.05 * z**4, abs=1e-11)
    assert w[2] @ f == pytest.approx(0.4 - 0.3 * z + 0.2 * z**3, abs=1e-10)


def test_vega_rho_zero_and_delta_unit_in_the_exercise_region() -> None:
    # Source: in the exercise region the value is the payoff K - S (Merton 1973).
    res = price(Option("put", 100.0, 1.0), Market(50.0, 0.08, 0.2))
    assert res.price == pytest.approx(50.0) and res.delta == -1.0
    assert res.gamma == res.theta == res.vega == res.rho == 0.0


def test_exercise_region_read_off_is_consistent_with_boundary() -> None:
    # common practice: a spot below the reported critical spot is exercised, above it held
    # (delta above -1, gamma positive, value at least the payoff).
    res = price(Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.2))
    star = res.boundary.spot[-1]
    below = price(Option("put", 100.0, 1.0), Market(star - 0.05, 0.05, 0.2))
    above = price(Option("put", 100.0, 1.0), Market(star + 0.05, 0.05, 0.2))
    assert below.delta == -1.0 and below.price == pytest.approx(100.0 - (star - 0.05))
    assert above.delta > -1.0 and above.gamma > 0.0 and above.price >= 100.0 - (star + 0.05) - 1e-12


def test_escrowed_european_vega_rho_match_shifted_black_scholes() -> None:
    # Source: escrowed-dividend model: a European option is Black-Scholes (1973) on the spot
    # less the present value of the dividends, S' = S - D e^{-r t_D}; its rho also moves S'
    # (dS'/dr = t_D D e^{-r t_D}). Vega and rho come from bumped re-solves here (no identity).
    s, k, t, r, v, d, td = 100.0, 100.0, 1.0, 0.05, 0.25, 2.0, 0.4
    mkt = Market(s, r, v, dividends=[(td, d)], dividend_model="escrowed")
    res = price(Option("put", k, t, style="european"), mkt)
    shifted = s - d * math.exp(-r * td)
    ex = bsm("put", shifted, k, t, r, 0.0, v)
    assert res.vega == pytest.approx(ex["vega"], rel=1e-3)
    assert res.rho == pytest.approx(ex["rho"] + ex["delta"] * td * d * math.exp(-r * td), rel=1e-3)


def test_american_vega_rho_with_curves_and_dividends_match_fine_differences() -> None:
    # common practice: parallel shifts of the rate and vol curves, central differences of
    # "fine" prices; cash dividends in the spot model (no closed form).
    from stopline import PiecewiseConstant

    def mkt(dr: float = 0.0, dv: float = 0.0) -> Market:
        rate = PiecewiseConstant((0.5, 2.0), (0.03 + dr, 0.05 + dr))
        vol = PiecewiseConstant((0.25, 2.0), (0.35 + dv, 0.28 + dv))
        return Market(100.0, rate, vol, dividends=[(0.3, 1.5), (0.8, 1.5)])

    opt = Option("put", 100.0, 1.0)
    res = price(opt, mkt())

    def fine(**bump: float) -> float:
        return price(opt, mkt(**bump), accuracy="fine").price

    assert res.rho == pytest.approx((fine(dr=1e-3) - fine(dr=-1e-3)) / 2e-3, rel=2e-3)
    assert res.vega == pytest.approx((fine(dv=1e-3) - fine(dv=-1e-3)) / 2e-3, rel=2e-3)
