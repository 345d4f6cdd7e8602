"""The Black-Scholes operator on a uniform log-moneyness grid.

With ``x = ln(S / K)`` and ``v = V / K``, the Black-Scholes equation in time to expiry is

    v_tau = L v,   L v = 1/2 s^2 v_xx + (r - q - 1/2 s^2) v_x - r v.

Central differences on spacing ``h`` give, at each interior node,

    (L v)_j = lo v_{j-1} + di v_j + up v_{j+1},
    lo = s^2 / (2 h^2) - mu / (2 h),  di = -s^2 / h^2 - r,  up = s^2 / (2 h^2) + mu / (2 h),

with ``mu = r - q - s^2 / 2``. The coefficients do not depend on ``x``, so a step is described
by three numbers; time-dependent rates, yields or vols (:mod:`stopline.termstructure`) give
one triple per step.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from .grid import TimeGrid
from .termstructure import Curve, PiecewiseConstant, curve_values

__all__ = ["StepPlan", "plan_steps", "max_monotone_spacing"]


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

    def part(self, start: int, stop: int) -> StepPlan:
        """The plan of steps ``start .. stop - 1`` (views, no copies)."""
        sl = slice(start, stop)
        return StepPlan(
            self.tau[sl], self.dt[sl], self.theta[sl], self.lo[sl], self.di[sl], self.up[sl],
            self.df_r[sl], self.df_q[sl],
        )


def plan_steps(time: TimeGrid, h: float, rate: Curve, div_yield: Curve, vol: Curve) -> StepPlan:
    """Per-step operator coefficients and discount factors.

    Parameters
    ----------
    time : TimeGrid
        The steps.
    h : float
        Spacing of the log-moneyness grid.
    rate, div_yield, vol : float or PiecewiseConstant
        Continuously compounded rate and yield, annual volatility; flat, or a curve in
        calendar time from valuation (``t = T - tau``). A curve is evaluated at each step's
        midpoint: put the curve's breakpoints on time levels (see
        :class:`~stopline.grid.SegmentedTimeGrid`) so that no step straddles one. Discount
        factors are exact integrals of the curves.
    """
    expiry = time.expiry
    tau_prev = time.tau - time.dt
    t_mid = np.maximum(expiry - 0.5 * (time.tau + tau_prev), 0.0)
    r = curve_values(rate, t_mid)
    q = curve_values(div_yield, t_mid)
    s2 = curve_values(vol, t_mid) ** 2
    mu = r - q - 0.5 * s2
    alpha = 0.5 * s2 / (h * h)
    beta = 0.5 * mu / h
    return StepPlan(
        tau=time.tau,
        dt=time.dt,
        theta=time.theta,
        lo=alpha - beta,
        di=-2.0 * alpha - r,
        up=alpha + beta,
        df_r=np.exp(-_integral_to_expiry(rate, time.tau, expiry)),
        df_q=np.exp(-_integral_to_expiry(div_yield, time.tau, expiry)),
    )


def _integral_to_expiry(curve: Curve, tau: FloatArray, expiry: float) -> FloatArray:
    """``int_{T - tau}^{T} c(t) dt`` for each ``tau``."""
    if isinstance(curve, PiecewiseConstant):
        t0 = np.maximum(expiry - tau, 0.0)
        return curve.cumulative(np.full_like(tau, expiry)) - curve.cumulative(t0)
    return float(curve) * tau


def max_monotone_spacing(rate: float, div_yield: float, vol: float) -> float:
    """Largest spacing at which central differences keep both off-diagonals non-negative.

    ``lo >= 0`` and ``up >= 0`` need ``|mu| h <= s^2``; beyond it the scheme can produce
    spurious oscillations (and negative prices) at low volatility.
    """
    mu = abs(rate - div_yield - 0.5 * vol * vol)
    return np.inf if mu == 0.0 else vol * vol / mu
