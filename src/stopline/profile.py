"""Value, payoff, delta and gamma across spot: the grid's answer around the money.

:func:`stopline.pricing.price` answers at one spot. For a picture of the option across spot
(:func:`stopline.plots.plot_value_profile`) the same two grids are solved and their values
are read at the nodes they share (every node of the coarser grid), Richardson-extrapolated
node by node like the price. Delta and gamma at each node come from fourth-order central
differences in ``x = ln(S / K)`` on each grid (Fornberg 1988 weights), extrapolated alike;
on nodes in the exercise region (beyond the critical spot located on the finer grid, as
:func:`~stopline.pricing.price` decides) they are the payoff's (+-1 and 0).

References
----------
Fornberg, B. (1988), Mathematics of Computation 51(184); Richardson, L. F. (1911).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from .contract import Option
from .errors import InputError
from .exercise import ExerciseMethod, get_method
from .greeks import fd_weights
from .market import Market
from .solve import GridSolution, problem_from_market, solve

__all__ = ["ValueProfile", "value_profile"]


@dataclass(frozen=True)
class ValueProfile:
    """An option across spot at valuation.

    Attributes
    ----------
    spot : ndarray, shape (n,)
        Spots (the coarser grid's nodes in the window), increasing.
    value, payoff, delta, gamma : ndarray, shape (n,)
        Option value, exercise value, dV/dS and d2V/dS2 at those spots.
    exercised : ndarray of bool, shape (n,)
        True where the option is worth its payoff (American exercise region).
    option : Option
        The contract.
    market : Market
        The market (its spot is where ``price`` answers).
    time_to_expiry : float
        Years from valuation to expiry.
    accuracy : str
        Preset name, or ``"custom"``.
    """

    spot: FloatArray
    value: FloatArray
    payoff: FloatArray
    delta: FloatArray
    gamma: FloatArray
    exercised: np.ndarray
    option: Option
    market: Market
    time_to_expiry: float
    accuracy: str


def _nodal(sol: GridSolution) -> tuple[FloatArray, FloatArray]:
    """v_x and v_xx on every node by five-point central differences (two end nodes: NaN)."""
    v, h = sol.values, sol.space.h
    n = v.shape[0]
    w = fd_weights(0.0, np.arange(-2.0, 3.0), 2)
    segs = [v[2 + off : n - 2 + off] for off in range(-2, 3)]
    vx = np.full(n, np.nan)
    vxx = np.full(n, np.nan)
    vx[2:-2] = sum(w[1, i] * seg for i, seg in enumerate(segs)) / h
    vxx[2:-2] = sum(w[2, i] * seg for i, seg in enumerate(segs)) / (h * h)
    return vx, vxx


def value_profile(
    option: Option,
    market: Market,
    *,
    accuracy: str = "standard",
    method: str | ExerciseMethod = "direct",
    grid=None,  # noqa: ANN001 - GridSpec | (int, int) | None, as in price()
    width_sd: float = 2.5,
) -> ValueProfile:
    """Value, payoff, delta and gamma across spot, from the same grids as :func:`price`.

    Parameters
    ----------
    option, market, accuracy, method, grid
        As for :func:`stopline.pricing.price`.
    width_sd : float
        Half-width of the spot window around the spot and the strike, in standard deviations
        of ``ln S`` over the option's life.

    Returns
    -------
    ValueProfile

    Raises
    ------
    InputError
        For an input outside its domain, or an option that expires at valuation.
    """
    from .pricing import _resolve_grid  # the presets live with price()

    if not width_sd > 0.0 or not math.isfinite(width_sd):
        raise InputError("width_sd", width_sd, "must be a positive number")
    solver = get_method(method)
    t = option.time_to_expiry(market.valuation_date)
    if t == 0.0:
        raise InputError("expiry", option.expiry, "is the valuation date: no profile to draw")
    k = option.strike
    problem = problem_from_market(option, market, t)
    space_c, time_c, acc_name = _resolve_grid(problem, accuracy, grid)
    coarse = solve(problem, space_c, time_c, solver)
    fine = solve(problem, space_c.refined(), time_c.refined(), solver)
    vc, pc = coarse.values, coarse.payoff
    vf = fine.values[::2]
    value = vf + (vf - vc) / 3.0
    dxc, dxxc = _nodal(coarse)
    dxf, dxxf = (a[::2] for a in _nodal(fine))
    vx = dxf + (dxf - dxc) / 3.0
    vxx = dxxf + (dxxf - dxxc) / 3.0
    x = coarse.x  # log-moneyness of the nodes at valuation (any frame)
    s = k * (np.exp(x) + problem.escrow_pv)  # escrowed model: nodes are spot less PV(D)
    # exercised: beyond the critical spot located on the finer grid (as price() decides)
    x_star = float(fine.report.boundary_x[-1]) if option.is_american else math.nan
    if math.isfinite(x_star):
        # the march reports the critical spot itself (not the node's spot less PV(D))
        xs = np.log(s / k)
        exercised = (xs <= x_star) if option.is_put else (xs >= x_star)
        exercised &= pc > 0.0
    else:
        exercised = np.zeros(x.shape, dtype=bool)
    if option.is_american:
        np.maximum(value, pc, out=value)
    delta = vx / np.exp(x)
    gamma = (vxx - vx) / (k * np.exp(2.0 * x))
    delta[exercised] = -1.0 if option.is_put else 1.0
    gamma[exercised] = 0.0
    sd = market.vol * math.sqrt(t)
    lo = min(0.0, problem.x_spot) - width_sd * sd
    hi = max(0.0, problem.x_spot) + width_sd * sd
    keep = (x >= lo) & (x <= hi) & np.isfinite(vx) & np.isfinite(dxc)
    return ValueProfile(
        s[keep], k * value[keep], k * pc[keep], delta[keep], gamma[keep], exercised[keep],
        option, market, t, acc_name,
    )
