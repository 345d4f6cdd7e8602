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
        Whether the exercise region is checked for.
    """
    n = values.shape[0]
    j = int(math.floor((x_spot - x_min) / h))
    j0 = min(max(j - 1, 0), n - 4)
    t = (x_spot - x_min) / h - j0  # position in units of h from node j0, in [0, 3]
    if american:
        is_put = bool(payoff[0] > payoff[-1])
        exercised = [
            v <= p and p > 0
            for v, p in zip(values[j0 : j0 + 4].tolist(), payoff[j0 : j0 + 4].tolist(), strict=True)
        ]
        if all(exercised) or _beyond_boundary(values, payoff, x_min, h, x_spot, is_put):
            s = math.exp(x_spot)
            intrinsic = max(1.0 - s, 0.0) if is_put else max(s - 1.0, 0.0)
            return GridReadout(strike * intrinsic, -1.0 if is_put else 1.0, 0.0, True)
    v0, v1, v2, v3 = values[j0 : j0 + 4].tolist()  # plain floats: cheaper arithmetic
    # Lagrange basis on nodes 0, 1, 2, 3 at position t
    a0 = t - 1.0
    a1 = t - 2.0
    a2 = t - 3.0
    l0 = -a0 * a1 * a2 / 6.0
    l1 = t * a1 * a2 / 2.0
    l2 = -t * a0 * a2 / 2.0
    l3 = t * a0 * a1 / 6.0
    v = l0 * v0 + l1 * v1 + l2 * v2 + l3 * v3
    # derivatives of the basis with respect to t
    d0 = -(a1 * a2 + a0 * a2 + a0 * a1) / 6.0
    d1 = (a1 * a2 + t * a2 + t * a1) / 2.0
    d2 = -(a0 * a2 + t * a2 + t * a0) / 2.0
    d3 = (a0 * a1 + t * a1 + t * a0) / 6.0
    vt = d0 * v0 + d1 * v1 + d2 * v2 + d3 * v3
    s0 = -(a0 + a1 + a2) / 3.0
    s1 = a1 + a2 + t
    s2 = -(a0 + a2 + t)
    s3 = (a0 + a1 + t) / 3.0
    vtt = s0 * v0 + s1 * v1 + s2 * v2 + s3 * v3
    vx = vt / h
    vxx = vtt / (h * h)
    e = math.exp(x_spot)
    return GridReadout(strike * v, vx / e, (vxx - vx) / (strike * e * e), False)


def _beyond_boundary(
    values: FloatArray, payoff: FloatArray, x_min: float, h: float, x_spot: float, is_put: bool
) -> bool:
    """Whether the spot lies in the exercise region between its last node and the boundary.

    The value is only C1 across the exercise boundary, so a cubic through nodes on both sides
    misses the payoff there by O(h^2); the boundary located below the grid spacing (from the
    quadratic contact of value and payoff, see :func:`stopline._kernels.locate_boundary`)
    tells whether the spot is exercised.
    """
    xb = _kernels.locate_boundary(values, payoff, x_min, h, is_put)
    if math.isnan(xb):
        return False
    return x_spot <= xb if is_put else x_spot >= xb


def theta_from_pde(
    spot: float, value: float, delta: float, gamma: float, rate: float, div_yield: float,
    vol: float, exercised: bool,
) -> float:
    """Calendar-time theta, dV/dt per year, from the Black-Scholes equation at valuation."""
    if exercised:
        return 0.0
    return -(0.5 * vol * vol * spot * spot * gamma + (rate - div_yield) * spot * delta - rate * value)
