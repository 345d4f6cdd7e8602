"""Numba kernels of the reference trees: plain float64 scalars and arrays only.

Layouts
-------
Recombining tree (:func:`binomial_tree`): level ``i`` (time ``i dt``) has nodes
``spot d**i (u/d)**j`` for ``j = 0..i``.

Band lattice (:func:`lattice_segment`): a CRR lattice started from a whole layer of nodes
rather than one. Its start layer has ``m`` nodes at log-spot ``x0 + 2 dx k``; level ``i`` has
``m + i`` nodes at ``x0 - i dx + 2 dx k``, ``k = 0..m+i-1``; each node moves to ``x +- dx``.
With ``m = 1`` it is the CRR tree.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = [
    "norm_cdf_nb",
    "bs_price_nb",
    "binomial_tree",
    "lattice_segment",
    "interp_layer",
    "interpolate_shifted",
    "exdate_crossings",
    "smoothed_exdate_step",
]


@njit(cache=True)
def norm_cdf_nb(x: float) -> float:
    """Standard normal distribution function."""
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


@njit(cache=True)
def bs_price_nb(
    is_call: bool, spot: float, strike: float, tau: float, rate: float, div_yield: float, vol: float
) -> float:
    """Black-Scholes-Merton European price; ``spot <= 0`` gives the value at zero spot."""
    if spot <= 0.0:
        return 0.0 if is_call else strike * math.exp(-rate * tau)
    sd = vol * math.sqrt(tau)
    d1 = (math.log(spot / strike) + (rate - div_yield) * tau) / sd + 0.5 * sd
    d2 = d1 - sd
    if is_call:
        return spot * math.exp(-div_yield * tau) * norm_cdf_nb(d1) - strike * math.exp(
            -rate * tau
        ) * norm_cdf_nb(d2)
    return strike * math.exp(-rate * tau) * norm_cdf_nb(-d2) - spot * math.exp(
        -div_yield * tau
    ) * norm_cdf_nb(-d1)


@njit(cache=True)
def _exercise_value(is_call: bool, s: float, strike: float) -> float:
    return s - strike if is_call else strike - s


@njit(cache=True)
def binomial_tree(
    is_call: bool,
    american: bool,
    spot: float,
    strike: float,
    rate: float,
    div_yield: float,
    vol: float,
    dt: float,
    u: float,
    d: float,
    p: float,
    n: int,
    bs_last_step: bool,
    addon_ex: np.ndarray,
    addon_cum: np.ndarray,
) -> float:
    """Backward induction on a recombining binomial tree of ``n`` steps of length ``dt``.

    Parameters
    ----------
    is_call, american : bool
        Payoff and exercise style.
    spot, strike, rate, div_yield, vol : float
        Tree root, strike, and the market data (``vol`` and ``div_yield`` are used only by
        the Black-Scholes last step).
    dt, u, d, p : float
        Step length, up and down factors and up probability.
    n : int
        Number of steps, >= 1.
    bs_last_step : bool
        Replace the last step by the Black-Scholes value over ``dt`` (Broadie-Detemple).
    addon_ex, addon_cum : ndarray, shape (n + 1,)
        Amount added to the tree variable to form the exercise price at each level, just
        after and just before a possible ex-dividend date at that level (zeros for a plain
        tree; the present value of the remaining dividends for the escrowed model). Exercise
        takes the better of the two.

    Returns
    -------
    float
        Option value at the root.
    """
    disc = math.exp(-rate * dt)
    pu = disc * p
    pd = disc * (1.0 - p)
    ratio = u / d
    m = n - 1 if bs_last_step else n
    values = np.empty(m + 1)
    s = spot * d**m
    for j in range(m + 1):
        if bs_last_step:
            v = bs_price_nb(is_call, s, strike, dt, rate, div_yield, vol)
        else:
            v = max(_exercise_value(is_call, s, strike), 0.0)
        if american:
            ex = max(
                _exercise_value(is_call, s + addon_ex[m], strike),
                _exercise_value(is_call, s + addon_cum[m], strike),
            )
            if ex > v:
                v = ex
        values[j] = v
        s *= ratio
    for i in range(m - 1, -1, -1):
        s = spot * d**i
        lo = addon_ex[i]
        hi = addon_cum[i]
        for j in range(i + 1):
            v = pu * values[j + 1] + pd * values[j]
            if american:
                ex = _exercise_value(is_call, s + lo, strike)
                if hi != lo:
                    ex = max(ex, _exercise_value(is_call, s + hi, strike))
                if ex > v:
                    v = ex
            values[j] = v
            s *= ratio
    return values[0]


@njit(cache=True)
def lattice_segment(
    is_call: bool,
    american: bool,
    strike: float,
    rate: float,
    dt: float,
    p: float,
    x0: float,
    dx: float,
    n: int,
    end_values: np.ndarray,
    addon: np.ndarray,
) -> np.ndarray:
    """Backward induction over ``n`` steps of a band lattice, from its end layer to its start.

    Parameters
    ----------
    is_call, american : bool
        Payoff and exercise style.
    strike, rate : float
        Strike and the discount rate.
    dt, p : float
        Step length and up probability.
    x0, dx : float
        Log-spot of the lowest start node and the log step (start nodes are ``2 dx`` apart).
    n : int
        Number of steps, >= 0.
    end_values : ndarray, shape (m + n,)
        Values on the end layer (level ``n``), exercise already applied.
    addon : ndarray, shape (n + 1,)
        Amount added to the lattice spot to form the exercise price at each level.

    Returns
    -------
    ndarray, shape (m,)
        Values on the start layer (level 0), exercise applied.
    """
    disc = math.exp(-rate * dt)
    pu = disc * p
    pd = disc * (1.0 - p)
    ratio = math.exp(2.0 * dx)
    size = end_values.shape[0]
    values = end_values.copy()
    for i in range(n - 1, -1, -1):
        size -= 1
        s = math.exp(x0 - i * dx)
        add = addon[i]
        for k in range(size):
            v = pu * values[k + 1] + pd * values[k]
            if american:
                ex = _exercise_value(is_call, s + add, strike)
                if ex > v:
                    v = ex
            values[k] = v
            s *= ratio
    return values[:size].copy()


#: Number of nodes of the Lagrange interpolation used across ex-dividend dates.
INTERP_POINTS = 6


@njit(cache=True)
def _interp(
    x0: float, h: float, values: np.ndarray, value_at_zero: float, s: float, nodes: np.ndarray
) -> float:
    """:func:`interp_layer` with a caller-owned scratch array ``nodes`` of length six."""
    m = values.shape[0]
    if s <= 0.0:
        return value_at_zero
    s_low = math.exp(x0)
    if s < s_low:
        w = s / s_low
        return (1.0 - w) * value_at_zero + w * values[0]
    s_high = math.exp(x0 + h * (m - 1))
    if s > s_high:
        s_next = math.exp(x0 + h * (m - 2))
        return values[m - 1] + (values[m - 1] - values[m - 2]) * (s - s_high) / (s_high - s_next)
    z = (math.log(s) - x0) / h
    k = int(math.floor(z)) - (INTERP_POINTS // 2 - 1)
    if k < 0:
        k = 0
    if k > m - INTERP_POINTS:
        k = m - INTERP_POINTS
    # Lagrange polynomial in spot on the nodes exp(x0 + h j): exact for the nearly linear
    # values far in or out of the money even when the nodes are far apart.
    ratio = math.exp(h)
    nodes[0] = math.exp(x0 + h * k)
    for j in range(1, INTERP_POINTS):
        nodes[j] = nodes[j - 1] * ratio
    total = 0.0
    for j in range(INTERP_POINTS):
        w = 1.0
        for i in range(INTERP_POINTS):
            if i != j:
                w *= (s - nodes[i]) / (nodes[j] - nodes[i])
        total += w * values[k + j]
    return total


@njit(cache=True)
def interp_layer(x0: float, h: float, values: np.ndarray, value_at_zero: float, s: float) -> float:
    """Value at spot ``s`` from values on the log-uniform layer ``exp(x0 + h k)``.

    Lagrange interpolation in spot on the six nodes nearest in log-spot (shifted inwards at
    the edges); below the lowest node, linear in spot towards ``value_at_zero`` at zero spot
    (``s <= 0`` gets ``value_at_zero``); above the highest node, linear in spot through the
    two highest nodes. Needs at least six nodes.
    """
    return _interp(x0, h, values, value_at_zero, s, np.empty(INTERP_POINTS))


@njit(cache=True)
def interpolate_shifted(
    x0: float,
    h: float,
    values: np.ndarray,
    value_at_zero: float,
    targets: np.ndarray,
) -> np.ndarray:
    """:func:`interp_layer` at every spot of ``targets``, shape (n_targets,)."""
    out = np.empty(targets.shape[0])
    scratch = np.empty(INTERP_POINTS)
    for idx in range(targets.shape[0]):
        out[idx] = _interp(x0, h, values, value_at_zero, targets[idx], scratch)
    return out


@njit(cache=True)
def _pre_exdate_value(
    is_call: bool,
    american: bool,
    strike: float,
    x0: float,
    h: float,
    values: np.ndarray,
    value_at_zero: float,
    shift: float,
    add_cum: float,
    y: float,
    scratch: np.ndarray,
) -> float:
    """Value just before an ex-date at lattice spot ``y``: the value just after at
    ``y - shift`` (interpolated), or exercise on the cum-dividend spot ``y + add_cum``."""
    v = _interp(x0, h, values, value_at_zero, y - shift, scratch)
    if american:
        ex = _exercise_value(is_call, y + add_cum, strike)
        if ex > v:
            v = ex
    return v


@njit(cache=True)
def exdate_crossings(
    is_call: bool,
    strike: float,
    x0: float,
    h: float,
    values: np.ndarray,
    value_at_zero: float,
    shift: float,
    add_cum: float,
    grid: np.ndarray,
) -> np.ndarray:
    """Spots where exercising just before an ex-date starts or stops paying.

    Sign changes of ``exercise(y + add_cum) - V_after(y - shift)`` between consecutive
    points of the increasing array ``grid``, each refined by bisection.
    """
    out = np.empty(grid.shape[0])
    count = 0
    scratch = np.empty(INTERP_POINTS)

    def gap(y: float) -> float:
        return _exercise_value(is_call, y + add_cum, strike) - _interp(
            x0, h, values, value_at_zero, y - shift, scratch
        )

    g_prev = gap(grid[0])
    for idx in range(1, grid.shape[0]):
        g_next = gap(grid[idx])
        if (g_prev > 0.0) != (g_next > 0.0):
            a, b, ga = grid[idx - 1], grid[idx], g_prev
            for _ in range(100):
                mid = 0.5 * (a + b)
                gm = gap(mid)
                if (gm > 0.0) == (ga > 0.0):
                    a, ga = mid, gm
                else:
                    b = mid
                if b - a <= 1e-15 * b:
                    break
            out[count] = 0.5 * (a + b)
            count += 1
        g_prev = g_next
    return out[:count].copy()


@njit(cache=True)
def smoothed_exdate_step(
    is_call: bool,
    american: bool,
    strike: float,
    x0: float,
    h: float,
    values: np.ndarray,
    value_at_zero: float,
    shift: float,
    add_cum: float,
    spots: np.ndarray,
    drift: float,
    sd: float,
    disc: float,
    kinks: np.ndarray,
    gl_nodes: np.ndarray,
    gl_weights: np.ndarray,
) -> np.ndarray:
    """Values one step before an ex-date by the exact one-step lognormal expectation.

    For each spot ``y`` of ``spots`` returns ``disc * E[f(y exp(drift + sd Z))]``, ``Z``
    standard normal truncated to [-8, 8], where ``f`` is the value just before the ex-date
    (:func:`_pre_exdate_value`). The integral is composite Gauss-Legendre on unit panels in
    ``Z``, also split at the spots ``kinks`` where ``f`` has a kink, so that the binomial
    error from a kink falling between nodes disappears (the idea of the Black-Scholes last
    step of Broadie and Detemple, applied at every ex-date).

    Returns
    -------
    ndarray, shape (len(spots),)
    """
    limit = 8.0
    n_panels = int(2.0 * limit)
    inv_sqrt_2pi = 1.0 / math.sqrt(2.0 * math.pi)
    out = np.empty(spots.shape[0])
    edges = np.empty(n_panels + 1 + kinks.shape[0])
    scratch = np.empty(INTERP_POINTS)
    for idx in range(spots.shape[0]):
        y = spots[idx]
        count = 0
        for j in range(n_panels + 1):
            edges[count] = -limit + j
            count += 1
        for j in range(kinks.shape[0]):
            if kinks[j] > 0.0:
                zk = (math.log(kinks[j] / y) - drift) / sd
                if -limit < zk < limit:
                    edges[count] = zk
                    count += 1
        e = np.sort(edges[:count])
        total = 0.0
        for j in range(count - 1):
            a, b = e[j], e[j + 1]
            if b - a <= 0.0:
                continue
            mid, half = 0.5 * (a + b), 0.5 * (b - a)
            for g in range(gl_nodes.shape[0]):
                z = mid + half * gl_nodes[g]
                f = _pre_exdate_value(
                    is_call, american, strike, x0, h, values, value_at_zero, shift, add_cum,
                    y * math.exp(drift + sd * z), scratch,
                )  # fmt: skip
                total += half * gl_weights[g] * inv_sqrt_2pi * math.exp(-0.5 * z * z) * f
        out[idx] = disc * total
    return out
