"""Calls solved as puts by put-call symmetry, where a call's own grid cannot hold it.

A call's value grows like the spot, so on a grid in ``x = ln(S / K)`` its values span
``e^{x_max}``; once ``vol^2 T`` is large (vol 500 % over years) the grid must reach far above
the strike, the values there are astronomically larger than at the spot, and the scheme's
relative error on them swamps the price (measured: a European call at vol 5, T = 50 priced
at 0 with an error estimate of 1e52). By put-call symmetry (McDonald and Schroder 1998;
Bjerksund and Stensland 1993), for American and European exercise alike,

    C(S, K, T, r, q, vol) = P(K, S, T, q, r, vol),

and in units of the strike, with ``p(x')`` the put's value / its strike ``S`` at its
log-moneyness ``x' = ln(K / S) = -x``,

    C / K = e^{x} p(-x).

The put's values are bounded by its strike, so its grid is sound at any ``vol^2 T``. This
module builds the put's problem and maps its grid solution back onto the call's nodes
(``x = -x'``, values times ``e^x``), so the read-off, the boundary and the bumped Greeks of
:func:`stopline.pricing.price` work unchanged.

References
----------
McDonald, R. L. and Schroder, M. D. (1998), "A parity result for American options",
Journal of Computational Finance 1(3), 5-13.
Bjerksund, P. and Stensland, G. (1993), "American exchange options and a put-call
transformation: a note", Journal of Business Finance and Accounting 20(5), 761-764.
Stoll, H. R. (1969), "The relationship between put and call option prices", Journal of
Finance 24(5), 801-824 (put-call parity, used for European calls deep in the money).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .exercise import ExerciseMethod, MarchReport
from .grid import SpaceGrid, TimeGrid
from .solve import GridSolution, PDEProblem, solve

__all__ = [
    "SYMMETRY_MIN_SD",
    "PARITY_MIN_MONEYNESS",
    "use_symmetry",
    "use_parity",
    "swapped_problem",
    "parity_problem",
    "solve_swapped",
    "solve_parity",
]

#: A call is solved as the symmetric put when ``vol sqrt(T)`` reaches this. Measured on
#: European calls against Black-Scholes (spot / strike 0.2-5): the call's own grid and the
#: put's agree in error up to ``vol sqrt(T)`` = 4; above it the call's own "standard" error
#: reaches 1.7e-4 of the strike while the put's stays below 1e-6.
SYMMETRY_MIN_SD = 3.0
#: Highest log-moneyness kept when a put's solution is mapped onto a call's nodes
#: (``e^x`` stays finite; the read-off uses a few nodes around the spot).
_X_KEEP = 600.0


#: A European call is solved as the put plus the forward (parity) when the spot is at least
#: this multiple of the strike, or ``vol sqrt(T) >= SYMMETRY_MIN_SD``: the call's value, and
#: its grid error, grow like the spot, the put's stay below the strike (domain study: a call
#: at 32 times the strike was 1.4e-5 of the strike off at "standard").
PARITY_MIN_MONEYNESS = 2.0


def _plain_call(problem: PDEProblem) -> bool:
    return not problem.is_put and problem.curves is None and not problem.dividend_tau


def use_parity(problem: PDEProblem) -> bool:
    """Whether to solve this European call as the put plus the forward (exact parity)."""
    return (
        _plain_call(problem) and not problem.american
        and (problem.x_spot >= math.log(PARITY_MIN_MONEYNESS)
             or problem.vol * math.sqrt(problem.expiry) >= SYMMETRY_MIN_SD)
    )


def use_symmetry(problem: PDEProblem) -> bool:
    """Whether to solve this American call as the symmetric put: flat data, no cash
    dividends and ``vol sqrt(T) >= SYMMETRY_MIN_SD``."""
    return (
        _plain_call(problem) and problem.american
        and problem.vol * math.sqrt(problem.expiry) >= SYMMETRY_MIN_SD
    )


def parity_problem(problem: PDEProblem) -> PDEProblem:
    """The European put on the same strike and market."""
    return replace(problem, is_put=True)


def solve_parity(
    problem: PDEProblem, space: SpaceGrid, time: TimeGrid, method: ExerciseMethod
) -> GridSolution:
    """Solve the European call ``problem`` as the put plus the forward on the put's grid.

    ``C = P + S e^{-qT} - K e^{-rT}`` holds exactly for European options (Stoll 1969); the
    forward is added on every node, so the read-off and the Richardson step see the call.
    """
    put = solve(parity_problem(problem), space, time, method)
    fwd = np.exp(put.x - problem.div_yield * problem.expiry) - math.exp(
        -problem.rate * problem.expiry
    )
    payoff = np.maximum(np.exp(put.x) - 1.0, 0.0)
    return replace(put, values=put.values + fwd, payoff=payoff)


def swapped_problem(problem: PDEProblem) -> PDEProblem:
    """The put with spot and strike, and rate and yield, swapped (in its strike's units)."""
    return replace(
        problem, is_put=True, rate=problem.div_yield, div_yield=problem.rate,
        x_spot=-problem.x_spot,
    )


def solve_swapped(
    problem: PDEProblem, space: SpaceGrid, time: TimeGrid, method: ExerciseMethod
) -> GridSolution:
    """Solve the call ``problem`` as its symmetric put on the put's grid ``space``.

    Returns the solution on the call's nodes ``x = -x'`` (frame "x", no drift), with values
    and exercise values in units of the call's strike; nodes above ``x = 600`` are dropped.
    """
    put = solve(swapped_problem(problem), space, time, method)
    x_call = -put.x[::-1]
    keep = int(np.searchsorted(x_call, _X_KEEP, side="right"))
    keep = max(keep, min(space.n, 6))
    x_call = x_call[:keep]
    scale = np.exp(np.minimum(x_call, _X_KEEP))
    values = scale * put.values[::-1][:keep]
    payoff = scale * put.payoff[::-1][:keep]
    si = put.space.strike_index
    flipped = put.space.n - 1 - si if si >= 0 and put.drift == 0.0 else -1
    strike_index = flipped if 0 <= flipped < keep else -1
    call_space = SpaceGrid(float(x_call[0]), space.h, keep, strike_index, "x")
    bnd = -put.report.boundary_x
    bnd[bnd > _X_KEEP] = np.inf  # a critical spot beyond any float's reach
    report = MarchReport(
        bnd, put.report.iterations, put.report.max_iterations,
        put.report.omega,
    )
    return GridSolution(call_space, time, values, payoff, 0.0, report, put.boundary_tau)
