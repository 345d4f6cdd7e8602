"""``price()``: the one entry point for a price with Greeks, error estimate and boundary."""

from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass, field

import numpy as np

from . import _kernels
from ._types import FloatArray
from ._validate import check_choice
from .contract import Option
from .daycount import DEFAULT_DAY_COUNT
from .errors import InputError
from .exercise import DirectSweep, ExerciseMethod, ProjectedSOR, get_method
from .greeks import (
    RATE_BUMP,
    VOL_BUMP,
    GridReadout,
    bumped_market,
    central_difference,
    european_vega_rho,
    read_at_spot,
    theta_from_pde,
)
from .grid import SpaceGrid, TimeGrid, build_space_grid, negligible_reach, unit_time_grid
from .market import Market
from .operator import choose_frame, coefficients
from .perpetual import american_bounds
from .solve import (
    GridSolution,
    PDEProblem,
    problem_from_market,
    solve,
    solve_with_tangents,
    tangents_available,
    theta_at_valuation,
    time_grid_for,
)
from .symmetry import (
    PARITY_MIN_MONEYNESS,
    SYMMETRY_MIN_SD,
    parity_problem,
    solve_parity,
    solve_swapped,
    swapped_problem,
    use_parity,
    use_symmetry,
)

__all__ = [
    "AccuracyPreset",
    "PRESETS",
    "GridSpec",
    "ExerciseBoundary",
    "SolveStats",
    "Result",
    "price",
]


@dataclass(frozen=True)
class AccuracyPreset:
    """Grid resolution behind an accuracy name.

    Attributes
    ----------
    name : str
        Preset name.
    target : float
        Intended absolute price error / strike over typical contracts.
    points_per_sd : float
        Space nodes per standard deviation of ``ln S`` over the option's life (fine grid).
    width_sd : float
        Domain half-width beyond strike, spot and forward, in standard deviations.
    time_levels : int
        Graded time intervals of the fine grid.
    max_spacing : float
        Largest spacing of the fine grid in ``ln S``: long-dated options have an exercise
        boundary whose neighbourhood needs resolving on an absolute scale, not only one
        relative to ``vol sqrt(T)``.
    """

    name: str
    target: float
    points_per_sd: float
    width_sd: float
    time_levels: int
    max_spacing: float = math.inf


#: Accuracy presets. Each solves on a grid and on the grid with half the resolution in space
#: and time, and extrapolates (Richardson); see ``validation/`` for the measured errors.
PRESETS: dict[str, AccuracyPreset] = {
    "fast": AccuracyPreset("fast", 1e-4, 14.0, 3.5, 32, 0.04),
    "standard": AccuracyPreset("standard", 1e-6, 20.0, 5.0, 100, 0.008),
    "fine": AccuracyPreset("fine", 1e-8, 120.0, 5.0, 500, 0.002),
}


#: Domain half-width beyond strike, spot and forward, in standard deviations, of an expert's
#: grid (:class:`GridSpec`): wide enough that the far-field values cost nothing even on the
#: very fine reference grids of the benchmarks (fixed, not a preset's, so that those grids do
#: not move when a preset is tuned).
CUSTOM_WIDTH_SD = 5.5


#: Most nodes of the coarse grid of a preset (the fine grid has about twice as many); a
#: safety net that typical and extreme contracts alike stay well inside; ``price`` warns if
#: it is reached.
MAX_COARSE_NODES = 10_000
_CAP_WARNING = (
    f"the grid reached its cap of {MAX_COARSE_NODES} coarse nodes; spacing is wider than "
    "the preset asks, so accuracy may be below its target"
)
#: Below this ``vol * sqrt(T)`` the zero-volatility limit is used (its error is below about
#: ``0.4 * vol * sqrt(T)`` of the spot, i.e. under 1e-6 of the strike near the money).
MIN_SD_FOR_GRID = 2e-6


#: Whether :func:`price` takes the one-call path (:func:`_price_pair`) where it applies; the
#: tests switch it off to compare with the general path.
_ONE_CALL = True

#: What ``price(greeks=...)`` accepts.
GREEKS = ("full", "grid", "vega")


@dataclass(frozen=True)
class GridSpec:
    """An expert's grid: total space nodes and graded time intervals of the fine grid.

    The coarse grid of the Richardson pair has about half of each.
    """

    space_points: int
    time_levels: int

    def __post_init__(self) -> None:
        if not isinstance(self.space_points, (int, np.integer)) or self.space_points < 9:
            raise InputError("grid.space_points", self.space_points, "must be an integer >= 9")
        if not isinstance(self.time_levels, (int, np.integer)) or self.time_levels < 4:
            raise InputError("grid.time_levels", self.time_levels, "must be an integer >= 4")


@dataclass(frozen=True)
class ExerciseBoundary:
    """Critical spot over the option's life.

    Attributes
    ----------
    time_to_expiry : ndarray, shape (n_levels,)
        Time to expiry of each level, increasing, ending at the option's expiry.
    spot : ndarray, shape (n_levels,)
        Critical spot at each level: a put is exercised at or below it, a call at or above.
        NaN where the option has no exercise region (European, or never optimal), or where
        that region lies beyond the grid's end (the grid ends the preset's ``width_sd``
        standard deviations beyond strike, spot and forward: e.g. a put whose yield far
        exceeds the rate, whose critical spot tends to ``K r / q`` near expiry). With flat
        inputs and no cash dividends, the least-squares monotone fit of ``raw_spot`` (see
        :mod:`stopline.boundary`): equal to it except in the first few steps after expiry,
        where the located points may step back by up to about one grid spacing. With
        dividends or term structures the true boundary need not be monotone (it jumps at
        ex-dates) and ``spot`` is ``raw_spot``.
    raw_spot : ndarray, shape (n_levels,)
        The critical spot as located after each step, below the grid spacing (finer grid).
    """

    time_to_expiry: FloatArray
    spot: FloatArray
    raw_spot: FloatArray = field(default_factory=lambda: np.empty(0))


@dataclass(frozen=True)
class SolveStats:
    """How the answer was computed.

    Attributes
    ----------
    space_points, time_levels : int
        Fine grid: nodes in space, graded time intervals (Rannacher half steps not counted).
    time_steps : int
        Steps actually taken on the fine grid (Rannacher half steps counted).
    coarse_space_points, coarse_time_levels : int
        The coarse grid of the Richardson pair (0 if none was solved).
    method : str
        Exercise solver used.
    psor_iterations, psor_max_sweeps : int
        PSOR sweeps over every solve (both grids, and the bumped re-solves for vega and rho)
        and the most in one step (0 for the direct sweep).
    domain : tuple of float
        Lowest and highest spot on the grid.
    day_count : str
        Convention for dates.
    warnings : tuple of str
        Anything a careful user should know about this solve (empty when all is well).
    """

    space_points: int
    time_levels: int
    time_steps: int
    coarse_space_points: int
    coarse_time_levels: int
    method: str
    psor_iterations: int
    psor_max_sweeps: int
    domain: tuple[float, float]
    day_count: str = DEFAULT_DAY_COUNT
    warnings: tuple[str, ...] = field(default_factory=tuple)


