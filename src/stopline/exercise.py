"""Solvers of the early-exercise constraint, offered through one table.

Each time step of an American option is a linear complementarity problem: ``A v >= b``,
``v >= payoff``, with equality in one of the two at every node. :data:`METHODS` maps a name to
the solver class; :func:`get_method` accepts a name or an instance.

- ``"direct"``: the Brennan-Schwartz sweep, exact and O(n) when the exercise region is one
  interval touching the grid end (vanilla puts and calls with non-negative carry settings).
- ``"psor"``: projected successive over-relaxation, general but iterative; reports sweeps and
  raises :class:`~stopline.errors.ConvergenceError` at its cap.

Both solve the same discrete problem: Crank-Nicolson steps after a Rannacher start, with the
exercise boundary fitted inside its cell (American options with flat data, and for the
direct sweep also with spot-model cash dividends; see :func:`stopline.solve.fitted_boundary`),
so they agree on the same grid to their tolerances where both fit it. ``DirectSweep(fitted=False)`` and ``ProjectedSOR(fitted=False)`` solve the
plain projected Crank-Nicolson problem instead (named ``"direct-plain"`` and
``"psor-plain"``), kept for comparison: near the boundary its error jumps about with the grid,
so the Richardson pair cannot remove it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import _kernels
from ._types import FloatArray
from .errors import ConvergenceError, InputError
from .grid import SpaceGrid
from .operator import StepPlan

__all__ = ["MarchReport", "DirectSweep", "ProjectedSOR", "METHODS", "get_method"]


@dataclass(frozen=True)
class MarchReport:
    """What a march through all steps reports besides the values.

    Attributes
    ----------
    boundary_x : ndarray, shape (n_steps,)
        Critical log-moneyness after each step (NaN where there is no exercise region).
    iterations : int
        PSOR sweeps over all steps (0 for the direct sweep).
    max_iterations : int
        Largest number of sweeps in one step.
    omega : float
        Relaxation factor used in the last step (NaN for the direct sweep).
    """

    boundary_x: FloatArray
    iterations: int = 0
    max_iterations: int = 0
    omega: float = float("nan")


@dataclass(frozen=True)
class DirectSweep:
    """Brennan-Schwartz direct sweep on the Crank-Nicolson steps (method ``"direct"``).

    Parameters
    ----------
    fitted : bool
        Where it applies (see :func:`stopline.solve.fitted_boundary`), fit the exercise
        boundary (default). Plain projected Crank-Nicolson does not damp what the exercise
        constraint, moving across the nodes, feeds in at every step, and the payoff's kink
        at the boundary spoils the stencil next to it, so near the boundary its error jumps
        about with the grid and the Richardson pair cannot remove it (measured over 1200
        typical contracts at "standard": max 1.8e-5 x K, 25 contracts beyond the 1e-6 x K
        target, and still 7e-6 x K with four times the time levels). Fitted, the first held
        node sees its exercised neighbour through the held side's smooth continuation (a
        ghost value from smooth pasting, in both halves of each step), and the few rows the
        boundary sweeps in a step blend in BDF2, which damps what it feeds in
        (:func:`stopline._kernels.damping_band`); every other row is Crank-Nicolson. Max
        5.4e-7 x K on the same set, every contract within the target. ``False`` solves the
        plain problem (named ``"direct-plain"``).

    References
    ----------
    Brennan, M. J. and Schwartz, E. S. (1977), The valuation of American put options,
    Journal of Finance 32(2). Rannacher, R. (1984), Finite element solution of diffusion
    problems with irregular data, Numer. Math. 43. LeVeque, R. J. and Li, Z. (1994), The
    immersed interface method for elliptic equations with discontinuous coefficients and
    singular sources, SIAM J. Numer. Anal. 31(4).
    """

    fitted: bool = True

    @property
    def name(self) -> str:
        """``"direct"``, or ``"direct-plain"`` without the fitted boundary."""
        return "direct" if self.fitted else "direct-plain"

    def march(
        self, v: FloatArray, ex: FloatArray, space: SpaceGrid, plan: StepPlan,
        is_put: bool, american: bool, fitted: bool = False,
    ) -> MarchReport:
        """Advance ``v`` (in place) through every step of ``plan``; ``ex = exp(space.x)``.

        ``fitted``: whether the problem allows fitting the exercise boundary (see
        :func:`stopline.solve.fitted_boundary`); it is done when this solver's ``fitted``
        is also set.
        """
        bnd = np.empty(plan.dt.shape[0])
        _kernels.march_direct(
            v, ex, space.x_min, space.h, plan.dt, plan.theta, plan.lo, plan.di, plan.up,
            plan.df_r, plan.df_q, plan.shift, plan.scale, is_put, american, bnd,
            fitted and self.fitted,
        )
        return MarchReport(bnd)


@dataclass(frozen=True)
class ProjectedSOR:
    """Projected successive over-relaxation (Cryer 1971).

    Parameters
    ----------
    omega : float or None
        Relaxation factor in (0, 2); ``None`` picks, per step, the optimal factor of the
        unprojected tridiagonal system.
    tol : float
        A step stops when the largest change in one sweep is below ``tol`` (value / strike).
    max_iter : int
        Sweep cap per step; reaching it raises :class:`ConvergenceError`.
    fitted : bool
        Where it applies (see :func:`stopline.solve.fitted_boundary`), solve the scheme of
        the fitted direct sweep (ghost value at the first held node, damped rows next to the
        boundary), so that both methods solve the same discrete problem.
    """

    omega: float | None = None
    tol: float = 1e-12
    max_iter: int = 20_000
    fitted: bool = True

    @property
    def name(self) -> str:
        """``"psor"``, or ``"psor-plain"`` without the fitted boundary."""
        return "psor" if self.fitted else "psor-plain"

    def __post_init__(self) -> None:
        if self.omega is not None and not 0.0 < self.omega < 2.0:
            raise InputError("omega", self.omega, "must be in (0, 2)")
        if not self.tol > 0.0:
            raise InputError("tol", self.tol, "must be > 0")
        if self.max_iter < 1:
            raise InputError("max_iter", self.max_iter, "must be >= 1")

    def march(
        self, v: FloatArray, ex: FloatArray, space: SpaceGrid, plan: StepPlan,
        is_put: bool, american: bool, fitted: bool = False,
    ) -> MarchReport:
        """Advance ``v`` (in place) through every step of ``plan``; ``ex = exp(space.x)``;
        ``fitted``: whether the problem allows fitting the exercise boundary (see
        :func:`stopline.solve.fitted_boundary`); it is done when this solver's ``fitted``
        is set too."""
        n_steps = plan.dt.shape[0]
        bnd = np.empty(n_steps)
        iters = np.zeros(n_steps, dtype=np.int64)
        omega = -1.0 if self.omega is None else float(self.omega)
        failed = _kernels.march_psor(
            v, ex, space.x_min, space.h, plan.dt, plan.theta, plan.lo, plan.di, plan.up,
            plan.df_r, plan.df_q, plan.shift, plan.scale, is_put, american, bnd, omega, self.tol,
            self.max_iter, iters, fitted and self.fitted,
        )
        if failed >= 0:
            raise ConvergenceError(
                f"PSOR did not converge: step {failed + 1} of {n_steps} used {self.max_iter} "
                f"sweeps without the change falling below tol={self.tol:g}; raise max_iter, "
                "loosen tol, or use method='direct'"
            )
        return MarchReport(bnd, int(iters.sum()), int(iters.max(initial=0)), omega)


#: Name -> solver class.
METHODS: dict[str, type[DirectSweep] | type[ProjectedSOR]] = {
    "direct": DirectSweep,
    "psor": ProjectedSOR,
}

ExerciseMethod = DirectSweep | ProjectedSOR

_DEFAULTS: dict[object, ExerciseMethod] = {name: cls() for name, cls in METHODS.items()}


def get_method(method: str | ExerciseMethod) -> ExerciseMethod:
    """Return a solver from its name or pass an instance through.

    Raises
    ------
    InputError
        For an unknown name; the message lists the valid ones.
    """
    if isinstance(method, (DirectSweep, ProjectedSOR)):
        return method
    if isinstance(method, str) and method in _DEFAULTS:  # one shared (frozen) instance
        return _DEFAULTS[method]
    if isinstance(method, str) and method.strip().lower() in METHODS:
        return METHODS[method.strip().lower()]()
    raise InputError("method", method, f"must be one of {', '.join(METHODS)}")
