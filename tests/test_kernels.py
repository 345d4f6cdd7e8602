"""Each numba kernel against a plain-NumPy twin written from the same equations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.linalg import solve_banded

from stopline import _kernels
from stopline.grid import build_space_grid, build_time_grid
from stopline.operator import plan_steps
from stopline.solve import payoff_on


def _twin_far(s, df_r, df_q, is_put, american):
    fwd = (df_r - s * df_q) if is_put else (s * df_q - df_r)
    intrinsic = max((1 - s) if is_put else (s - 1), 0.0)
    return max(fwd, 0.0, intrinsic if american else 0.0)


def _twin_march(v, x0, h, plan, is_put, american, fitted=False, coef=None):
    """Theta steps solved with scipy's banded solver; American by projected iteration.

    ``fitted`` (American), written from the docstrings of ``_substitute_fitted``,
    ``ghost_explicit``, ``damping_band`` and ``band_row``: in the projected iteration a held
    node next to an exercised one sees it through the ghost value ``payoff + (s - u)^2``
    (``s = sqrt(kappa) h``, ``u^2`` the node's own premium, ``kappa`` from ``coef = (r, q,
    vol)`` at the cell's middle); the next step's explicit half sees that ghost too; and the
    rows within 1.5 cells of the cells the boundary sweeps in a step (from the boundary of
    the level before, located by the kernel ``locate_boundary``, to its linear extrapolation)
    blend BDF2 in with a weight falling linearly from one to zero.
    """
    v = v.copy()
    v_prev = v.copy()
    n = v.size
    x = x0 + h * np.arange(n)
    bnd = []
    ghost = None  # (node, u, kappa) of the level before
    for k in range(plan.dt.size):
        s_nodes = np.exp(x) * plan.shift[k]
        payoff = np.maximum((1 - s_nodes) if is_put else (s_nodes - 1), 0.0)
        s_lo, s_hi = s_nodes[0], s_nodes[-1]
        dt = plan.dt[k]
        ae, ai = (1 - plan.theta[k]) * dt, plan.theta[k] * dt
        lo, di, up = plan.lo[k], plan.di[k], plan.up[k]
        vl, vh = (_twin_far(s, plan.df_r[k], plan.df_q[k], is_put, american) for s in (s_lo, s_hi))
        rhs = v[1:-1] + ae * (lo * v[:-2] + di * v[1:-1] + up * v[2:])
        ai_row = np.full(n - 2, ai)
        if fitted and plan.theta[k] < 1.0:
            if ghost is not None:
                j, u, kap = ghost
                rhs[j - 1] += ae * (lo if is_put else up) * (np.sqrt(kap) * h - u) ** 2
            if k > 0 and not math.isnan(bnd[-1]):
                c = ahead = (bnd[-1] - x0) / h
                ratio = dt / plan.dt[k - 1]
                if k > 1 and not math.isnan(bnd[-2]):
                    ahead = c + (bnd[-1] - bnd[-2]) / h * ratio
                c_lo, c_hi = min(c, ahead), max(c, ahead)
                j = np.arange(1, n - 1)
                dist = np.maximum(np.maximum(c_lo - j, j - c_hi), 0.0)
                phi = np.maximum(1.0 - dist / 1.5, 0.0)
                a0 = (1 + 2 * ratio) / (1 + ratio)
                d = phi * a0 + 1 - phi
                bdf = (1 + ratio) * v[1:-1] - ratio**2 / (1 + ratio) * v_prev[1:-1]
                rhs = np.where(phi > 0, (phi * bdf + (1 - phi) * rhs) / d, rhs)
                ai_row = np.where(phi > 0, dt * (0.5 + 0.5 * phi) / d, ai)
        v_prev = v.copy()
        a_row, b_row, c_row = -ai_row * lo, 1 - ai_row * di, -ai_row * up
        rhs[0] -= a_row[0] * vl
        rhs[-1] -= c_row[-1] * vh
        m = n - 2
        ab = np.zeros((3, m))
        ab[0, 1:] = c_row[:-1]
        ab[1, :] = b_row
        ab[2, :-1] = a_row[1:]
        new = solve_banded((1, 1), ab, rhs)
        if american:
            # projected Gauss-Seidel to full convergence (Cryer 1971), from the linear solution;
            # the boundary values enter through the neighbours, so take them out of rhs again
            rhs[0] += a_row[0] * vl
            rhs[-1] += c_row[-1] * vh
            full = np.concatenate(([vl], np.maximum(new, payoff[1:-1]), [vh]))
            if fitted:
                r, q, vol = coef
                x_mid = x + (-0.5 * h if is_put else 0.5 * h)
                kappa = (r - q * np.exp(x_mid)) / vol**2 * (1.0 if is_put else -1.0)
            for _ in range(100000):
                old = full.copy()
                for j in range(1, n - 1):
                    a, b, c = a_row[j - 1], b_row[j - 1], c_row[j - 1]
                    gs = (rhs[j - 1] - a * full[j - 1] - c * full[j + 1]) / b
                    i = j - 1 if is_put else j + 1
                    beta = -(a if is_put else c) / b
                    if fitted and 1 <= i <= n - 2 and payoff[i] > 0 and full[i] <= payoff[i] \
                            and kappa[j] > 0 and 0 < beta < 1:
                        s2 = kappa[j] * h * h
                        gap = gs - payoff[j]
                        if gap + beta * s2 <= 0:
                            gs = payoff[j]
                        elif gap < s2:
                            # u^2 = gap + beta (s - u)^2, the positive root
                            u = max(np.roots([1 - beta, 2 * beta * np.sqrt(s2), -(gap + beta * s2)]).real)
                            gs = payoff[j] + u * u
                    full[j] = max(gs, payoff[j])
                if np.max(np.abs(full - old)) < 1e-15:
                    break
            v = full
            bnd.append(_kernels.locate_boundary(v, payoff, x0, h, is_put) + math.log(plan.shift[k]))
            if fitted:
                # the ghosted node: first held node after the exercised run, u below s
                ghost = None
                step = 1 if is_put else -1
                j = 1 if is_put else n - 2
                while 1 <= j <= n - 2 and payoff[j] > 0 and v[j] <= payoff[j]:
                    j += step
                i = j - step
                if 1 <= j <= n - 2 and 1 <= i <= n - 2 and payoff[i] > 0 and kappa[j] > 0:
                    beta = -(a_row[j - 1] if is_put else c_row[j - 1]) / b_row[j - 1]
                    u = np.sqrt(v[j] - payoff[j])
                    if 0 < beta < 1 and u < np.sqrt(kappa[j]) * h:
                        ghost = (j, u, kappa[j])
        else:
            v = np.concatenate(([vl], new, [vh]))
    return v


@pytest.fixture
def small_case():
    t, r, q, vol, xs = 0.5, 0.05, 0.07, 0.3, math.log(0.95)  # q > r: calls exercised early too
    sd = vol * math.sqrt(t)
    space = build_space_grid(xs, sd, (r - q - vol * vol / 2) * t, width_sd=4.0, points_per_sd=6)
    time = build_time_grid(t, 8)
    return space, time, plan_steps(time, space.h, r, q, vol), (r, q, vol)


@pytest.mark.parametrize("is_put", [True, False])
@pytest.mark.parametrize("american,fitted", [(False, False), (True, False), (True, True)])
def test_march_direct_matches_numpy_twin(small_case, is_put: bool, american: bool, fitted: bool) -> None:
    # common practice: the Brennan-Schwartz sweep and a projected Gauss-Seidel iteration solve
    # the same discrete complementarity problem; the European case is a banded linear solve.
    space, time, plan, coef = small_case
    payoff = payoff_on(space, is_put)
    v = payoff.copy()
    bnd = np.empty(plan.dt.size)
    _kernels.march_direct(v, np.exp(space.x), space.x_min, space.h, plan.dt, plan.theta, plan.lo,
                          plan.di, plan.up, plan.df_r, plan.df_q, plan.shift, plan.scale, is_put,
                          american, bnd, fitted)
    twin = _twin_march(payoff, space.x_min, space.h, plan, is_put, american, fitted, coef)
    np.testing.assert_allclose(v, twin, rtol=0, atol=1e-12)


@pytest.mark.parametrize("is_put", [True, False])
@pytest.mark.parametrize("fitted", [False, True])
def test_march_psor_matches_direct_kernel_and_twin(small_case, is_put: bool, fitted: bool) -> None:
    # common practice: PSOR converges to the unique solution of the same problem.
    space, time, plan, coef = small_case
    payoff = payoff_on(space, is_put)
    v = payoff.copy()
    bnd = np.empty(plan.dt.size)
    iters = np.zeros(plan.dt.size, dtype=np.int64)
    failed = _kernels.march_psor(v, np.exp(space.x), space.x_min, space.h, plan.dt, plan.theta,
                                 plan.lo, plan.di, plan.up, plan.df_r, plan.df_q, plan.shift, plan.scale,
                                 is_put, True, bnd, -1.0, 1e-14, 100000, iters, fitted)
    assert failed == -1 and iters.min() >= 1
    twin = _twin_march(payoff, space.x_min, space.h, plan, is_put, True, fitted, coef)
    np.testing.assert_allclose(v, twin, rtol=0, atol=1e-11)
    direct = payoff.copy()
    _kernels.march_direct(direct, np.exp(space.x), space.x_min, space.h, plan.dt, plan.theta,
                          plan.lo, plan.di, plan.up, plan.df_r, plan.df_q, plan.shift, plan.scale,
                          is_put, True, np.empty(plan.dt.size), fitted)
    np.testing.assert_allclose(v, direct, rtol=0, atol=1e-11)


def test_locate_boundary_matches_twin() -> None:
    # Smooth pasting: the gap v - payoff grows like c (x - x*)^2 beyond the boundary, so the
    # located point is exact for such a gap (common practice for sub-grid boundary location).
    h, x0, xstar = 0.01, -0.5, -0.2337
    x = x0 + h * np.arange(80)
    payoff = np.maximum(1 - np.exp(x), 0.0)
    v = payoff + np.where(x > xstar, 3.0 * (x - xstar) ** 2, 0.0)
    got = _kernels.locate_boundary(v, payoff, x0, h, True)
    assert got == pytest.approx(xstar, abs=1e-12)
    # twin: the same rule written with NumPy (line through the second and third held nodes)
    j = int(np.argmax(v[1:] > payoff[1:])) + 1
    s1, s2 = np.sqrt(v[j + 1] - payoff[j + 1]), np.sqrt(v[j + 2] - payoff[j + 2])
    assert got == pytest.approx(x[j + 1] - s1 / (s2 - s1) * h, abs=1e-14)
    # no exercise region
    assert math.isnan(_kernels.locate_boundary(payoff + 1.0, payoff, x0, h, True))


def test_thomas_repeat_matches_scipy(rng: np.random.Generator) -> None:
    # Source: scipy.linalg.solve_banded as the independent tridiagonal solver.
    n = 50
    rhs = rng.normal(size=n)
    a, b, c = -0.7, 2.5, -0.6
    out = np.empty(n)
    _kernels.thomas_repeat(rhs, a, b, c, 3, out)
    ab = np.zeros((3, n))
    ab[0, 1:], ab[1, :], ab[2, :-1] = c, b, a
    np.testing.assert_allclose(out, solve_banded((1, 1), ab, rhs), rtol=1e-13, atol=1e-14)


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


def _locate_twin(v: np.ndarray, payoff: np.ndarray, x0: float, h: float, is_put: bool) -> float:
    """Plain-NumPy twin of _kernels.locate_boundary (written from its docstring)."""
    n = v.shape[0]
    exercised = (payoff > 0.0) & (v <= payoff)
    inner = np.arange(1, n - 1)
    if is_put:
        run = inner[np.cumprod(exercised[1 : n - 1]).astype(bool)]
        j = 1 + run.size
        if j == 1 or j >= n - 2:
            return math.nan
        held = [j + 1, j + 2] if j + 3 <= n - 1 else [j, j + 1]
        sgn = 1.0
    else:
        run = inner[::-1][np.cumprod(exercised[1 : n - 1][::-1]).astype(bool)]
        j = n - 2 - run.size
        if j == n - 2 or j <= 1:
            return math.nan
        held = [j - 1, j - 2] if j - 3 >= 0 else [j, j - 1]
        sgn = -1.0
    sa, sb = np.sqrt(np.maximum(v[held] - payoff[held], 0.0))
    off = abs(held[0] - j)
    t = off - sa / (sb - sa) if sb > sa else -0.5
    t = min(max(t, -3.0), 0.0)
    x = x0 + j * h + sgn * t * h
    if is_put:  # not beyond the strike, found from the last exercised node's payoff
        return min(x, x0 + (j - 1) * h - math.log(1.0 - payoff[j - 1]))
    return max(x, x0 + (j + 1) * h - math.log(1.0 + payoff[j + 1]))


@pytest.mark.parametrize("is_put", [True, False])
def test_locate_boundary_kernel_matches_numpy_twin(is_put: bool, rng: np.random.Generator) -> None:
    # common practice: each numba kernel agrees with a plain-NumPy twin; here on gaps
    # c (x - x*)^2 plus noise, whose vertex the kernel should find to a small fraction of h.
    h, n = 0.01, 201
    x0 = -1.0
    x = x0 + h * np.arange(n)
    for _ in range(50):
        star = rng.uniform(-0.6, -0.1) if is_put else rng.uniform(0.1, 0.6)
        payoff = np.maximum(1.0 - np.exp(x), 0.0) if is_put else np.maximum(np.exp(x) - 1.0, 0.0)
        side = (x > star) if is_put else (x < star)
        gap = np.where(side, rng.uniform(0.5, 2.0) * (x - star) ** 2, 0.0)
        v = payoff + gap * (1.0 + rng.normal(0.0, 1e-3, n))
        ours = _kernels.locate_boundary(v, payoff, x0, h, is_put)
        assert ours == pytest.approx(_locate_twin(v, payoff, x0, h, is_put), abs=1e-14)
        assert abs(ours - star) < 0.01 * h


def _twin_weights(z, x, m):  # noqa: ANN001, ANN202
    """Derivatives at ``z`` of the Lagrange basis polynomials, from NumPy's polynomial
    classes (an independent route to the weights the kernel builds by Fornberg's recurrence)."""
    from numpy.polynomial import Polynomial

    p = x.shape[0]
    out = np.empty((m + 1, p))
    for i in range(p):
        basis = Polynomial.fromroots(np.delete(x, i))
        basis = basis / basis(x[i])
        for k in range(m + 1):
            out[k, i] = basis.deriv(k)(z) if k else basis(z)
    return out


def test_fornberg_weights_match_their_twin_and_differentiate_cubics(
    rng: np.random.Generator,
) -> None:
    for p in (4, 6):
        x = np.sort(rng.uniform(-3, 3, p))
        z = float(rng.uniform(-1, 1))
        w = _kernels.fornberg_weights(z, x, 2)
        np.testing.assert_allclose(w, _twin_weights(z, x, 2), rtol=1e-10, atol=1e-10)
        # exact for a cubic: value, first and second derivative at z
        f = x**3 - 2 * x
        assert w[0] @ f == pytest.approx(z**3 - 2 * z, abs=1e-9)
        assert w[1] @ f == pytest.approx(3 * z**2 - 2, abs=1e-8)
        assert w[2] @ f == pytest.approx(6 * z, abs=1e-7)


@pytest.mark.parametrize("is_put", [True, False])
def test_tangents_equal_finite_differences_of_the_same_march(is_put: bool) -> None:
    # common practice (forward-mode differentiation): for a European option the tangent march
    # is the exact derivative of the discrete solution, so it matches a central difference of
    # the same kernel on the same grid to the difference's own O(bump^2) error
    import dataclasses

    from stopline.solve import PDEProblem, solve, solve_with_tangents

    t, r, q, vol = 0.75, 0.04, 0.01, 0.3
    p = PDEProblem(is_put, False, t, r, q, vol, math.log(0.97))
    sd = vol * math.sqrt(t)
    space = build_space_grid(p.x_spot, sd, (r - q - vol * vol / 2) * t, width_sd=5.0, points_per_sd=8)
    time = build_time_grid(t, 24)
    sol, tan = solve_with_tangents(p, space, time)
    from stopline.exercise import DirectSweep

    assert np.array_equal(sol.values, solve(p, space, time, DirectSweep()).values)
    for i, field in enumerate(("vol", "rate")):
        d = 1e-5
        up = solve(dataclasses.replace(p, **{field: getattr(p, field) + d}), space, time, DirectSweep())
        dn = solve(dataclasses.replace(p, **{field: getattr(p, field) - d}), space, time, DirectSweep())
        fd = (up.values - dn.values) / (2 * d)
        np.testing.assert_allclose(tan[i], fd, rtol=0, atol=1e-6)


def test_pava_increasing_matches_scipy(rng: np.random.Generator) -> None:
    # Source: scipy.optimize.isotonic_regression (pool-adjacent-violators, Ayer et al. 1955)
    from scipy.optimize import isotonic_regression

    for n in (1, 2, 7, 40):
        y = np.cumsum(rng.normal(0.1, 1.0, n))
        out = np.empty(n)
        _kernels.pava_increasing(y, out)
        np.testing.assert_allclose(out, isotonic_regression(y).x, rtol=0, atol=1e-12)
