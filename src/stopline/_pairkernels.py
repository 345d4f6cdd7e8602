"""Numba kernels for one price on a Richardson pair in a single call, and the rules it shares
with the general path.

The general path (:func:`stopline.pricing.price` through :mod:`stopline.solve`) builds
dataclasses for grids, plans and solutions and calls a kernel per step of the work; for the
common case (flat rate, yield and vol, no cash dividends, frame "x", the direct sweep)
:func:`price_pair` does the whole pair in one call: step plans, both marches, read-off at
the spot, boundary. Every rule it needs is a kernel here that the general path calls too,
so the two cannot drift apart:

- :func:`space_layout`, :func:`preset_layout`: where the nodes go
  (:func:`stopline.grid.build_space_grid`, the presets of :mod:`stopline.pricing`);
- :func:`flat_plan`: per-step discount factors and frame shifts for flat data
  (:func:`stopline.operator.plan_steps`);
- :func:`node_exp`, :func:`payoff_nodes`: the spot and the exercise value on the nodes
  (:func:`stopline.solve.payoff_on`);
- :func:`tangent_coefficients`: what the vega and rho tangents need per step
  (:func:`stopline.solve.solve_with_tangents`);
- :func:`read_off`: value, delta and gamma at the spot (:func:`stopline.greeks.read_at_spot`);
- :func:`boundary_spots`, :func:`monotone_fit_into`: the reported exercise boundary
  (:func:`stopline.boundary.monotone_fit`).

All work on plain float64 arrays and scalars and are compiled with ``cache=True``; the
tests compare :func:`price_pair` with the general path over a seeded set of contracts. The
shared rules are marked ``inline="always"``: :func:`price_pair` takes their bodies in
(numba IR inlining), so a fresh process compiles one function for the pair instead of one
per rule; called from Python they compile on their own as usual.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from ._kernels import fornberg_weights, march_direct_tangents, obstacle, pava_increasing

__all__ = [
    "STENCIL",
    "space_layout",
    "decay_length",
    "frame_y_needed",
    "preset_layout",
    "flat_plan",
    "node_exp",
    "payoff_nodes",
    "tangent_coefficients",
    "read_off",
    "monotone_fit_into",
    "boundary_spots",
    "price_pair",
    "PAIR_OUT",
]

#: Nodes in the read-off stencil (a quintic).
STENCIL = 6
#: Length of :func:`price_pair`'s ``out``: value, delta, gamma, exercised (coarse, then fine
#: grid), then d value / d vol and d value / d rate (coarse, then fine).
PAIR_OUT = 12


@njit(cache=True, inline="always")
def space_layout(x_spot, sd, drift, width_sd, points_per_sd, n_points, h_max, n_max, frame_y):
    """First node, spacing, node count and strike index of a uniform grid.

    The rule of :func:`stopline.grid.build_space_grid` (see it for the arguments);
    ``n_points <= 0`` sizes by ``points_per_sd``, ``n_max <= 0`` sets no cap. Returns
    ``(x_min, h, n, strike_index)``, ``strike_index = -1`` when the strike is left out.
    """
    if frame_y:
        lo = x_spot + drift - width_sd * sd
        hi = x_spot + drift + width_sd * sd
    else:
        lo = min(x_spot, x_spot + drift) - width_sd * sd
        hi = max(x_spot, x_spot + drift) + width_sd * sd
    # the strike is left out only when it lies two standard deviations beyond the domain
    # itself: what the option is worth there is then below ~phi(width_sd + 2) of the strike
    reach = lo - 2.0 * sd <= 0.0 <= hi + 2.0 * sd
    if reach:
        lo = min(lo, -width_sd * sd)
        hi = max(hi, width_sd * sd)
    if n_points > 0:
        h = (hi - lo) / (n_points - 2)
    else:
        h = min(sd / points_per_sd, h_max)
    if n_max > 0 and (hi - lo) / h + 2 > n_max:
        h = (hi - lo) / (n_max - 2)
    if not reach:
        n = n_points if n_points > 0 else math.ceil((hi - lo) / h) + 1
        return lo, h, n, -1
    j_lo = math.ceil(-lo / h)
    n = n_points if n_points > 0 else j_lo + math.ceil(hi / h) + 1
    return -j_lo * h, h, n, j_lo


@njit(cache=True, inline="always")
def decay_length(rate, mu, vol):
    """Length in ``ln S`` over which an American option's premium decays near its boundary.

    ``1 / |lambda|`` for the roots of ``vol^2/2 l^2 + mu l - r = 0``, the exponents of the
    perpetual option (Merton 1973); infinite when there is no real root.
    """
    disc = mu * mu + 2.0 * vol * vol * rate
    if disc < 0.0:
        return math.inf
    root = math.sqrt(disc)
    best = math.inf
    for sgn in (-1.0, 1.0):
        d = -mu + sgn * root
        if d != 0.0:
            length = vol * vol / abs(d)
            if length < best:
                best = length
    return best


@njit(cache=True, inline="always")
def frame_y_needed(sd, drift, h, vol, mu):
    """Whether frame "x" would be non-monotone (``|mu| h > vol^2``) on spacing ``h`` or would
    spend most of its nodes on the forward's path (``|drift| > 4 sd``)."""
    return abs(mu) * h > vol * vol or abs(drift) > 4.0 * sd


