"""Bounds on a long-lived American option from the perpetual one (stopline.perpetual)."""

from __future__ import annotations

import math

import pytest
from scipy.integrate import quad

from stopline import Market, Option, price
from stopline.perpetual import american_bounds, hit_discount, perpetual_bounds
from stopline.pricing import PERPETUAL_GAP, PRESETS
from stopline.reference import lr_extrapolated_price, perpetual_american


@pytest.mark.parametrize("a,m,vol,rate,t", [
    (0.5, 0.1, 0.3, 0.05, 1.0), (2.0, -0.3, 0.8, 0.1, 3.0), (0.2, 1.5, 2.0, 0.02, 0.5),
])
def test_hit_discount_matches_the_first_passage_density(a, m, vol, rate, t) -> None:
    # common practice (Harrison 1985): the first time m u + vol W_u reaches a > 0 has the
    # inverse-Gaussian density a / (vol sqrt(2 pi u^3)) exp(-(a - m u)^2 / (2 vol^2 u));
    # both discounted expectations by quadrature.
    def density(u: float) -> float:
        return a / (vol * math.sqrt(2 * math.pi * u**3)) * math.exp(-(a - m * u) ** 2 / (2 * vol**2 * u))

    whole, late = hit_discount(a, m, vol, rate, t)
    early_q = quad(lambda u: math.exp(-rate * u) * density(u), 0.0, t, limit=200)[0]
    late_q = quad(lambda u: math.exp(-rate * u) * density(u), t, math.inf, limit=200)[0]
    assert late == pytest.approx(late_q, rel=1e-8, abs=1e-14)
    assert whole == pytest.approx(early_q + late_q, rel=1e-8)


@pytest.mark.parametrize("kind,s,r,q,v", [
    ("put", 1.1, 0.05, 0.02, 0.3), ("put", 0.9, 0.08, 0.0, 0.5), ("call", 1.2, 0.03, 0.07, 0.4),
    ("call", 0.8, -0.01, 0.05, 1.2),
])
def test_upper_bound_is_the_perpetual_option(kind, s, r, q, v) -> None:
    # Merton (1973): the perpetual American option, from the independent reference formula.
    b = perpetual_bounds(kind == "put", s, 2.0, r, q, v)
    ref = perpetual_american(kind, s, 1.0, r, q, v)
    assert b.upper == pytest.approx(ref.value, rel=1e-12)
    assert b.critical == pytest.approx(ref.critical_spot, rel=1e-12)


@pytest.mark.parametrize("kind,s,t,r,q,v", [
    ("put", 1.0, 2.0, 0.06, 0.01, 0.4), ("put", 1.3, 5.0, 0.05, 0.03, 0.6),
    ("call", 1.0, 3.0, 0.02, 0.06, 0.35),
])
def test_a_converged_tree_lies_between_the_bounds(kind, s, t, r, q, v) -> None:
    # Merton (1973): a finite life is worth at most the perpetual option, and at least any
    # feasible exercise rule; Leisen-Reimer (1996) tree, 2001/4003 steps extrapolated, as the
    # independent value (its error here is below 1e-6 x K).
    b = perpetual_bounds(kind == "put", s, t, r, q, v)
    tree = lr_extrapolated_price(kind, "american", s, 1.0, t, r, q, v, 2001)
    assert b.lower - 1e-6 <= tree <= b.upper + 1e-6
    assert b.upper - b.lower > 1e-3  # not a degenerate check: these lives are short


def test_price_uses_the_bounds_where_they_pin_the_value() -> None:
    # vol 5 for 50 years (a corner of the supported domain): the bounds coincide to far
    # below any preset's target, so price() returns their midpoint without a grid and says so.
    opt, mkt = Option("put", 100.0, 50.0), Market(100.0, 0.25, 5.0, div_yield=0.25)
    b = perpetual_bounds(True, 1.0, 50.0, 0.25, 0.25, 5.0)
    for acc in PRESETS:
        res = price(opt, mkt, accuracy=acc)
        assert 100.0 * b.lower <= res.price <= 100.0 * b.upper
        assert res.error_estimate <= PERPETUAL_GAP * PRESETS[acc].target * 100.0
        assert res.stats.space_points == 0 and "bounds pin the value" in res.stats.warnings[-1]
        assert res.theta == 0.0 and res.delta < 0.0 < res.gamma
    # a typical contract is still solved on a grid
    typical = price(Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.3))
    assert typical.stats.space_points > 0


def test_a_call_without_yield_is_pinned_between_its_european_value_and_the_spot() -> None:
    # Merton (1973): a call on a stock without a yield is worth at least the European and at
    # most the spot; at vol 5 for 50 years the two agree to rounding (the European call's
    # N(d1) is 1 to double precision), so price() returns the spot without a grid.
    opt, mkt = Option("call", 100.0, 50.0), Market(10000.0, -0.05, 5.0)
    b = american_bounds(False, 100.0, 50.0, -0.05, 0.0, 5.0)
    assert b.upper == 100.0 and b.upper - b.lower < 1e-12
    res = price(opt, mkt, accuracy="fine")
    assert res.price == pytest.approx(10000.0, abs=1e-8 * 100.0)
    assert res.stats.space_points == 0 and res.delta == pytest.approx(1.0)
