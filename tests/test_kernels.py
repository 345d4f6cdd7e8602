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


def _twin_read(values, payoff, x_min, h, x_spot, american):  # noqa: ANN001, ANN202
    """Plain-Python cubic read-off (Lagrange on the four nearest nodes), with the exercise test."""
    n = values.size
    j = int(math.floor((x_spot - x_min) / h))
    j0 = min(max(j - 1, 0), n - 4)
    t = (x_spot - x_min) / h - j0
    if american:
        is_put = payoff[0] > payoff[-1]
        ex = all(values[i] <= payoff[i] and payoff[i] > 0 for i in range(j0, j0 + 4))
        xb = _kernels.locate_boundary.py_func(values, payoff, x_min, h, is_put)
        if ex or (not math.isnan(xb) and (x_spot <= xb if is_put else x_spot >= xb)):
            s = math.exp(x_spot)
            return (max(1 - s, 0.0), -1.0, 0.0, True) if is_put else (max(s - 1, 0.0), 1.0, 0.0, True)
    nodes = np.arange(4.0)
    y = values[j0 : j0 + 4]
    coef = np.polyfit(nodes, y, 3)
    v = np.polyval(coef, t)
    vt = np.polyval(np.polyder(coef), t)
    vtt = np.polyval(np.polyder(coef, 2), t)
    return v, vt / h, vtt / (h * h), False


@pytest.mark.parametrize("is_put", [True, False])
def test_read_cubic_matches_its_twin(rng: np.random.Generator, is_put: bool) -> None:
    vol, t = 0.3, 1.5
    r, q = (0.06, 0.01) if is_put else (0.02, 0.08)  # both with an exercise region on the grid
    sd = vol * math.sqrt(t)
    space = build_space_grid(0.0, sd, (r - q - vol * vol / 2) * t, width_sd=4.0, points_per_sd=20)
    time = build_time_grid(t, 40)
    plan = plan_steps(time, space.h, r, q, vol)
    payoff = payoff_on(space, is_put)
    v = payoff.copy()
    bnd = np.empty(time.dt.size)
    _kernels.march_direct(v, payoff, space.x_min, space.h, plan.dt, plan.theta, plan.lo,
                          plan.di, plan.up, plan.df_r, plan.df_q, is_put, True, bnd)
    n_ex = 0
    for x in rng.uniform(space.x_min + 2 * space.h, space.x_max - 2 * space.h, 200):
        for american in (True, False):
            got = _kernels.read_cubic(v, payoff, space.x_min, space.h, x, american)
            want = _twin_read(v, payoff, space.x_min, space.h, x, american)
            assert got[3] == want[3]
            np.testing.assert_allclose(got[:3], want[:3], rtol=1e-9, atol=1e-9)
            n_ex += got[3]
    assert n_ex > 0  # the exercise branch was exercised


@pytest.mark.parametrize("step", [1, -1])
def test_split_substitution_equals_the_one_line_projection(
    rng: np.random.Generator, step: int
) -> None:
    # payoff binding on an initial run, then not, then again at random: every loop is used
    n = 60
    for trial in range(20):
        rhs = rng.standard_normal(n) + rng.uniform(-1, 2)
        aw = rng.uniform(-0.6, -0.1, n)
        payoff = np.maximum(rng.standard_normal(n), 0.0) * (trial % 3)
        v = np.zeros(n)
        start, stop = (1, n - 1) if step == 1 else (n - 2, 0)
        v[start - step] = 0.3
        want = v.copy()
        y = want[start - step]
        for j in range(start, stop, step):
            y = max(rhs[j] - aw[j] * y, payoff[j])
            want[j] = y
        _kernels._substitute_projected(v, rhs, aw, payoff, start, stop, step)
        np.testing.assert_allclose(v, want, rtol=1e-15, atol=1e-15)  # fused multiply-add: 1 ulp