@njit(cache=True)
def preset_layout(x_spot, expiry, rate, div_yield, vol, american, width_sd, points_per_sd,
                  max_spacing, n_max, frame_y):
    """The coarse grid of a preset's Richardson pair, in frame "x" (or "y": ``frame_y``).

    ``points_per_sd`` and ``max_spacing`` are the preset's (fine grid) values; the coarse
    grid takes half the nodes per standard deviation and twice the spacing cap. An American
    option's grid also resolves :func:`decay_length`. Returns
    ``(x_min, h, n, strike_index, needs_y)``, ``needs_y`` True when frame "x" does not suit
    the problem on that spacing (see :func:`frame_y_needed`).
    """
    sd = vol * math.sqrt(expiry)
    mu = rate - div_yield - 0.5 * vol**2
    drift = mu * expiry
    scale = decay_length(rate, mu, vol) if american else math.inf
    pps = 0.5 * points_per_sd * sd / min(sd, scale)
    x_min, h, n, k = space_layout(x_spot, sd, drift, width_sd, pps, -1, 2.0 * max_spacing,
                                  n_max, frame_y)
    return x_min, h, n, k, frame_y_needed(sd, drift, h, vol, mu)


@njit(cache=True, inline="always")
def flat_plan(tau, h_coef, rate, div_yield, vol, frame_y, out):
    """Per-step plan for flat data into ``out``, shape (7, n_steps): rows ``lo, di, up`` (the
    constant coefficients, a tuple ``h_coef``), ``df_r, df_q, shift, scale`` (see
    :class:`stopline.operator.StepPlan`)."""
    for k in range(tau.shape[0]):
        int_r = rate * tau[k]
        int_q = div_yield * tau[k]
        out[0, k] = h_coef[0]
        out[1, k] = h_coef[1]
        out[2, k] = h_coef[2]
        out[3, k] = math.exp(-int_r)
        out[4, k] = math.exp(-int_q)
        if frame_y:
            out[5, k] = math.exp(-(int_r - int_q - 0.5 * (vol**2 * tau[k])))
            out[6, k] = math.exp(int_r)
        else:
            out[5, k] = 1.0
            out[6, k] = 1.0


@njit(cache=True, inline="always")
def node_exp(x_min, h, n):
    """``e^{x_j}`` on the nodes ``x_j = x_min + j h``."""
    out = np.empty(n)
    for j in range(n):
        out[j] = math.exp(x_min + h * j)
    return out


@njit(cache=True, inline="always")
def payoff_nodes(ex, is_put, shift, strike_index, out):
    """Exercise value / strike on the nodes where ``S / K = e^y shift`` into ``out``; exactly
    zero on the strike node (``strike_index``, or -1) when ``shift == 1``."""
    obstacle(ex, shift, is_put, out)
    if shift == 1.0 and strike_index >= 0:
        out[strike_index] = 0.0


@njit(cache=True, inline="always")
def tangent_coefficients(h, vol, is_put, american, s_lo, s_hi, tau, df_r, df_q, dco, dfar):
    """Per-step derivatives of the operator and the far-field values with respect to the vol
    (index 0) and the rate (index 1), into ``dco`` (2, 3, n_steps) and ``dfar`` (2, 2, n_steps).

    ``lo = s^2/(2h^2) - mu/(2h)``, ``di = -s^2/h^2 - r``, ``up = s^2/(2h^2) + mu/(2h)`` with
    ``mu = r - q - s^2/2``; the far-field values (discounted forward payoff at the grid ends
    ``s_lo``, ``s_hi``) depend on the rate through ``df_r`` where they are active.
    """
    for k in range(tau.shape[0]):
        dco[0, 0, k] = vol / (h * h) + 0.5 * vol / h
        dco[0, 1, k] = -2.0 * vol / (h * h)
        dco[0, 2, k] = vol / (h * h) - 0.5 * vol / h
        dco[1, 0, k] = -0.5 / h
        dco[1, 1, k] = -1.0
        dco[1, 2, k] = 0.5 / h
        dfar[0, 0, k] = 0.0
        dfar[0, 1, k] = 0.0
    sign = -1.0 if is_put else 1.0
    for end in range(2):
        s_end = s_lo if end == 0 else s_hi
        intrinsic = max(1.0 - s_end, 0.0) if is_put else max(s_end - 1.0, 0.0)
        for k in range(tau.shape[0]):
            fwd = (df_r[k] - s_end * df_q[k]) if is_put else (s_end * df_q[k] - df_r[k])
            active = fwd > 0.0 and not (american and intrinsic > fwd)
            dfar[1, end, k] = sign * tau[k] * df_r[k] if active else 0.0


