"""One finite-difference solve on one grid: payoff, march, values at valuation."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import _kernels
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
    """

    space: SpaceGrid
    time: TimeGrid
    values: FloatArray
    payoff: FloatArray
    drift: float
    report: MarchReport

    @property
    def x_min(self) -> float:
        """Log-moneyness of the first node at valuation."""
        return self.space.x_min - self.drift

    @property
    def x(self) -> FloatArray:
        """Log-moneyness of every node at valuation, shape (space.n,)."""
        return self.space.x - self.drift


def payoff_on(space: SpaceGrid, is_put: bool, shift: float = 1.0) -> FloatArray:
    """Exercise value / strike on the nodes at a level where ``S / K = e^y shift``."""
    out = np.empty(space.n)
    _kernels.obstacle(np.exp(space.x), shift, is_put, out)
    if shift == 1.0 and space.has_strike:
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
        The grid (``space.frame`` says which frame, see :mod:`stopline.operator`).
    method : DirectSweep or ProjectedSOR
        Solver of the exercise constraint (also used for European options, where it is a
        plain linear solve).
    """
    plan = plan_steps(time, space.h, problem.rate, problem.div_yield, problem.vol, space.frame)
    v = payoff_on(space, problem.is_put)
    report = method.march(v, np.exp(space.x), space, plan, problem.is_put, problem.american)
    v /= plan.scale[-1]
    payoff = payoff_on(space, problem.is_put, float(plan.shift[-1]))
    return GridSolution(space, time, v, payoff, plan.drift, report)
