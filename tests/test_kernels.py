"""The march kernels against plain-NumPy twins (textbook Thomas / Brennan-Schwartz per step)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.linalg import solve_banded

from stopline import _kernels
from stopline.grid import build_space_grid, build_time_grid
from stopline.operator import plan_steps
from stopline.solve import payoff_on


def _twin_march(v, payoff, x0, h, plan, is_put, american):  # noqa: ANN001, ANN202
    """Plain-NumPy Brennan-Schwartz march: a division per node, no fixed point, no scaling."""
    n = v.size
    v = v.copy()
    s_lo, s_hi = math.exp(x0), math.exp(x0 + (n - 1) * h)
    for k in range(plan.dt.size):
        ae = (1 - plan.theta[k]) * plan.dt[k]
        ai = plan.theta[k] * plan.dt[k]
        lo, di, up = plan.lo[k], plan.di[k], plan.up[k]
        vl, vh = _kernels.far_values.py_func(
            s_lo, s_hi, plan.df_r[k], plan.df_q[k], is_put, american
        )
        rhs = ae * lo * v[:-2] + (1 + ae * di) * v[1:-1] + ae * up * v[2:]
        a, b, c = -ai * lo, 1 - ai * di, -ai * up
        m = n - 2
        if is_put:
            rhs[-1] -= c * vh
            w = np.empty(m)
            w[-1] = 1 / b
            for j in range(m - 2, -1, -1):
                f = c * w[j + 1]
                w[j] = 1 / (b - f * a)
                rhs[j] -= f * rhs[j + 1]
            prev = vl
            for j in range(m):
                y = (rhs[j] - a * prev) * w[j]
                prev = max(y, payoff[j + 1]) if american else y
                v[j + 1] = prev
        else:
            rhs[0] -= a * vl
            w = np.empty(m)
            w[0] = 1 / b
            for j in range(1, m):
                f = a * w[j - 1]
                w[j] = 1 / (b - f * c)
                rhs[j] -= f * rhs[j - 1]
            prev = vh
            for j in range(m - 1, -1, -1):
                y = (rhs[j] - c * prev) * w[j]
                prev = max(y, payoff[j + 1]) if american else y
                v[j + 1] = prev
        v[0], v[-1] = vl, vh
    return v


@pytest.mark.parametrize("is_put", [True, False])
@pytest.mark.parametrize("american", [True, False])
def test_march_direct_matches_its_numpy_twin(
    rng: np.random.Generator, is_put: bool, american: bool
) -> None:
    for _ in range(6):
        vol, r, q = rng.uniform(0.1, 0.6), rng.uniform(0.0, 0.1), rng.uniform(0.0, 0.08)
        t = rng.uniform(0.05, 3.0)
        sd = vol * math.sqrt(t)
        space = build_space_grid(rng.uniform(-0.3, 0.3), sd, (r - q - vol * vol / 2) * t,
                                 width_sd=5.0, points_per_sd=rng.uniform(8, 40))
        time = build_time_grid(t, int(rng.integers(8, 60)))
        plan = plan_steps(time, space.h, r, q, vol)
        payoff = payoff_on(space, is_put)
        v = payoff.copy()
        bnd = np.empty(time.dt.size)
        _kernels.march_direct(v, payoff, space.x_min, space.h, plan.dt, plan.theta, plan.lo,
                              plan.di, plan.up, plan.df_r, plan.df_q, is_put, american, bnd)
        twin = _twin_march(payoff.copy(), payoff, space.x_min, space.h, plan, is_put, american)
        # same arithmetic up to rounding (fused multiply-adds, pre-scaled right-hand side)
        np.testing.assert_allclose(v, twin, rtol=0, atol=1e-13)
        if american:  # the end values come from math.exp, the payoff from np.exp: 1 ulp apart
            assert np.all(v >= payoff - 1e-14)


@pytest.mark.parametrize("n", [5, 40, 700])
def test_thomas_floors_solve_the_system(rng: np.random.Generator, n: int) -> None:
    rhs = rng.standard_normal(n)
    a, b, c = -1.3, 3.1, -1.1
    bands = np.vstack([np.full(n, c), np.full(n, b), np.full(n, a)])
    exact = solve_banded((1, 1), bands, rhs)
    for kernel in (_kernels.thomas_repeat, _kernels.thomas_repeat_fixed_point):
        out = np.empty(n)
        kernel(rhs, a, b, c, 2, out)
        np.testing.assert_allclose(out, exact, rtol=1e-12, atol=1e-12)
