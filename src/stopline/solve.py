"""One finite-difference solve on one grid: payoff, march, values at valuation."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from .exercise import ExerciseMethod, MarchReport
from .grid import SpaceGrid, TimeGrid
from .operator import plan_steps

__all__ = ["PDEProblem", "GridSolution", "payoff_on", "solve"]


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
        Flat market data.
    x_spot : float
        ``ln(spot / strike)``.
    """

    is_put: bool
    american: bool
    expiry: float
    rate: float
    div_yield: float
    vol: float
    x_spot: float


@dataclass(frozen=True)
class GridSolution:
    """Values on one grid at valuation, with what the march reported.

    Attributes
    ----------
    space, time : SpaceGrid, TimeGrid
        The grids solved on.
    values : ndarray, shape (space.n,)
        Value / strike at valuation on every node.
    payoff : ndarray, shape (space.n,)
        Exercise value / strike on every node.
    report : MarchReport
        Boundary per step and iteration counts.
    """

    space: SpaceGrid
    time: TimeGrid
    values: FloatArray
    payoff: FloatArray
    report: MarchReport


def payoff_on(space: SpaceGrid, is_put: bool) -> FloatArray:
    """Exercise value / strike on the nodes: ``max(1 - e^x, 0)`` or ``max(e^x - 1, 0)``."""
    s = np.exp(space.x)
    out = 1.0 - s if is_put else s - 1.0
    np.maximum(out, 0.0, out=out)
    if space.has_strike:
        out[space.strike_index] = 0.0
    return out


def solve(
    problem: PDEProblem, space: SpaceGrid, time: TimeGrid, method: ExerciseMethod
) -> GridSolution:
    """March from the payoff at expiry to valuation on one grid.

    Parameters
    ----------
    problem : PDEProblem
        What to solve.
    space, time : SpaceGrid, TimeGrid
        The grid.
    method : DirectSweep or ProjectedSOR
        Solver of the exercise constraint (also used for European options, where it is a
        plain linear solve).
    """
    payoff = payoff_on(space, problem.is_put)
    plan = plan_steps(time, space.h, problem.rate, problem.div_yield, problem.vol)
    v = payoff.copy()
    report = method.march(v, payoff, space, plan, problem.is_put, problem.american)
    return GridSolution(space, time, v, payoff, report)
