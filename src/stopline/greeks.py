"""Reading the price, delta and gamma at the spot off a grid solution, and theta from the PDE.

The grid carries the value on nodes in ``x = ln(S / K)``. At the spot ``x_s`` the four nearest
nodes define a cubic (Lagrange) interpolant; its value, first and second derivative give
``v``, ``v_x`` and ``v_xx`` (errors O(h^4), O(h^3), O(h^2), below the scheme's O(h^2)), and

    price = K v,   delta = v_x / e^x,   gamma = (v_xx - v_x) / (K e^{2x}).

Theta (calendar time) comes from the equation itself at the valuation level: where the option
is held, ``V_t = -(1/2 s^2 S^2 gamma + (r - q) S delta - r V)``; where it is exercised, the
value is the payoff and theta is zero. This is second order, like delta and gamma; a
difference quotient over the last (longest, on a graded grid) time step would be first order.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from . import _kernels
from ._types import FloatArray

__all__ = ["GridReadout", "read_at_spot", "theta_from_pde"]


@dataclass(frozen=True)
class GridReadout:
    """Value and Greeks at the spot read off one grid (in money units, not per strike).

    Attributes
    ----------
    value, delta, gamma : float
        Price, dV/dS, d2V/dS2.
    exercised : bool
        True if the spot lies inside the exercise region (all four stencil nodes exercised).
    """

    value: float
    delta: float
    gamma: float
    exercised: bool


def read_at_spot(
    values: FloatArray, payoff: FloatArray, x_min: float, h: float, x_spot: float,
    strike: float, american: bool,
) -> GridReadout:
    """Cubic read-off of value, delta and gamma at ``x_spot``.

    Parameters
    ----------
    values, payoff : ndarray, shape (n,)
        Value / strike and payoff / strike on the nodes.
    x_min, h : float
        First node and spacing.
    x_spot : float
        ``ln(S / K)``.
    strike : float
        Scales the dimensionless values back to money.
    american : bool
        Whether the exercise region is checked for: a spot in it (all four nodes exercised,
        or past the boundary located below the grid spacing, see
        :func:`stopline._kernels.locate_boundary`) reads the payoff, since the value is only
        C1 across the boundary and a cubic through nodes on both sides misses it by O(h^2).
    """
    v, v_x, v_xx, exercised = _kernels.read_cubic(values, payoff, x_min, h, x_spot, american)
    if exercised:
        # intrinsic value; v_x carries the money delta (-1 put, +1 call)
        return GridReadout(strike * v, v_x, 0.0, True)
    e = math.exp(x_spot)
    return GridReadout(strike * v, v_x / e, (v_xx - v_x) / (strike * e * e), False)


def theta_from_pde(
    spot: float, value: float, delta: float, gamma: float, rate: float, div_yield: float,
    vol: float, exercised: bool,
) -> float:
    """Calendar-time theta, dV/dt per year, from the Black-Scholes equation at valuation."""
    if exercised:
        return 0.0
    return -(0.5 * vol * vol * spot * spot * gamma + (rate - div_yield) * spot * delta - rate * value)
