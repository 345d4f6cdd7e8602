"""Greeks from grid solutions: read-off at the spot, theta from the PDE, vega and rho.

How each number in :class:`~stopline.pricing.Result` is computed:

- **price, delta, gamma.** The grid carries the value on nodes in ``x = ln(S / K)``. The six
  nodes nearest the spot define a quintic (Lagrange) interpolant; its value, first and second
  derivative at the spot, by Fornberg's (1988) weights, give ``v``, ``v_x`` and ``v_xx`` with
  interpolation errors O(h^6), O(h^5), O(h^4), far below the scheme's O(h^2), so the
  Richardson step of two grids cancels the scheme's error cleanly (a cubic's O(h^2) error in
  ``v_xx`` depends on where the spot falls between nodes and does not cancel). Then
  ``price = K v``, ``delta = v_x / e^x``, ``gamma = (v_xx - v_x) / (K e^{2x})``. Where the
  spot lies in the exercise region (beyond the located critical spot) the value is the payoff,
  delta is -1 or +1 and gamma 0; near the boundary the stencil is moved onto held nodes so that
  it does not straddle the kink in the second derivative.
- **theta** (calendar time) comes from the equation itself at the valuation level: where the
  option is held, ``V_t = -(1/2 s^2 S^2 gamma + (r - q) S delta - r V)``; where it is
  exercised, zero. It is as accurate as delta and gamma; a difference quotient over the last
  (longest, on a graded grid) time step would be first order.
- **vega, rho** (American with flat inputs and no cash dividends, the direct sweep): the exact derivatives of the discrete solution with respect to the
  volatility and the rate, marched alongside it on the same two grids (tangent-linear: each
  step's pivots and exercised nodes are reused, no bump size enters; see
  :func:`stopline.solve.solve_with_tangents` and :func:`stopline._kernels.price_pair`), read at
  the spot by the same read-off as the value and Richardson-extrapolated like the price. No
  extra solve: the tangents ride along the two solves of the price.
- **vega, rho** (American with cash dividends, term structures or projected SOR, and
  European options with dividends or term structures) by central differences
  ``(V(p + dp) - V(p - dp)) / (2 dp)`` of prices re-solved with the market's volatility or
  rate shifted in parallel (:data:`VOL_BUMP`, :data:`RATE_BUMP`; a curve moves as a whole,
  see :func:`bumped_market`), on grids built once from the unbumped inputs and reused, so
  that the bump moves no node: one pair of shared-grid solves per bumped input and
  direction. See :func:`central_difference`.
- **vega, rho** (European, flat inputs) from the solve itself: differentiating
  ``V = e^{-rT} E[payoff(S_T)]`` gives ``vega = vol T S^2 gamma`` and
  ``rho = T (S delta - V)`` exactly (:func:`european_vega_rho`); no re-solve is needed.
  Neither identity holds with early exercise, nor with discrete dividends or term
  structures.

References
----------
Fornberg, B. (1988), Generation of finite difference formulas on arbitrarily spaced grids,
Mathematics of Computation 51(184).
Richardson, L. F. (1911), The approximate arithmetical solution by finite differences of
physical problems, Phil. Trans. R. Soc. A 210.
"""

from __future__ import annotations

import copy
import math
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from . import _kernels
from ._types import FloatArray

if TYPE_CHECKING:
    from .market import Market

__all__ = [
    "GridReadout",
    "read_at_spot",
    "theta_from_pde",
    "fd_weights",
    "central_difference",
    "VOL_BUMP",
    "RATE_BUMP",
    "STENCIL",
    "european_vega_rho",
    "bumped_market",
]

#: Nodes in the read-off stencil (a quintic).
STENCIL = _kernels.STENCIL
#: Relative volatility bump for vega: ``dv = VOL_BUMP * vol``. The truncation error of the
#: central difference, ``dv^2 / 6 * d3V/dvol3``, stays below 1.5e-4 of vega over typical
#: contracts; a smaller bump divides the grid's non-smooth dependence on the inputs (nodes
#: entering or leaving the exercise region) by a smaller number, and American vegas at
#: ``standard`` lose accuracy (measured: 1.2e-3 relative with a 0.1 % bump, 4e-4 with 1 %).
VOL_BUMP = 1e-2
#: Absolute rate bump for rho (truncation error about ``(dr T)^2 / 6`` relative: 2e-7 at one
#: year, 4e-4 at fifty).
RATE_BUMP = 1e-3


