"""The Black-Scholes operator on a uniform grid, in one of two frames.

With ``x = ln(S / K)`` and ``v = V / K``, the Black-Scholes equation in time to expiry is

    v_tau = 1/2 s^2 v_xx + mu v_x - r v,   mu = r - q - s^2 / 2.

Frame "x" solves it as it stands. Central differences on spacing ``h`` give, at every interior
node, ``(L v)_j = lo v_{j-1} + di v_j + up v_{j+1}`` with

    lo = s^2 / (2 h^2) - mu / (2 h),   di = -s^2 / h^2 - r,   up = s^2 / (2 h^2) + mu / (2 h).

The payoff kink stays on the strike node for the whole life, which keeps American prices
cleanly second order; but ``lo`` turns negative (oscillations, negative prices) once
``|mu| h > s^2``, and the grid must span the forward's whole path ``mu T``.

Frame "y" moves with the drift, ``y = x + M(tau)``, ``M(tau) = int_0^tau mu``, and marches the
undiscounted value ``u = v e^{int r}``, which obeys the heat equation ``u_tau = 1/2 s^2 u_yy``
(no drift term, and no decay term for Crank-Nicolson to misjudge over long, high-rate lives);
the exercise value at level ``tau`` is the payoff at ``x = y - M(tau)``, undiscounted alike.
It is monotone at every spacing and its grid covers only the spot's neighbourhood, so it
serves very low volatility with a large drift (:func:`choose_frame`), where frame "x" would
need a tiny spacing over a long domain. Its price for that: the exercise value's kink drifts
between nodes, so American errors are less regular and need shorter steps.

The coefficients do not depend on the node, so a step is described by three numbers;
time-dependent rates, yields or vols (:mod:`stopline.termstructure`) give one triple per step.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import _kernels
from ._types import FloatArray
from .grid import TimeGrid
from .termstructure import Curve, PiecewiseConstant, curve_values

__all__ = ["StepPlan", "plan_steps", "coefficients", "choose_frame"]


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
    shift : ndarray
        ``exp(-M(tau))`` at the end of each step in frame "y" (node ``y`` stands for
        ``S/K = e^y shift``); ones in frame "x".
    scale : ndarray
        ``1 / df_r`` in frame "y", whose operator leaves out the discounting (the kernels then
        march the undiscounted value and scale exercise and far-field values to match); ones
        in frame "x".
    """

    tau: FloatArray
    dt: FloatArray
    theta: FloatArray
    lo: FloatArray
    di: FloatArray
    up: FloatArray
    df_r: FloatArray
    df_q: FloatArray
    shift: FloatArray
    scale: FloatArray

    @property
    def drift(self) -> float:
        """``M(T)``: how far the frame has moved by valuation (``x = y - M(T)``)."""
        return float(-np.log(self.shift[-1])) if self.shift.size else 0.0

    def part(self, start: int, stop: int) -> StepPlan:
        """The plan of steps ``start .. stop - 1`` (views, no copies)."""
        sl = slice(start, stop)
        return StepPlan(
            self.tau[sl], self.dt[sl], self.theta[sl], self.lo[sl], self.di[sl], self.up[sl],
            self.df_r[sl], self.df_q[sl], self.shift[sl], self.scale[sl],
        )


def coefficients(
    h: float, rate: float, div_yield: float, vol: float, frame: str = "x"
) -> tuple[float, float, float]:
    """``(lo, di, up)`` of the operator on spacing ``h`` in the given frame."""
    alpha = 0.5 * vol * vol / (h * h)
    if frame == "y":
        return alpha, -2.0 * alpha, alpha
    beta = 0.5 * (rate - div_yield - 0.5 * vol * vol) / h
    return alpha - beta, -2.0 * alpha - rate, alpha + beta


def choose_frame(sd: float, drift: float, h: float, vol: float, mu: float) -> str:
    """Frame "y" where frame "x" would be non-monotone (``|mu| h > vol^2``) on spacing ``h``
    or would spend most of its nodes on the forward's path (``|drift| > 4 sd``); else "x"."""
    return "y" if _kernels.frame_y_needed(sd, drift, h, vol, mu) else "x"


def plan_steps(
    time: TimeGrid, h: float, rate: Curve, div_yield: Curve, vol: Curve, frame: str = "x"
) -> StepPlan:
    """Per-step operator coefficients, discount factors and frame shifts.

    Parameters
    ----------
    time : TimeGrid
        The steps.
    h : float
        Spacing of the grid.
    rate, div_yield, vol : float or PiecewiseConstant
        Continuously compounded rate and yield, annual volatility; flat, or a curve in
        calendar time from valuation (``t = T - tau``). A curve is evaluated at each step's
        midpoint: put the curve's breakpoints on time levels (see
        :class:`~stopline.grid.SegmentedTimeGrid`) so that no step straddles one. Discount
        factors and the frame's shift are exact integrals of the curves.
    frame : {"x", "y"}
        Coordinate of the grid (module docstring).
    """
    if not isinstance(rate, PiecewiseConstant) and not isinstance(div_yield, PiecewiseConstant) \
            and not isinstance(vol, PiecewiseConstant):
        return _plan_flat(time, h, float(rate), float(div_yield), float(vol), frame)
    expiry = time.expiry
    tau_prev = time.tau - time.dt
    t_mid = np.maximum(expiry - 0.5 * (time.tau + tau_prev), 0.0)
    r = curve_values(rate, t_mid)
    q = curve_values(div_yield, t_mid)
    v = curve_values(vol, t_mid)
    lo, di, up = coefficients(h, r, q, v, frame)  # type: ignore[arg-type]
    int_r = _integral_to_expiry(rate, time.tau, expiry)
    int_q = _integral_to_expiry(div_yield, time.tau, expiry)
    if frame == "y":
        int_v2 = _integral_to_expiry(vol, time.tau, expiry, power=2)
        shift = np.exp(-(int_r - int_q - 0.5 * int_v2))
    else:
        shift = np.ones_like(time.dt)
    return StepPlan(
        tau=time.tau,
        dt=time.dt,
        theta=time.theta,
        lo=lo,
        di=di,
        up=up,
        df_r=np.exp(-int_r),
        df_q=np.exp(-int_q),
        shift=shift,
        scale=np.exp(int_r) if frame == "y" else np.ones_like(time.dt),
    )


def _plan_flat(
    time: TimeGrid, h: float, rate: float, div_yield: float, vol: float, frame: str
) -> StepPlan:
    """:func:`plan_steps` for flat data: the same numbers, without per-step curve look-ups."""
    plan = np.empty((7, time.dt.shape[0]))
    coef = coefficients(h, rate, div_yield, vol, frame)
    _kernels.flat_plan(time.tau, coef, rate, div_yield, vol, frame == "y", plan)
    lo, di, up, df_r, df_q, shift, scale = plan
    return StepPlan(
        tau=time.tau, dt=time.dt, theta=time.theta, lo=lo, di=di, up=up, df_r=df_r, df_q=df_q,
        shift=shift, scale=scale,
    )


def _integral_to_expiry(curve: Curve, tau: FloatArray, expiry: float, power: int = 1) -> FloatArray:
    """``int_{T - tau}^{T} c(t)^power dt`` for each ``tau``."""
    if isinstance(curve, PiecewiseConstant):
        if power != 1:
            curve = PiecewiseConstant(curve.times, tuple(x**power for x in curve.values))
        t0 = np.maximum(expiry - tau, 0.0)
        return curve.cumulative(np.full_like(tau, expiry)) - curve.cumulative(t0)
    return float(curve) ** power * tau