@njit(cache=True, inline="always")
def read_off(values, payoff, x_min, h, x_spot, strike, american, x_boundary, put_side, pv):
    """Quintic read-off of value, delta and gamma at ``x_spot`` (money units).

    The rule of :func:`stopline.greeks.read_at_spot` (see it for the arguments; ``put_side``
    is the option's kind). Returns ``(value, delta, gamma, exercised)``.
    """
    n = values.shape[0]
    p = min(STENCIL, n)
    j = int(math.floor((x_spot - x_min) / h))
    j0 = min(max(j - p // 2 + 1, 0), n - p)
    if american:
        e = math.exp(x_spot) + pv
        intrinsic = max(1.0 - e, 0.0) if put_side else max(e - 1.0, 0.0)
        if not math.isnan(x_boundary):
            inside = x_spot <= x_boundary if put_side else x_spot >= x_boundary
        else:
            inside = True
            for i in range(j0, j0 + p):
                if not (values[i] <= payoff[i] and payoff[i] > 0.0):
                    inside = False
                    break
        if inside and intrinsic > 0.0:
            return strike * intrinsic, -1.0 if put_side else 1.0, 0.0, True
        # keep the stencil on held nodes, off the kink in the second derivative at the
        # boundary (every node exercised: the stencil stays around the spot)
        if put_side:
            for i in range(n):
                if values[i] > payoff[i] or payoff[i] <= 0.0:  # first held node
                    if i + p <= n:
                        j0 = max(j0, i)
                    break
        else:
            for i in range(n - 1, -1, -1):
                if values[i] > payoff[i] or payoff[i] <= 0.0:  # last held node
                    if i - p + 1 >= 0:
                        j0 = min(j0, i - p + 1)
                    break
    nodes = np.empty(p)
    for i in range(p):
        nodes[i] = i
    w = fornberg_weights((x_spot - x_min) / h - j0, nodes, 2)
    v = 0.0
    vx = 0.0
    vxx = 0.0
    for i in range(p):
        v += w[0, i] * values[j0 + i]
        vx += w[1, i] * values[j0 + i]
        vxx += w[2, i] * values[j0 + i]
    vx /= h
    vxx /= h * h
    e = math.exp(x_spot)
    return strike * v, vx / e, (vxx - vx) / (strike * e * e), False


@njit(cache=True, inline="always")
def monotone_fit_into(values, decreasing, out):
    """Least-squares monotone fit of ``values`` into ``out``, NaNs kept in place (the rule of
    :func:`stopline.boundary.monotone_fit`); ``out`` equals ``values`` where they are
    monotone already.

    References
    ----------
    Ayer, M. et al. (1955), Ann. Math. Statist. 26(4) (pool-adjacent-violators).
    """
    n = values.shape[0]
    sign = -1.0 if decreasing else 1.0
    m = 0
    ordered = True
    prev = 0.0
    for i in range(n):
        out[i] = values[i]
        if math.isfinite(values[i]):
            y = sign * values[i]
            if m and y < prev:
                ordered = False
            prev = y
            m += 1
    if m < 2 or ordered:
        return
    y = np.empty(m)
    idx = np.empty(m, dtype=np.int64)
    m = 0
    for i in range(n):
        if math.isfinite(values[i]):
            y[m] = sign * values[i]
            idx[m] = i
            m += 1
    fit = np.empty(m)
    pava_increasing(y, fit)  # pooled stretches get the mean, others stay exact
    for i in range(m):
        out[idx[i]] = sign * fit[i]


@njit(cache=True, inline="always")
def boundary_spots(boundary_x, strike, fit, decreasing, raw, spot):
    """Critical spots ``strike e^x`` into ``raw`` and, into ``spot``, their monotone fit
    (``fit``: flat data, no cash dividends) or a copy."""
    for i in range(boundary_x.shape[0]):
        raw[i] = strike * math.exp(boundary_x[i])
    if fit:
        monotone_fit_into(raw, decreasing, spot)
    else:
        for i in range(raw.shape[0]):
            spot[i] = raw[i]


@njit(cache=True, inline="always")
def _solve_flat(is_put, american, expiry, rate, div_yield, vol, x_min, h, n, strike_index,
                h_coef, unit_tau, unit_dt, unit_theta, n_par, bnd):
    """One grid of the pair: payoff, plan, march (with ``n_par`` tangents: 0, or 2 for vol
    and rate); returns the values, the exercise value at valuation and the tangents."""
    tau = expiry * unit_tau
    dt = expiry * unit_dt
    theta = unit_theta.copy()
    m = tau.shape[0]
    plan = np.empty((7, m))
    flat_plan(tau, h_coef, rate, div_yield, vol, False, plan)
    ex = node_exp(x_min, h, n)
    v = np.empty(n)
    payoff_nodes(ex, is_put, 1.0, strike_index, v)
    tan = np.zeros((n_par, n))
    dco = np.empty((n_par, 3, m if n_par else 0))
    dfar = np.empty((n_par, 2, m if n_par else 0))
    if n_par:
        tangent_coefficients(h, vol, is_put, american, ex[0], ex[n - 1], tau, plan[3],
                             plan[4], dco, dfar)
    march_direct_tangents(
        v, ex, x_min, h, dt, theta, plan[0], plan[1], plan[2], plan[3], plan[4], plan[5],
        plan[6], is_put, american, bnd, tan, dco, dfar,
    )
    for j in range(n):
        v[j] /= plan[6, m - 1]
    payoff = np.empty(n)
    payoff_nodes(ex, is_put, plan[5, m - 1], strike_index, payoff)
    return v, payoff, tan


@njit(cache=True)
def price_pair(
    is_put, american, expiry, rate, div_yield, vol, x_spot, strike, x_min, h, n, strike_index,
    coef_c, coef_f, unit_tau_c, unit_dt_c, unit_theta_c, unit_tau_f, unit_dt_f, unit_theta_f, n_par,
    out, bnd_x, raw, spot,
):
    """Both grids of a Richardson pair in frame "x" with flat data and the direct sweep.

    Parameters
    ----------
    is_put, american : bool
        Contract flags.
    expiry, rate, div_yield, vol : float
        Years to expiry and flat market data.
    x_spot, strike : float
        ``ln(S / K)`` and ``K``.
    x_min, h, n, strike_index : float, float, int, int
        The coarse grid (:func:`preset_layout`); the fine grid has half the spacing on the
        same domain.
    coef_c, coef_f : tuple of 3 floats
        Operator coefficients ``(lo, di, up)`` on the coarse and the fine spacing
        (:func:`stopline.operator.coefficients`).
    unit_tau_c, unit_dt_c, unit_theta_c, unit_tau_f, unit_dt_f, unit_theta_f : ndarray
        Time grids of the coarse and fine grid for ``T = 1``
        (:func:`stopline.grid.unit_time_grid`).
    n_par : int
        0, or 2 to march the vol and rate tangents alongside.
    out : ndarray, shape (PAIR_OUT,)
        Written: value, delta, gamma, exercised (1.0 or 0.0) on the coarse, then the fine
        grid; then the vol and rate tangents read at the spot (coarse, then fine; money
        units; zeros when ``n_par = 0``).
    bnd_x, raw, spot : ndarray, shape (fine steps,)
        Written: the fine grid's critical log-moneyness per step, ``strike e^x``, and its
        monotone fit.

    References
    ----------
    Crank, J. and Nicolson, P. (1947); Brennan, M. J. and Schwartz, E. S. (1977);
    Fornberg, B. (1988); Richardson, L. F. (1911).
    """
    for g in range(2):  # coarse, then fine; one call site each (compile time)
        fine = g == 1
        hg = 0.5 * h if fine else h
        ng = 2 * n - 1 if fine else n
        kg = strike_index
        if fine and strike_index >= 0:
            kg = 2 * strike_index
        unit_tau = unit_tau_f if fine else unit_tau_c
        bnd = bnd_x if fine else np.empty(unit_tau.shape[0])
        v, payoff, tan = _solve_flat(
            is_put, american, expiry, rate, div_yield, vol, x_min, hg, ng, kg,
            coef_f if fine else coef_c, unit_tau, unit_dt_f if fine else unit_dt_c,
            unit_theta_f if fine else unit_theta_c, n_par, bnd,
        )
        x_b = bnd[bnd.shape[0] - 1] if american else math.nan
        out[8 + 2 * g] = 0.0
        out[9 + 2 * g] = 0.0
        for i in range(n_par + 1):  # the values, then each tangent (read like a European)
            val, dlt, gam, exd = read_off(
                v if i == 0 else tan[i - 1], payoff, x_min, hg, x_spot, strike,
                american and i == 0, x_b if i == 0 else math.nan, is_put, 0.0,
            )
            if i == 0:
                out[4 * g] = val
                out[4 * g + 1] = dlt
                out[4 * g + 2] = gam
                out[4 * g + 3] = 1.0 if exd else 0.0
            else:
                out[8 + 2 * g + i - 1] = val
    boundary_spots(bnd_x, strike, True, is_put, raw, spot)