class GridReadout(NamedTuple):
    """Value and Greeks at the spot read off one grid (in money units, not per strike).

    A named tuple (immutable like the result types, and built two or more times per price:
    cheaper than a dataclass).

    Attributes
    ----------
    value, delta, gamma : float
        Price, dV/dS, d2V/dS2.
    exercised : bool
        True if the spot lies in the exercise region.
    """

    value: float
    delta: float
    gamma: float
    exercised: bool


def fd_weights(z: float, x: FloatArray, m: int) -> FloatArray:
    """Weights of derivatives 0..m at ``z`` of the polynomial through nodes ``x``.

    Parameters
    ----------
    z : float
        Where to evaluate.
    x : ndarray, shape (p,)
        Distinct nodes.
    m : int
        Highest derivative.

    Returns
    -------
    ndarray, shape (m + 1, p)
        Row ``k`` dotted with the nodal values gives the ``k``-th derivative at ``z``.

    References
    ----------
    Fornberg, B. (1988), Mathematics of Computation 51(184), 699-706.
    """
    return _kernels.fornberg_weights(float(z), np.ascontiguousarray(x, dtype=np.float64), int(m))


def read_at_spot(
    values: FloatArray, payoff: FloatArray, x_min: float, h: float, x_spot: float,
    strike: float, american: bool, x_boundary: float = math.nan,
    is_put: bool | None = None, pv: float = 0.0,
) -> GridReadout:
    """Quintic read-off of value, delta and gamma at ``x_spot``.

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
    x_boundary : float, optional
        Located critical log-moneyness at valuation (NaN if none). Without it, the spot counts
        as exercised when every stencil node is.
    is_put : bool, optional
        The option's kind; when not given it is inferred from where the payoff is positive,
        which fails on a grid that lies wholly in the money.
    pv : float, optional
        Escrowed dividends: the nodes are ``(spot - PV(D)) / K`` and ``pv = PV(D) / K``, so the
        exercise value at ``x`` is that of the spot ``K (e^x + pv)``; ``x_boundary`` is then
        given in the same frame as the nodes.

    Notes
    -----
    The rule is compiled (:func:`stopline._kernels.read_off`) and shared with the one-call
    price of a Richardson pair.
    """
    put_side = bool(is_put) if is_put is not None else bool(payoff[0] > 0.0)
    return GridReadout(*_kernels.read_off(
        np.ascontiguousarray(values, dtype=np.float64),
        np.ascontiguousarray(payoff, dtype=np.float64), float(x_min), float(h), float(x_spot), float(strike), bool(american),
        float(x_boundary), put_side, float(pv),
    ))


def european_vega_rho(
    spot: float, value: float, delta: float, gamma: float, vol: float, expiry: float
) -> tuple[float, float]:
    """Vega and rho of a European option with flat inputs, from its value, delta and gamma.

    ``vega = vol T S^2 gamma`` and ``rho = T (S delta - V)``: identities of the lognormal
    model with constant rate, yield and volatility, found by differentiating the discounted
    expected payoff ``e^{-rT} E[payoff(S e^{(r - q - vol^2/2) T + vol W_T})]`` under the
    parameter (for vega, with an integration by parts in ``W_T``).
    """
    return vol * expiry * spot * spot * gamma, expiry * (spot * delta - value)


def bumped_market(market: Market, *, vol: float = 0.0, rate: float = 0.0) -> Market:
    """A copy of ``market`` with its vol and rate shifted in parallel by ``vol`` and ``rate``.

    Flat numbers and term structures (:class:`~stopline.PiecewiseConstant`, which adds a
    number to every piece) shift alike. The copy skips the input range checks on purpose: a
    bump may step just outside the accepted range (vol 5 + 1 %), and the market itself was
    checked.
    """
    out = copy.copy(market)
    if vol:
        object.__setattr__(out, "vol", market.vol + vol)
    if rate:
        object.__setattr__(out, "rate", market.rate + rate)
    return out


def central_difference(up: float, down: float, bump: float) -> float:
    """``(up - down) / (2 bump)``: a derivative with O(bump^2) truncation error.

    Vega and rho are central differences of prices re-solved with the input bumped up and
    down by ``bump`` on the unbumped problem's two grids. Each bumped price is Richardson
    extrapolated from that pair like the price, so the difference of extrapolated prices is
    the extrapolation of the differences.
    """
    return (up - down) / (2.0 * bump)


def theta_from_pde(
    spot: float, value: float, delta: float, gamma: float, rate: float, div_yield: float,
    vol: float, exercised: bool,
) -> float:
    """Calendar-time theta, dV/dt per year, from the Black-Scholes equation at valuation."""
    if exercised:
        return 0.0
    return -(0.5 * vol * vol * spot * spot * gamma + (rate - div_yield) * spot * delta - rate * value)