@dataclass(frozen=True)
class Result:
    """A price and what comes with it. Always this type, whatever the options of ``price``.

    Attributes
    ----------
    price : float
        Option value (Richardson-extrapolated from two grids).
    delta, gamma : float
        dV/dS and d2V/dS2 read off the grids at the spot (extrapolated likewise).
    theta : float
        dV/dt, change in value per year of calendar time (negative when the option loses
        value as time passes), from the Black-Scholes equation at valuation.
    vega : float
        dV/dvol per unit of volatility (divide by 100 for one vol point), for a parallel shift
        of a vol curve. American with flat inputs, no cash dividends and the direct or fitted
        sweep, and any option with flat inputs and cash dividends (either model; a preset, the
        direct sweep): the exact derivative of the discrete solution, marched alongside it
        on the same two grids (tangent-linear, no bump, no extra solve; through each dividend
        jump by the same interpolation), read at the spot and extrapolated like the price.
        Other cases (projected SOR, curves, an expert grid with dividends): a central
        difference of prices re-solved on the same two grids with the vol bumped up and down
        by 1 % of itself. European with flat inputs and no cash dividends: ``vol T S^2
        gamma`` (an identity of the model). See :mod:`stopline.greeks`.
    rho : float
        dV/drate per unit of rate (divide by 10,000 for one basis point), for a parallel shift
        of a rate curve; computed like vega (tangent-linear; or the rate bumped by 1e-3; or,
        European with flat inputs, ``T (S delta - V)``). Vega and rho are NaN when ``price``
        was called with ``greeks="grid"``, rho when with ``greeks="vega"``.
    error_estimate : float
        Estimated absolute error of the finer grid's price, ``|V_fine - V_coarse| / 3``; the
        extrapolated price is usually well inside it.
    boundary : ExerciseBoundary
        Critical spot over time (from the finer grid).
    stats : SolveStats
        Grid sizes, method, iterations, conventions, warnings.
    option : Option
        The contract priced.
    market : Market
        The market used.
    time_to_expiry : float
        Years from valuation to expiry.
    accuracy : str
        Preset name, or ``"custom"`` when a grid was given.
    """

    price: float
    delta: float
    gamma: float
    theta: float
    vega: float
    rho: float
    error_estimate: float
    boundary: ExerciseBoundary
    stats: SolveStats
    option: Option
    market: Market
    time_to_expiry: float
    accuracy: str


