"""Space and time grids.

Space: uniform nodes in the drift-free frame ``y = ln(S / K) + M(tau)`` (see
:mod:`stopline.operator`), with the strike exactly on a node at expiry (the payoff kink on a
node keeps the scheme second order) and the domain wide enough, in standard deviations of
``ln S`` over the option's life, that the far-field values do not move the price at the
preset's tolerance.

Time: levels in time to expiry ``tau`` graded towards expiry, ``tau_k = T (k / m)^2``, since
the American exercise boundary moves like ``sqrt(tau)`` near expiry and uniform steps lose
order there. The first intervals are each taken as two fully implicit half steps (Rannacher
1984) to damp the Crank-Nicolson ringing that the payoff kink would otherwise cause.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._types import FloatArray

__all__ = ["SpaceGrid", "TimeGrid", "build_space_grid", "build_time_grid"]


@dataclass(frozen=True)
class SpaceGrid:
    """Uniform log-moneyness nodes ``x_j = x_min + j h``, ``j = 0 .. n - 1``.

    Attributes
    ----------
    x_min : float
        First node.
    h : float
        Spacing.
    n : int
        Number of nodes, boundary nodes included.
    frame : {"x", "y"}
        Coordinate of the nodes: log-moneyness ``x = ln(S / K)``, or the drift-free frame
        ``y = x + M(tau)`` (see :mod:`stopline.operator`).
    strike_index : int
        Index of the node at expiry's strike, or -1 when the strike lies more than
        ``width_sd`` standard deviations from both the spot and the forward: then the payoff is
        smooth on the whole domain and no node is spent between the spot and the strike.
    """

    x_min: float
    h: float
    n: int
    strike_index: int
    frame: str = "x"

    @property
    def x(self) -> FloatArray:
        """Node positions, shape (n,)."""
        return self.x_min + self.h * np.arange(self.n, dtype=np.float64)

    @property
    def x_max(self) -> float:
        """Last node."""
        return self.x_min + (self.n - 1) * self.h

    @property
    def has_strike(self) -> bool:
        """Whether the strike is a node (False when it lies beyond the domain's reach)."""
        return self.strike_index >= 0

    def refined(self) -> SpaceGrid:
        """The grid with half the spacing on the same domain (every old node kept)."""
        k = 2 * self.strike_index if self.has_strike else -1
        return SpaceGrid(self.x_min, 0.5 * self.h, 2 * self.n - 1, k, self.frame)


@dataclass(frozen=True)
class TimeGrid:
    """Steps from expiry (``tau = 0``) to valuation (``tau = T``).

    Attributes
    ----------
    levels : int
        Number of graded intervals ``m`` (before Rannacher splitting).
    tau : ndarray, shape (n_steps,)
        Time to expiry at the end of each step.
    dt : ndarray, shape (n_steps,)
        Step lengths.
    theta : ndarray, shape (n_steps,)
        1.0 for a fully implicit step, 0.5 for Crank-Nicolson.
    """

    levels: int
    tau: FloatArray
    dt: FloatArray
    theta: FloatArray

    @property
    def expiry(self) -> float:
        """Time to expiry at valuation."""
        return float(self.tau[-1]) if self.tau.size else 0.0

    def refined(self, rannacher: int | None = None, grading: float = 2.0) -> TimeGrid:
        """The grid with twice the intervals (every old level kept)."""
        return build_time_grid(self.expiry, 2 * self.levels, rannacher=rannacher, grading=grading)


def build_space_grid(
    x_spot: float,
    sd: float,
    drift: float,
    *,
    width_sd: float,
    points_per_sd: float | None = None,
    n_points: int | None = None,
    h_max: float = math.inf,
    n_max: int | None = None,
    frame: str = "x",
) -> SpaceGrid:
    """Build a uniform grid with the strike on a node.

    In the log-moneyness frame (``frame="x"``) the domain covers the spot and the forward
    ``x_s + drift``, each with ``width_sd * sd`` to spare. In the drift-free frame
    (``frame="y"``, ``y = ln(S / K) + M(tau)``, see :mod:`stopline.operator`) the strike sits at
    ``y = 0`` at expiry and the spot at ``y_s = x_s + drift`` at valuation, so the domain only
    covers ``y_s +- width_sd * sd``. Either way the strike is added, with the same margin, when
    it lies within two more standard deviations of that interval.

    Parameters
    ----------
    x_spot : float
        ``ln(S / K)`` at valuation.
    sd : float
        Standard deviation of ``ln S`` over the option's life, ``sqrt(int vol^2 dt)``.
    drift : float
        ``M(T) = int (r - q - vol^2 / 2) dt`` over the option's life.
    width_sd : float
        Half-width of the domain around the spot (and the strike), in ``sd``.
    points_per_sd, n_points : float or int
        Resolution: nodes per standard deviation, or (expert) the total number of nodes.
        Exactly one must be given.
    h_max : float
        Largest spacing wanted.
    n_max : int, optional
        Most nodes allowed; overrides ``h_max`` when both cannot hold.
    frame : {"x", "y"}
        Coordinate of the nodes.
    """
    anchors = (x_spot + drift,) if frame == "y" else (x_spot, x_spot + drift)
    lo = min(anchors) - width_sd * sd
    hi = max(anchors) + width_sd * sd
    # the strike is left out only when it lies two standard deviations beyond the domain
    # itself: what the option is worth there is then below ~phi(width_sd + 2) of the strike
    reach = lo - 2.0 * sd <= 0.0 <= hi + 2.0 * sd
    if reach:
        lo, hi = min(lo, -width_sd * sd), max(hi, width_sd * sd)
    if (points_per_sd is None) == (n_points is None):
        raise ValueError("give exactly one of points_per_sd and n_points")
    h = (hi - lo) / (n_points - 2) if n_points is not None else min(sd / points_per_sd, h_max)
    if n_max is not None and (hi - lo) / h + 2 > n_max:
        h = (hi - lo) / (n_max - 2)
    if not reach:
        n = n_points if n_points is not None else math.ceil((hi - lo) / h) + 1
        return SpaceGrid(lo, h, n, -1, frame)
    j_lo = math.ceil(-lo / h)
    n = n_points if n_points is not None else j_lo + math.ceil(hi / h) + 1
    return SpaceGrid(-j_lo * h, h, n, j_lo, frame)


def build_time_grid(
    expiry: float, levels: int, *, rannacher: int | None = None, grading: float = 2.0
) -> TimeGrid:
    """Graded time levels with a Rannacher start.

    Parameters
    ----------
    expiry : float
        Time to expiry ``T`` in years, > 0.
    levels : int
        Number of intervals ``m``; level ``k`` sits at ``T (k / m) ** grading``.
    rannacher : int, optional
        How many of the first intervals are replaced by two fully implicit half steps each.
        Default ``min(4, max(1, levels // 8))``: on graded levels the first intervals are
        tiny, so one or two implicit steps do not damp the kink's high frequencies enough for
        a clean gamma at the strike; four do, and coarse grids keep most steps second order.
    grading : float
        Exponent of the grading (1 gives uniform steps).

    References
    ----------
    Rannacher, R. (1984), Finite element solution of diffusion problems with irregular data,
    Numerische Mathematik 43.
    """
    if rannacher is None:
        rannacher = min(4, max(1, levels // 8))
    k = np.arange(levels + 1, dtype=np.float64)
    tau_levels = expiry * (k / levels) ** grading
    r = min(rannacher, levels)
    # the first r intervals each become two half steps: insert their midpoints
    mids = 0.5 * (tau_levels[:r] + tau_levels[1 : r + 1])
    tau_all = np.concatenate((tau_levels[: r + 1], mids, tau_levels[r + 1 :]))
    tau_all.sort()
    dt = np.diff(tau_all)
    theta = np.full(dt.shape, 0.5)
    theta[: 2 * r] = 1.0
    return TimeGrid(levels, tau_all[1:].copy(), dt, theta)
