"""The Black-Scholes operator on a uniform log-moneyness grid.

With ``x = ln(S / K)`` and ``v = V / K``, the Black-Scholes equation in time to expiry is

    v_tau = L v,   L v = 1/2 s^2 v_xx + (r - q - 1/2 s^2) v_x - r v.

Central differences on spacing ``h`` give, at each interior node,

    (L v)_j = lo v_{j-1} + di v_j + up v_{j+1},
    lo = s^2 / (2 h^2) - mu / (2 h),  di = -s^2 / h^2 - r,  up = s^2 / (2 h^2) + mu / (2 h),

with ``mu = r - q - s^2 / 2``. The coefficients do not depend on ``x``, so a step is described
by three numbers; time-dependent rates, yields or vols give one triple per step.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from .grid import TimeGrid

__all__ = ["StepPlan", "plan_steps", "coefficients", "max_monotone_spacing"]


@dataclass(frozen=True)
class StepPlan:
    """Everything the kernels need per step, as plain float64 arrays of shape (n_steps,).

    Attributes
    ----------
    tau, dt, theta : ndarray
        Time to expiry after each step, its length, its implicitness.
    lo, di, up : ndarray
        Operator coefficients (see module docstring).
    df_r, df_q : ndarray
        ``exp(-int_0^tau r)`` and ``exp(-int_0^tau q)`` at the end of each step.
    """

    tau: FloatArray
    dt: FloatArray
    theta: FloatArray
    lo: FloatArray
    di: FloatArray
    up: FloatArray
    df_r: FloatArray
    df_q: FloatArray


def plan_steps(time: TimeGrid, h: float, rate: float, div_yield: float, vol: float) -> StepPlan:
    """Per-step operator coefficients and discount factors for flat market data.

    Parameters
    ----------
    time : TimeGrid
        The steps.
    h : float
        Spacing of the log-moneyness grid.
    rate, div_yield, vol : float
        Continuously compounded rate and yield, annual volatility.
    """
    lo, di, up = coefficients(h, rate, div_yield, vol)
    ones = np.ones_like(time.dt)
    return StepPlan(
        tau=time.tau,
        dt=time.dt,
        theta=time.theta,
        lo=lo * ones,
        di=di * ones,
        up=up * ones,
        df_r=np.exp(-rate * time.tau),
        df_q=np.exp(-div_yield * time.tau),
    )


def coefficients(h: float, rate: float, div_yield: float, vol: float) -> tuple[float, float, float]:
    """``(lo, di, up)`` of the operator on spacing ``h``.

    Central differences (second order) when ``|mu| h <= s^2``; otherwise the drift term is
    differenced upwind (first order but monotone: no negative off-diagonal, so no spurious
    oscillation or negative price at very low volatility). Only grids that the node cap
    stopped from resolving ``s^2 / |mu|`` reach the upwind branch, and ``price`` says so.
    """
    s2 = vol * vol
    mu = rate - div_yield - 0.5 * s2
    alpha = 0.5 * s2 / (h * h)
    if abs(mu) * h <= s2:
        beta = 0.5 * mu / h
        return alpha - beta, -2.0 * alpha - rate, alpha + beta
    if mu > 0.0:
        return alpha, -2.0 * alpha - mu / h - rate, alpha + mu / h
    return alpha - mu / h, -2.0 * alpha + mu / h - rate, alpha


def max_monotone_spacing(rate: float, div_yield: float, vol: float) -> float:
    """Largest spacing at which central differences keep both off-diagonals non-negative.

    ``lo >= 0`` and ``up >= 0`` need ``|mu| h <= s^2``; beyond it the scheme can produce
    spurious oscillations (and negative prices) at low volatility.
    """
    mu = abs(rate - div_yield - 0.5 * vol * vol)
    return np.inf if mu == 0.0 else vol * vol / mu