def _resolve_grid(
    problem: PDEProblem, accuracy: str, grid: GridSpec | tuple[int, int] | None,
    refine: float = 1.0,
) -> tuple[SpaceGrid, TimeGrid, str]:
    """The coarse grid of the Richardson pair, in the frame that suits the problem.

    ``refine`` divides a preset's spacing (a call solved as the symmetric put, whose values
    are in units of the call's spot: ``sqrt(S / K)`` keeps a second-order error within the
    target relative to the call's strike).
    """
    sd = problem.vol * math.sqrt(problem.expiry)
    mu = problem.rate - problem.div_yield - 0.5 * problem.vol**2
    drift = mu * problem.expiry
    args = (problem.x_spot, problem.expiry, problem.rate, problem.div_yield, problem.vol,
            problem.american)
    if grid is not None:
        spec = grid if isinstance(grid, GridSpec) else GridSpec(*grid)
        name, width = "custom", CUSTOM_WIDTH_SD
        n_points = spec.space_points // 2 + 1
        levels = max(spec.time_levels // 2, 2)
        kwargs: dict = {"n_points": n_points}
        eps = NEGLIGIBLE_REACH * PRESETS["fine"].target
    else:
        name = check_choice("accuracy", accuracy, tuple(PRESETS))
        preset = _preset_for(PRESETS[name], problem.american, problem.escrowed)
        width, levels = preset.width_sd, _coarse_levels(preset, sd, problem.american)
        scale = _decay_length(problem.rate, mu, problem.vol, problem.is_put) \
            if problem.american else math.inf
        kwargs = {
            "points_per_sd": 0.5 * refine * preset.points_per_sd * sd / min(sd, scale),
            "h_max": 2.0 * preset.max_spacing / refine,
            "n_max": MAX_COARSE_NODES,
        }
        eps = NEGLIGIBLE_REACH * preset.target
    if problem.american and problem.curves is None and not problem.has_events and (
        refine > 1.0 or _extreme_regime(problem.is_put, True, problem.x_spot, problem.expiry,
                                        problem.rate, problem.div_yield, problem.vol)
    ):
        # an American option with flat data in an extreme regime: the grid ends where the far field is known (deep
        # in the exercise region, or where the option is worth a negligible part of the
        # strike), and stays in frame "x", where the exercise value's kink stays on a node
        lo_lim, hi_lim = _american_limits(problem, mu, eps)
        long_levels = levels
        if sd > LONG_SD:
            # a long, very volatile life: the graded levels' late steps are too long for the
            # exercise boundary (domain study: "standard" 3e-5 of the strike off at
            # vol sqrt(T) = 6.8 with 104 steps, 4e-6 with 404)
            long_levels = max(levels, min(math.ceil(levels * (sd / LONG_SD) ** 1.5),
                                          MAX_LONG_LEVELS))
        space = build_space_grid(problem.x_spot, sd, drift, width_sd=width, lo_limit=lo_lim,
                                 hi_limit=hi_lim, **kwargs)
        # frame "x" also needs the drift not to sweep the solution towards the exercise
        # region across many nodes per step (domain study: a call at vol 2.4 % drifting 17 % a
        # year towards exercise for 21 years was 5e-6 of the strike off there, 1e-11 in "y")
        # (at vol sqrt(T) > LONG_SD frame "y" is the worse: vol 500 %, T 50 lost 1e-4 there)
        towards = mu < 0.0 if problem.is_put else mu > 0.0
        sweeps = towards and abs(drift) > 4.0 * sd and sd <= LONG_SD
        if abs(mu) * space.h <= problem.vol**2 and not sweeps:
            return space, time_grid_for(problem, long_levels), name
    if grid is not None:
        space = build_space_grid(problem.x_spot, sd, drift, width_sd=width, n_points=n_points)
        frame_y = choose_frame(sd, drift, space.h, problem.vol, mu) == "y"
    else:
        # the layout rule shared with the one-call pair (_kernels.price_pair)
        x_min, h, n, k_idx, frame_y = _preset_layout(*args, preset)
        space = SpaceGrid(x_min, h, n, k_idx)
    # cash dividends are applied in frame "x" (the dropped spot of a node is a fixed node)
    if frame_y and not problem.has_events:
        if grid is not None:
            space = build_space_grid(problem.x_spot, sd, drift, width_sd=width,
                                     n_points=n_points, frame="y")
        else:
            space = SpaceGrid(*_preset_layout(*args, preset, frame="y")[:4], "y")
        if problem.american:
            # steps short enough that the exercise value's kink moves about a node per step
            levels = max(levels, min(math.ceil(abs(drift) / space.h), 20 * levels))
    if grid is None and not problem.american and sd > LONG_SD and problem.curves is None:
        # a European over a long, very volatile life: more levels likewise (domain study:
        # "fast" 3.3e-4 of the strike off at vol sqrt(T) = 7.8 with 27 steps)
        levels = max(levels, min(math.ceil(levels * (sd / LONG_SD) ** 1.5), MAX_LONG_LEVELS))
    return space, time_grid_for(problem, levels), name


#: Accuracy promised everywhere in the documented domain, relative to the strike, by every
#: preset but "fast" (whose target, 1e-4, is looser); see README, Accuracy and robustness.
EVERYWHERE = 1e-5
#: Above this ``vol sqrt(T)`` an American grid gets ``(vol sqrt(T) / LONG_SD) ** 1.5`` times
#: the preset's time levels, at most ``MAX_LONG_LEVELS`` on the coarse grid. Measured: an
#: American call 11 times in the money at vol 437 %, T 22.8 (vol sqrt(T) = 21) is 1.5e-5 of
#: the strike off with 400 coarse levels at 10,000 nodes, 7e-7 with 800 (space converged).
LONG_SD = 2.0
MAX_LONG_LEVELS = 800
#: An American grid may end where the option is worth less than this times the preset's
#: target (in units of the strike): see :func:`_american_limits`.
NEGLIGIBLE_REACH = 1e-3


def _american_limits(problem: PDEProblem, mu: float, eps: float) -> tuple[float, float]:
    """Where an American grid (flat data, no cash dividends) may end, in ``x = ln(S / K)``.

    Out of the money (above the strike for a put, below for a call): beyond the distance at
    which the spot's chance of reaching the strike within the life is below ``eps``
    (:func:`~stopline.grid.negligible_reach`), the option is worth less than ``eps`` times
    the strike (times ``e^{-rT}`` when the rate is negative), and the far field's zero is
    right to that. A call uses the symmetric put's drift (``C / K = e^x p(-x)``, McDonald and
    Schroder 1998). In the money: beyond the perpetual option's critical spot (Merton 1973)
    every finite-life option is exercised, so the far field's intrinsic value is exact; the
    grid keeps a tenth of that distance plus the lesser of five decay lengths and half a
    standard deviation to spare (on typical contracts this only drops nodes that the solve
    sets to the intrinsic value anyway). With low volatility and a large drift these ends
    make the domain a small part of what the spread of the forward would ask, so the grid
    can resolve the boundary's decay length in frame "x".
    """
    vol, t, x_s = problem.vol, problem.expiry, problem.x_spot
    if problem.is_put:
        cap = max(1.0, math.exp(-problem.rate * t))
        reach = negligible_reach(mu, vol, t, eps / cap)
        scale = _decay_length(problem.rate, mu, vol, True)
        hi = max(reach, x_s) + (5.0 * scale if math.isfinite(scale) else vol * math.sqrt(t))
        lo = -math.inf
        lam = _perpetual_root(problem.rate, mu, vol, True)
        if lam is not None:
            x_perp = math.log(lam / (lam - 1.0))
            itm = min(5.0 * scale, 0.5 * vol * math.sqrt(t))
            lo = min(x_perp - 0.1 * abs(x_perp) - itm, x_s - itm)
        return lo, hi
    mu_sym = problem.div_yield - problem.rate - 0.5 * vol * vol
    cap = max(1.0, math.exp(-problem.div_yield * t))
    reach = negligible_reach(mu_sym, vol, t, eps / cap)
    scale = _decay_length(problem.rate, mu, vol, False)
    lo = min(-reach, x_s) - (5.0 * scale if math.isfinite(scale) else vol * math.sqrt(t))
    hi = math.inf
    lam = _perpetual_root(problem.rate, mu, vol, False)
    if lam is not None:
        x_perp = math.log(lam / (lam - 1.0))
        itm = min(5.0 * scale, 0.5 * vol * math.sqrt(t))
        hi = max(x_perp + 0.1 * abs(x_perp) + itm, x_s + itm)
    return lo, hi


def _perpetual_root(rate: float, mu: float, vol: float, is_put: bool) -> float | None:
    """The perpetual option's exponent (Merton 1973): the root of
    ``vol^2/2 l^2 + mu l - r = 0`` below 0 for a put, above 1 for a call; None when it has
    no such root (exercise never optimal, or two exercise boundaries)."""
    disc = mu * mu + 2.0 * vol * vol * rate
    if disc < 0.0:
        return None
    root = math.sqrt(disc)
    lam = (-mu - root) / (vol * vol) if is_put else (-mu + root) / (vol * vol)
    if is_put:
        return lam if lam < 0.0 and rate > 0.0 else None
    return lam if lam > 1.0 else None


def _decay_length(rate: float, mu: float, vol: float, is_put: bool | None = None) -> float:
    """Length in ``ln S`` over which an American option's premium decays near its boundary.

    ``1 / |lambda|`` for the perpetual option's exponent (Merton 1973): the negative root of
    ``vol^2/2 l^2 + mu l - r = 0`` for a put, the one above 1 for a call (the smaller of the
    two lengths when ``is_put`` is None). At low volatility this is far shorter than
    ``vol sqrt(T)``, and the grid must resolve it rather than the spread of the spot. Infinite
    when exercise is never optimal.
    """
    if is_put is not None:
        lam = _perpetual_root(rate, mu, vol, is_put)
        return 1.0 / abs(lam) if lam is not None else math.inf
    disc = mu * mu + 2.0 * vol * vol * rate
    if disc < 0.0:
        return math.inf
    root = math.sqrt(disc)
    lengths = [vol * vol / abs(-mu + sgn * root) for sgn in (-1.0, 1.0) if -mu + sgn * root != 0.0]
    return min(lengths, default=math.inf)


#: An American life whose ``vol sqrt(T)`` exceeds this gets more time levels (a whole
#: multiple, at most :data:`MAX_LEVEL_MULTIPLE`): over such a life the exercise boundary crosses
#: many cells per step, and although the price holds its target, gamma and the theta built from
#: it lag (own computation: a 10-year put at vol 1, S = 100, K = 300 has theta 13 % off at
#: "standard" with 100 levels, 0.8 % with 200, 0.07 % with 280).
LONG_LIFE_SD = 1.5
MAX_LEVEL_MULTIPLE = 4


#: An American option under escrowed cash dividends is marched with the plain scheme (one step
#: at a time on shifted spots, where the fitted boundary's curvature formula does not hold),
#: whose error is set mostly by the spacing; its grid takes this many times the preset's points
#: per standard deviation and time levels. Own measurement, 60 random American contracts with
#: one to three dividends against ``GridSpec(8001, 4000)``: at 1x, 1.7e-6 x K at "standard"
#: and 2.7e-8 at "fine" (2 and 5 of 60 above target); at 1.5x, 3.9e-7 and 8.2e-9 (none).
ESCROWED_REFINE = 1.5


def _preset_for(preset: AccuracyPreset, american: bool, escrowed: bool) -> AccuracyPreset:
    """The grid behind ``preset`` for this problem: the preset itself, or a finer one for an
    American option under escrowed dividends (:data:`ESCROWED_REFINE`)."""
    if not (american and escrowed):
        return preset
    f = ESCROWED_REFINE
    return dataclasses.replace(
        preset, points_per_sd=preset.points_per_sd * f, max_spacing=preset.max_spacing / f,
        time_levels=2 * round(preset.time_levels * f / 2),
    )


def _coarse_levels(preset: AccuracyPreset, sd: float = 0.0, american: bool = False) -> int:
    """Graded time intervals of the coarse grid of a preset's pair (frame "x"); ``sd`` is
    ``vol sqrt(T)`` (see :data:`LONG_LIFE_SD`)."""
    m = 1
    if american and sd > LONG_LIFE_SD:
        m = min(math.ceil(sd / LONG_LIFE_SD), MAX_LEVEL_MULTIPLE)
    return m * (preset.time_levels // 2)


def _preset_layout(
    x_spot: float, expiry: float, rate: float, div_yield: float, vol: float, american: bool,
    preset: AccuracyPreset, frame: str = "x",
) -> tuple[float, float, int, int, bool]:
    """Coarse grid of a preset's pair: ``(x_min, h, n, strike_index, frame_y)``, ``frame_y``
    True when frame "x" does not suit the problem (see
    :func:`stopline._kernels.preset_layout`)."""
    x_min, h, n, k_idx, frame_y = _kernels.preset_layout(
        float(x_spot), float(expiry), float(rate), float(div_yield), float(vol), bool(american),
        float(preset.width_sd), float(preset.points_per_sd), float(preset.max_spacing),
        MAX_COARSE_NODES, frame == "y",
    )
    return x_min, h, int(n), int(k_idx), bool(frame_y)


def _expired(option: Option, market: Market, method: ExerciseMethod, t: float) -> Result:
    s, k = market.spot, option.strike
    intrinsic = max(k - s, 0.0) if option.is_put else max(s - k, 0.0)
    if s == k:
        delta = -0.5 if option.is_put else 0.5
    elif intrinsic > 0.0:
        delta = -1.0 if option.is_put else 1.0
    else:
        delta = 0.0
    empty = np.empty(0)
    stats = SolveStats(0, 0, 0, 0, 0, method.name, 0, 0, (s, s),
                       warnings=("expiry is zero: intrinsic value, no grid solved",))
    return Result(intrinsic, delta, 0.0, 0.0, 0.0, 0.0, 0.0, ExerciseBoundary(empty, empty),
                  stats, option, market, t, "exact")


def _extreme(option: Option, market: Market, t: float) -> bool:
    """Whether a flat, dividend-free contract needs the general path's handling of extreme
    regimes (calls through puts, American options exercised at once or never early, long
    volatile lives, short decay lengths or large drifts), which the one-call pair lacks."""
    if market.dividends or market.has_term_structure:
        return False
    return _extreme_regime(option.is_put, option.is_american, math.log(market.spot / option.strike),
                           t, market.rate, market.div_yield, market.vol)


def _extreme_regime(
    is_put: bool, american: bool, x_spot: float, t: float, r: float, q: float, vol: float
) -> bool:
    """:func:`_extreme` on plain numbers (flat data, no cash dividends)."""
    sd = vol * math.sqrt(t)
    if not is_put and (sd >= SYMMETRY_MIN_SD or (
            not american and x_spot >= math.log(PARITY_MIN_MONEYNESS))):
        return True
    if not american:
        return sd > LONG_SD
    mu = r - q - 0.5 * vol * vol
    if sd > LONG_SD or abs(mu * t) > 4.0 * sd:
        return True
    if (r <= 0.0 <= q) if is_put else (q <= 0.0 <= r):
        return sd >= 1.0
    lam = _perpetual_root(r, mu, vol, is_put)
    return lam is not None and 10.0 / abs(lam) < sd


def _never_exercised(problem: PDEProblem) -> bool:
    """Early exercise is never optimal and the grid is hard: flat data, no cash dividends, a
    put with ``r <= 0 <= q`` or a call with ``q <= 0 <= r`` (then the European value already
    exceeds the intrinsic value, Merton 1973), and ``vol sqrt(T) >= 1`` or a drift beyond
    four standard deviations."""
    if problem.curves is not None or problem.dividend_tau:
        return False
    r, q = problem.rate, problem.div_yield
    if not (r <= 0.0 <= q if problem.is_put else q <= 0.0 <= r):
        return False
    sd = problem.vol * math.sqrt(problem.expiry)
    drift = (r - q - 0.5 * problem.vol**2) * problem.expiry
    return sd >= 1.0 or abs(drift) > 4.0 * sd


def _perpetual_critical_spot(problem: PDEProblem) -> float | None:
    """The perpetual option's critical spot / strike (Merton 1973), or None if it has none."""
    mu = problem.rate - problem.div_yield - 0.5 * problem.vol**2
    lam = _perpetual_root(problem.rate, mu, problem.vol, problem.is_put)
    return None if lam is None else lam / (lam - 1.0)


def _exercised_at_once(
    option: Option, market: Market, method: ExerciseMethod, t: float, s_star: float,
    warnings: list[str], greeks: str = "full",
) -> Result:
    """Spot at or beyond the perpetual option's critical spot ``s_star``: exercise now.

    A finite-life American option is worth no more than the perpetual one, which is worth its
    intrinsic value there (Merton 1973), and no less than its intrinsic value; so the price
    is the intrinsic value exactly, delta is -1 (put) or +1 (call), gamma, theta, vega and
    rho are 0. No grid is solved (the grid would have to span from the spot to where the
    option is still held, which at low volatility takes many thousands of nodes).
    """
    s, k = market.spot, option.strike
    put = option.is_put
    value = (k - s) if put else (s - k)
    empty = np.empty(0)
    note = (f"spot {s:g} is {'at or below' if put else 'at or above'} the perpetual option's "
            f"critical spot {s_star:.6g}: exercised at once at any expiry, intrinsic value, no "
            "grid solved")
    stats = SolveStats(0, 0, 0, 0, 0, method.name, 0, 0, (s, s),
                       warnings=(*warnings, note))
    zero = math.nan if greeks == "grid" else 0.0  # vega and rho, as for any grid-only call
    return Result(value, -1.0 if put else 1.0, 0.0, 0.0, zero,
                  0.0 if greeks == "full" else math.nan, 0.0,
                  ExerciseBoundary(empty, empty), stats, option, market, t, "exact")


#: The perpetual bounds replace the grid where they are this close, relative to the preset's
#: target (see :func:`_near_perpetual`).
PERPETUAL_GAP = 0.01


def _near_perpetual(
    option: Option, market: Market, method: ExerciseMethod, t: float, accuracy: str,
    warnings: list[str], greeks: str = "full",
) -> Result | None:
    """A life so long and volatile that bounds without a grid pin the value, or None.

    The finite-life value lies between bounds in closed form
    (:func:`stopline.perpetual.american_bounds`: the perpetual option above, the perpetual
    exercise rule cut off at expiry and the European value below). Where they are closer
    than :data:`PERPETUAL_GAP` times the preset's target, the price is their midpoint and
    ``error_estimate`` half their distance; no grid is solved (the far corners of the domain,
    vol 5 for 50 years, where a grid would need more nodes than it may have). Delta and gamma
    are those of the bound that sets the value, theta is 0 (the bounds' distance bounds the
    change with the life), vega and rho central differences of the bounds' midpoint. The
    boundary is not computed.
    """
    name = check_choice("accuracy", accuracy, tuple(PRESETS))
    k, s = option.strike, market.spot
    r, q, vol = market.rate, market.div_yield, market.vol
    b = american_bounds(option.is_put, s / k, t, r, q, vol)
    if b is None or b.upper - b.lower > PERPETUAL_GAP * PRESETS[name].target:
        return None
    value = 0.5 * (b.upper + b.lower) * k
    delta, gamma = b.delta, b.gamma / k
    if greeks == "grid":
        vega = rho = math.nan
    else:
        def mid(r_: float, v_: float) -> float:
            bb = american_bounds(option.is_put, s / k, t, r_, q, v_)
            return math.nan if bb is None else 0.5 * (bb.upper + bb.lower) * k

        dv, dr = 1e-5 * vol, 1e-5 * max(abs(r), 1e-3)
        vega = (mid(r, vol + dv) - mid(r, vol - dv)) / (2.0 * dv)
        rho = (mid(r + dr, vol) - mid(r - dr, vol)) / (2.0 * dr)
        if greeks == "vega":
            rho = math.nan
    note = (f"life long and volatile enough that bounds pin the value: between "
            f"{b.lower * k:.10g} and {b.upper * k:.10g} (Merton 1973; stopline.perpetual); no "
            "grid solved, exercise boundary not computed")
    stats = SolveStats(0, 0, 0, 0, 0, method.name, 0, 0, (s, s), warnings=(*warnings, note))
    empty = np.empty(0)
    return Result(value, delta, gamma, 0.0, vega, rho, 0.5 * (b.upper - b.lower) * k,
                  ExerciseBoundary(empty, empty), stats, option, market, t, name)


def _zero_vol_limit(option: Option, market: Market, method: ExerciseMethod, t: float) -> Result:
    """Deterministic spot ``S e^{(r-q)u}``: the best of exercising at any ``u`` in [0, T].

    Exercise at ``u`` is worth ``e^{-ru} payoff(S e^{(r-q)u})``; for a put this is
    ``K e^{-ru} - S e^{-qu}``, smooth with at most one stationary point
    ``u* = ln(qS / (rK)) / (q - r)``, so the maximum is at 0, T or u*. A European option
    takes ``u = T`` only.
    """
    s, k, r, q = market.spot, option.strike, market.rate, market.div_yield
    sign = 1.0 if option.is_put else -1.0

    def worth(u: float) -> float:
        return sign * (k * math.exp(-r * u) - s * math.exp(-q * u))

    candidates = [t]
    if option.is_american:
        candidates.append(0.0)
        if q != r and r * q > 0.0 and q * s / (r * k) > 0.0:
            u = math.log(q * s / (r * k)) / (q - r)
            if 0.0 < u < t:
                candidates.append(u)
    best_u = max(candidates, key=worth)
    value = max(worth(best_u), 0.0)
    delta = -sign * math.exp(-q * best_u) if value > 0.0 else 0.0
    exercised = value > 0.0 and best_u == 0.0
    theta = theta_from_pde(s, value, delta, 0.0, r, q, market.vol, exercised)
    empty = np.empty(0)
    stats = SolveStats(0, 0, 0, 0, 0, method.name, 0, 0, (s, s), warnings=(
        f"vol * sqrt(T) = {market.vol * math.sqrt(t):.2g} is below {MIN_SD_FOR_GRID:g}: priced by "
        "the zero-volatility limit (best deterministic exercise time), no grid solved",
    ))
    # rho of the deterministic exercise value; vega that of a European expiring at best_u
    # (Black-Scholes 1973), which tends to zero except at the forward
    rho = -sign * best_u * k * math.exp(-r * best_u) if value > 0.0 else 0.0
    vega = 0.0
    if best_u > 0.0:
        sq = market.vol * math.sqrt(best_u)
        d1 = (math.log(s / k) + (r - q) * best_u) / sq + 0.5 * sq
        vega = s * math.exp(-q * best_u) * math.sqrt(best_u) * math.exp(-0.5 * d1 * d1) / math.sqrt(
            2.0 * math.pi
        )
    return Result(value, delta, 0.0, theta, vega, rho, 0.4 * market.vol * math.sqrt(t) * s,
                  ExerciseBoundary(empty, empty), stats, option, market, t, "exact")


def price(
    option: Option,
    market: Market,
    *,
    accuracy: str = "standard",
    method: str | ExerciseMethod = "direct",
    grid: GridSpec | tuple[int, int] | None = None,
    greeks: str = "full",
) -> Result:
    """Price an option by Crank-Nicolson finite differences, with Greeks and error estimate.

    The equation is solved on two nested grids (the second with half the spacing in space
    and twice the time levels); the price, delta and gamma are extrapolated from the pair
    (Richardson), and a third of their difference estimates the error. Theta follows from
    the equation at valuation. For an American option with flat inputs, no cash dividends
    and the direct sweep, vega and rho are the exact derivatives of the discrete solution,
    marched with it (tangent-linear: each step's pivots are reused, no bump size enters) and
    extrapolated like the price: 1.6x to 3.7x the price alone (fast to fine), measured within 0.1 % of central
    differences of "fine" prices (12 random contracts). Otherwise (cash dividends, curves, PSOR) they are central
    differences of prices re-solved with the vol (rate) bumped up and down, on the same two
    grids (built once from the unbumped inputs, so a bump moves no node), each bumped price
    extrapolated like the price: four extra solves per Greek, about five times the price
    alone. A European option with flat inputs and no cash
    dividends needs no re-solve: ``vega = vol T S^2 gamma`` and ``rho = T (S delta - V)``
    hold exactly in the model. See :mod:`stopline.greeks`.

    Accuracy over the whole domain (expiry 1 day to 50 years, vol 1 % to 500 %, spot /
    strike 0.01 to 100, strike 0.01 to 1e6, rate -5 % to 25 %, yield 0 to 25 %): the price is
    finite and within 1e-5 of the strike at "standard" and "fine", and aims at the preset's
    target (for "fast", 1e-4) where the price is not negligible. A price is
    *negligible* when it is below 1e-6 of the strike; there only the 1e-5 bound is claimed.
    Degenerate but legal inputs have exact answers without a grid: expiry zero (intrinsic
    value), ``vol sqrt(T)`` below 2e-6 (the zero-volatility limit), an American spot beyond
    the perpetual option's critical spot (intrinsic value, delta -1 or +1). An American
    option never exercised early (put with ``r <= 0 <= q``, call with ``q <= 0 <= r``) may be
    solved as the European it equals; calls with ``vol sqrt(T) >= 3`` through puts
    (:mod:`stopline.symmetry`). Each such choice, and any sign of numerical trouble, is
    named in ``Result.stats.warnings``. Measured by ``benchmarks/domain_study.py``; see the
    README, "Accuracy and robustness over the whole domain".

    Parameters
    ----------
    option : Option
        The contract.
    market : Market
        Spot, rate, yield, vol and valuation date.
    accuracy : {"fast", "standard", "fine"}
        Target absolute error relative to the strike over typical contracts: 1e-4, 1e-6, 1e-8.
        Met over 1200 typical American contracts, every one within its target
        (``benchmarks/accuracy_study.py``; README, Accuracy).
    method : {"direct", "psor"} or a solver instance
        Solver of the early-exercise constraint (see :mod:`stopline.exercise`): ``"direct"``
        the Brennan-Schwartz sweep (default), ``"psor"`` projected SOR. Both solve the same
        Crank-Nicolson steps after a Rannacher start, with the exercise boundary fitted in
        its cell where it applies (:class:`~stopline.exercise.DirectSweep`).
    grid : GridSpec or (space_points, time_levels), optional
        Expert override of the finer grid; ``accuracy`` is then ignored.
    greeks : {"full", "grid", "vega"}
        ``"full"`` (default) also computes vega and rho: for American options with flat
        inputs, tangents marched with the solution (1.6x to 3.7x the cost of the price alone);
        with cash dividends of the spot model (flat data), vega by a tangent carried through
        the dividend jumps and rho from two re-solves (compiled); with curves, the escrowed
        model or PSOR, four re-solves of the grid pair (about 5x);
        ``"grid"`` returns only what the grid holds (price, delta, gamma, theta) and sets
        vega and rho to NaN: the choice for loops that need prices only (implied vols,
        batch re-pricing). ``"vega"`` computes vega as ``"full"`` does and leaves rho NaN
        (one tangent, or two re-solves, fewer): the choice for quote checks and implied-vol
        starts.

    Returns
    -------
    Result

    Raises
    ------
    InputError
        For an input outside its domain (the message names the field).
    ConvergenceError
        If PSOR reaches its iteration cap.

    Notes
    -----
    With flat rate, yield and vol, no cash dividends, a preset and the direct sweep (and
    unless the volatility is so low for the drift that the drift-free frame is needed), both
    grids are solved and read in one compiled call (:func:`stopline._kernels.price_pair`);
    it applies the same rules as the general path and gives the same numbers, about three
    times faster at "fast". With cash dividends (either model) and otherwise the same
    conditions, :func:`stopline._kernels.price_pair_cash_dividends` does likewise (the same
    numbers; vega by the tangent): measured 1.5x (spot model) to 3.5x (escrowed) faster than
    the general path for the price alone, 2x to 5x with vega and rho.

    References
    ----------
    Crank, J. and Nicolson, P. (1947); Rannacher, R. (1984); Richardson, L. F. (1911);
    Merton, R. C. (1973), Bell Journal of Economics 4(1) (perpetual option, early exercise
    never optimal); McDonald, R. L. and Schroder, M. D. (1998), J. Comput. Finance 1(3).

    Examples
    --------
    >>> from stopline import Option, Market, price
    >>> r = price(Option("put", 50.0, 5 / 12), Market(50.0, 0.10, 0.40))
    >>> round(r.price, 4)
    4.2842
    """
    greeks = check_choice("greeks", greeks, GREEKS)
    solver = get_method(method)
    t = option.time_to_expiry(market.valuation_date)
    if t == 0.0:
        return _expired(option, market, solver, t)
    if (grid is None and isinstance(solver, DirectSweep) and _ONE_CALL
            and not _extreme(option, market, t)):
        # the common case in one kernel call; None where it does not apply
        result = _price_pair(option, market, t, accuracy, greeks, solver)
        if result is None and market.dividends:
            result = _price_pair_dividends(option, market, t, accuracy, greeks, solver)
        if result is not None:
            return result
    k = option.strike
    american = option.is_american
    problem = problem_from_market(option, market, t)
    warnings: list[str] = list(problem.warnings)
    if american and _never_exercised(problem):
        # exact (Merton 1973): the American equals the European; solved as one in the regimes
        # where the American grid is the harder one (large vol sqrt(T), or drift >> spread)
        problem = dataclasses.replace(problem, american=False)
        american = False
    if american and _two_boundaries_possible(option.is_put, problem.rate, problem.div_yield):
        if isinstance(solver, DirectSweep):
            solver = ProjectedSOR()
            warnings.append(
                "rate and yield both negative: the exercise region may not touch the grid end, "
                "so projected SOR was used instead of the direct sweep"
            )
    if problem.vol * math.sqrt(t) < MIN_SD_FOR_GRID:
        if problem.curves is not None or problem.dividend_tau:
            raise InputError(
                "vol", market.vol,
                f"vol * sqrt(T) below {MIN_SD_FOR_GRID:g} is not supported with cash dividends "
                "or term structures",
            )
        return _zero_vol_limit(option, market, solver, t)
    # a call whose grid would span astronomically large values is solved as the symmetric put
    # (European: the put plus the forward, by parity, once the call is deep in the money)
    swapped, parity = use_symmetry(problem), use_parity(problem)
    grid_problem = swapped_problem(problem) if swapped else problem
    grid_problem = parity_problem(problem) if parity else grid_problem
    solve_on = solve_swapped if swapped else (solve_parity if parity else solve)
    if american and problem.curves is None and not problem.dividend_tau and _extreme_regime(
        problem.is_put, True, problem.x_spot, t, problem.rate, problem.div_yield, problem.vol
    ):
        # in the extreme regimes (where the grid would be large), no grid at all
        s_star = _perpetual_critical_spot(problem)
        if s_star is not None and (market.spot <= k * s_star if option.is_put
                                   else market.spot >= k * s_star):
            return _exercised_at_once(option, market, solver, t, k * s_star, warnings, greeks)
        if grid is None:
            near = _near_perpetual(option, market, solver, t, accuracy, warnings, greeks)
            if near is not None:
                return near
    refine = math.sqrt(max(market.spot / k, 1.0)) if swapped else 1.0
    space_c, time_c, acc_name = _resolve_grid(grid_problem, accuracy, grid, refine)
    if space_c.n >= MAX_COARSE_NODES:
        warnings.append(_CAP_WARNING)
    if american and space_c.frame == "y":
        warnings.append(
            "very low volatility for the drift: solved in the drift-free frame, where the "
            "exercise value's kink moves between nodes; American accuracy may be below target"
        )
    space_f = space_c.refined()
    time_f = time_c.refined()
    # American vega and rho: exact derivatives of the discrete solution ride along the march
    # where the tangent-linear sweep applies (flat data, no cash dividends, direct sweep)
    tangents = (greeks != "grid" and american and not swapped
                and tangents_available(problem, space_c, solver))
    if tangents:
        coarse, tan_c = solve_with_tangents(problem, space_c, time_c, solver.fitted)
        fine, tan_f = solve_with_tangents(problem, space_f, time_f, solver.fitted)
    else:
        coarse = solve_on(problem, space_c, time_c, solver)
        fine = solve_on(problem, space_f, time_f, solver)
    rc = _read(coarse, problem, k)
    rf = _read(fine, problem, k)
    value, delta, gamma = _richardson(rc, rf, option, market, problem.div_yield, t)
    vega = rho = 0.0
    psor = [coarse.report, fine.report]
    flat = problem.curves is None and not problem.dividend_tau
    if greeks == "grid":
        vega = rho = math.nan
    elif not rf.exercised and tangents:
        vega, rho = (
            _extrapolate(_read_tangent(coarse, tan_c[i], problem, k),
                         _read_tangent(fine, tan_f[i], problem, k))
            for i in range(2)
        )
    elif not rf.exercised and (american or not flat):
        # vega, rho: re-solves with the market's vol (rate) shifted in parallel, on the same
        # two grids (the bump moves no node), each bumped price extrapolated like the price
        pair = ((space_c, time_c), (space_f, time_f))
        dv, dr = VOL_BUMP * problem.vol, RATE_BUMP
        bumped = []
        rate_too = greeks == "full"
        for changes in ({"vol": dv}, {"vol": -dv}, {"rate": dr}, {"rate": -dr})[:4 if rate_too else 2]:
            p = problem_from_market(option, bumped_market(market, **changes), t)
            lo, hi = (solve_on(p, sg, tg, solver) for sg, tg in pair)
            psor += [lo.report, hi.report]
            bumped.append(_extrapolate(_read(lo, p, k).value, _read(hi, p, k).value))
        vega = central_difference(bumped[0], bumped[1], dv)
        rho = central_difference(bumped[2], bumped[3], dr) if rate_too else math.nan
    if not american and flat and greeks != "grid":
        # European with flat inputs: exact identities of the model, no re-solve needed
        vega, rho = european_vega_rho(market.spot, value, delta, gamma, problem.vol, t)
    if greeks == "vega":
        rho = math.nan  # not asked for
    theta = theta_at_valuation(problem, market.spot, k, value, delta, gamma, rf.exercised)
    err = abs(rf.value - rc.value) / 3.0
    warnings += _health_warnings(err, k, acc_name, (value, delta, gamma, theta))
    if american and flat:
        warnings += _gamma_warning(rc, rf, market.spot, problem.vol, k)
    n_b = fine.report.boundary_x.shape[0]
    raw, spot_b = np.empty(n_b), np.empty(n_b)
    # with flat inputs and no dividends the true boundary is monotone in time to expiry
    _kernels.boundary_spots(fine.report.boundary_x, k, flat, option.is_put, raw, spot_b)
    boundary = ExerciseBoundary(fine.boundary_times.copy(), spot_b, raw)
    stats = SolveStats(
        space_points=space_f.n,
        time_levels=time_f.levels,
        time_steps=int(time_f.dt.shape[0]),
        coarse_space_points=space_c.n,
        coarse_time_levels=time_c.levels,
        method=solver.name,
        psor_iterations=sum(r.iterations for r in psor),
        psor_max_sweeps=max(r.max_iterations for r in psor),
        domain=_domain(k, fine.x_min, fine.space.h, fine.space.n),
        warnings=tuple(warnings),
    )
    return Result(value, delta, gamma, theta, vega, rho, abs(rf.value - rc.value) / 3.0,
                  boundary, stats, option, market, t, acc_name)


def _value_and_error(option: Option, market: Market, accuracy: str) -> tuple[float, float]:
    """``price(option, market, accuracy=accuracy, greeks="grid")``'s price and error estimate,
    the same numbers, without building the :class:`Result` where a one-call pair applies
    (the implied-vol search's price function, called many times per quote)."""
    t = option.time_to_expiry(market.valuation_date)
    if t > 0.0 and _ONE_CALL and not _extreme(option, market, t):
        solver = get_method("direct")
        out = _price_pair(option, market, t, accuracy, "grid", solver, True)
        if out is None and market.dividends:
            out = _price_pair_dividends(option, market, t, accuracy, "grid", solver, True)
        if out is not None:
            return out
    res = price(option, market, accuracy=accuracy, greeks="grid")
    return res.price, res.error_estimate


def _extrapolate(coarse: float, fine: float) -> float:
    """Richardson's step for a second-order scheme on grids of spacing ``2h`` and ``h``."""
    return fine + (fine - coarse) / 3.0


def _richardson(
    rc: GridReadout, rf: GridReadout, option: Option, market: Market, div_yield: float,
    t: float,
) -> tuple[float, float, float]:
    """Value, delta and gamma from the pair's read-offs, within the bounds the model obeys."""
    k, s, is_put = option.strike, market.spot, option.is_put
    value = _extrapolate(rc.value, rf.value)
    delta = _extrapolate(rc.delta, rf.delta)
    gamma = _extrapolate(rc.gamma, rf.gamma)
    if rf.exercised != rc.exercised:  # the grids put the spot on different sides of the
        value, delta, gamma = rf.value, rf.delta, rf.gamma  # boundary: do not extrapolate
    intrinsic = max(k - s, 0.0) if is_put else max(s - k, 0.0)
    if rf.exercised:
        # exercised at once: the intrinsic value of the real spot (also under escrowed dividends)
        value, delta, gamma = intrinsic, rf.delta, rf.gamma
    # extrapolation may step below a bound the true price obeys; the bound is then closer
    value = max(value, intrinsic if option.is_american else 0.0)
    # likewise delta: within [-1, 0] for a put and [0, 1] for a call (e^{-qT} when q < 0)
    dmax = max(1.0, math.exp(-div_yield * t))
    delta = min(max(delta, -dmax), 0.0) if is_put else min(max(delta, 0.0), dmax)
    return value, delta, gamma


def _gamma_warning(
    rc: GridReadout, rf: GridReadout, spot: float, vol: float, strike: float
) -> list[str]:
    """Gamma (and theta, which the PDE builds from it) is unreliable when the two grids'
    gammas differ by more than 5 % and that difference moves theta by more than 1e-3 of
    the strike per year. Plain projected Crank-Nicolson (``DirectSweep(fitted=False)``) does
    that where the exercise boundary feeds it oscillations it does not damp (long, very
    volatile American lives); the fitted boundary damps them."""
    if rf.exercised or rc.exercised:
        return []
    diff = abs(rf.gamma - rc.gamma)
    if diff > 0.05 * abs(rf.gamma) and 0.5 * vol * vol * spot * spot * diff > 1e-3 * strike:
        return [
            f"the two grids' gammas differ by {diff / max(abs(rf.gamma), 1e-300):.0%}: gamma "
            "and theta are unreliable here (oscillations near the exercise boundary); a finer "
            "accuracy preset will tell"
        ]
    return []


#: How far the error estimate may exceed a preset's promise before ``price`` warns (see
#: :func:`_health_warnings`).
HEALTH_FACTOR = 10.0


def _health_warnings(
    err: float, strike: float, acc_name: str, numbers: tuple[float, ...]
) -> list[str]:
    """Numerical health: the error estimate exceeds :data:`HEALTH_FACTOR` times what the preset
    promises (its target, or 1e-5 of the strike if looser), or a number came out non-finite;
    neither is expected anywhere in the documented domain.

    The estimate (a third of the two grids' difference) is that of the finer grid before
    extrapolation, so it is conservative: over the 1200 typical contracts of
    ``benchmarks/accuracy_study.py`` it reaches 1.6e-4 / 2.0e-5 / 8.2e-7 x K at fast /
    standard / fine while the extrapolated prices stay within 1.4e-5 / 5.4e-7 / 7.9e-9 x K.
    Compared with the promise itself it flagged 14 % of those contracts at standard, every
    one of them accurate; at ten times the promise it flags none, and still flags grids whose
    two answers disagree grossly.
    """
    out = []
    promised = max(PRESETS[acc_name].target if acc_name in PRESETS else 0.0, EVERYWHERE)
    if err > HEALTH_FACTOR * promised * strike:
        out.append(
            f"the two grids differ by {3 * err / strike:.1e} of the strike (error estimate "
            f"{err / strike:.1e}), over {HEALTH_FACTOR:g} times the {promised:g} promised: the "
            "price may be off by more; try accuracy='fine'"
        )
    if not all(map(math.isfinite, (*numbers, err))):
        out.append("a non-finite number came out of the grid: do not use this result")
    return out


def _domain(strike: float, x_min: float, h: float, n: int) -> tuple[float, float]:
    """Lowest and highest spot of a grid."""
    return strike * math.exp(x_min), strike * math.exp(x_min + (n - 1) * h)


@functools.lru_cache(maxsize=64)
def _pair_time_grids(
    levels: int,
) -> tuple[tuple[FloatArray, FloatArray, FloatArray], tuple[FloatArray, FloatArray, FloatArray]]:
    """The unit time grids of a pair whose coarse grid has ``levels`` (shared, read-only)."""
    return unit_time_grid(levels), unit_time_grid(2 * levels)


def _price_pair(
    option: Option, market: Market, t: float, accuracy: str, greeks: str, solver: DirectSweep,
    value_only: bool = False,
) -> Result | tuple[float, float] | None:
    """:func:`price` in one kernel call (:func:`stopline._kernels.price_pair`), or None
    where it does not apply.

    It applies with flat rate, yield and vol, no cash dividends, a preset, the direct sweep
    (the caller checks those two) and frame "x", and gives the same numbers as the general
    path: every rule on the way (grid layout, time levels, step plan, march, read-off,
    boundary fit, extrapolation) is the one the general path uses. ``value_only``: only
    ``(price, error_estimate)`` (see :func:`_value_and_error`).
    """
    if market.dividends or market.has_term_structure:
        return None
    rate, q, vol = market.rate, market.div_yield, market.vol
    american, is_put = option.is_american, option.is_put
    if vol * math.sqrt(t) < MIN_SD_FOR_GRID or (
        american and _two_boundaries_possible(is_put, rate, q)
    ):
        return None
    name = check_choice("accuracy", accuracy, tuple(PRESETS))
    preset = PRESETS[name]
    k = option.strike
    x_spot = math.log(market.spot / k)
    # the compiled layout directly: every argument is already a float or a bool here
    x_min, h, n, k_idx, frame_y = _kernels.preset_layout(
        x_spot, t, rate, q, vol, american, preset.width_sd, preset.points_per_sd,
        preset.max_spacing, MAX_COARSE_NODES, False,
    )
    if frame_y:
        return None
    levels = _coarse_levels(preset, vol * math.sqrt(t), american)
    unit_c, unit_f = _pair_time_grids(levels)
    tangents = greeks != "grid" and american
    out = np.empty(_kernels.PAIR_OUT)
    m_f = unit_f[0].shape[0]
    b_tau, b_x, b_raw, b_spot = np.empty(m_f), np.empty(m_f), np.empty(m_f), np.empty(m_f)
    _kernels.price_pair(
        is_put, american, t, rate, q, vol, x_spot, k, x_min, h, n, k_idx,
        coefficients(h, rate, q, vol), coefficients(0.5 * h, rate, q, vol), *unit_c, *unit_f,
        (2 if greeks == "full" else 1) if tangents else 0, out, b_x, b_raw, b_spot,
        solver.fitted, b_tau,
    )
    o = out.tolist()
    rc = GridReadout(o[0], o[1], o[2], o[3] != 0.0)
    rf = GridReadout(o[4], o[5], o[6], o[7] != 0.0)
    value, delta, gamma = _richardson(rc, rf, option, market, q, t)
    if value_only:
        return value, abs(rf.value - rc.value) / 3.0
    if greeks == "grid":
        vega = rho = math.nan
    elif not american:
        vega, rho = european_vega_rho(market.spot, value, delta, gamma, vol, t)
    elif rf.exercised:
        vega = rho = 0.0
    else:
        vega, rho = _extrapolate(o[8], o[10]), _extrapolate(o[9], o[11])
    if greeks == "vega":
        rho = math.nan  # not asked for
    theta = theta_from_pde(market.spot, value, delta, gamma, rate, q, vol, rf.exercised)
    warnings = ([] if n < MAX_COARSE_NODES else [_CAP_WARNING]) + _health_warnings(
        abs(rf.value - rc.value) / 3.0, k, name, (value, delta, gamma, theta))
    if american:
        warnings += _gamma_warning(rc, rf, market.spot, vol, k)
    stats = SolveStats(2 * n - 1, 2 * levels, m_f, n, levels, solver.name, 0, 0,
                       _domain(k, x_min, 0.5 * h, 2 * n - 1), warnings=tuple(warnings))
    return Result(value, delta, gamma, theta, vega, rho, abs(rf.value - rc.value) / 3.0,
                  ExerciseBoundary(b_tau, b_spot, b_raw), stats, option, market, t, name)


@functools.lru_cache(maxsize=512)
def _event_time_grids(
    expiry: float, dividend_tau: tuple[float, ...], levels: int
) -> tuple[TimeGrid, TimeGrid, tuple[int, ...], tuple[int, ...], FloatArray]:
    """The Richardson pair's time grids for cash dividends with ex-dates ``dividend_tau``
    (:func:`~stopline.solve.time_grid_for`, then refined; none: the plain grids), the level of each ex-date on each
    (as :func:`stopline.solve._solve_with_dividends` finds it; -1 where none is close enough)
    and the fine grid's boundary times (each ex-date twice: after it, then just before it).

    Kept per process: the rows of a book share expiries and dividend dates, and the
    implied-vol search prices one contract many times (arrays read-only)."""
    shape = PDEProblem(True, True, expiry, 0.0, 0.0, 0.0, 0.0, dividend_tau=dividend_tau,
                       dividend_amount=(0.0,) * len(dividend_tau))
    time_c = time_grid_for(shape, levels)
    time_f = time_c.refined()
    found = []
    for time in (time_c, time_f):
        tau = time.tau
        idx = []
        for t_d in dividend_tau:
            k = int(np.argmin(np.abs(tau - t_d)))
            idx.append(k if abs(tau[k] - t_d) <= 1e-9 * max(1.0, t_d) else -1)
        found.append(tuple(idx))
    ends = sorted({k for k in found[1] if k >= 0})
    b_tau = np.insert(time_f.tau, np.asarray(ends, dtype=np.int64) + 1, time_f.tau[ends])
    for arr in (time_c.tau, time_c.dt, time_c.theta, time_f.tau, time_f.dt, time_f.theta, b_tau):
        arr.flags.writeable = False
    return time_c, time_f, found[0], found[1], b_tau


def _events(idx: tuple[int, ...], amounts: tuple[float, ...]) -> tuple[FloatArray, FloatArray]:
    """Levels of the ex-dates, increasing, and the dividend paid at each (summed per level, in
    the schedule's order, as :func:`stopline.solve._solve_with_dividends` does)."""
    events: dict[int, float] = {}
    for k, d in zip(idx, amounts, strict=True):
        events[k] = events.get(k, 0.0) + d
    keys = sorted(events)
    return np.asarray(keys, dtype=np.int64), np.asarray([events[k] for k in keys])


def _price_pair_dividends(
    option: Option, market: Market, t: float, accuracy: str, greeks: str, solver: DirectSweep,
    value_only: bool = False,
) -> Result | tuple[float, float] | None:
    """:func:`price` with cash dividends in one kernel call per pair
    (:func:`stopline._kernels.price_pair_cash_dividends`), or None where it does not apply.

    It applies with flat rate, yield and vol, either dividend model, a preset and the direct
    sweep (the caller checks those two), and no ex-date on the expiry date; where every
    dividend falls after expiry, the flat pair (:func:`_price_pair`) serves. The numbers are
    the general path's (the same grids, steps, jumps and read-off), except vega: the vol
    tangent marched with the solution and carried through the jumps
    (:func:`stopline._kernels.dividend_jump_tangents`) instead of a central difference of
    re-solved prices. Rho stays a central difference of two re-solves, here compiled.
    ``value_only``: only ``(price, error_estimate)`` (see :func:`_value_and_error`).
    """
    if market.has_term_structure:
        return None
    problem = problem_from_market(option, market, t)
    if not problem.dividend_tau:
        # every dividend after expiry: the flat problem, with the schedule's warnings
        flat_market = dataclasses.replace(market, dividends=())
        if _extreme(option, flat_market, t):
            return None
        res = _price_pair(option, flat_market, t, accuracy, greeks, solver, value_only)
        if res is None or value_only:
            return res
        stats = dataclasses.replace(res.stats, warnings=problem.warnings + res.stats.warnings)
        return dataclasses.replace(res, market=market, stats=stats)
    rate, q, vol = problem.rate, problem.div_yield, problem.vol
    american, is_put = option.is_american, option.is_put
    escrowed = problem.escrowed
    sd = vol * math.sqrt(t)
    if min(problem.dividend_tau) <= 1e-12 or sd < MIN_SD_FOR_GRID or (
        american and _two_boundaries_possible(is_put, rate, q)
    ):
        return None
    name = check_choice("accuracy", accuracy, tuple(PRESETS))
    preset = _preset_for(PRESETS[name], american, escrowed)
    k = option.strike
    x_min, h, n, k_idx, frame_y = _preset_layout(problem.x_spot, t, rate, q, vol, american,
                                                 preset)
    if frame_y and not problem.has_events:
        return None  # an escrowed European solved in frame "y": the general path's
    levels = _coarse_levels(preset, sd, american)
    if not american and sd > LONG_SD:
        levels = max(levels, min(math.ceil(levels * (sd / LONG_SD) ** 1.5), MAX_LONG_LEVELS))
    events = problem.dividend_tau if problem.has_events else ()
    time_c, time_f, idx_c, idx_f, b_tau = _event_time_grids(t, events, levels)
    if -1 in idx_c or -1 in idx_f:
        return None
    amounts = problem.dividend_amount if events else ()
    ev_c, amt_c = _events(idx_c, amounts)
    ev_f, amt_f = _events(idx_f, amounts)
    if not np.array_equal(amt_c, amt_f):
        return None
    div_tau = np.asarray(problem.dividend_tau)
    div_amt = np.asarray(problem.dividend_amount)

    def pair(p: PDEProblem, n_par: int, bnd: FloatArray) -> list[float]:
        out = np.empty(_kernels.PAIR_OUT)
        r = p.rate
        _kernels.price_pair_cash_dividends(
            is_put, american, escrowed, t, r, q, vol, p.x_spot, p.escrow_pv, k, x_min, h, n,
            k_idx, coefficients(h, r, q, vol), coefficients(0.5 * h, r, q, vol), time_c.tau,
            time_c.dt, time_c.theta, ev_c, time_f.tau, time_f.dt, time_f.theta, ev_f, amt_c,
            div_tau, div_amt, n_par, out, bnd[0], bnd[1], bnd[2], american and not escrowed and solver.fitted,
        )
        return out.tolist()

    bnd = np.empty((3, b_tau.shape[0]))
    o = pair(problem, 0 if greeks == "grid" else 1, bnd)
    rc = GridReadout(o[0], o[1], o[2], o[3] != 0.0)
    rf = GridReadout(o[4], o[5], o[6], o[7] != 0.0)
    value, delta, gamma = _richardson(rc, rf, option, market, q, t)
    if value_only:
        return value, abs(rf.value - rc.value) / 3.0
    if greeks == "grid":
        vega = rho = math.nan
    elif rf.exercised:
        vega, rho = 0.0, (0.0 if greeks == "full" else math.nan)
    else:
        vega, rho = _extrapolate(o[8], o[10]), math.nan
        if greeks == "full":
            # re-solves on the same grids (under the escrowed model the rate also moves the
            # present value of the dividends, so the spot's node)
            scratch = np.empty((3, b_tau.shape[0]))
            bumped = []
            for dr in (RATE_BUMP, -RATE_BUMP):
                p = problem_from_market(option, bumped_market(market, rate=dr), t)
                ob = pair(p, 0, scratch)
                bumped.append(_extrapolate(ob[0], ob[4]))
            rho = central_difference(bumped[0], bumped[1], RATE_BUMP)
    theta = theta_at_valuation(problem, market.spot, k, value, delta, gamma, rf.exercised)
    warnings = list(problem.warnings) + ([] if n < MAX_COARSE_NODES else [_CAP_WARNING])
    warnings += _health_warnings(abs(rf.value - rc.value) / 3.0, k, name,
                                 (value, delta, gamma, theta))
    stats = SolveStats(2 * n - 1, time_f.levels, int(time_f.dt.shape[0]), n, time_c.levels,
                       solver.name, 0, 0, _domain(k, x_min, 0.5 * h, 2 * n - 1),
                       warnings=tuple(warnings))
    return Result(value, delta, gamma, theta, vega, rho, abs(rf.value - rc.value) / 3.0,
                  ExerciseBoundary(b_tau.copy(), bnd[2], bnd[1]), stats, option, market, t,
                  name)


def _read(
    sol: GridSolution, problem: PDEProblem, strike: float, x_spot: float | None = None
) -> GridReadout:
    """Value, delta and gamma read at the spot (or at ``x_spot``, in the nodes' frame)."""
    x_boundary = float(sol.report.boundary_x[-1]) if problem.american else math.nan
    pv = problem.escrow_pv if problem.escrowed else 0.0
    if pv and math.isfinite(x_boundary):
        # the march reports the critical spot itself; the grid's nodes are spot less PV(D)
        s_star = math.exp(x_boundary) - pv
        x_boundary = math.log(s_star) if s_star > 0.0 else -math.inf
    return read_at_spot(
        sol.values, sol.payoff, sol.x_min, sol.space.h,
        problem.x_spot if x_spot is None else x_spot, strike,
        problem.american, x_boundary, problem.is_put, pv=pv,
    )


def _read_tangent(sol: GridSolution, tangent: FloatArray, problem: PDEProblem, strike: float) -> float:
    """A derivative of the value / strike, read at the spot like the value (money units)."""
    return read_at_spot(
        tangent, sol.payoff, sol.x_min, sol.space.h, problem.x_spot, strike, False
    ).value


def _two_boundaries_possible(is_put: bool, rate: float, div_yield: float) -> bool:
    """Whether the exercise region may be an interval away from the grid ends.

    For a put this happens when ``q < r < 0`` (Battauz, De Donno and Sbuelz, 2015), and for a
    call, by put-call symmetry, when ``r < q < 0``; the direct sweep assumes one interval
    touching the grid end.
    """
    return (div_yield < rate < 0.0) if is_put else (rate < div_yield < 0.0)
