"""Space and time grids.

Space: uniform nodes in the drift-free frame ``y = ln(S / K) + M(tau)`` (see
:mod:`stopline.operator`), with the strike exactly on a node at expiry (the payoff kink on a
node keeps the scheme second order) and the domain wide enough, in standard deviations of
``ln S`` over the option's life, that the far-field values do not move the price at the
preset's tolerance.

Time: levels in time to expiry ``tau`` graded towards expiry, ``tau_k = T (k / m)^2``, since
the American exercise boundary moves like ``sqrt(tau)`` near expiry and uniform steps lose
order there. The first intervals are each taken as two fully implicit half steps (Rannacher
1984) to damp the Crank-Nicolson ringing that the payoff kink would otherwise cause. With
ex-dividend dates or term-structure breakpoints, :class:`SegmentedTimeGrid` puts a level on
each and grades every segment afresh; a segment after an ex-date (where the exercise value
makes a new kink) also starts with implicit half steps.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from . import _kernels
from ._types import FloatArray

__all__ = [
    "SpaceGrid",
    "TimeGrid",
    "SegmentedTimeGrid",
    "build_space_grid",
    "build_time_grid",
    "unit_time_grid",
    "build_segmented_time_grid",
    "split_levels",
]


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
    if (points_per_sd is None) == (n_points is None):
        raise ValueError("give exactly one of points_per_sd and n_points")
    x_min, h, n, k = _kernels.space_layout(
        float(x_spot), float(sd), float(drift), float(width_sd),
        math.nan if points_per_sd is None else float(points_per_sd),
        -1 if n_points is None else int(n_points), float(h_max),
        -1 if n_max is None else int(n_max), frame == "y",
    )
    return SpaceGrid(x_min, h, int(n), int(k), frame)


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
    unit_tau, unit_dt, theta = unit_time_grid(levels, rannacher=rannacher, grading=grading)
    return TimeGrid(levels, expiry * unit_tau, expiry * unit_dt, theta.copy())


def unit_time_grid(
    levels: int, *, rannacher: int | None = None, grading: float = 2.0
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Time to expiry, step lengths and implicitness of :func:`build_time_grid` for ``T = 1``
    (read-only arrays shared by every caller; multiply the first two by the expiry)."""
    if rannacher is None:
        rannacher = min(4, max(1, levels // 8))
    return _unit_time_grid(levels, min(rannacher, levels), float(grading))


@functools.lru_cache(maxsize=256)
def _unit_time_grid(
    levels: int, rannacher: int, grading: float
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Levels, steps and implicitness for ``T = 1`` (read-only; scaled by the expiry).

    Every option priced at one preset shares these arrays, so they are built once per
    process; scaling by the expiry is exact up to rounding.
    """
    k = np.arange(levels + 1, dtype=np.float64)
    tau_levels = (k / levels) ** grading
    r = rannacher
    # the first r intervals each become two half steps: insert their midpoints
    mids = 0.5 * (tau_levels[:r] + tau_levels[1 : r + 1])
    tau_all = np.concatenate((tau_levels[: r + 1], mids, tau_levels[r + 1 :]))
    tau_all.sort()
    dt = np.diff(tau_all)
    theta = np.full(dt.shape, 0.5)
    theta[: 2 * r] = 1.0
    tau = tau_all[1:].copy()
    for arr in (tau, dt, theta):
        arr.flags.writeable = False
    return tau, dt, theta


@dataclass(frozen=True)
class SegmentedTimeGrid(TimeGrid):
    """Graded time levels in segments whose ends are fixed levels (ex-dates, breakpoints).

    Each segment ``(bounds[i-1], bounds[i]]`` in time to expiry has its own graded levels,
    ``bounds[i-1] + L_i (k / m_i) ** grading``, so a segment starting where the value has a
    kink (expiry, an ex-dividend date) is resolved like expiry itself; such segments
    (``restart[i]``) also begin with Rannacher half steps. Refining doubles every ``m_i``,
    so every old level is kept.

    Attributes
    ----------
    bounds : tuple of float
        Time to expiry at the end of each segment, increasing; the last is the expiry.
    restart : tuple of bool
        Whether each segment begins with Rannacher half steps.
    segment_levels : tuple of int
        Graded intervals ``m_i`` per segment (``levels`` is their sum).
    segment_stop : tuple of int
        Index in ``tau`` one past each segment's last step.
    """

    bounds: tuple[float, ...] = ()
    restart: tuple[bool, ...] = ()
    segment_levels: tuple[int, ...] = ()
    segment_stop: tuple[int, ...] = ()

    def refined(self, rannacher: int | None = None, grading: float = 2.0) -> SegmentedTimeGrid:
        """The grid with twice the intervals in every segment (every old level kept)."""
        return build_segmented_time_grid(
            self.bounds, self.restart, tuple(2 * m for m in self.segment_levels),
            rannacher=rannacher, grading=grading,
        )


def split_levels(
    bounds: tuple[float, ...],
    levels: int,
    restart: tuple[bool, ...] | None = None,
    min_levels: int = 2,
) -> tuple[int, ...]:
    """Share ``levels`` graded intervals among segments.

    A segment that restarts (after a kink: expiry, an ex-date) of length ``L`` gets
    ``levels sqrt(L / T)`` intervals, so that its first graded steps are as short as those of
    an unsegmented grid, ``T / levels^2``; others get ``levels L / T``, a share of the
    length. Short restarting segments thus get relatively more levels (measured on an
    American put with an ex-date 0.05 years before expiry: the same error for a fifth to a
    twentieth of the steps of a share by length).
    """
    expiry = bounds[-1]
    starts = (0.0,) + tuple(bounds[:-1])
    flags = restart if restart is not None else (False,) * len(bounds)
    out = []
    for a, b, again in zip(starts, bounds, flags, strict=True):
        frac = (b - a) / expiry
        out.append(max(min_levels, round(levels * (math.sqrt(frac) if again else frac))))
    return tuple(out)


def build_segmented_time_grid(
    bounds: tuple[float, ...],
    restart: tuple[bool, ...],
    segment_levels: tuple[int, ...],
    *,
    rannacher: int | None = None,
    grading: float = 2.0,
) -> SegmentedTimeGrid:
    """Time levels with fixed segment ends, graded afresh in every segment.

    Parameters
    ----------
    bounds : tuple of float
        Time to expiry at each segment's end, strictly increasing, > 0; the last is ``T``.
    restart : tuple of bool
        Per segment: start with Rannacher half steps (the first segment should: it starts at
        the payoff).
    segment_levels : tuple of int
        Graded intervals per segment, each >= 1.
    rannacher : int, optional
        Half-stepped intervals at the start of a restarting segment; default as in
        :func:`build_time_grid`, from the segment's own level count.
    grading : float
        Exponent of the grading within each segment.

    References
    ----------
    Rannacher, R. (1984), Numerische Mathematik 43 (implicit start after non-smooth data).
    """
    taus: list[FloatArray] = []
    thetas: list[FloatArray] = []
    stops: list[int] = []
    start = 0.0
    count = 0
    for end, again, m in zip(bounds, restart, segment_levels, strict=True):
        r = None if again else 0
        if again and rannacher is not None:
            r = rannacher
        seg = build_time_grid(end - start, m, rannacher=r, grading=grading)
        tau = start + seg.tau
        tau[-1] = end
        taus.append(tau)
        thetas.append(seg.theta)
        count += tau.shape[0]
        stops.append(count)
        start = end
    tau_all = np.concatenate(taus)
    dt = np.diff(np.concatenate(([0.0], tau_all)))
    return SegmentedTimeGrid(
        int(sum(segment_levels)), tau_all, dt, np.concatenate(thetas),
        tuple(float(b) for b in bounds), tuple(bool(x) for x in restart),
        tuple(int(m) for m in segment_levels), tuple(stops),
    )
