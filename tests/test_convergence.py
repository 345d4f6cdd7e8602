"""Fitted convergence orders of the scheme (slope of log error against log spacing)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stopline.exercise import DirectSweep
from stopline.greeks import read_at_spot
from stopline.grid import build_space_grid, build_time_grid
from stopline.solve import PDEProblem, solve

from ._bsm import bsm

CASES = [(100.0, 1.0, 0.05, 0.0, 0.2), (90.0, 0.5, 0.08, 0.02, 0.35), (110.0, 2.0, 0.03, 0.06, 0.25)]


def _value(p: PDEProblem, pps: float, levels: int, *, grading: float = 2.0, rannacher: int = 2) -> float:
    sd = p.vol * math.sqrt(p.expiry)
    drift = (p.rate - p.div_yield - 0.5 * p.vol**2) * p.expiry
    space = build_space_grid(p.x_spot, sd, drift, width_sd=6.0, points_per_sd=pps)
    time = build_time_grid(p.expiry, levels, grading=grading, rannacher=rannacher)
    sol = solve(p, space, time, DirectSweep())
    return read_at_spot(sol.values, sol.payoff, sol.x_min, space.h, p.x_spot, 100.0, p.american).value


def _slope(h: list[float], err: list[float]) -> float:
    return float(np.polyfit(np.log(h), np.log(err), 1)[0])


@pytest.mark.parametrize("american", [False, True])
@pytest.mark.parametrize("case", CASES)
def test_second_order_when_both_grids_are_refined(american: bool, case: tuple) -> None:
    # Source: Crank-Nicolson with Rannacher start and graded steps is second order in h and dt
    # (Rannacher 1984; Forsyth & Vetzal 2002, SIAM J. Sci. Comput. 23(6)); band 1.8-2.2.
    # European error against the closed form (Black-Scholes 1973); American error against an
    # own fine-grid computation four doublings finer (its error is <1 % of the coarsest one's).
    s, t, r, q, v = case
    p = PDEProblem(True, american, t, r, q, v, math.log(s / 100.0))
    exact = bsm("put", s, 100.0, t, r, q, v)["price"] if not american else _value(p, 320, 640)
    ks = [8, 16, 32, 64]
    err = [abs(_value(p, k, 2 * k) - exact) for k in ks]
    assert 1.8 <= _slope([1 / k for k in ks], err) <= 2.2


def test_time_order_european_with_space_error_removed() -> None:
    # Source: Crank-Nicolson is second order in time (Crank & Nicolson 1947). The space error
    # is removed by comparing with the same space grid and 64x more steps.
    p = PDEProblem(True, False, 1.0, 0.05, 0.01, 0.25, 0.0)
    ref = _value(p, 60, 5120)
    ms = [10, 20, 40, 80]
    err = [abs(_value(p, 60, m) - ref) for m in ms]
    assert 1.8 <= _slope([1 / m for m in ms], err) <= 2.2


def test_space_order_european_with_time_error_small() -> None:
    # Source: central differences are second order in space; time error held small (4000
    # graded steps), error against the closed form (Black-Scholes 1973).
    s, t, r, q, v = 105.0, 0.5, 0.04, 0.0, 0.3
    p = PDEProblem(True, False, t, r, q, v, math.log(s / 100.0))
    exact = bsm("put", s, 100.0, t, r, q, v)["price"]
    ks = [5, 10, 20, 40]
    err = [abs(_value(p, k, 4000) - exact) for k in ks]
    assert 1.8 <= _slope([1 / k for k in ks], err) <= 2.2


def test_graded_steps_are_needed_for_american_order() -> None:
    # Source: the American boundary moves like sqrt(tau) near expiry, so uniform steps lose
    # order (Forsyth & Vetzal 2002, SIAM J. Sci. Comput. 23(6)); own computation: with uniform
    # steps the fitted order falls below the band and the error is larger at every grid.
    p = PDEProblem(True, True, 0.5, 0.05, 0.0, 0.2, math.log(0.95))
    exact = _value(p, 320, 640)
    ks = [8, 16, 32, 64]
    graded = [abs(_value(p, k, 2 * k) - exact) for k in ks]
    uniform = [abs(_value(p, k, 2 * k, grading=1.0) - exact) for k in ks]
    assert all(u > g for u, g in zip(uniform, graded, strict=True))
    assert _slope([1 / k for k in ks], uniform) < 1.8 <= _slope([1 / k for k in ks], graded)


def test_rannacher_start_removes_gamma_ringing() -> None:
    # Source: Crank-Nicolson alone passes the payoff kink's high frequencies undamped and gamma
    # at the strike rings (Rannacher 1984; Giles & Carter 2006, J. Comput. Finance 9(4)).
    # Against the closed-form gamma (Black-Scholes 1973), one-week at-the-money put.
    t = 7 / 365
    p = PDEProblem(True, False, t, 0.05, 0.0, 0.2, 0.0)
    exact = bsm("put", 100.0, 100.0, t, 0.05, 0.0, 0.2)["gamma"]
    sd = 0.2 * math.sqrt(t)

    def gamma(k: int, rannacher: int, grading: float) -> float:
        space = build_space_grid(0.0, sd, 0.0, width_sd=6.0, points_per_sd=k)
        time = build_time_grid(t, k, rannacher=rannacher, grading=grading)
        sol = solve(p, space, time, DirectSweep())
        return read_at_spot(sol.values, sol.payoff, sol.x_min, space.h, 0.0, 100.0, False).gamma

    ks = [10, 20, 40, 80]
    plain = [abs(gamma(k, 0, 1.0) / exact - 1) for k in ks]
    started = [abs(gamma(k, 4, 2.0) / exact - 1) for k in ks]
    assert min(plain) > 0.5  # ringing: gamma wrong by more than half, and worse as dt/h^2 grows
    assert plain[-1] > plain[0]
    assert max(started[1:]) < 1e-3
