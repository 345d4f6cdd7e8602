"""Value, payoff, delta and gamma across spot: the grid's answer around the money.

:func:`stopline.pricing.price` answers at one spot. For a picture of the option across spot
(:func:`stopline.plots.plot_value_profile`) the same two grids are solved and their values
are read at the nodes they share (every node of the coarser grid) by the rule
:func:`~stopline.pricing.price` reads its answer at the spot with: the quintic read-off of
:func:`stopline.greeks.read_at_spot` on each grid (Fornberg 1988 weights in ``x = ln(S / K)``;
next to the exercise boundary the stencil stays on held nodes, off the kink in the second
derivative), Richardson-extrapolated node by node like the price. On nodes in the exercise
region (beyond the critical spot located on the finer grid, as ``price`` decides) delta and
gamma are the payoff's (+-1 and 0). So each point of the profile is what ``price`` answers
for that spot on these grids, and gamma has no spike at the boundary (a centred stencil
across the kink would put one there).

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
from .market import Market
from .solve import problem_from_market, solve

__all__ = ["ValueProfile", "value_profile"]


@dataclass(frozen=True)
class _AtSpot:
    """The one field of a market that the pair's extrapolation reads: the spot."""

    spot: float


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
    from .pricing import _read, _resolve_grid, _richardson  # price()'s own rules

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
    pc = coarse.payoff
    x = coarse.x  # log-moneyness of the nodes at valuation (any frame)
    s = k * (np.exp(x) + problem.escrow_pv)  # escrowed model: nodes are spot less PV(D)
    sd = market.vol * math.sqrt(t)
    lo = min(0.0, problem.x_spot) - width_sd * sd
    hi = max(0.0, problem.x_spot) + width_sd * sd
    # nodes in the window, the two at either grid end left out (their values are the far
    # field's, not the solution's)
    keep = (x >= lo) & (x <= hi)
    keep[:2] = keep[-2:] = False
    value, delta, gamma = (np.full(x.shape, np.nan) for _ in range(3))
    exercised = np.zeros(x.shape, dtype=bool)
    for i in np.flatnonzero(keep):
        xi = float(x[i])
        rc, rf = _read(coarse, problem, k, xi), _read(fine, problem, k, xi)
        value[i], delta[i], gamma[i] = _richardson(
            rc, rf, option, _AtSpot(float(s[i])), problem.div_yield, t)
        exercised[i] = rf.exercised
    if option.is_american:  # never below the payoff, as drawn (rounding aside)
        np.maximum(value, k * pc, out=value)
    return ValueProfile(
        s[keep], value[keep], k * pc[keep], delta[keep], gamma[keep], exercised[keep],
        option, market, t, acc_name,
    )
