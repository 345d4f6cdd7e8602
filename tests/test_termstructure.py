"""Piecewise-constant term structures of rate, yield and vol."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from stopline import InputError, Market, Option, PiecewiseConstant, price
from stopline.grid import SegmentedTimeGrid
from stopline.operator import plan_steps
from stopline.pricing import _resolve_grid
from stopline.solve import problem_from_market, time_grid_for

from ._bsm import bsm
from ._div_trees import equal_variance_tree

RATE = PiecewiseConstant([0.25, 0.6, 2.0], [0.01, 0.04, 0.07])
YIELD = PiecewiseConstant([0.5], [0.03])  # flat in fact: one value
VOL = PiecewiseConstant([0.1, 0.4, 0.9], [0.45, 0.30, 0.22])


def test_values_integrals_and_averages() -> None:
    c = PiecewiseConstant([0.25, 1.0], [0.30, 0.20])
    assert (c(0.0), c(0.25), c(0.2500001), c(5.0)) == (0.30, 0.30, 0.20, 0.20)
    assert c.integral(0.0, 2.0) == pytest.approx(0.25 * 0.3 + 1.75 * 0.2, rel=1e-15)
    assert c.integral(0.1, 0.5) == pytest.approx(0.15 * 0.3 + 0.25 * 0.2, rel=1e-15)
    assert c.average(0.5) == pytest.approx(0.25, rel=1e-15)
    assert c.rms(0.5) == pytest.approx(math.sqrt((0.25 * 0.09 + 0.25 * 0.04) / 0.5), rel=1e-15)
    t = np.array([0.0, 0.1, 0.25, 0.7, 1.0, 3.0])
    np.testing.assert_allclose(c.cumulative(t), [c.integral(0.0, x) for x in t], rtol=1e-14)
    assert c.breakpoints(2.0) == (0.25,) and c.breakpoints(0.2) == ()
    assert (c + 0.01).values == pytest.approx((0.31, 0.21)) and (c - 0.1).values == pytest.approx((0.2, 0.1))


@pytest.mark.parametrize(
    ("times", "values"),
    [([], []), ([0.5, 0.25], [0.1, 0.2]), ([0.5], [0.1, 0.2]), ([-1.0], [0.1]), ([1.0], [math.nan])],
)
def test_bad_curves_are_refused(times: list, values: list) -> None:
    with pytest.raises(InputError):
        PiecewiseConstant(times, values)


def test_market_checks_every_value_of_a_curve_naming_the_field() -> None:
    with pytest.raises(InputError) as exc:
        Market(100.0, 0.05, PiecewiseConstant([0.5, 1.0], [0.2, 0.0]))
    assert exc.value.field == "vol"
    with pytest.raises(InputError) as exc:
        Market(100.0, PiecewiseConstant([1.0], [2.0]), 0.2)
    assert exc.value.field == "rate"
    with pytest.raises(InputError) as exc:
        Market(100.0, [0.01, 0.02], 0.2)
    assert exc.value.field == "rate"


def test_breakpoints_are_time_levels_and_coefficients_step_with_them() -> None:
    mkt = Market(100.0, RATE, VOL, div_yield=YIELD)
    p = problem_from_market(Option("put", 100.0, 1.0), mkt, 1.0)
    tg = time_grid_for(p, 50)
    assert isinstance(tg, SegmentedTimeGrid)
    for b in (0.1, 0.25, 0.4, 0.6, 0.9):
        assert np.min(np.abs(tg.tau - (1.0 - b))) < 1e-14
    # no implicit restart at a breakpoint (the value is smooth there), only at expiry
    assert tg.theta[tg.segment_stop[0]] == 0.5
    plan = plan_steps(tg, 0.01, *p.coefficients)
    t_mid = 1.0 - (tg.tau - 0.5 * tg.dt)
    r = np.array([RATE(t) for t in t_mid])
    np.testing.assert_allclose(plan.di + plan.up + plan.lo, -r, atol=1e-9)
    # discount factors are the exact integrals of the rate from the level to expiry
    np.testing.assert_allclose(
        plan.df_r, [math.exp(-RATE.integral(1.0 - x, 1.0)) for x in tg.tau], rtol=1e-13
    )


@pytest.mark.parametrize("kind", ["put", "call"])
@pytest.mark.parametrize("t", [0.5, 1.0, 3.0])
def test_european_equals_bsm_with_averaged_rates_and_rms_vol(kind: str, t: float) -> None:
    # Source: with deterministic time-dependent r, q and vol, ln S at expiry is normal with
    # the integrated drift and variance, so Black-Scholes-Merton holds with the average rate
    # and yield and the root-mean-square vol over the life (Merton 1973). Tolerance: the
    # "standard" preset's target, 1e-6 x strike.
    s, k = 95.0, 100.0
    q = PiecewiseConstant([0.3, 0.8, 5.0], [0.0, 0.02, 0.05])
    res = price(Option(kind, k, t, "european"), Market(s, RATE, VOL, div_yield=q))
    ex = bsm(kind, s, k, t, RATE.average(t), q.average(t), VOL.rms(t))
    assert res.price == pytest.approx(ex["price"], abs=1e-6 * k)
    assert res.delta == pytest.approx(ex["delta"], abs=1e-5)


def test_flat_curve_gives_the_flat_price() -> None:
    opt = Option("put", 100.0, 1.0)
    flat = price(opt, Market(100.0, 0.05, 0.25, div_yield=0.01))
    curve = price(opt, Market(100.0, PiecewiseConstant([2.0], [0.05]), 0.25,
                              div_yield=PiecewiseConstant([0.5, 1.0], [0.01, 0.01])))
    assert curve.price == pytest.approx(flat.price, abs=1e-12)


def test_american_term_structure_sits_between_its_bounds_and_converges() -> None:
    # Own computation: the American put dominates the European one on the same curves; the
    # two-grid error estimate at "standard" is below the preset's target scale (1e-6 x K
    # times a safety factor of 100 for an American contract with breakpoints).
    opt = Option("put", 100.0, 1.0)
    mkt = Market(100.0, RATE, VOL, div_yield=YIELD)
    am = price(opt, mkt)
    eu = price(dataclasses.replace(opt, style="european"), mkt)
    assert am.price > eu.price
    assert am.error_estimate < 1e-4 * 100.0
    fine = price(opt, mkt, accuracy="fine")
    assert am.price == pytest.approx(fine.price, abs=1e-4)


def test_theta_uses_the_instantaneous_coefficients() -> None:
    # Source: theta from the Black-Scholes equation at valuation (Black and Scholes 1973)
    # with r(0), q(0), vol(0): for a European call on curves this matches the closed-form
    # time derivative of BSM with the averaged inputs (checked by a central difference).
    s, k, t = 100.0, 100.0, 1.0
    res = price(Option("call", k, t, "european"), Market(s, RATE, VOL))

    def value_from(t0: float) -> float:
        # the same contract seen from calendar time t0, the curves unchanged in calendar time
        span = t - t0
        r = RATE.integral(t0, t) / span
        v = math.sqrt(VOL.integral_of_square(t0, t) / span)
        return bsm("call", s, k, span, r, 0.0, v)["price"]

    eps = 1e-5
    theta = (value_from(eps) - value_from(0.0)) / eps
    assert res.theta == pytest.approx(theta, rel=2e-3)


@pytest.mark.parametrize("s", [100.0, 140.0])
def test_low_vol_curves_in_the_drift_free_frame(s: float) -> None:
    # Exact identity (Merton 1973) as above, at a vol so low for the drift that the grid moves
    # with the forward (frame "y"), whose shift is the integral of the curves' drift.
    rate = PiecewiseConstant([1.0, 3.0, 5.0], [0.06, 0.08, 0.09])
    vol = PiecewiseConstant([2.0, 5.0], [0.02, 0.03])
    res = price(Option("call", 100.0, 5.0, "european"), Market(s, rate, vol))
    ex = bsm("call", s, 100.0, 5.0, rate.average(5.0), 0.0, vol.rms(5.0))
    assert res.price == pytest.approx(ex["price"], abs=1e-6 * 100.0)
    p = problem_from_market(Option("call", 100.0, 5.0, "european"), Market(s, rate, vol), 5.0)
    assert _resolve_grid(p, "standard", None)[0].frame == "y"


def test_american_put_on_curves_agrees_with_an_equal_variance_tree() -> None:
    # Source: own independent tree (tests/_div_trees.py): CRR with steps of equal variance,
    # so one up factor serves both vol regimes and the tree recombines (common practice),
    # Black-Scholes last step (Broadie and Detemple 1996), 2100 and 4200 steps extrapolated.
    # On the flat case (vol 0.2, r 0.06, q 0.01) that extrapolation sits 1.4e-5 from the
    # converged value, so the tolerance is 3e-5; measured gap here 1.1e-5.
    rate = PiecewiseConstant([0.25, 1.0], [0.02, 0.06])
    vol = PiecewiseConstant([0.25, 1.0], [0.4, 0.2])
    res = price(Option("put", 100.0, 1.0), Market(100.0, rate, vol, div_yield=0.01),
                accuracy="fine")

    def tree(kk: int) -> float:
        return equal_variance_tree("put", 100.0, 100.0, [0.02, 0.06], 0.01,
                                   [(0.25, 0.4, 4 * kk), (0.75, 0.2, 3 * kk)])

    assert res.price == pytest.approx(2 * tree(600) - tree(300), abs=3e-5)
