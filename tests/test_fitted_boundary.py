"""The fitted exercise boundary: smooth-pasting ghost value and damped rows (American)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stopline import DirectSweep, GridSpec, Market, Option, price
from stopline.grid import build_space_grid
from stopline.pricing import _read
from stopline.solve import (
    fitted_boundary,
    problem_from_market,
    solve,
    solve_with_tangents,
    time_grid_for,
)

# The put whose Richardson pair misbehaved most on the benchmark set before the boundary was
# fitted (own computation; the reference below is a very fine grid of the same engine).
OPT = Option("put", 100.0, 1.864)
MKT = Market(84.19, 0.0968, 0.2223, div_yield=0.0248)


@pytest.fixture(scope="module")
def reference() -> float:
    return price(OPT, MKT, grid=GridSpec(8001, 3000), greeks="grid").price


def _single_grid(n: int, levels: int, fitted: bool) -> tuple[float, float]:
    """Value of one grid (no extrapolation) with ``n`` nodes and ``levels`` time levels."""
    t = OPT.expiry
    p = problem_from_market(OPT, MKT, t)
    sd = p.vol * math.sqrt(t)
    space = build_space_grid(p.x_spot, sd, (p.rate - p.div_yield - 0.5 * p.vol**2) * t,
                             width_sd=5.5, n_points=n)
    sol = solve(p, space, time_grid_for(p, levels), DirectSweep(fitted=fitted))
    return _read(sol, p, OPT.strike).value, space.h


def test_space_error_is_a_smooth_second_order_function_of_the_spacing(reference: float) -> None:
    # Own computation: with the ghost value the single-grid error / h^2 is nearly constant
    # over spacings that put the boundary anywhere between nodes (so Richardson removes it);
    # without it the ratio varies about threefold (measured 0.08 to 0.23).
    ns = [121, 141, 161, 181, 201, 241, 281, 341, 401]
    errs, hs = [], []
    for n in ns:
        v, h = _single_grid(n, 1500, True)
        errs.append(v - reference)
        hs.append(h)
    errs, hs = np.array(errs), np.array(hs)
    ratio = np.abs(errs) / hs**2
    assert np.all(errs < 0.0) and ratio.max() / ratio.min() < 1.25
    slope = np.polyfit(np.log(hs), np.log(np.abs(errs)), 1)[0]
    assert 1.8 <= slope <= 2.2
    classic = np.array([abs(_single_grid(n, 1500, False)[0] - reference) / h**2
                        for n, h in zip(ns, hs, strict=True)])
    assert classic.max() / classic.min() > 2.0  # the weakness the ghost value removes


def test_time_error_is_a_smooth_second_order_function_of_the_levels(reference: float) -> None:
    # Own computation: BDF2 blended into the rows the boundary sweeps damps what the moving
    # exercise kink feeds in at every step, so the error keeps its sign, error x m^2 settles
    # monotonically (measured 0.220, 0.235, 0.250, 0.261, 0.265, 0.268) and the fitted order
    # is second; plain Crank-Nicolson's changes sign from one level count to the next
    # (measured -1.03, 0.93, -0.96, 0.46, 0.95, -0.02). Space error kept small by 6001 nodes
    # (a few 1e-9 x K).
    levels = np.array([40, 50, 60, 80, 100, 120])
    err = np.array([_single_grid(6001, m, True)[0] - reference for m in levels])
    scaled = err * levels**2
    assert scaled.min() > 0.0 and np.all(np.diff(scaled) > 0.0)
    assert np.all(np.diff(np.diff(scaled)) < 0.0) or np.all(np.abs(np.diff(scaled)) < 0.02)
    slope = np.polyfit(np.log(1.0 / levels), np.log(err), 1)[0]
    assert 1.8 <= slope <= 2.2
    classic = np.array([(_single_grid(6001, m, False)[0] - reference) * m * m for m in levels])
    assert np.sign(classic).min() != np.sign(classic).max()


@pytest.mark.parametrize("kind", ["put", "call"])
def test_fitted_tangents_match_central_differences(kind: str) -> None:
    # common practice: the tangent-linear march gives the exact derivatives of the discrete
    # solution (ghost node included), so a small central difference of re-solved values on
    # the same grid agrees with them (bump 1e-6: truncation ~1e-12 relative).
    t, spot = 1.3, (92.0 if kind == "put" else 112.0)
    opt = Option(kind, 100.0, t)

    def problem(vol: float, rate: float):  # noqa: ANN202
        return problem_from_market(opt, Market(spot, rate, vol, div_yield=0.04), t)

    base = problem(0.28, 0.06)
    sd = 0.28 * math.sqrt(t)
    space = build_space_grid(base.x_spot, sd, (0.06 - 0.04 - 0.5 * 0.28**2) * t, width_sd=5.5,
                             n_points=301)
    time = time_grid_for(base, 60)
    sol, tan = solve_with_tangents(base, space, time, fitted=True)
    assert fitted_boundary(base, space, time)
    d = 1e-6
    for i, (dv, dr) in enumerate(((d, 0.0), (0.0, d))):
        up = solve(problem(0.28 + dv, 0.06 + dr), space, time, DirectSweep()).values
        down = solve(problem(0.28 - dv, 0.06 - dr), space, time, DirectSweep()).values
        cd = (up - down) / (2 * d)
        np.testing.assert_allclose(tan[i], cd, rtol=0, atol=1e-6 * np.abs(cd).max())


def test_fitted_presets_meet_their_targets_against_an_independent_scheme() -> None:
    # The reference is plain projected Crank-Nicolson with the direct sweep on a very fine
    # grid (GridSpec(12001, 6000); an independent discretisation: no ghost value, no damped
    # rows; on the benchmark set it agrees with GridSpec(8001, 4000) to 3e-11 x K). The
    # default method must meet each preset's target on the contract where the plain pair
    # misbehaves most (own computation: plain "standard" is 8.6e-6 x K off here).
    ref = price(OPT, MKT, grid=GridSpec(12001, 6000), greeks="grid",
                method=DirectSweep(fitted=False)).price
    k = OPT.strike
    for acc, target in (("fast", 1e-4), ("standard", 1e-6), ("fine", 1e-8)):
        res = price(OPT, MKT, accuracy=acc, greeks="grid")
        assert res.stats.method == "direct"
        assert abs(res.price - ref) <= target * k, acc
        plain = price(OPT, MKT, accuracy=acc, greeks="grid", method=DirectSweep(fitted=False))
        assert plain.stats.method == "direct-plain"
    assert abs(plain.price - ref) > 1e-8 * k  # the weakness the fitting removes (fine)
