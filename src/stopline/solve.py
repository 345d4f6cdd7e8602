"""One finite-difference solve on one grid: payoff, march, values at valuation.

With cash dividends the march stops at every ex-date (a time level), applies the dividend
(:mod:`stopline.dividends`), and goes on; with term structures the per-step coefficients
come from the curves (:func:`stopline.operator.plan_steps`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from . import _kernels
from ._types import FloatArray
from .contract import Option
from .dividends import dividend_schedule, present_value
from .errors import InputError
from .exercise import DirectSweep, ExerciseMethod, MarchReport
from .greeks import theta_from_pde
from .grid import (
    SpaceGrid,
    TimeGrid,
    build_segmented_time_grid,
    build_time_grid,
    split_levels,
)
from .market import Market
from .operator import StepPlan, plan_steps
from .termstructure import Curve, PiecewiseConstant

__all__ = [
    "PDEProblem",
    "GridSolution",
    "payoff_on",
    "node_exp",
    "solve",
    "problem_from_market",
    "time_grid_for",
    "theta_at_valuation",
]


@dataclass(frozen=True)
class PDEProblem:
    """The dimensionless problem: value / strike as a function of ``x = ln(S / K)``.

    Attributes
    ----------
    is_put, american : bool
        Contract flags.
    expiry : float
        Time to expiry in years, > 0.
    rate, div_yield, vol : float
        Flat market data; with term structures, the averages of rate and yield and the
        root-mean-square vol over the life (so ``vol * sqrt(T)`` and the drift size the grid).
    x_spot : float
        ``ln(spot / strike)``; for escrowed dividends ``ln((spot - PV(D)) / strike)``.
    curves : tuple of (rate, div_yield, vol), optional
        Term structures (flat numbers or :class:`~stopline.PiecewiseConstant` in years from
        valuation) used by the march instead of the flat values.
    dividend_tau : tuple of float
        Time to expiry of each ex-date, decreasing order of ex-date is not required.
    dividend_amount : tuple of float
        Cash amount / strike of each dividend.
    dividend_model : {"spot", "escrowed"}
        How the dividends act (:mod:`stopline.dividends`).
    escrow_pv : float
        Present value at valuation of the dividends / strike (escrowed model, else 0).
    warnings : tuple of str
        Notes from building the problem (dividends ignored ...).
    """

    is_put: bool
    american: bool
    expiry: float
    rate: float
    div_yield: float
    vol: float
    x_spot: float
    curves: tuple[Curve, Curve, Curve] | None = None
    dividend_tau: tuple[float, ...] = ()
    dividend_amount: tuple[float, ...] = ()
    dividend_model: str = "spot"
    escrow_pv: float = 0.0
    warnings: tuple[str, ...] = ()

    @property
    def coefficients(self) -> tuple[Curve, Curve, Curve]:
        """Rate, yield and vol as the march uses them (curves if given, else flat)."""
        return self.curves if self.curves is not None else (self.rate, self.div_yield, self.vol)

    @property
    def escrowed(self) -> bool:
        """True when dividends are modelled as escrowed."""
        return self.dividend_model == "escrowed" and bool(self.dividend_tau)

    @property
    def has_events(self) -> bool:
        """True when the march must stop at ex-dates (all but escrowed European options,
        which are Black-Scholes on ``S - PV(D)`` and need only the shifted spot)."""
        return bool(self.dividend_tau) and not (self.escrowed and not self.american)


@dataclass(frozen=True)
class GridSolution:
    """Values on one grid at valuation, with what the march reported.

    Attributes
    ----------
    space, time : SpaceGrid, TimeGrid
        The grids solved on (in frame ``space.frame``).
    values : ndarray, shape (space.n,)
        Value / strike at valuation on every node.
    payoff : ndarray, shape (space.n,)
        Exercise value / strike on every node at valuation.
    drift : float
        ``M(T)`` in frame "y", 0 in frame "x": at valuation a node at ``y`` stands for the
        log-moneyness ``x = y - drift``.
    report : MarchReport
        Boundary per step (in log-moneyness) and iteration counts.
    boundary_tau : ndarray, optional
        Times of the boundary entries when they are not one per step (see
        :attr:`boundary_times`).
    """

    space: SpaceGrid
    time: TimeGrid
    values: FloatArray
    payoff: FloatArray
    drift: float
    report: MarchReport
    boundary_tau: FloatArray | None = None

    @property
    def boundary_times(self) -> FloatArray:
        """Time to expiry of each entry of ``report.boundary_x``, non-decreasing.

        One per step; with dividends, each ex-date appears twice: the state just after it
        (from the step that ends there) and then the state just before it.
        """
        return self.time.tau if self.boundary_tau is None else self.boundary_tau

    @property
    def x_min(self) -> float:
        """Log-moneyness of the first node at valuation."""
        return self.space.x_min - self.drift

    @property
    def x(self) -> FloatArray:
        """Log-moneyness of every node at valuation, shape (space.n,)."""
        return self.space.x - self.drift


def payoff_on(
    space: SpaceGrid, is_put: bool, shift: float = 1.0, ex: FloatArray | None = None
) -> FloatArray:
    """Exercise value / strike on the nodes at a level where ``S / K = e^y shift``
    (``ex``: ``e^y`` on the nodes, if already at hand)."""
    out = np.empty(space.n)
    _kernels.payoff_nodes(
        node_exp(space) if ex is None else ex, is_put, float(shift), space.strike_index, out
    )
    return out


def node_exp(space: SpaceGrid) -> FloatArray:
    """``e^x`` on the nodes of ``space``: the spot / strike each stands for in frame "x"."""
    return _kernels.node_exp(space.x_min, space.h, space.n)


def solve(
    problem: PDEProblem, space: SpaceGrid, time: TimeGrid, method: ExerciseMethod
) -> GridSolution:
    """March from the payoff at expiry to valuation on one grid.

    Parameters
    ----------
    problem : PDEProblem
        What to solve.
    space, time : SpaceGrid, TimeGrid
        The grid (``space.frame`` says which frame, see :mod:`stopline.operator`); with
        dividends, frame "x" and a time grid with a level on every ex-date
        (:func:`time_grid_for`).
    method : DirectSweep or ProjectedSOR
        Solver of the exercise constraint (also used for European options, where it is a
        plain linear solve).
    """
    plan = plan_steps(time, space.h, *problem.coefficients, space.frame)
    ex = node_exp(space)
    v = payoff_on(space, problem.is_put, ex=ex)
    if not problem.has_events:
        fitted = fitted_boundary(problem, space, time)
        report = method.march(v, ex, space, plan, problem.is_put, problem.american, fitted)
        v /= plan.scale[-1]
        payoff = payoff_on(space, problem.is_put, float(plan.shift[-1]), ex=ex)
        return GridSolution(space, time, v, payoff, plan.drift, report)
    if space.frame != "x":
        raise ValueError("cash dividends are solved in frame 'x'")
    return _solve_with_dividends(problem, space, time, plan, method, v.copy(), v)


def fitted_boundary(problem: PDEProblem, space: SpaceGrid, time: TimeGrid) -> bool:
    """Whether the march fits the exercise boundary inside its cell.

    Where it does, the ghost value at the first held node
    (:func:`stopline._kernels._substitute_fitted`, seen by both halves of each
    Crank-Nicolson step) and BDF2 blended into the few rows the boundary sweeps in a step
    (:func:`stopline._kernels.damping_band`) make the error a smooth function of the spacing
    and the step, so that the Richardson pair removes it. That is done for American options
    in frame "x" without term-structure breakpoints, with or without cash dividends of the
    spot model (the march restarts after each ex-date, the boundary's history with it).

    - European options keep Crank-Nicolson, whose error is smooth already.
    - With cash dividends projected SOR keeps the plain scheme (its fitted iteration was
      seen to cycle after a dividend jump); so do dividends of the escrowed model: the march goes one step at
      a time on shifted spots, where the premium's curvature next to the boundary differs.
      Under the spot model the fitted march is the more accurate (own measurement, 60 random
      American contracts with one to three dividends against a 8001 x 4000 grid: max error
      6.0e-7 x K at "standard" and 1.1e-8 at "fine", against 1.7e-6 and 2.5e-8 for the plain
      scheme, which missed "standard" on a put with K = 108.26, S = 100, T = 1, vol 14.6 %,
      r = 7.3 % and a dividend of 0.24 at 0.14 years by 16 times).
    - Term-structure breakpoints keep Crank-Nicolson: their segments restart the grading
      without implicit steps, and the first step-size ratios there (3, 5/3, ...) exceed what
      variable-step BDF2 tolerates (``1 + sqrt(2)``), and the damped rows are BDF2.
    - Frame "y" (very low vol) keeps the plain scheme: there the payoff moves across the
      nodes and the curvature formula of :func:`stopline._kernels.pasting_curvature` does
      not apply.
    """
    return (problem.american and space.frame == "x" and not problem.escrowed
            and all(getattr(time, "restart", (True,))))


def tangents_available(problem: PDEProblem, space: SpaceGrid, method: ExerciseMethod) -> bool:
    """Whether :func:`solve_with_tangents` applies: flat data, no cash dividends, frame "x",
    the direct sweep."""
    return (
        problem.curves is None and not problem.has_events and space.frame == "x"
        and isinstance(method, DirectSweep)
    )


def solve_with_tangents(
    problem: PDEProblem, space: SpaceGrid, time: TimeGrid, fitted: bool = True
) -> tuple[GridSolution, FloatArray]:
    """:func:`solve` with the direct sweep, plus the exact derivatives of the values with
    respect to the volatility and the rate (tangent-linear march, no bump). ``fitted``:
    fit the exercise boundary (:class:`~stopline.exercise.DirectSweep`) where
    :func:`fitted_boundary` allows it.

    Returns
    -------
    GridSolution
        As :func:`solve` (identical values).
    ndarray, shape (2, space.n)
        d(value / strike)/d vol and d(value / strike)/d rate on every node at valuation.
    """
    plan = plan_steps(time, space.h, *problem.coefficients, space.frame)
    ex = node_exp(space)
    v = payoff_on(space, problem.is_put, ex=ex)
    n_steps = plan.dt.shape[0]
    dco = np.empty((2, 3, n_steps))
    dfar = np.empty((2, 2, n_steps))
    _kernels.tangent_coefficients(
        space.h, problem.vol, problem.is_put, problem.american, ex[0], ex[-1], plan.tau,
        plan.df_r, plan.df_q, dco, dfar,
    )
    tan = np.zeros((2, space.n))
    bnd = np.empty(n_steps)
    _kernels.march_direct_tangents(
        v, ex, space.x_min, space.h, plan.dt, plan.theta, plan.lo, plan.di, plan.up,
        plan.df_r, plan.df_q, plan.shift, plan.scale, problem.is_put, problem.american, bnd,
        tan, dco, dfar, fitted and fitted_boundary(problem, space, time),
    )
    payoff = payoff_on(space, problem.is_put, float(plan.shift[-1]), ex=ex)
    return GridSolution(space, time, v, payoff, plan.drift, MarchReport(bnd)), tan


def _solve_with_dividends(
    problem: PDEProblem, space: SpaceGrid, time: TimeGrid, plan: StepPlan,
    method: ExerciseMethod, payoff: FloatArray, v: FloatArray,
) -> GridSolution:
    """March segment by segment, applying each dividend at its ex-date level."""
    tau = time.tau
    ex_nodes = node_exp(space)
    events: dict[int, float] = {}
    at_expiry = 0.0
    for t_d, d in zip(problem.dividend_tau, problem.dividend_amount, strict=True):
        if t_d <= 1e-12:
            at_expiry += d
            continue
        k = int(np.argmin(np.abs(tau - t_d)))
        if abs(tau[k] - t_d) > 1e-9 * max(1.0, t_d):
            raise ValueError(f"no time level on the ex-date (tau={t_d!r}); use time_grid_for")
        events[k] = events.get(k, 0.0) + d
    escrowed = problem.escrowed
    pv_after = _dividends_ahead(problem, plan, to_expiry=False) if escrowed else None
    # the far field below the grid at an ex-date (a spot dropped below the first node) takes
    # the plain discount factor and the dividends still ahead, capped at each dropped spot
    df_r_plain = plan.df_r
    ahead = np.zeros_like(plan.df_r)
    if not escrowed:
        # Far field of the spot model: the discounted forward is lowered by the dividends
        # ahead, so the European asymptote K e^{-r tau} - S e^{-q tau} gains their value
        # (kept below K e^{-r tau} for a put, whose stock cannot fall below zero).
        adj = _dividends_ahead(problem, plan, to_expiry=True)
        ahead = adj
        if problem.is_put:
            adj = np.minimum(adj, np.exp(space.x_min) * plan.df_q)
        plan = replace(plan, df_r=plan.df_r + adj)
        if problem.is_put and problem.american:
            # an American put deep in the money may do better by waiting for the dividends
            # ahead to take the spot to zero and exercising just after: its far field is at
            # least that (zero-vol) value, at the grid's end and, where the dividends ahead
            # exceed the forward of that end, at every spot dropped below it
            s_lo = float(np.exp(space.x_min))
            wait = _put_after_dividends(problem, plan, s_lo)
            plan = replace(plan, df_r=np.maximum(plan.df_r, wait + s_lo * plan.df_q))
            df_r_plain = np.where(ahead >= s_lo * plan.df_q, np.maximum(df_r_plain, wait),
                                  df_r_plain)
    work = np.empty_like(v)
    if at_expiry > 0.0:
        if escrowed:
            # the exercise value just before an ex-date on the expiry includes that dividend
            if problem.american:
                ex = _shifted_payoff(space, problem.is_put, at_expiry)
                _kernels.dividend_jump(
                    v, ex, space.x_min, space.h, 0.0, at_expiry, 1.0, 1.0, 0.0, problem.is_put,
                    True, work,
                )
                v[:] = work
        else:
            v[:] = _payoff_after_drop(space, problem.is_put, at_expiry, problem.american)
    stops = sorted(set(events) | {tau.shape[0] - 1})
    parts: list[MarchReport] = []
    # boundary per step, plus one entry at each ex-date for the state just before it
    b_tau: list[FloatArray] = []
    b_x: list[FloatArray] = []
    b_pv: list[FloatArray] = []
    start = 0
    for last in stops:
        if escrowed and problem.american:
            for k in range(start, last + 1):
                # the march takes the spot on each node as e^x: here S*/K + PV/K, which sets
                # the exercise value and the far-field values of the spot itself
                parts.append(method.march(
                    v, ex_nodes + pv_after[k], space, plan.part(k, k + 1), problem.is_put, True
                ))
                b_x.append(parts[-1].boundary_x)
        else:
            # (the direct sweep only: projected SOR's fitted iteration was seen to cycle after
            # a dividend jump, so with cash dividends it solves the plain scheme)
            parts.append(
                method.march(v, ex_nodes, space, plan.part(start, last + 1), problem.is_put,
                             problem.american,
                             fitted_boundary(problem, space, time)
                             and isinstance(method, DirectSweep))
            )
            b_x.append(parts[-1].boundary_x)
        b_tau.append(tau[start:last + 1])
        b_pv.append(pv_after[start:last + 1] if escrowed else np.zeros(last + 1 - start))
        d = events.get(last)
        if d is not None:
            pv_before = pv_after[last] + d if escrowed else 0.0
            ex = _shifted_payoff(space, problem.is_put, pv_before) if escrowed else payoff
            held_from = v.copy()
            if not escrowed or problem.american:
                _kernels.dividend_jump(
                    v, ex, space.x_min, space.h, 0.0 if escrowed else d, pv_before,
                    df_r_plain[last], plan.df_q[last], ahead[last], problem.is_put,
                    problem.american, work,
                )
                v[:] = work
            if problem.american:
                held = np.empty_like(v)
                _kernels.value_after_drop(
                    held_from, space.x_min, space.h, 0.0 if escrowed else d, df_r_plain[last],
                    plan.df_q[last], ahead[last], problem.is_put, True, held,
                )
                bx = _crossing(held - ex, ex, space, problem.is_put)
            else:
                bx = math.nan
            b_tau.append(np.array([tau[last]]))
            b_x.append(np.array([bx]))
            b_pv.append(np.array([pv_before]))
        start = last + 1
    bnd = np.concatenate(b_x)
    if escrowed:
        # report the critical spot itself: S = S* + PV_t(D)
        with np.errstate(invalid="ignore"):
            bnd = np.log(np.exp(bnd) + np.concatenate(b_pv))
    final_payoff = payoff
    if escrowed and problem.american:
        final_payoff = _shifted_payoff(space, problem.is_put, problem.escrow_pv)
    report = MarchReport(
        bnd,
        int(sum(p.iterations for p in parts)),
        int(max(p.max_iterations for p in parts)),
        parts[-1].omega,
    )
    return GridSolution(space, time, v, final_payoff, 0.0, report, np.concatenate(b_tau))


def _crossing(gap: FloatArray, exercise: FloatArray, space: SpaceGrid, is_put: bool) -> float:
    """Where held minus exercise value changes sign at the in-the-money end, or NaN.

    Just before an ex-date the exercise value crosses the held value at an angle (no smooth
    pasting there), so the crossing is placed by linear interpolation of the gap.
    """
    n = gap.shape[0]
    idx = range(1, n - 1) if is_put else range(n - 2, 0, -1)
    prev = -1
    for j in idx:
        if not (gap[j] <= 0.0 and exercise[j] > 0.0):
            if prev < 0:
                return math.nan
            g0, g1 = gap[prev], gap[j]
            frac = g0 / (g0 - g1) if g0 != g1 else 0.0
            return float(space.x_min + (prev + (j - prev) * frac) * space.h)
        prev = j
    return math.nan


def _payoff_after_drop(space: SpaceGrid, is_put: bool, d: float, american: bool) -> FloatArray:
    """Value / strike just before an ex-date on the expiry date (spot model), on the nodes.

    The payoff of the dropped spot, ``max(+-(1 - max(e^x - d, 0)), 0)``, and for an American
    option the larger of that and the exercise value at ``e^x``, in closed form. Its kink at
    ``e^x = 1 + d`` (and a put's at ``e^x = d``) lies between nodes: the node whose cell holds
    one takes the cell average (two-point Gauss on each side of the kink), which keeps the
    error a smooth function of the spacing (Pooley, Vetzal and Forsyth 2003). Interpolating
    the payoff on the nodes instead (as at an ex-date inside the option's life) gave an
    error that depends on where the kink falls: 3.6e-6 x K for a European call at spacing
    0.016 where the identity with a call struck at ``K + d`` is exact.

    References
    ----------
    Pooley, D. M., Vetzal, K. R. and Forsyth, P. A. (2003), Convergence remedies for
    non-smooth payoffs in option pricing, J. Comput. Finance 6(4).
    """

    def value(x: FloatArray) -> FloatArray:
        s = np.exp(x)
        out = np.clip(1.0 + d - s, 0.0, 1.0) if is_put else np.maximum(s - d - 1.0, 0.0)
        if american:
            out = np.maximum(out, np.maximum(1.0 - s, 0.0) if is_put else np.maximum(s - 1.0, 0.0))
        return out

    x = space.x
    h = space.h
    out = value(x)
    g = 0.5 / math.sqrt(3.0)
    kinks = [math.log1p(d)] + ([math.log(d)] if is_put else [])
    for xk in kinks:
        j = int(round((xk - space.x_min) / h))
        if not 0 <= j < space.n or abs(x[j] - xk) <= 1e-12:
            continue  # outside the grid, or on a node (the point value is then right)
        total = 0.0
        for lo, hi in ((x[j] - 0.5 * h, xk), (xk, x[j] + 0.5 * h)):
            c, half = 0.5 * (lo + hi), 0.5 * (hi - lo)
            total += half * float(value(np.array([c - 2.0 * g * half, c + 2.0 * g * half])).sum())
        out[j] = total / h
    return out


def _shifted_payoff(space: SpaceGrid, is_put: bool, pv: float) -> FloatArray:
    """Exercise value / strike on the escrowed grid: spot = ``e^x + pv``."""
    s = np.exp(space.x) + pv
    out = 1.0 - s if is_put else s - 1.0
    np.maximum(out, 0.0, out=out)
    return out


def _dividends_ahead(problem: PDEProblem, plan: StepPlan, *, to_expiry: bool) -> FloatArray:
    """Per step: the dividends / strike still to come after its end, discounted to it.

    Each dividend is discounted at the rate from its ex-date back to the step's end; with
    ``to_expiry`` also at the yield from expiry back to the ex-date (the amount by which
    the dividend lowers the discounted forward ``S e^{-int q}`` of the spot model).
    """
    rate, q = problem.coefficients[0], problem.coefficients[1]
    expiry = problem.expiry
    out = np.zeros_like(plan.tau)
    for t_d, d in zip(problem.dividend_tau, problem.dividend_amount, strict=True):
        ahead = plan.tau > t_d * (1.0 + 1e-12) + 1e-14
        t_now = np.maximum(expiry - plan.tau[ahead], 0.0)
        t_ex = expiry - t_d
        grow = _integral(rate, t_now, t_ex)
        if to_expiry:
            grow = grow + _integral(q, np.full_like(t_now, t_ex), expiry)
        out[ahead] += d * np.exp(-grow)
    return out


def _put_after_dividends(problem: PDEProblem, plan: StepPlan, s: float) -> FloatArray:
    """Per step: the best zero-vol value / strike of a put exercised just after one of the
    ex-dates still to come, from spot / strike ``s`` at the step's end (spot model).

    Along the path the spot grows at ``r - q`` and drops by each dividend, not below zero;
    exercising just after ex-date ``j`` is worth ``exp(-int r) (1 - S_j)^+``.
    """
    rate, q = problem.coefficients[0], problem.coefficients[1]
    expiry = problem.expiry
    tau = plan.tau
    spot = np.full_like(tau, s)
    t_cur = np.maximum(expiry - tau, 0.0)
    t_now = t_cur.copy()
    best = np.zeros_like(tau)
    order = np.argsort(-np.asarray(problem.dividend_tau), kind="stable")  # calendar order
    for i in order:
        t_d, d = problem.dividend_tau[i], problem.dividend_amount[i]
        ahead = tau > t_d * (1.0 + 1e-12) + 1e-14
        if not ahead.any():
            continue
        t_ex = expiry - t_d
        grow = _integral(rate, t_cur[ahead], t_ex) - _integral(q, t_cur[ahead], t_ex)
        spot[ahead] = np.maximum(spot[ahead] * np.exp(grow) - d, 0.0)
        t_cur[ahead] = t_ex
        value = np.exp(-_integral(rate, t_now[ahead], t_ex)) * np.maximum(1.0 - spot[ahead], 0.0)
        best[ahead] = np.maximum(best[ahead], value)
    return best


def _integral(curve: Curve, t0: FloatArray, t1: float) -> FloatArray:
    """``int_{t0}^{t1} c(t) dt`` for each entry of ``t0``."""
    if isinstance(curve, PiecewiseConstant):
        return curve.cumulative(np.full_like(t0, t1)) - curve.cumulative(t0)
    return float(curve) * (t1 - t0)


def problem_from_market(option: Option, market: Market, expiry: float) -> PDEProblem:
    """The dimensionless problem for an option in a market, ``expiry`` years from valuation.

    Raises
    ------
    InputError
        Naming ``dividends`` if an ex-date is before the valuation date, or if the present
        value of the dividends reaches the spot under the escrowed model.
    """
    k = option.strike
    rate, q, vol = market.rate, market.div_yield, market.vol
    curves = (rate, q, vol) if market.has_term_structure else None
    rate_avg = rate.average(expiry) if isinstance(rate, PiecewiseConstant) else float(rate)
    q_avg = q.average(expiry) if isinstance(q, PiecewiseConstant) else float(q)
    vol_rms = vol.rms(expiry) if isinstance(vol, PiecewiseConstant) else float(vol)
    sched = dividend_schedule(market.dividends, expiry, market.valuation_date)
    spot = market.spot
    pv = 0.0
    if market.dividend_model == "escrowed" and sched.times.size:
        pv = present_value(sched.times, sched.amounts, rate)
        if pv >= spot:
            raise InputError(
                "dividends", market.dividends,
                f"present value {pv:g} of the dividends before expiry reaches the spot {spot:g} "
                "(escrowed model needs spot > PV(dividends))",
            )
        spot = spot - pv
    return PDEProblem(
        option.is_put, option.is_american, expiry, rate_avg, q_avg, vol_rms,
        math.log(spot / k), curves,
        tuple(float(expiry - t) for t in sched.times),
        tuple(float(a / k) for a in sched.amounts),
        market.dividend_model, pv / k, sched.warnings,
    )


def time_grid_for(problem: PDEProblem, levels: int) -> TimeGrid:
    """Graded time levels for a problem: plain, or segmented at ex-dates and breakpoints.

    Ex-dates end a segment whose successor (earlier in calendar time) restarts the grading
    and the Rannacher half steps (the exercise value makes a new kink there); term-structure
    breakpoints end a segment with graded levels but no implicit restart.
    """
    expiry = problem.expiry
    ends: dict[float, bool] = {}
    ex_dates = problem.dividend_tau if problem.has_events else ()
    for t_d in ex_dates:
        if 1e-12 < t_d < expiry * (1.0 - 1e-12):
            ends[t_d] = True
    if problem.curves is not None:
        for c in problem.curves:
            if isinstance(c, PiecewiseConstant):
                for b in c.breakpoints(expiry):
                    tb = expiry - b
                    if not any(abs(tb - e) <= 1e-12 * expiry for e in ends):
                        ends[tb] = False
    if not ends:
        return build_time_grid(expiry, levels)
    bounds = tuple(sorted(ends)) + (expiry,)
    # segment i runs from bounds[i-1] to bounds[i]; it restarts if its start is an ex-date
    restart = (True,) + tuple(ends[b] for b in bounds[:-1])
    return build_segmented_time_grid(bounds, restart, split_levels(bounds, levels, restart))


def theta_at_valuation(
    problem: PDEProblem, spot: float, strike: float, value: float, delta: float, gamma: float,
    exercised: bool,
) -> float:
    """Calendar-time theta from the Black-Scholes equation at valuation.

    Uses the instantaneous rate, yield and vol. Under the escrowed model the equation holds
    for ``S* = S - PV_t(D)``, and ``S*`` moves by ``-r PV`` per year at fixed ``S``.
    """
    r, q, v = (c(0.0) if isinstance(c, PiecewiseConstant) else float(c) for c in problem.coefficients)
    if not problem.escrowed:
        return theta_from_pde(spot, value, delta, gamma, r, q, v, exercised)
    pv = problem.escrow_pv * strike
    core = theta_from_pde(spot - pv, value, delta, gamma, r, q, v, exercised)
    return 0.0 if exercised else core - r * pv * delta

