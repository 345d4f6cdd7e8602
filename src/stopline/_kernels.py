"""Numba kernels of the finite-difference engine.

Every function here works on plain float64 arrays and scalars only, and is compiled with
``cache=True`` so a new process loads machine code from disk instead of recompiling. The
orchestration (grids, coefficients, results) lives in the other modules; the tests hold a
plain-NumPy twin of each kernel.

Notation. Values are dimensionless (option value divided by the strike) on uniformly spaced
nodes ``y_j``, ``j = 0 .. n-1``, of the drift-free frame ``y = ln(S / K) + M(tau)`` with
``M(tau) = int_0^tau (r - q - vol^2 / 2)`` (see :mod:`stopline.operator`). At step ``k`` a node
stands for the spot ``S_j / K = e^{y_j} shift_k`` with ``shift_k = e^{-M(tau_k)}``. One
theta-scheme step from level ``tau`` to ``tau + dt`` solves, on the interior nodes,

    (1 - theta dt L) v_new = (1 + (1 - theta) dt L) v_old,
    (L v)_j = lo v_{j-1} + di v_j + up v_{j+1},

with Dirichlet values at both ends, then (American) the complementarity problem
``v_new >= payoff(e^{y} shift_k)``.

One price on a Richardson pair in one call. The general path (:func:`stopline.pricing.price`
through :mod:`stopline.solve`) builds dataclasses for grids, plans and solutions and calls a
kernel per piece of the work; for the common case (flat rate, yield and vol, no cash
dividends, frame "x", the direct sweep) :func:`price_pair` does the whole pair in one call:
step plans, both marches, read-off at the spot, boundary. Every rule it needs is a kernel
here that the general path calls too, so the two cannot drift apart: :func:`space_layout`
and :func:`preset_layout` (where the nodes go), :func:`flat_plan` (per-step discount factors
and frame shifts), :func:`node_exp` and :func:`payoff_nodes`, :func:`tangent_coefficients`,
:func:`read_off` (value, delta, gamma at the spot), :func:`boundary_spots` and
:func:`monotone_fit_into`. Those rules are marked ``inline="always"``: :func:`price_pair`
takes their bodies in, so a fresh process compiles one function for the pair instead of one
per rule (called from Python they compile on their own as usual). They live in this file
with the march because numba's cache tracks only the file a function is defined in: a
cached :func:`price_pair` in another file would keep running an old march after an edit
here. ``tests/test_kernels.py`` holds the two paths equal.
"""

from __future__ import annotations

import functools
import math

import numba
import numpy as np
from numba import types
from numba.extending import intrinsic

#: Every kernel: division by zero gives inf or NaN as in NumPy instead of raising (no
#: exception paths, which keep reference counts on arrays the compiler could drop).
njit = functools.partial(numba.njit, error_model="numpy")


@intrinsic
def _address_as_pointer(typingctx, addr):  # noqa: ANN001, ANN202
    """An integer address as a pointer to float64 (for :func:`_borrow`)."""
    sig = types.CPointer(types.float64)(types.uintp)

    def codegen(context, builder, signature, args):  # noqa: ANN001, ANN202
        return builder.inttoptr(args[0], context.get_value_type(types.CPointer(types.float64)))

    return sig, codegen


@njit(cache=True)
def _borrow(a):
    """``a`` without reference counting: an array over the same memory that kernels pass
    to each other without the atomic increments and decrements of an owned array's count
    (which the compiler cannot always drop, and which on small grids cost as much as a
    step). Valid while ``a`` lives (arguments: the caller's call); ``a`` must be
    C-contiguous."""
    if not a.flags.c_contiguous:
        raise ValueError("_borrow needs a C-contiguous array")
    return numba.carray(_address_as_pointer(a.ctypes.data), a.shape)


@njit(cache=True)
def _carve(block, start, shape):
    """The part of the float64 array ``block`` from element ``start`` with ``shape``, borrowed
    (see :func:`_borrow`): work arrays carved from one allocation, which the caller keeps
    alive until the last use of any part."""
    return numba.carray(_address_as_pointer(block.ctypes.data + 8 * start), shape)

__all__ = [
    "obstacle",
    "far_value",
    "far_values",
    "march_direct",
    "march_direct_tangents",
    "march_psor",
    "locate_boundary",
    "thomas_repeat",
    "pava_increasing",
    "thomas_repeat_fixed_point",
    "fornberg_weights",
    "dividend_jump",
    "value_after_drop",
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
    "dividend_jump_tangents",
    "dividends_ahead",
    "put_after_dividends",
    "crossing",
    "solve_cash_dividends",
    "price_pair_cash_dividends",
]


@njit(cache=True)
def far_value(s, df_r, df_q, is_put, american):
    """Dirichlet value at a grid end at spot ``s`` (in units of the strike).

    Far from the strike the option is certain to end in or out of the money, so its value is
    the discounted forward payoff, floored at zero; an American option is also floored by its
    intrinsic value. The same rule serves both ends and grids that do not reach the strike.
    """
    if is_put:
        v = df_r - s * df_q
        e = 1.0 - s
    else:
        v = s * df_q - df_r
        e = s - 1.0
    if v < 0.0:
        v = 0.0
    if american and e > v:
        v = e
    return v


@njit(cache=True)
def obstacle(ex, shift, is_put, out):
    """Exercise value / strike on the nodes at one level: ``max(+-(1 - e^{y} shift), 0)``."""
    n = ex.shape[0]
    if is_put:
        for j in range(n):
            e = 1.0 - ex[j] * shift
            out[j] = e if e > 0.0 else 0.0
    else:
        for j in range(n):
            e = ex[j] * shift - 1.0
            out[j] = e if e > 0.0 else 0.0


@njit(cache=True)
def far_values(s_lo, s_hi, df_r, df_q, is_put, american):
    """Dirichlet values at the low and high ends of the grid at one level."""
    return (
        far_value(s_lo, df_r, df_q, is_put, american),
        far_value(s_hi, df_r, df_q, is_put, american),
    )


@njit(cache=True)
def locate_boundary(v, payoff, x0, h, is_put):
    """Critical log-moneyness where the option stops being exercised, or NaN
    (:func:`locate_boundary_from` scanning every node)."""
    return locate_boundary_from(v, payoff, x0, h, is_put, 1 if is_put else v.shape[0] - 2)


@njit(cache=True)
def locate_boundary_from(v, payoff, x0, h, is_put, first):
    """Critical log-moneyness where the option stops being exercised, or NaN.

    The exercise region is the run of interior nodes, starting at the grid end where the
    option is deep in the money, on which ``v == payoff`` and the payoff is positive. Beyond
    it the gap ``g = v - payoff`` grows like ``c (x - x*)^2`` (smooth pasting), so ``sqrt(g)``
    is close to linear in ``x`` and the root of a line through two of its values places
    ``x*`` below the grid spacing. The first held node's gap is distorted by the projection
    onto the payoff (its neighbour was clamped), so the line goes through the second and
    third held nodes; the first two are used if the grid leaves no third. The discrete
    problem may exercise a node or two on which the exact solution is (barely) held, so
    ``x*`` may lie up to three spacings inside the run of exercised nodes; it is kept on the
    side of the strike where the payoff is positive (the strike's position is read off the
    payoff of the last exercised node, so any frame of the nodes will do).

    The scan for the run of exercised nodes starts at node ``first`` (1 for a put and
    ``n - 2`` for a call scan every node; a march that knows the nodes before ``first`` to
    be exercised starts there).
    """
    n = v.shape[0]
    if is_put:
        j = first
        while j < n - 1 and payoff[j] > 0.0 and v[j] <= payoff[j]:
            j += 1
        if j == 1 or j >= n - 2:
            return math.nan
        step = h
    else:
        j = first
        while j > 0 and payoff[j] > 0.0 and v[j] <= payoff[j]:
            j -= 1
        if j == n - 2 or j <= 1:
            return math.nan
        step = -h
    i = 1 if (j + 3 <= n - 1 if is_put else j - 3 >= 0) else 0
    sgn = 1 if is_put else -1
    ga = v[j + sgn * i] - payoff[j + sgn * i]
    gb = v[j + sgn * (i + 1)] - payoff[j + sgn * (i + 1)]
    sa = math.sqrt(ga) if ga > 0.0 else 0.0
    sb = math.sqrt(gb) if gb > 0.0 else 0.0
    # position in units of step from the first held node j
    t = i - sa / (sb - sa) if sb > sa else -0.5
    if t < -3.0:
        t = -3.0
    elif t > 0.0:
        t = 0.0
    x = x0 + j * h + t * step
    # the strike's position, from the payoff of the last exercised node (any frame)
    if is_put:
        x_k = x0 + (j - 1) * h - math.log(1.0 - payoff[j - 1])
        if x > x_k:
            x = x_k
    else:
        x_k = x0 + (j + 1) * h - math.log(1.0 + payoff[j + 1])
        if x < x_k:
            x = x_k
    return x


@njit(cache=True)
def locate_boundary_tangent(v, t, payoff, x0, h, is_put):
    """Derivative of :func:`locate_boundary` for a derivative ``t`` of ``v`` (payoff fixed):
    the derivative of the root of the line through the two square-root gaps; zero where the
    root is clamped or there is no boundary."""
    n = v.shape[0]
    if is_put:
        j = 1
        while j < n - 1 and payoff[j] > 0.0 and v[j] <= payoff[j]:
            j += 1
        if j == 1 or j >= n - 2:
            return 0.0
        step = h
    else:
        j = n - 2
        while j > 0 and payoff[j] > 0.0 and v[j] <= payoff[j]:
            j -= 1
        if j == n - 2 or j <= 1:
            return 0.0
        step = -h
    i = 1 if (j + 3 <= n - 1 if is_put else j - 3 >= 0) else 0
    sgn = 1 if is_put else -1
    ja = j + sgn * i
    jb = j + sgn * (i + 1)
    ga = v[ja] - payoff[ja]
    gb = v[jb] - payoff[jb]
    sa = math.sqrt(ga) if ga > 0.0 else 0.0
    sb = math.sqrt(gb) if gb > 0.0 else 0.0
    if not sb > sa:
        return 0.0
    pos = i - sa / (sb - sa)
    if pos < -3.0 or pos > 0.0:
        return 0.0
    x = x0 + j * h + pos * step
    if is_put:
        if x > x0 + (j - 1) * h - math.log(1.0 - payoff[j - 1]):
            return 0.0
    elif x < x0 + (j + 1) * h - math.log(1.0 + payoff[j + 1]):
        return 0.0
    dsa = t[ja] / (2.0 * sa) if sa > 0.0 else 0.0
    dsb = t[jb] / (2.0 * sb)
    return -(dsa * sb - sa * dsb) / ((sb - sa) * (sb - sa)) * step


#: Half-width, in cells, of the band of rows around the exercise boundary where a fitted
#: march blends BDF2 into its Crank-Nicolson rows (:func:`damping_band`). Measured over 1200
#: typical contracts (``benchmarks/accuracy_study.py``): 1.0 leaves 8.9e-7 x K at "standard",
#: 1.5 3.6e-7, 2.5 4.5e-7, 4.0 6.4e-7; a band of whole rows switched on and off (not
#: weighted) leaves 1e-6 to 9e-6.
BAND_HALF_WIDTH = 1.5
SWEEP_FACTOR = 1.0


@njit(cache=True)
def damping_band(theta_k, b1, b2, ratio, x0, h, n):
    """The rows that a step of a fitted march damps, ``(j0, j1, c_lo, c_hi)``.

    They are the rows the exercise boundary sweeps during the step, from where it was at the
    level before (``b1``) to where it is headed (extrapolated linearly from ``b2`` and
    ``b1``, the two levels before, over a step ``ratio`` times the last), both in cells from
    ``x0`` (``c_lo <= c_hi``), and
    :data:`BAND_HALF_WIDTH` cells either side: where the exercise constraint, moving across
    the nodes, disturbs the solution at every step. Crank-Nicolson does not damp such
    disturbances (its amplification factor tends to -1 for the stiff components), so they
    ring and the time error jumps about with the step, which spoils Richardson
    extrapolation; blending the L-stable BDF2 into those rows damps them where they arise,
    while every other row stays Crank-Nicolson. The band is empty (``j0 > j1``) for an
    implicit (Rannacher) step (``theta_k`` 1), the first step or no boundary (``b1`` NaN).

    References
    ----------
    Rannacher, R. (1984), Finite element solution of diffusion problems with irregular data,
    Numer. Math. 43 (damping where the data are not smooth); Hairer, E. and Wanner, G.
    (1996), Solving Ordinary Differential Equations II, Springer (variable-step BDF2).
    """
    if theta_k >= 1.0 or math.isnan(b1):
        return 1, 0, 0.0, 0.0
    c_lo = c_hi = (b1 - x0) / h
    if not math.isnan(b2):
        ahead = c_lo + SWEEP_FACTOR * (b1 - b2) / h * ratio
        if ahead < c_lo:
            c_lo = ahead
        else:
            c_hi = ahead
    j0 = max(1, int(math.floor(c_lo - BAND_HALF_WIDTH)) + 1)
    j1 = min(n - 2, int(math.ceil(c_hi + BAND_HALF_WIDTH)) - 1)
    return j0, j1, c_lo, c_hi


@njit(cache=True)
def damping_band_tangent(b1, b2, ratio, h, d1, d2):
    """Derivatives ``(dc_lo, dc_hi)`` of the swept cells of :func:`damping_band` for
    derivatives ``d1``, ``d2`` of the boundary at the two levels before."""
    dc = d1 / h
    if not math.isnan(b2):
        r = ratio
        dahead = dc + SWEEP_FACTOR * (d1 - d2) / h * r
        if (b1 - b2) * r < 0.0:
            return dahead, dc
        return dc, dahead
    return dc, dc


@njit(cache=True)
def band_row(j, c_lo, c_hi, dt_k, dt_prev):
    """Blend of row ``j`` in the damping band: ``(phi, d, ai, w)``.

    The row is ``phi`` times the variable-step BDF2 equation plus ``1 - phi`` times the
    Crank-Nicolson one, each written as an approximation of ``v_tau - L v`` (so the blend is
    second order too), with the weight ``phi`` one on the swept cells ``[c_lo, c_hi]`` and
    falling linearly to zero :data:`BAND_HALF_WIDTH` cells beyond (a continuous function of
    where the boundary sits). With ``w = dt_k / dt_{k-1}`` and ``a0 = (1 + 2w) / (1 + w)``,
    multiplied by ``dt_k`` and divided by ``d = phi a0 + 1 - phi`` it reads

        (1 - ai L) v_new = [phi ((1 + w) v_old - w^2 / (1 + w) v_older)
                            + (1 - phi) (v_old + dt/2 L v_old)] / d,
        ai = dt (phi + (1 - phi) / 2) / d.
    """
    dist = c_lo - j if j < c_lo else (j - c_hi if j > c_hi else 0.0)
    phi = 1.0 - dist / BAND_HALF_WIDTH
    w = dt_k / dt_prev
    a0 = (1.0 + 2.0 * w) / (1.0 + w)
    d = phi * a0 + 1.0 - phi
    return phi, d, dt_k * (0.5 + 0.5 * phi) / d, w


@njit(cache=True)
def _pivot_map(a, b, c):
    """The map of the reciprocal pivots of constant rows, ``w -> 1 / (b - a c w)``, as a
    Moebius map: ``(ok, ws, wp, kz)`` with ``ws`` its attracting fixed point, ``wp`` the other
    one and ``kz = ws / wp``, so that ``z = (w - ws) / (w - wp)`` is multiplied by ``kz`` at
    every row. A run of pivots then needs no division that waits for the one before
    (``w = (ws - z wp) / (1 - z)``: the divisions overlap in the pipeline). ``ok`` is False
    when the map has no two real fixed points (then the pivots are iterated)."""
    p = a * c
    disc = b * b - 4.0 * p
    if not (p > 0.0 and disc > 0.0):
        return False, 0.0, 0.0, 0.0
    ws = 2.0 / (b + math.sqrt(disc))
    wp = 1.0 / (p * ws)
    return True, ws, wp, ws / wp


@njit(cache=True, fastmath={"contract"})
def _eliminate(rhs, w, aw, far, b, near, gfar, gb, gnear, j0, j1, keep_w, step, lim0, lim1):
    """Eliminate one off-diagonal of the tridiagonal system, rows taken in the direction
    ``step``: from the top (``step = -1``, a put's sweep; ``near`` the super-diagonal, ``far``
    the sub-diagonal), after which ``v_j = rhs_j - aw_j v_{j-1}``; or from the bottom
    (``step = 1``, a call's sweep; the roles swapped), after which
    ``v_j = rhs_j - aw_j v_{j+1}``. ``rhs`` ends scaled by the pivot ``w_j``.

    Rows ``j0..j1`` have their own coefficients ``(gfar, gb, gnear)``, the others
    ``(far, b, near)``. The pivots of a run of constant rows follow the closed form of
    :func:`_pivot_map`; once they are within rounding of its fixed point the sweep goes on
    without a division, four rows at a time (which cuts the serial latency of its
    recurrence), up to the band or the end. ``keep_w`` stores every pivot (the tangent march
    needs them). Only rows ``lim0..lim1`` are eliminated (all interior rows: ``1..n - 2``;
    the sweep may stop short of the exercise region, see :func:`march_direct_tangents`).
    """
    j = lim1 if step < 0 else lim0
    r = 0.0
    wn = 0.0  # pivot of the row before (none at the start)
    fn = 0.0  # its coefficient on this row
    ok, ws, wp, kz = _pivot_map(far, b, near)
    z = 0.0
    chain = False  # whether z holds the pivot of the row before (a constant row)
    band_first = j1 if step < 0 else j0  # the band's first row in the sweep's direction
    while lim0 <= j <= lim1:
        inb = j0 <= j <= j1
        fj = gfar[j] if inb else far
        bj = gb[j] if inb else b
        nj = gnear[j] if inb else near
        f = nj * wn
        if chain and not inb:
            z *= kz
            wj = (ws - z * wp) / (1.0 - z)
        else:
            wj = 1.0 / (bj - f * fn)
            chain = ok and not inb
            if chain:
                z = (wj - ws) / (wj - wp)
        if inb:
            chain = False
        if chain:
            fixed = abs(z) < 1e-18
            if fixed:
                wj = ws
        else:
            fixed = (not inb) and wj == wn and fn == far
        w[j] = wj
        aw[j] = fj * wj
        r = rhs[j] - f * r
        rhs[j] = r * wj
        wn = wj
        fn = fj
        j += step
        if fixed:
            if j0 <= j1 and (band_first - j) * step >= 0:
                stop = band_first
            else:
                stop = lim0 - 1 if step < 0 else lim1 + 1
            awc = far * wj
            fc = near * wj
            # four rows at a time: the partial sums p depend only on the right-hand side, so
            # the recurrence's latency is one fused multiply-add per four rows
            c1 = -fc
            c2 = c1 * c1
            c3 = c2 * c1
            c4 = c2 * c2
            i = j
            while (stop - i) * step >= 4:
                p0 = rhs[i]
                p1 = rhs[i + step] + c1 * p0
                p2 = rhs[i + 2 * step] + c1 * p1
                p3 = rhs[i + 3 * step] + c1 * p2
                r0 = p0 + c1 * r
                r1 = p1 + c2 * r
                r2 = p2 + c3 * r
                r = p3 + c4 * r
                for m in range(4):
                    aw[i + m * step] = awc
                if keep_w:
                    for m in range(4):
                        w[i + m * step] = wj
                rhs[i] = r0 * wj
                rhs[i + step] = r1 * wj
                rhs[i + 2 * step] = r2 * wj
                rhs[i + 3 * step] = r * wj
                i += 4 * step
            while i != stop:
                aw[i] = awc
                if keep_w:
                    w[i] = wj
                r = rhs[i] - fc * r
                rhs[i] = r * wj
                i += step
            j = i


@njit(cache=True)
def _damp_band(rhs, ga, gb, gc, cur, prev, j0, j1, c_lo, c_hi, k, dt, lo, di, up, keep_cn,
               keep_older):
    """Blend BDF2 into rows ``j0..j1`` (:func:`band_row`): their coefficients into
    ``(ga, gb, gc)`` and their right-hand sides (Crank-Nicolson on entry) in place. Where
    ``keep_cn`` has room (tangents), the Crank-Nicolson right-hand sides and the values of
    the level before last are kept there and in ``keep_older``."""
    keep = keep_cn.shape[0] > 0
    for j in range(j0, j1 + 1):
        if keep:
            keep_cn[j] = rhs[j]
            keep_older[j] = prev[j]
        phi, d, ai, w = band_row(j, c_lo, c_hi, dt[k], dt[k - 1])
        ga[j] = -ai * lo[k]
        gb[j] = 1.0 - ai * di[k]
        gc[j] = -ai * up[k]
        rhs[j] = (phi * ((1.0 + w) * cur[j] - w * w / (1.0 + w) * prev[j])
                  + (1.0 - phi) * rhs[j]) / d


@njit(cache=True)
def ghost_explicit(ug, kg, h):
    """The ghost value less the payoff at the exercised neighbour of the ghosted node of a
    level (``ug``, ``kg`` its ``u`` and ``kappa``, :func:`_substitute_fitted`),
    ``(s - u)^2`` with ``s = sqrt(kappa) h``: what the explicit half of the next
    Crank-Nicolson step adds there per unit of the coefficient on the exercised side, so that
    both halves of the step see the held side's smooth continuation rather than the kink."""
    g = math.sqrt(kg) * h - ug
    return g * g


@njit(cache=True)
def pasting_curvature(lo, di, up, h, is_put):
    """Curvature of the premium next to the exercise boundary, ``kappa = ka + kb e^{x_j}``.

    Beyond the critical log-moneyness ``x*`` the premium ``g = v - payoff`` grows like
    ``kappa (x - x*)^2`` (smooth pasting: ``g = g_x = 0`` at ``x*``, and ``g_tau = 0`` there,
    so the equation gives ``s^2/2 g_xx = -L payoff``): ``kappa = (r - q e^{x*}) / s^2`` for
    a put and ``(q e^{x*} - r) / s^2`` for a call. ``r``, ``q`` and ``s`` are read back from
    the frame-"x" coefficients ``(lo, di, up)`` on spacing ``h``, and ``e^{x*}`` is taken at
    the middle of the cell next to the first held node ``j``, ``e^{x_j} e^{-+h/2}``.
    Returns ``(ka, kb)``.
    """
    alpha = 0.5 * (lo + up)
    s2 = 2.0 * alpha * h * h
    r = -di - 2.0 * alpha
    q = r - (up - lo) * h - 0.5 * s2
    if is_put:
        return r / s2, -q * math.exp(-0.5 * h) / s2
    return -r / s2, q * math.exp(0.5 * h) / s2


@njit(cache=True)
def pasting_curvature_tangent(lo, di, up, dl, dd, du, h, is_put):
    """Derivatives ``(dka, dkb)`` of :func:`pasting_curvature` for coefficient changes
    ``(dl, dd, du)``."""
    ka, kb = pasting_curvature(lo, di, up, h, is_put)
    alpha = 0.5 * (lo + up)
    s2 = 2.0 * alpha * h * h
    da = 0.5 * (dl + du)
    ds2 = 2.0 * h * h * da
    dr = -dd - 2.0 * da
    dq = dr - (du - dl) * h - 0.5 * ds2
    sgn = 1.0 if is_put else -1.0
    e_half = math.exp(-0.5 * h) if is_put else math.exp(0.5 * h)
    return (sgn * dr - ka * ds2) / s2, (-sgn * dq * e_half - kb * ds2) / s2


@njit(cache=True)
def ghost_gap(gap, beta, s):
    """Root ``u >= 0`` of ``u^2 = gap + beta (s - u)^2``: the square root of the premium at
    the first held node when its exercised neighbour takes the ghost value
    ``payoff + (s - u)^2`` (see :func:`_substitute_fitted`)."""
    return (-beta * s + math.sqrt(beta * s * s + (1.0 - beta) * gap)) / (1.0 - beta)


@njit(cache=True, fastmath={"contract"})
def _begin_step(
    k, v, ex, rhs, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put, american, r0, r1,
):
    """What every solver does first in step ``k``: the far-field values and the explicit
    half of the theta step into ``rhs`` on rows ``r0..r1`` (all interior rows:
    ``1..n - 2``); the exercise value is the caller's (:func:`_refresh_exercise`). Returns
    the implicit matrix's ``(sub, diag, super)`` and the far-field values ``(vl, vh)``.

    Arrays are read at the top and written in one loop, so that the compiler can drop the
    reference counting of its array arguments (atomic operations, which on small grids cost
    as much as the step itself)."""
    n = v.shape[0]
    sk = shift[k]
    sc = scale[k]
    ae = (1.0 - theta[k]) * dt[k]
    ai = theta[k] * dt[k]
    lk = lo[k]
    d = di[k]
    u = up[k]
    vl, vh = far_values(ex[0] * sk, ex[n - 1] * sk, df_r[k], df_q[k], is_put, american)
    vl *= sc
    vh *= sc
    el = ae * lk
    ed = 1.0 + ae * d
    eu = ae * u
    # on views from the row before r0: indices that cannot be negative keep the loop
    # vectorised (a possibly negative index costs a wraparound fix-up on every access)
    vv = v[r0 - 1:r1 + 2]
    rr = rhs[r0:r1 + 1]
    for i in range(r1 - r0 + 1):
        rr[i] = el * vv[i] + ed * vv[i + 1] + eu * vv[i + 2]
    return -ai * lk, 1.0 - ai * d, -ai * u, vl, vh


@njit(cache=True)
def _refresh_exercise(k, ex, payoff, shift, scale, is_put):
    """The exercise value on the nodes at step ``k`` into ``payoff``, where it changes (the
    first step, or a new shift or scale of the frame; so never after the first step in frame
    "x")."""
    sk = shift[k]
    sc = scale[k]
    if k == 0 or sk != shift[k - 1] or sc != scale[k - 1]:
        obstacle(ex, sk, is_put, payoff)
        if sc != 1.0:
            for j in range(payoff.shape[0]):
                payoff[j] *= sc


#: Cells kept between the rows a step of an American march solves and where the exercise
#: boundary is expected (:func:`held_rows`), beyond twice its expected move in the step.
SKIP_MARGIN = 4


@njit(cache=True)
def held_rows(b1, b2, ratio, x0, h, n, is_put):
    """The rows ``(lim0, lim1)`` that step ``k`` of an American march solves: all interior
    rows but those deep in the exercise region (below the boundary for a put, above it for a
    call), which keep the exercise value.

    The boundary is expected where it was at the level before (``b1``) or where it is headed
    (extrapolated linearly from ``b2`` and ``b1``, the two levels before, over a step
    ``ratio`` times the last, as :func:`damping_band` does); the solved rows reach
    :data:`SKIP_MARGIN` cells plus twice that move beyond it. Scalars only: see
    :func:`_begin_step` on reference counting.
    The march checks that the first solved row is surely exercised and solves every row
    otherwise, so this only decides how much work is saved, never the result.
    """
    if math.isnan(b1):
        return 1, n - 2
    c = (b1 - x0) / h
    move = 0.0
    if not math.isnan(b2):
        move = (b1 - b2) / h * ratio
    if is_put:
        edge = c + 2.0 * move if move < 0.0 else c
        j = math.floor(edge) - SKIP_MARGIN
        if not j > 1.0:  # NaN too
            return 1, n - 2
        return int(min(j, n - 2.0)), n - 2
    edge = c + 2.0 * move if move > 0.0 else c
    j = math.ceil(edge) + SKIP_MARGIN
    if not j < n - 2.0:
        return 1, n - 2
    return 1, int(max(j, 1.0))


@njit(cache=True)
def march_direct(
    v, ex, x0, h, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put, american, bnd,
    fitted,
):
    """March ``v`` through all steps with the Brennan-Schwartz direct sweep.

    :func:`march_direct_tangents` without sensitivities; see it for the arguments.
    """
    march_direct_tangents(
        v, ex, x0, h, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put, american, bnd,
        np.empty((0, v.shape[0])), np.empty((0, 3, 0)), np.empty((0, 2, 0)), fitted,
    )


@njit(cache=True, fastmath={"contract"})
def march_direct_tangents(
    v, ex, x0, h, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put, american, bnd,
    tan, dco, dfar, fitted,
):
    """March ``v`` through all steps with the Brennan-Schwartz direct sweep, and optionally
    the derivatives of ``v`` with respect to parameters of the operator (tangent-linear).

    Parameters
    ----------
    v : ndarray, shape (n,)
        Values at the first level; overwritten with the values at the last level.
    ex : ndarray, shape (n,)
        ``e^{y_j}`` on the nodes.
    x0, h : float
        First node and spacing of the uniform grid in ``y``.
    dt, theta, lo, di, up, df_r, df_q, shift, scale : ndarray, shape (n_steps,)
        Per step: length, implicitness (1 fully implicit, 0.5 Crank-Nicolson), operator
        coefficients, the discount factors for rate and yield from expiry to the new level
        (for the far-field values), ``e^{-M(tau)}`` at the new level, and the factor by which
        ``v`` is scaled at the new level (``1 / df_r`` when the operator leaves out the
        discounting term, 1 otherwise): the exercise and far-field values are scaled alike.
    is_put, american : bool
        Contract flags. For a European option the sweep is a plain Thomas solve.
    bnd : ndarray, shape (n_steps,)
        Written: the critical log-moneyness ``ln(S*/K)`` after each step (NaN if no exercise
        region).
    tan : ndarray, shape (n_par, n)
        Derivatives of ``v`` with respect to each parameter: at the first level on entry (zeros
        for parameters the payoff does not depend on), at the last level on return.
        ``n_par = 0`` marches the values only.
    dco : ndarray, shape (n_par, 3, n_steps)
        Derivatives of ``(lo, di, up)`` with respect to each parameter, per step.
    dfar : ndarray, shape (n_par, 2, n_steps)
        Derivatives of the low and high far-field values, per step (scaled like ``v``).
    fitted : bool
        American options in frame "x" only (shift and scale all ones): fit the exercise
        boundary inside its cell (ghost value at the first held node,
        :func:`_substitute_fitted`, seen by both halves of each Crank-Nicolson step,
        :func:`ghost_explicit`) and damp the rows next to it (:func:`damping_band`). Both
        make the error a smooth function of the spacing and the step, which Richardson
        extrapolation needs. False: Crank-Nicolson with the plain projected sweep.

    Notes
    -----
    Tangents. Differentiating one step of the scheme gives the same matrix applied to the
    derivative, ``B dv_new = E dv_old + dt (theta dL v_new + (1 - theta) dL v_old)``, except
    on exercised nodes, where the value is the payoff and its derivative is zero; the sweep's
    pivots are reused, so a parameter costs a right-hand side, an elimination and a
    substitution per step, without a division. This is the exact derivative of the discrete
    solution, so no bump size enters (forward-mode differentiation of the algorithm).

    A put's exercise region is one interval touching the low end, so eliminating from the
    high end and substituting upward while taking ``max(value, payoff)`` solves the linear
    complementarity problem exactly (Brennan and Schwartz, 1977); a call is the mirror image.

    Speed. The coefficients are constant in space, so the reciprocal pivots
    ``w_j = 1 / (b - a c w_{j+1})`` converge geometrically to a fixed point; once two in a row
    are equal in floating point every later one is too (same map, same input), and the rest of
    the elimination needs no division; there it goes four nodes at a time, which cuts the
    serial latency of its recurrence. The right-hand side is scaled by the pivot during the
    elimination, so the substitution is one fused multiply-add per node, split by region
    (:func:`_substitute_projected`) so that the ``max`` stays off the critical path, and
    taken four held rows at a time (:func:`_block4`). An American step solves only the rows
    from a few cells beyond where the boundary is expected (:func:`held_rows`): the others lie
    deep in the exercise region. It checks, exactly as the substitution would decide, that
    the first solved row is exercised (then, with one exercise interval, so are the rows
    beyond it, and the result is the full sweep's), and solves every row otherwise. Every
    array the steps pass around is borrowed (:func:`_borrow`, :func:`_carve`), so that no
    call pays for atomic reference counting.
    """
    n = v.shape[0]
    n_par = tan.shape[0]
    # every array the steps pass around is borrowed (:func:`_borrow`): the arguments, and the
    # work arrays carved from one block that lives to the end of the march
    ex, dt, theta, lo, di, up = _borrow(ex), _borrow(dt), _borrow(theta), _borrow(lo), \
        _borrow(di), _borrow(up)
    df_r, df_q, shift, scale, bnd = _borrow(df_r), _borrow(df_q), _borrow(shift), \
        _borrow(scale), _borrow(bnd)
    tan, dco, dfar = _borrow(tan), _borrow(dco), _borrow(dfar)
    n_fit = n if fitted else 0
    n_tan = n if n_par else 0
    n_tf = n if n_par and fitted else 0
    n_old = n if n_par and not fitted else 0
    block = np.empty(4 * n + 4 * n_fit + n_old + (n_par + 2) * n_tf + n_tan)
    at = 0
    rhs = _carve(block, at, n)  # right-hand side, then (after elimination) rhs x pivot
    at += n
    w = _carve(block, at, n)  # reciprocal pivots
    at += n
    aw = _carve(block, at, n)  # off-diagonal x pivot, the substitution's coefficient
    at += n
    payoff = _carve(block, at, n)
    at += n
    # fitted: the step writes its values into the buffer of the level before last (free
    # once the right-hand side is formed) and the two buffers swap roles, so that the BDF2
    # history of the damped rows costs no copy; ``cur`` holds the last level, ``prev`` the one
    # before
    cur = _borrow(v)
    prev = _carve(block, at, n_fit)
    at += n_fit
    in_v = True  # whether cur is the caller's array
    v_old = _carve(block, at, n_old)
    at += n_old
    t_prev = _carve(block, at, (n_par if fitted else 0, n))
    at += n_par * n_tf
    trhs = _carve(block, at, n_tan)
    at += n_tan
    # the damped rows' own coefficients (only rows j0..j1 are read)
    ga = _carve(block, at, n_fit)
    at += n_fit
    gb = _carve(block, at, n_fit)
    at += n_fit
    gc = _carve(block, at, n_fit)
    at += n_fit
    # tangents of a fitted march: the damped rows' Crank-Nicolson right-hand sides and older
    # values, and the boundary's derivatives at the last two levels
    keep_cn = _carve(block, at, n_tf)
    at += n_tf
    keep_older = _carve(block, at, n_tf)
    d1 = np.zeros(n_par)
    d2 = np.zeros(n_par)
    jg, ug, kg = -1, 0.0, 0.0
    ka = kb = 0.0
    # rows deep in the exercise region are skipped (see Notes): ``lim0..lim1`` are solved
    s_step = 1 if is_put else -1
    for k in range(dt.shape[0]):
        if n_par and not fitted:
            for j in range(n):  # a loop, not v_old[:] = v: slice assignment compiles slowly
                v_old[j] = cur[j]
        # the boundary at the two levels before and the step's ratio to the last, as scalars
        b1 = bnd[k - 1] if k >= 1 else math.nan
        b2 = bnd[k - 2] if k >= 2 else math.nan
        ratio = dt[k] / dt[k - 1] if k >= 1 else 1.0
        same_frame = k >= 1 and shift[k] == shift[k - 1] and scale[k] == scale[k - 1]
        lim0, lim1 = 1, n - 2
        if american and not same_frame:
            _refresh_exercise(k, ex, payoff, shift, scale, is_put)
        if american and same_frame:
            lim0, lim1 = held_rows(b1, b2, ratio, x0, h, n, is_put)
        nv = prev if fitted else cur  # where this step's values go
        jgo, ugo, kgo = -1, 0.0, 0.0  # the ghost of the level before
        while True:  # once, or twice if the skipped rows turn out not to be exercised
            a, b, c, vl, vh = _begin_step(
                k, cur, ex, rhs, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put,
                american, lim0, lim1,
            )
            j0, j1, cb, cb_hi = 1, 0, 0.0, 0.0
            if fitted:
                if k == 0 or lo[k] != lo[k - 1] or di[k] != di[k - 1] or up[k] != up[k - 1]:
                    ka, kb = pasting_curvature(lo[k], di[k], up[k], h, is_put)
                if theta[k] < 1.0:
                    jgo, ugo, kgo = jg, ug, kg
                    if jg >= 0:
                        side = lo[k] if is_put else up[k]
                        rhs[jg] += (1.0 - theta[k]) * dt[k] * side * ghost_explicit(ug, kg, h)
                    j0, j1, cb, cb_hi = damping_band(theta[k], b1, b2, ratio, x0, h, n)
                    _damp_band(rhs, ga, gb, gc, cur, prev, j0, j1, cb, cb_hi, k, dt, lo, di,
                               up, keep_cn, keep_older)
            if is_put:
                rhs[n - 2] -= (gc[n - 2] if j0 <= n - 2 <= j1 else c) * vh
                _eliminate(rhs, w, aw, a, b, c, ga, gb, gc, j0, j1, n_par > 0, -1, lim0, lim1)
                edge = lim0
            else:
                rhs[1] -= (ga[1] if j0 <= 1 <= j1 else a) * vl
                _eliminate(rhs, w, aw, c, b, a, gc, gb, ga, j0, j1, n_par > 0, 1, lim0, lim1)
                edge = lim1
            if lim0 == 1 and lim1 == n - 2:
                break
            # the first solved row must be exercised (so are the skipped rows then): as
            # :func:`_substitute_fitted` decides after an exercised row
            gap = rhs[edge] - aw[edge] * payoff[edge - s_step] - payoff[edge]
            beta = -aw[edge]
            kap = ka + kb * ex[edge]
            if fitted and payoff[edge - s_step] > 0.0 and kap > 0.0 and 0.0 < beta < 1.0:
                s2 = kap * h * h
                gap = gap + beta * s2
            if not gap > 0.0:
                break
            lim0, lim1 = 1, n - 2
        # the skipped rows are exercised: their values are the exercise value
        for j in range(1, lim0):
            nv[j] = payoff[j]
        for j in range(lim1 + 1, n - 1):
            nv[j] = payoff[j]
        # the substitution's range, as plain integers (literal arguments would compile a
        # second copy of it)
        s_first = lim0 if is_put else lim1
        s_stop = lim1 + 1 if is_put else lim0 - 1
        if is_put:
            nv[0] = vl
            if fitted:
                jg, ug, kg = _substitute_fitted(
                    nv, rhs, aw, payoff, s_first, s_stop, s_step, ex, ka, kb, h
                )
            elif american:
                _substitute_projected(nv, rhs, aw, payoff, s_first, s_stop, s_step)
            else:
                for j in range(1, n - 1):
                    nv[j] = rhs[j] - aw[j] * nv[j - 1]
            nv[n - 1] = vh
        else:
            nv[n - 1] = vh
            if fitted:
                jg, ug, kg = _substitute_fitted(
                    nv, rhs, aw, payoff, s_first, s_stop, s_step, ex, ka, kb, h
                )
            elif american:
                _substitute_projected(nv, rhs, aw, payoff, s_first, s_stop, s_step)
            else:
                for j in range(n - 2, 0, -1):
                    nv[j] = rhs[j] - aw[j] * nv[j + 1]
            nv[0] = vl
        if n_par:
            vo = cur if fitted else v_old
            e = c if is_put else a
            ge = gc if is_put else ga
            for p in range(n_par):
                _tangent_step(
                    k, p, tan, trhs, vo, nv, payoff, w, aw, e, dt, theta, lo, di, up, dco,
                    dfar, is_put, american, t_prev, fitted, jg, ug, kg, h, ex, ge, j0, j1, cb,
                    cb_hi, jgo, ugo, kgo, bnd, d1[p], d2[p], keep_cn, keep_older, lim0, lim1,
                )
                if fitted:
                    d2[p] = d1[p]
                    d1[p] = locate_boundary_tangent(nv, tan[p], payoff, x0, h, is_put)
        if american:
            bnd[k] = locate_boundary_from(nv, payoff, x0, h, is_put, s_first) + math.log(shift[k])
        else:
            bnd[k] = math.nan
        if fitted:
            prev = cur
            cur = nv
            in_v = not in_v
    if not in_v:
        for j in range(n):
            v[j] = cur[j]
    if block.shape[0] < 0:  # never: the block's last use, after every use of its parts
        v[0] = math.nan


@njit(cache=True, fastmath={"contract"})
def _tangent_step(
    k, p, tan, trhs, v_old, v, payoff, w, aw, e, dt, theta, lo, di, up, dco, dfar, is_put,
    american, t_prev, fitted, jg, ug, kg, h, ex, ge, j0, j1, cb, cb_hi, jgo, ugo, kgo, bnd,
    d1, d2, keep_cn, keep_older, lim0, lim1,
):
    """Advance the derivative ``tan[p]`` through step ``k`` (see :func:`march_direct_tangents`).
    Rows outside ``lim0..lim1`` are exercised (their derivative is zero) and not solved.

    ``w``, ``aw`` are the step's pivots and substitution coefficients; ``e`` the coefficient
    that the elimination removes (super-diagonal for a put, sub-diagonal for a call), ``ge``
    its values on the damped rows ``j0..j1`` (:func:`damping_band`, swept cells
    ``cb..cb_hi``).

    With ``fitted``: the damped rows differentiate their blend (:func:`band_row`), the
    weights included, through the derivatives ``d1``, ``d2`` of the boundary at the two
    levels before (:func:`locate_boundary_tangent`, :func:`damping_band_tangent`; the
    damped rows' Crank-Nicolson right-hand sides and older values in ``keep_cn``,
    ``keep_older``); the ghost of the level
    before (``jgo``, ``ugo``, ``kgo``) adds the derivative of :func:`ghost_explicit`; and
    the node ``jg`` that took a ghost value in this step (:func:`_substitute_fitted`;
    ``ug``, ``kg`` its ``u`` and ``kappa``) the linearised quadratic: its row
    ``a (payoff + G) + b v_j + c v_{j+1} = rhs`` with ``G = (s - u)^2``,
    ``u^2 = v_j - payoff_j`` and ``s = sqrt(kappa) h`` gives
    ``(1 + beta (s - u) / u) dv_j = w_j (R_j + ai dl G - 2 a (s - u) ds) - ...`` (``beta =
    -a w_j``, ``R_j`` the eliminated right-hand side, ``dl`` the change of the coefficient
    on the ghost's side).
    """
    n = v.shape[0]
    t = tan[p]
    dl = dco[p, 0, k]
    dd = dco[p, 1, k]
    du = dco[p, 2, k]
    ae = (1.0 - theta[k]) * dt[k]
    ai = theta[k] * dt[k]
    el = ae * lo[k]
    ed = 1.0 + ae * di[k]
    eu = ae * up[k]
    # explicit half, and the change of the operator on the new values (on views from the
    # row before lim0, so that no index can be negative and the loop vectorises)
    tv = t[lim0 - 1:lim1 + 2]
    vo = v_old[lim0 - 1:lim1 + 2]
    vn = v[lim0 - 1:lim1 + 2]
    tr = trhs[lim0:lim1 + 1]
    for i in range(lim1 - lim0 + 1):
        tr[i] = (
            el * tv[i] + ed * tv[i + 1] + eu * tv[i + 2]
            + ae * (dl * vo[i] + dd * vo[i + 1] + du * vo[i + 2])
            + ai * (dl * vn[i] + dd * vn[i + 1] + du * vn[i + 2])
        )
    if fitted and jgo >= 0 and ugo > 0.0:
        # the ghost of the level before, seen by the explicit half (ghost_explicit)
        sq = math.sqrt(kgo)
        dka, dkb = pasting_curvature_tangent(lo[k], di[k], up[k], dl, dd, du, h, is_put)
        ds = h * (dka + dkb * ex[jgo]) / (2.0 * sq)
        gap = sq * h - ugo
        side = lo[k] if is_put else up[k]
        dside = dl if is_put else du
        trhs[jgo] += ae * (dside * gap * gap + 2.0 * side * gap * (ds - t[jgo] / (2.0 * ugo)))
    if fitted:
        tp = t_prev[p]
        if j0 <= j1:
            dc_lo, dc_hi = damping_band_tangent(
                bnd[k - 1], bnd[k - 2] if k >= 2 else math.nan, dt[k] / dt[k - 1], h, d1, d2
            )
        for j in range(j0, j1 + 1):
            phi, d, aij, wr = band_row(j, cb, cb_hi, dt[k], dt[k - 1])
            lv = dl * v[j - 1] + dd * v[j] + du * v[j + 1]
            cn = trhs[j] - ai * lv  # the Crank-Nicolson row's explicit part
            trhs[j] = (phi * ((1.0 + wr) * t[j] - wr * wr / (1.0 + wr) * tp[j])
                       + (1.0 - phi) * cn) / d + aij * lv
            # the weight moves with the boundary: minus dphi dF/dphi of the row's equation
            if j < cb:
                dphi = -dc_lo / BAND_HALF_WIDTH
            elif j > cb_hi:
                dphi = dc_hi / BAND_HALF_WIDTH
            else:
                dphi = 0.0
            if dphi != 0.0:
                a0 = (1.0 + 2.0 * wr) / (1.0 + wr)
                lnew = lo[k] * v[j - 1] + di[k] * v[j] + up[k] * v[j + 1]
                if j == jg:  # the exercised neighbour enters through its ghost value
                    lnew += (lo[k] if is_put else up[k]) * ghost_explicit(ug, kg, h)
                bdf = (1.0 + wr) * v_old[j] - wr * wr / (1.0 + wr) * keep_older[j]
                df = (a0 - 1.0) * v[j] - 0.5 * dt[k] * lnew - bdf + keep_cn[j]
                trhs[j] -= dphi * df / d
        for j in range(n):
            tp[j] = t[j]
    # the ghost node's extra terms: right-hand side and the factor on dv_j
    g_add = 0.0
    g_div = 1.0
    if jg >= 0 and ug > 0.0:
        sq = math.sqrt(kg)
        sc = sq * h
        dka, dkb = pasting_curvature_tangent(lo[k], di[k], up[k], dl, dd, du, h, is_put)
        ds = h * (dka + dkb * ex[jg]) / (2.0 * sq)
        if j0 <= jg <= j1:
            aig = band_row(jg, cb, cb_hi, dt[k], dt[k - 1])[2]
        else:
            aig = ai
        side_coef = lo[k] if is_put else up[k]
        side = -aig * side_coef
        dside = dl if is_put else du
        gap = sc - ug
        g_add = w[jg] * (aig * dside * gap * gap - 2.0 * side * gap * ds)
        g_div = 1.0 - side * w[jg] * gap / ug
    tl = dfar[p, 0, k]
    th = dfar[p, 1, k]
    if is_put:
        trhs[n - 2] -= (ge[n - 2] if j0 <= n - 2 <= j1 else e) * th
        r = trhs[n - 2]
        trhs[n - 2] = r * w[n - 2]
        j = n - 3
        while j >= lim0:
            if j - 3 >= lim0 and (j - 3 > j1 or j < j0):
                # four rows outside the band at a time (see _held_then_projected)
                p0, p1, p2, p3, q0, q1, q2, q3 = _block4(
                    trhs[j], trhs[j - 1], trhs[j - 2], trhs[j - 3], e * w[j + 1], e * w[j],
                    e * w[j - 1], e * w[j - 2],
                )
                trhs[j] = (p0 + q0 * r) * w[j]
                trhs[j - 1] = (p1 + q1 * r) * w[j - 1]
                trhs[j - 2] = (p2 + q2 * r) * w[j - 2]
                r = p3 + q3 * r
                trhs[j - 3] = r * w[j - 3]
                j -= 4
                continue
            ej = ge[j] if j0 <= j <= j1 else e
            r = trhs[j] - ej * w[j + 1] * r
            trhs[j] = r * w[j]
            j -= 1
        t[0] = tl
        y = tl  # the last value, carried in a register
        for j in range(1, lim0):
            y = 0.0
            t[j] = y
        j = lim0
        while j < n - 1:
            if (j + 3 < n - 1 and (jg < j or jg > j + 3) and (not american or (
                    v[j] > payoff[j] and v[j + 1] > payoff[j + 1] and v[j + 2] > payoff[j + 2]
                    and v[j + 3] > payoff[j + 3]))):
                # four held rows at a time (see _held_then_projected)
                p0, p1, p2, p3, q0, q1, q2, q3 = _block4(
                    trhs[j], trhs[j + 1], trhs[j + 2], trhs[j + 3], aw[j], aw[j + 1], aw[j + 2],
                    aw[j + 3],
                )
                t[j] = p0 + q0 * y
                t[j + 1] = p1 + q1 * y
                t[j + 2] = p2 + q2 * y
                y = p3 + q3 * y
                t[j + 3] = y
                j += 4
                continue
            if american and v[j] <= payoff[j]:
                y = 0.0
            elif j == jg:
                y = (trhs[j] + g_add) / g_div
            else:
                y = trhs[j] - aw[j] * y
            t[j] = y
            j += 1
        t[n - 1] = th
    else:
        trhs[1] -= (ge[1] if j0 <= 1 <= j1 else e) * tl
        r = trhs[1]
        trhs[1] = r * w[1]
        j = 2
        while j <= lim1:
            if j + 3 <= lim1 and (j + 3 < j0 or j > j1):
                # four rows outside the band at a time (see _held_then_projected)
                p0, p1, p2, p3, q0, q1, q2, q3 = _block4(
                    trhs[j], trhs[j + 1], trhs[j + 2], trhs[j + 3], e * w[j - 1], e * w[j],
                    e * w[j + 1], e * w[j + 2],
                )
                trhs[j] = (p0 + q0 * r) * w[j]
                trhs[j + 1] = (p1 + q1 * r) * w[j + 1]
                trhs[j + 2] = (p2 + q2 * r) * w[j + 2]
                r = p3 + q3 * r
                trhs[j + 3] = r * w[j + 3]
                j += 4
                continue
            ej = ge[j] if j0 <= j <= j1 else e
            r = trhs[j] - ej * w[j - 1] * r
            trhs[j] = r * w[j]
            j += 1
        t[n - 1] = th
        y = th
        for j in range(n - 2, lim1, -1):
            y = 0.0
            t[j] = y
        j = lim1
        while j > 0:
            if (j - 3 > 0 and (jg > j or jg < j - 3) and (not american or (
                    v[j] > payoff[j] and v[j - 1] > payoff[j - 1] and v[j - 2] > payoff[j - 2]
                    and v[j - 3] > payoff[j - 3]))):
                # four held rows at a time (see _held_then_projected)
                p0, p1, p2, p3, q0, q1, q2, q3 = _block4(
                    trhs[j], trhs[j - 1], trhs[j - 2], trhs[j - 3], aw[j], aw[j - 1], aw[j - 2],
                    aw[j - 3],
                )
                t[j] = p0 + q0 * y
                t[j - 1] = p1 + q1 * y
                t[j - 2] = p2 + q2 * y
                y = p3 + q3 * y
                t[j - 3] = y
                j -= 4
                continue
            if american and v[j] <= payoff[j]:
                y = 0.0
            elif j == jg:
                y = (trhs[j] + g_add) / g_div
            else:
                y = trhs[j] - aw[j] * y
            t[j] = y
            j -= 1
        t[0] = tl


@njit(cache=True, fastmath={"contract"})
def _block4(r0, r1, r2, r3, a0, a1, a2, a3):
    """Four rows of ``y_m = r_m - a_m y_{m-1}`` as ``y_m = p_m + q_m y`` from the value ``y``
    before them: ``(p0, p1, p2, p3, q0, q1, q2, q3)``, which do not depend on ``y``, so that
    a sweep's serial latency is one fused multiply-add per four rows."""
    q0 = -a0
    p1 = r1 - a1 * r0
    q1 = -a1 * q0
    p2 = r2 - a2 * p1
    q2 = -a2 * q1
    p3 = r3 - a3 * p2
    q3 = -a3 * q2
    return r0, p1, p2, p3, q0, q1, q2, q3


@njit(cache=True, fastmath={"contract"})
def _held_then_projected(v, rhs, aw, payoff, j, stop, step, y):
    """From node ``j`` (``y`` the value before it): the continuation region, where the
    ``max`` is not needed, then the plain projected loop from the first node where it would
    bind (for one boundary it never does again). Shared by both substitutions.

    The continuation region goes four rows at a time: ``v_{j+m} = p_m + q_m y`` with partial
    sums ``p`` and products ``q`` of the rows' own coefficients, which do not depend on
    ``y``; so the serial latency is one fused multiply-add per four rows instead of one per
    row. A block where any row would be exercised is redone row by row."""
    # continuation region, four rows at a time while all four are held (the two directions
    # written apart, each with a constant step)
    if step > 0:
        while j + 3 < stop:
            p0, p1, p2, p3, q0, q1, q2, q3 = _block4(
                rhs[j], rhs[j + 1], rhs[j + 2], rhs[j + 3], aw[j], aw[j + 1], aw[j + 2], aw[j + 3]
            )
            y0 = p0 + q0 * y
            y1 = p1 + q1 * y
            y2 = p2 + q2 * y
            y3 = p3 + q3 * y
            if not (y0 > payoff[j] and y1 > payoff[j + 1] and y2 > payoff[j + 2]
                    and y3 > payoff[j + 3]):
                break
            v[j] = y0
            v[j + 1] = y1
            v[j + 2] = y2
            v[j + 3] = y3
            y = y3
            j += 4
    else:
        while j - 3 > stop:
            p0, p1, p2, p3, q0, q1, q2, q3 = _block4(
                rhs[j], rhs[j - 1], rhs[j - 2], rhs[j - 3], aw[j], aw[j - 1], aw[j - 2], aw[j - 3]
            )
            y0 = p0 + q0 * y
            y1 = p1 + q1 * y
            y2 = p2 + q2 * y
            y3 = p3 + q3 * y
            if not (y0 > payoff[j] and y1 > payoff[j - 1] and y2 > payoff[j - 2]
                    and y3 > payoff[j - 3]):
                break
            v[j] = y0
            v[j - 1] = y1
            v[j - 2] = y2
            v[j - 3] = y3
            y = y3
            j -= 4
    while j != stop:  # the rest of it, row by row
        t = rhs[j] - aw[j] * y
        if not t > payoff[j]:
            break
        y = t
        v[j] = y
        j += step
    while j != stop:  # anywhere the max binds again (not for one boundary)
        y = rhs[j] - aw[j] * y
        y = y if y > payoff[j] else payoff[j]
        v[j] = y
        j += step


@njit(cache=True, fastmath={"contract"})
def _substitute_projected(v, rhs, aw, payoff, start, stop, step):
    """Projected substitution ``v_j = max(rhs_j - aw_j v_{j-step}, payoff_j)``, ``j`` from
    ``start`` to ``stop`` (exclusive) by ``step``.

    Written as three loops with the same result as the one-line form: through the exercise
    region the value is the payoff (no serial dependence); then, while the new value exceeds
    the payoff, the ``max`` is not needed and each node costs one fused multiply-add of
    latency; at the first node where it would bind, the plain projected loop takes over.
    """
    j = start
    y = v[start - step]
    while j != stop:  # exercise region
        y = rhs[j] - aw[j] * y
        if y > payoff[j]:
            v[j] = y
            j += step
            break
        y = payoff[j]
        v[j] = y
        j += step
    _held_then_projected(v, rhs, aw, payoff, j, stop, step, y)


@njit(cache=True, fastmath={"contract"})
def _exercised_run(v, rhs, aw, payoff, j, stop, step, y, bound):
    """The run of nodes that are surely exercised (gap at most ``-bound``), from ``j``:
    their values are the payoff. Returns the first node that may be held (or ``stop``) and
    the value before it."""
    while j != stop:
        if rhs[j] - aw[j] * y > payoff[j] - bound:
            return j, y
        y = payoff[j]
        v[j] = y
        j += step
    return j, y


@njit(cache=True, fastmath={"contract"})
def _substitute_fitted(v, rhs, aw, payoff, start, stop, step, ex, ka, kb, h):
    """:func:`_substitute_projected` with the exercise boundary fitted inside its cell.

    The first held node ``j`` after the exercised run sees its exercised neighbour ``j - step``
    through the ghost value ``payoff + (s - u)^2``, the held side's premium
    ``kappa (x - x*)^2`` (:func:`pasting_curvature`) continued to that node, where
    ``s = sqrt(kappa) h`` and ``u = sqrt(v_j - payoff_j)``, so that ``x*`` sits ``u / s`` of a
    cell before ``x_j``. Node ``j``'s equation ``v_j = cand + beta (s - u)^2`` (``cand`` its
    plain value, ``beta = -aw_j``) is then a quadratic in ``u`` (:func:`ghost_gap`); the node
    is held when its root is positive, i.e. when ``cand - payoff_j + beta s^2 > 0``, and the
    ghost applies while ``u < s`` (``x*`` inside the cell; beyond it the plain value, to
    which the ghost tends continuously). Without the ghost the plain stencil sees the payoff
    at ``j - step``, an O(1) error in ``v_xx`` at ``j`` whose size depends on where ``x*``
    falls between nodes: the erratic part of the error that Richardson extrapolation cannot
    remove (measured single-grid error / h^2 varied 3x with the spacing, 1.3x with the
    ghost). This is the immersed-interface idea applied to the free boundary.

    Returns ``(j, u, kappa)`` of the ghosted node, or ``(-1, 0, 0)`` if none.

    References
    ----------
    LeVeque, R. J. and Li, Z. (1994), The immersed interface method for elliptic equations
    with discontinuous coefficients and singular sources, SIAM J. Numer. Anal. 31(4).
    """
    j = start
    y = v[start - step]
    jg = -1
    ug = 0.0
    kg = 0.0
    # no node with a gap below -bound can be held (beta < 1, kappa below this on the grid)
    bound = (abs(ka) + abs(kb) * max(ex[start], ex[stop - step])) * h * h
    while j != stop:  # exercise region
        j, y = _exercised_run(v, rhs, aw, payoff, j, stop, step, y, bound)
        if j == stop:
            break
        cand = rhs[j] - aw[j] * y
        gap = cand - payoff[j]
        beta = -aw[j]
        kap = ka + kb * ex[j]
        if j != start and payoff[j - step] > 0.0 and kap > 0.0 and 0.0 < beta < 1.0:
            s2 = kap * h * h
            if gap + beta * s2 > 0.0:
                if gap < s2:
                    u = ghost_gap(gap, beta, math.sqrt(s2))
                    jg = j
                    ug = u
                    kg = kap
                    y = payoff[j] + u * u
                else:
                    y = cand
                v[j] = y
                j += step
                break
        elif gap > 0.0:
            y = cand
            v[j] = y
            j += step
            break
        y = payoff[j]
        v[j] = y
        j += step
    _held_then_projected(v, rhs, aw, payoff, j, stop, step, y)
    if ex[0] != ex[0]:  # never: a last use of every array at the one exit (see _begin_step)
        jg = -2
    return jg, ug, kg


@njit(cache=True)
def march_psor(
    v, ex, x0, h, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put, american, bnd,
    omega, tol, max_iter, iters, fitted,
):
    """March ``v`` through all steps with projected successive over-relaxation.

    Same arguments as :func:`march_direct`, plus:

    omega : float
        Over-relaxation factor in (0, 2); a value <= 0 asks for the optimal factor of the
        unprojected system, ``2 / (1 + sqrt(1 - rho_J^2))`` with ``rho_J`` the spectral radius
        of the Jacobi iteration of the constant-coefficient tridiagonal matrix.
    tol : float
        Stop a step when the largest change of a sweep is below ``tol``.
    max_iter : int
        Sweep cap per step.
    iters : ndarray of int64, shape (n_steps,)
        Written: sweeps used per step.
    fitted : bool
        The scheme of :func:`march_direct_tangents` with ``fitted``: the ghost of the level
        before in the explicit half (:func:`ghost_explicit`), the damped rows
        (:func:`damping_band`), and a held node next to an exercised one seeing it through
        the ghost value (:func:`_substitute_fitted`); that node is updated by plain
        Gauss-Seidel (its equation is a quadratic in the square root of its premium,
        :func:`ghost_gap`), the others are over-relaxed.

    Returns
    -------
    int
        Index of the first step that hit ``max_iter``, or -1 if every step converged.

    References
    ----------
    Cryer, C. W. (1971), The solution of a quadratic programming problem using systematic
    overrelaxation, SIAM J. Control 9(3).
    """
    n = v.shape[0]
    rhs = np.empty(n)
    payoff = np.empty(n)
    older = np.empty(n if fitted else 0)  # the level before last
    old = np.empty(n if fitted else 0)
    ga = np.empty(n if fitted else 0)
    gb = np.empty(n if fitted else 0)
    gc = np.empty(n if fitted else 0)
    none = np.empty(0)
    jg, ug, kg = -1, 0.0, 0.0
    ka = kb = 0.0
    failed = -1
    for k in range(dt.shape[0]):
        if american:
            _refresh_exercise(k, ex, payoff, shift, scale, is_put)
        a, b, c, vl, vh = _begin_step(
            k, v, ex, rhs, dt, theta, lo, di, up, df_r, df_q, shift, scale, is_put, american,
            1, n - 2,
        )
        j0, j1 = 1, 0
        if fitted:
            if k == 0 or lo[k] != lo[k - 1] or di[k] != di[k - 1] or up[k] != up[k - 1]:
                ka, kb = pasting_curvature(lo[k], di[k], up[k], h, is_put)
            if theta[k] < 1.0:
                if jg >= 0:
                    side = lo[k] if is_put else up[k]
                    rhs[jg] += (1.0 - theta[k]) * dt[k] * side * ghost_explicit(ug, kg, h)
                j0, j1, c_lo, c_hi = damping_band(
                    theta[k], bnd[k - 1] if k >= 1 else math.nan,
                    bnd[k - 2] if k >= 2 else math.nan, dt[k] / dt[k - 1] if k >= 1 else 1.0,
                    x0, h, n,
                )
                _damp_band(rhs, ga, gb, gc, v, older, j0, j1, c_lo, c_hi, k, dt, lo, di, up,
                           none, none)
            for j in range(n):
                old[j] = v[j]
        v[0] = vl
        v[n - 1] = vh
        om = omega
        if om <= 0.0:
            ac = a * c
            rho = 2.0 * math.sqrt(ac) / abs(b) * math.cos(math.pi / (n - 1)) if ac > 0.0 else 0.0
            if rho >= 1.0:
                rho = 0.999999
            om = 2.0 / (1.0 + math.sqrt(1.0 - rho * rho))
        inv_b = 1.0 / b
        s_side = -1 if is_put else 1  # where a node's exercised neighbour is
        it = 0
        while True:
            it += 1
            err = 0.0
            for j in range(1, n - 1):
                inb = j0 <= j <= j1
                aj = ga[j] if inb else a
                cj = gc[j] if inb else c
                ib = 1.0 / gb[j] if inb else inv_b
                gs = (rhs[j] - aj * v[j - 1] - cj * v[j + 1]) * ib
                y = v[j] + om * (gs - v[j])
                if fitted:
                    i = j + s_side
                    if 1 <= i <= n - 2 and payoff[i] > 0.0 and v[i] <= payoff[i]:
                        kap = ka + kb * ex[j]
                        beta = -(aj if is_put else cj) * ib
                        if kap > 0.0 and 0.0 < beta < 1.0:
                            s2 = kap * h * h
                            gap = gs - payoff[j]
                            if gap + beta * s2 <= 0.0:
                                y = payoff[j]
                            elif gap < s2:
                                u = ghost_gap(gap, beta, math.sqrt(s2))
                                y = payoff[j] + u * u
                            else:
                                y = gs
                if american and y < payoff[j]:
                    y = payoff[j]
                dy = abs(y - v[j])
                if dy > err:
                    err = dy
                v[j] = y
            if err < tol:
                break
            if it >= max_iter:
                if failed < 0:
                    failed = k
                break
        iters[k] = it
        if american:
            bnd[k] = locate_boundary(v, payoff, x0, h, is_put) + math.log(shift[k])
        else:
            bnd[k] = math.nan
        if fitted:
            jg, ug, kg = _ghost_of(v, payoff, ex, ka, kb, h, is_put, a, b, c, ga, gb, gc, j0, j1)
            for j in range(n):
                older[j] = old[j]
    return failed


@njit(cache=True)
def _ghost_of(v, payoff, ex, ka, kb, h, is_put, a, b, c, ga, gb, gc, j0, j1):
    """The node of a solved level that took a ghost value (:func:`_substitute_fitted`):
    ``(j, u, kappa)`` of the first held node after the exercised run, if its exercised
    neighbour is in the money and ``u`` is below ``s = sqrt(kappa) h``; else
    ``(-1, 0, 0)``."""
    n = v.shape[0]
    step = 1 if is_put else -1
    j = 1 if is_put else n - 2
    while 1 <= j <= n - 2 and payoff[j] > 0.0 and v[j] <= payoff[j]:
        j += step
    i = j - step
    if not (1 <= j <= n - 2 and 1 <= i <= n - 2) or not payoff[i] > 0.0:
        return -1, 0.0, 0.0
    inb = j0 <= j <= j1
    side = (ga[j] if inb else a) if is_put else (gc[j] if inb else c)
    beta = -side / (gb[j] if inb else b)
    kap = ka + kb * ex[j]
    if not (kap > 0.0 and 0.0 < beta < 1.0):
        return -1, 0.0, 0.0
    u = math.sqrt(v[j] - payoff[j])
    if u < math.sqrt(kap) * h:
        return j, u, kap
    return -1, 0.0, 0.0


@njit(cache=True)
def thomas_repeat(rhs0, a, b, c, n_solves, out):
    """Solve the same constant tridiagonal system ``n_solves`` times (benchmark floor).

    The cost of this function is the floor for one time-stepping solve: one Thomas sweep per
    level and nothing else.
    """
    n = rhs0.shape[0]
    w = np.empty(n)
    r = np.empty(n)
    for _ in range(n_solves):
        w[0] = 1.0 / b
        r[0] = rhs0[0]
        for j in range(1, n):
            f = a * w[j - 1]
            w[j] = 1.0 / (b - f * c)
            r[j] = rhs0[j] - f * r[j - 1]
        out[n - 1] = r[n - 1] * w[n - 1]
        for j in range(n - 2, -1, -1):
            out[j] = (r[j] - c * out[j + 1]) * w[j]



@njit(cache=True)
def _value_after(v, x, x0, h, d, df_r, df_q, ahead, is_put, american):
    """Value / strike after the ex-date at ``ln(max(e^x - d, 0))``, read off the nodes ``v``.

    A four-point Lagrange cubic in ``x`` limited to the range of the two bracketing nodes
    (so a monotone value stays monotone and non-negative); below the first node, the
    far-field value of :func:`far_value` at the dropped spot ``s``, whose discounted forward
    ``s df_q`` the dividends still ahead (``ahead``, discounted like it) lower, but not below
    zero: a put there is worth at most ``df_r``. The value of :func:`_value_after_weights`.
    """
    return _value_after_weights(v, x, x0, h, d, df_r, df_q, ahead, is_put, american)[0]


@njit(cache=True)
def _exercise_value(x, pv, is_put):
    """Exercise value / strike at log-moneyness ``x`` when the spot is ``e^x + pv``."""
    s = math.exp(x) + pv
    e = 1.0 - s if is_put else s - 1.0
    return e if e > 0.0 else 0.0


@njit(cache=True)
def _held_or_exercised(v, x, x0, h, d, pv, df_r, df_q, ahead, is_put):
    w = _value_after(v, x, x0, h, d, df_r, df_q, ahead, is_put, True)
    e = _exercise_value(x, pv, is_put)
    return w if w > e else e


@njit(cache=True)
def _cell_kink(v, xl, xr, x0, h, d, df_r, df_q, ahead, pv, is_put, american, x_zero):
    """Where, inside the cell ``[xl, xr]``, the value after the drop has a kink: the point
    where holding and exercising trade places (American; found by 40 bisections, to
    ``h / 2^40``), else where the dropped spot reaches zero (``x_zero``), else NaN."""
    if american:
        gl = _value_after(v, xl, x0, h, d, df_r, df_q, ahead, is_put, True) - _exercise_value(xl, pv, is_put)
        gr = _value_after(v, xr, x0, h, d, df_r, df_q, ahead, is_put, True) - _exercise_value(xr, pv, is_put)
        if gl * gr < 0.0:
            a = xl
            b = xr
            for _ in range(40):
                m = 0.5 * (a + b)
                gm = _value_after(v, m, x0, h, d, df_r, df_q, ahead, is_put, True) - _exercise_value(
                    m, pv, is_put
                )
                if (gm < 0.0) == (gl < 0.0):
                    a = m
                else:
                    b = m
            return 0.5 * (a + b)
    if xl < x_zero < xr:
        return x_zero
    return math.nan


@njit(cache=True)
def dividend_jump(v, payoff, x0, h, d, pv, df_r, df_q, ahead, is_put, american, out):
    """Values just before an ex-dividend date from those just after.

    ``out_j = v(ln(max(e^{x_j} - d, 0)))`` (the spot drops by ``d``), and for an American
    option the larger of that and the exercise value at spot ``e^{x_j} + pv`` (exercise just
    before the drop). The spot model has ``pv = 0``; the escrowed model has ``d = 0`` and
    ``pv`` the present value of the dividends still to come, including this one.

    Parameters
    ----------
    v : ndarray, shape (n,)
        Value / strike after the ex-date (read only).
    payoff : ndarray, shape (n,)
        Exercise value / strike on the nodes at spot ``e^{x_j} + pv`` (American only; the
        nodes take it exactly, so that the exercise region is found by equality).
    x0, h : float
        First node and spacing of the uniform log-moneyness grid.
    d : float
        Drop of the spot / strike, >= 0.
    pv : float
        Shift of the spot in the exercise value / strike, >= 0.
    df_r, df_q : float
        Discount factors for rate and yield from expiry to the ex-date (far-field values).
    ahead : float
        Dividends / strike after this one, discounted at the rate to the ex-date and at the
        yield from expiry to their ex-dates (lower the far field's forward; 0 if none).
    is_put, american : bool
        Contract flags.
    out : ndarray, shape (n,)
        Written: the values before the ex-date.

    Notes
    -----
    Where the exercise value overtakes the held value inside a node's cell
    ``[x_j - h/2, x_j + h/2]``, or the dropped spot reaches zero there (``e^x = d``), the
    value has a kink off the grid; the node then takes the cell average (the kink located by
    bisection, two-point Gauss on each side), which
    keeps the error a smooth function of the spacing so that Richardson extrapolation still
    works (Pooley, Vetzal and Forsyth 2003, J. Comput. Finance 6(4)).
    """
    n = v.shape[0]
    half = 0.5 * h
    g = 0.5 / math.sqrt(3.0)
    x_zero = math.log(d) if d > 0.0 else -math.inf  # the dropped spot reaches zero here
    for j in range(n):
        xj = x0 + j * h
        xl = xj - half
        xr = xj + half
        w = _value_after(v, xj, x0, h, d, df_r, df_q, ahead, is_put, american)
        e = payoff[j] if american else 0.0
        xk = _cell_kink(v, xl, xr, x0, h, d, df_r, df_q, ahead, pv, is_put, american, x_zero)
        if math.isnan(xk):
            out[j] = w if w > e else e
            continue
        total = 0.0
        for lo, hi in ((xl, xk), (xk, xr)):
            c = 0.5 * (lo + hi)
            ln = hi - lo
            for z in (c - g * ln, c + g * ln):
                if american:
                    total += 0.5 * ln * _held_or_exercised(v, z, x0, h, d, pv, df_r, df_q, ahead, is_put)
                else:
                    total += 0.5 * ln * _value_after(v, z, x0, h, d, df_r, df_q, ahead, is_put, False)
        out[j] = total / h


@njit(cache=True)
def value_after_drop(v, x0, h, d, df_r, df_q, ahead, is_put, american, out):
    """``out_j = v(ln(max(e^{x_j} - d, 0)))``: the held value just before an ex-date.

    As :func:`dividend_jump` without the exercise floor and without cell averaging; the
    American flag only sets the far-field value below the grid.
    """
    for j in range(v.shape[0]):
        out[j] = _value_after(v, x0 + j * h, x0, h, d, df_r, df_q, ahead, is_put, american)


@njit(cache=True, fastmath={"contract"})
def thomas_repeat_fixed_point(rhs0, a, b, c, n_solves, out):
    """:func:`thomas_repeat` with the pivots' fixed point, as in :func:`march_direct` (floor).

    The tightest floor for the direct sweep: the same division-free elimination and one fused
    multiply-add per node in the substitution, without the right-hand side, the exercise
    constraint or the boundary search.
    """
    n = rhs0.shape[0]
    w = np.empty(n)
    r = np.empty(n)
    for _ in range(n_solves):
        w[0] = 1.0 / b
        r[0] = rhs0[0] * w[0]
        acc = rhs0[0]
        j = 1
        while j < n:
            f = a * w[j - 1]
            w[j] = 1.0 / (b - f * c)
            acc = rhs0[j] - f * acc
            r[j] = acc * w[j]
            j += 1
            if w[j - 1] == w[j - 2]:
                break
        wc = w[j - 1]
        f = a * wc
        for i in range(j, n):
            w[i] = wc
            acc = rhs0[i] - f * acc
            r[i] = acc * wc
        y = r[n - 1]
        out[n - 1] = y
        for i in range(n - 2, -1, -1):
            y = r[i] - c * w[i] * y
            out[i] = y


@njit(cache=True)
def fornberg_weights(z, x, m):
    """Weights, shape (m + 1, p), of derivatives 0..m at ``z`` of the polynomial through the
    nodes ``x`` (Fornberg 1988); row ``k`` dotted with nodal values gives the ``k``-th
    derivative. The numba twin of :func:`stopline.greeks.fd_weights`' algorithm."""
    p = x.shape[0]
    c = np.zeros((m + 1, p))
    c1 = 1.0
    c4 = x[0] - z
    c[0, 0] = 1.0
    for i in range(1, p):
        mn = min(i, m)
        c2 = 1.0
        c5 = c4
        c4 = x[i] - z
        for j in range(i):
            c3 = x[i] - x[j]
            c2 *= c3
            if j == i - 1:
                for k in range(mn, 0, -1):
                    c[k, i] = c1 * (k * c[k - 1, i - 1] - c5 * c[k, i - 1]) / c2
                c[0, i] = -c1 * c5 * c[0, i - 1] / c2
            for k in range(mn, 0, -1):
                c[k, j] = (c4 * c[k, j] - k * c[k - 1, j]) / c3
            c[0, j] = c4 * c[0, j] / c3
        c1 = c2
    return c


@njit(cache=True)
def pava_increasing(y, out):
    """Least-squares non-decreasing fit of ``y`` by pool-adjacent-violators, into ``out``.

    Blocks are merged while a block's mean exceeds the next one's; each block's points take
    its mean, and points in blocks of one keep their exact value.

    References
    ----------
    Ayer, M. et al. (1955), Ann. Math. Statist. 26(4).
    """
    n = y.shape[0]
    means = np.empty(n)
    sizes = np.empty(n, dtype=np.int64)
    m = 0
    for i in range(n):
        means[m] = y[i]
        sizes[m] = 1
        m += 1
        while m > 1 and means[m - 2] > means[m - 1]:
            size = sizes[m - 2] + sizes[m - 1]
            means[m - 2] = (means[m - 2] * sizes[m - 2] + means[m - 1] * sizes[m - 1]) / size
            sizes[m - 2] = size
            m -= 1
    i = 0
    for b in range(m):
        for _ in range(sizes[b]):
            out[i] = y[i] if sizes[b] == 1 else means[b]
            i += 1


#: Nodes in the read-off stencil (a quintic).
STENCIL = 6
#: Length of :func:`price_pair`'s ``out``: value, delta, gamma, exercised (coarse, then fine
#: grid), then d value / d vol and d value / d rate (coarse, then fine).
PAIR_OUT = 12


@njit(cache=True, inline="always")
def space_layout(x_spot, sd, drift, width_sd, points_per_sd, n_points, h_max, n_max, frame_y,
                 lo_limit, hi_limit):
    """First node, spacing, node count and strike index of a uniform grid.

    The rule of :func:`stopline.grid.build_space_grid` (see it for the arguments);
    ``n_points <= 0`` sizes by ``points_per_sd``, ``n_max <= 0`` sets no cap; the domain
    ends no further out than ``lo_limit`` and ``hi_limit`` (-inf and inf for none). Returns
    ``(x_min, h, n, strike_index)``, ``strike_index = -1`` when the strike is left out.
    """
    if frame_y:
        lo = x_spot + drift - width_sd * sd
        hi = x_spot + drift + width_sd * sd
    else:
        lo = min(x_spot, x_spot + drift) - width_sd * sd
        hi = max(x_spot, x_spot + drift) + width_sd * sd
    lo = max(lo, lo_limit)
    hi = min(hi, hi_limit)
    # the strike is left out only when it lies two standard deviations beyond the domain
    # itself: what the option is worth there is then below ~phi(width_sd + 2) of the strike
    reach = lo - 2.0 * sd <= 0.0 <= hi + 2.0 * sd
    if reach:
        lo = max(min(lo, -width_sd * sd), lo_limit)
        hi = min(max(hi, width_sd * sd), hi_limit)
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
    perpetual option (Merton 1973); infinite when there is no real root. At low volatility
    this is far shorter than ``vol sqrt(T)``, and the grid must resolve it rather than the
    spread of the spot.
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
                                  n_max, frame_y, -math.inf, math.inf)
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
                h_coef, unit_tau, unit_dt, unit_theta, n_par, bnd, fitted):
    """One grid of the pair: payoff, plan, march (with ``n_par`` tangents: 0, 1 for the vol,
    or 2 for vol and rate); returns the values, the exercise value at valuation and the tangents. With
    ``fitted`` an American option is marched with the boundary fitted (frame "x", flat data,
    no cash dividends: where :func:`stopline.solve.fitted_boundary` holds)."""
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
    dco = np.empty((2 if n_par else 0, 3, m if n_par else 0))  # vol and rate, n_par 1 or 2
    dfar = np.empty((2 if n_par else 0, 2, m if n_par else 0))
    if n_par:
        tangent_coefficients(h, vol, is_put, american, ex[0], ex[n - 1], tau, plan[3],
                             plan[4], dco, dfar)
    march_direct_tangents(
        v, ex, x_min, h, dt, theta, plan[0], plan[1], plan[2], plan[3], plan[4], plan[5],
        plan[6], is_put, american, bnd, tan, dco, dfar, fitted and american,
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
    out, bnd_x, raw, spot, fitted, tau_out,
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
        0, 1 to march the vol tangent alongside, or 2 for the vol and rate tangents.
    out : ndarray, shape (PAIR_OUT,)
        Written: value, delta, gamma, exercised (1.0 or 0.0) on the coarse, then the fine
        grid; then the vol and rate tangents read at the spot (coarse, then fine; money
        units; zeros when ``n_par = 0``).
    bnd_x, raw, spot : ndarray, shape (fine steps,)
        Written: the fine grid's critical log-moneyness per step, ``strike e^x``, and its
        monotone fit.
    fitted : bool
        March an American option with the fitted boundary (the default direct sweep,
        :func:`march_direct_tangents`) instead of plain projected Crank-Nicolson
        (``DirectSweep(fitted=False)``).
    tau_out : ndarray, shape (fine steps,)
        Written: the fine grid's time to expiry after each step.

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
            unit_theta_f if fine else unit_theta_c, n_par, bnd, fitted,
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
    for i in range(tau_out.shape[0]):
        tau_out[i] = expiry * unit_tau_f[i]


# ---------------------------------------------------------------------------------------------
# cash dividends (spot model) in one call: the general path's _solve_with_dividends, compiled
# ---------------------------------------------------------------------------------------------


@njit(cache=True)
def _cubic_window(s, x0, h, n):
    """Where spot ``s`` (above the first node) falls on the grid: the bracketing node ``i``,
    the first ``j0`` of the four nodes of the Lagrange cubic (kept inside the grid) and the
    position ``t`` in cells from ``j0``."""
    y = (math.log(s) - x0) / h
    i = int(math.floor(y))
    if i > n - 2:
        i = n - 2
    j0 = i - 1
    if j0 < 0:
        j0 = 0
    if j0 > n - 4:
        j0 = n - 4
    return i, j0, y - j0


@njit(cache=True)
def _value_after_weights(v, x, x0, h, d, df_r, df_q, ahead, is_put, american):
    """:func:`_value_after` and how it depends on the nodes: ``(value, j0, c0, c1, c2, c3)``
    with ``d value = sum_i c_i dv[j0 + i]`` for a change ``dv`` of the values that moves
    neither ``x`` nor the far field (``j0 = 0`` and all ``c_i = 0`` below the first node,
    where the value is the far field's; one ``c_i = 1`` where the limiter clamps)."""
    n = v.shape[0]
    s = math.exp(x) - d
    if s <= math.exp(x0):
        if s < 0.0:
            s = 0.0
        carry = s * df_q
        if ahead < carry:
            carry = ahead
        return far_value(s, df_r + carry, df_q, is_put, american), 0, 0.0, 0.0, 0.0, 0.0
    i, j0, t = _cubic_window(s, x0, h, n)
    a0 = t - 1.0
    a1 = t - 2.0
    a2 = t - 3.0
    c0 = -a0 * a1 * a2 / 6.0
    c1 = t * a1 * a2 / 2.0
    c2 = -t * a0 * a2 / 2.0
    c3 = t * a0 * a1 / 6.0
    val = c0 * v[j0] + c1 * v[j0 + 1] + c2 * v[j0 + 2] + c3 * v[j0 + 3]
    lo_i = i if v[i] < v[i + 1] else i + 1
    hi_i = i if v[i] > v[i + 1] else i + 1
    k = -1  # the node whose value the limiter returns
    if val < v[lo_i]:
        k = lo_i
    elif val > v[hi_i]:
        k = hi_i
    if k < 0:
        return val, j0, c0, c1, c2, c3
    # its weight 1 within the same four-node window (which lies inside the grid: the
    # caller reads all four nodes)
    o = k - j0
    return (v[k], j0, 1.0 if o == 0 else 0.0, 1.0 if o == 1 else 0.0, 1.0 if o == 2 else 0.0,
            1.0 if o == 3 else 0.0)


@njit(cache=True)
def _value_after_slope(v, x, x0, h, d, df_r, df_q, ahead, is_put, american):
    """``d/dx`` of :func:`_value_after` at ``x`` (the same branches: the far field below the
    first node, zero where the limiter clamps, else the cubic's slope)."""
    n = v.shape[0]
    ex = math.exp(x)
    s = ex - d
    if s <= math.exp(x0):
        if s <= 0.0:
            return 0.0
        capped = ahead < s * df_q  # the carry is the dividends ahead, not s df_q
        carry = ahead if capped else s * df_q
        fwd = df_r + carry - s * df_q if is_put else s * df_q - (df_r + carry)
        far = fwd if fwd > 0.0 else 0.0
        e = 1.0 - s if is_put else s - 1.0
        sgn = -1.0 if is_put else 1.0
        if american and e > far:
            return sgn * ex
        return sgn * df_q * ex if (fwd > 0.0 and capped) else 0.0
    i, j0, t = _cubic_window(s, x0, h, n)
    a0 = t - 1.0
    a1 = t - 2.0
    a2 = t - 3.0
    val = (-a0 * a1 * a2 / 6.0 * v[j0] + t * a1 * a2 / 2.0 * v[j0 + 1]
           - t * a0 * a2 / 2.0 * v[j0 + 2] + t * a0 * a1 / 6.0 * v[j0 + 3])
    lo = v[i] if v[i] < v[i + 1] else v[i + 1]
    hi = v[i] if v[i] > v[i + 1] else v[i + 1]
    if val < lo or val > hi:
        return 0.0
    dv = (-(a1 * a2 + a0 * a2 + a0 * a1) / 6.0 * v[j0]
          + (a1 * a2 + t * a2 + t * a1) / 2.0 * v[j0 + 1]
          - (a0 * a2 + t * a2 + t * a0) / 2.0 * v[j0 + 2]
          + (a0 * a1 + t * a1 + t * a0) / 6.0 * v[j0 + 3])
    return dv * ex / (s * h)


@njit(cache=True, inline="always")
def _exercise_slope(x, pv, is_put):
    """``d/dx`` of the exercise value ``max(+-(1 - e^x - pv), 0)`` (:func:`_exercise_value`)."""
    ex = math.exp(x)
    s = ex + pv
    if is_put:
        return -ex if 1.0 - s > 0.0 else 0.0
    return ex if s - 1.0 > 0.0 else 0.0


@njit(cache=True)
def dividend_jump_tangents(v, tan, payoff, x0, h, d, pv, df_r, df_q, ahead, is_put, american,
                           out, tan_out):
    """:func:`dividend_jump` with the derivatives of its values (same arguments, plus ``tan``
    and ``tan_out``).

    ``out`` gets the values :func:`dividend_jump` gives (the same operations, so the same
    numbers) and ``tan_out[p]`` (shape ``tan``, (n_par, n)) the derivative of ``out`` for
    the change ``tan[p]`` of ``v``, for a parameter that moves neither the dropped spot, the
    exercise value's shift nor the far field (the volatility): the same interpolation applied to the tangent, zero where
    the exercise value binds or below the grid. In a cell averaged across the kink where
    the exercise value overtakes the held value ``H``, the kink ``x_k`` moves too: by
    ``-dH(x_k) / (H'(x_k) - E'(x_k))`` (``E`` the exercise value, primes in ``x``), and the
    two Gauss sums with it, by half the integrand at each side's points plus its slope
    times their motion (``1/2 -+ g`` of the kink's, ``g = 1 / (2 sqrt 3)``). That is the
    derivative of the rule with the exact kink; the bisection's own kink moves in steps of
    ``h / 2^40``. The kink where the dropped spot reaches zero does not move.
    """
    n = v.shape[0]
    n_par = tan.shape[0]
    half = 0.5 * h
    g = 0.5 / math.sqrt(3.0)
    x_zero = math.log(d) if d > 0.0 else -math.inf  # the dropped spot reaches zero here
    for j in range(n):
        xj = x0 + j * h
        xl = xj - half
        xr = xj + half
        w, j0, c0, c1, c2, c3 = _value_after_weights(v, xj, x0, h, d, df_r, df_q, ahead, is_put, american)
        e = payoff[j] if american else 0.0
        xk = _cell_kink(v, xl, xr, x0, h, d, df_r, df_q, ahead, pv, is_put, american, x_zero)
        if math.isnan(xk):
            held = w if w > e else e
            out[j] = held
            for p in range(n_par):
                if w > e:
                    tp = tan[p]
                    tan_out[p, j] = c0 * tp[j0] + c1 * tp[j0 + 1] + c2 * tp[j0 + 2] + c3 * tp[j0 + 3]
                else:
                    tan_out[p, j] = 0.0
            continue
        total = 0.0
        dq_dk = 0.0  # change of the two Gauss sums per unit move of the kink
        for p in range(n_par):
            tan_out[p, j] = 0.0
        side = -1.0
        for lo, hi in ((xl, xk), (xk, xr)):
            c = 0.5 * (lo + hi)
            ln = hi - lo
            sg = -1.0
            for z in (c - g * ln, c + g * ln):
                wz, i0, b0, b1, b2, b3 = _value_after_weights(v, z, x0, h, d, df_r, df_q, ahead,
                                                             is_put, american)
                ez = _exercise_value(z, pv, is_put) if american else 0.0
                held_z = not (american and not wz > ez)
                fz = wz if held_z else ez
                if american and n_par > 0:
                    slope = (_value_after_slope(v, z, x0, h, d, df_r, df_q, ahead, is_put, True)
                             if held_z else _exercise_slope(z, pv, is_put))
                    # d ln / d x_k = -side, d z / d x_k = 1/2 + side sg g (left: 1/2 - sg g...)
                    dq_dk += -side * 0.5 * fz + 0.5 * ln * slope * (0.5 - side * sg * g)
                sg = 1.0
                if not held_z:
                    total += 0.5 * ln * ez  # as _held_or_exercised: the larger value
                    continue
                total += 0.5 * ln * wz
                for p in range(n_par):
                    tp = tan[p]
                    tan_out[p, j] += 0.5 * ln * (
                        b0 * tp[i0] + b1 * tp[i0 + 1] + b2 * tp[i0 + 2] + b3 * tp[i0 + 3])
            side = 1.0
        out[j] = total / h
        moves = american and n_par > 0 and xk != x_zero
        k0 = 0
        e0 = e1 = e2 = e3 = dg = 0.0
        if moves:
            _, k0, e0, e1, e2, e3 = _value_after_weights(v, xk, x0, h, d, df_r, df_q, ahead, is_put, True)
            dg = (_value_after_slope(v, xk, x0, h, d, df_r, df_q, ahead, is_put, True)
                  - _exercise_slope(xk, pv, is_put))
            moves = dg != 0.0
        for p in range(n_par):
            if moves:
                tp = tan[p]
                dk = -(e0 * tp[k0] + e1 * tp[k0 + 1] + e2 * tp[k0 + 2] + e3 * tp[k0 + 3]) / dg
                tan_out[p, j] += dq_dk * dk
            tan_out[p, j] /= h


@njit(cache=True, inline="always")
def dividends_ahead(tau, expiry, rate, div_yield, div_tau, div_amt, to_expiry, out):
    """Per step: the dividends / strike still to come after its end, discounted to it at the
    rate (flat data), and with ``to_expiry`` also from the ex-date to expiry at the yield,
    into ``out``. The rule of :func:`stopline.solve._dividends_ahead`: with ``to_expiry``,
    the amount by which they lower the discounted forward of the spot model; without, their
    present value at the step's end (escrowed model)."""
    for k in range(tau.shape[0]):
        out[k] = 0.0
    for i in range(div_tau.shape[0]):
        t_d = div_tau[i]
        t_ex = expiry - t_d
        for k in range(tau.shape[0]):
            if tau[k] > t_d * (1.0 + 1e-12) + 1e-14:
                t_now = expiry - tau[k]
                if t_now < 0.0:
                    t_now = 0.0
                grow = rate * (t_ex - t_now)
                if to_expiry:
                    grow = grow + div_yield * (expiry - t_ex)
                out[k] += div_amt[i] * math.exp(-grow)


@njit(cache=True, inline="always")
def put_after_dividends(tau, expiry, rate, div_yield, div_tau, div_amt, s, out):
    """Per step: the best zero-vol value / strike of a put exercised just after one of the
    ex-dates still to come, from spot / strike ``s`` at the step's end (spot model, flat
    data), into ``out``: the rule of :func:`stopline.solve._put_after_dividends`."""
    order = np.argsort(-div_tau, kind="mergesort")  # calendar order
    for k in range(tau.shape[0]):
        spot = s
        t_cur = expiry - tau[k]
        if t_cur < 0.0:
            t_cur = 0.0
        t_now = t_cur
        best = 0.0
        for ii in range(order.shape[0]):
            i = order[ii]
            t_d = div_tau[i]
            if not tau[k] > t_d * (1.0 + 1e-12) + 1e-14:
                continue
            t_ex = expiry - t_d
            grow = rate * (t_ex - t_cur) - div_yield * (t_ex - t_cur)
            spot = spot * math.exp(grow) - div_amt[i]
            if not spot > 0.0:
                spot = 0.0
            t_cur = t_ex
            left = 1.0 - spot
            value = math.exp(-(rate * (t_ex - t_now))) * (left if left > 0.0 else 0.0)
            if value > best:
                best = value
        out[k] = best


@njit(cache=True, inline="always")
def crossing(gap, exercise, x_min, h, is_put):
    """Where the held minus the exercise value changes sign at the in-the-money end, or NaN:
    the rule of :func:`stopline.solve._crossing` (the critical log-moneyness just before an
    ex-date, placed by linear interpolation of the gap)."""
    n = gap.shape[0]
    prev = -1
    j = 1 if is_put else n - 2
    stop = n - 1 if is_put else 0
    step = 1 if is_put else -1
    while j != stop:
        if not (gap[j] <= 0.0 and exercise[j] > 0.0):
            if prev < 0:
                return math.nan
            g0 = gap[prev]
            g1 = gap[j]
            frac = g0 / (g0 - g1) if g0 != g1 else 0.0
            return x_min + (prev + (j - prev) * frac) * h
        prev = j
        j += step
    return math.nan


@njit(cache=True, inline="always")
def _shifted_exercise(ex, pv, is_put, out):
    """Exercise value / strike on the nodes when the spot is ``e^x + pv`` (escrowed grid)."""
    for j in range(ex.shape[0]):
        s = ex[j] + pv
        e = 1.0 - s if is_put else s - 1.0
        out[j] = e if e > 0.0 else 0.0


@njit(cache=True)
def _march_piece(v, ex, x_min, h, plan, tau, dt, theta, start, stop, is_put, american, vol,
                 tan, bnd, b, fitted):
    """March steps ``start .. stop - 1`` of a flat plan (rows of :func:`flat_plan`) with the
    direct sweep and the vol tangent (``tan``, (n_par, n)), on nodes standing for the spots
    ``ex``; the critical log-moneyness of each step into ``bnd[b:]``."""
    n = v.shape[0]
    n_par = tan.shape[0]
    ms = stop - start
    seg = np.empty((7, ms))
    seg_t = np.empty((3, ms))
    for k in range(ms):
        for r in range(7):
            seg[r, k] = plan[r, start + k]
        seg_t[0, k] = tau[start + k]
        seg_t[1, k] = dt[start + k]
        seg_t[2, k] = theta[start + k]
    dco = np.empty((2 if n_par else 0, 3, ms if n_par else 0))
    dfar = np.empty((2 if n_par else 0, 2, ms if n_par else 0))
    if n_par:
        tangent_coefficients(h, vol, is_put, american, ex[0], ex[n - 1], seg_t[0], seg[3],
                             seg[4], dco, dfar)
    sb = np.empty(ms)
    march_direct_tangents(
        v, ex, x_min, h, seg_t[1], seg_t[2], seg[0], seg[1], seg[2], seg[3], seg[4], seg[5],
        seg[6], is_put, american, sb, tan, dco, dfar, fitted,
    )
    for k in range(ms):
        bnd[b + k] = sb[k]


@njit(cache=True)
def solve_cash_dividends(is_put, american, escrowed, expiry, rate, div_yield, vol, x_min, h, n,
                         strike_index, h_coef, tau, dt, theta, ev_idx, ev_amt, div_tau, div_amt,
                         escrow_pv, n_par, v, payoff, tan, bnd, fitted):
    """One grid with cash dividends, flat data, frame "x", the direct sweep:
    :func:`stopline.solve.solve` for that case (the same steps, in one call).

    The march goes segment by segment between ex-date levels (:func:`march_direct_tangents`);
    at each ex-date the values jump (:func:`dividend_jump_tangents`) and the critical
    log-moneyness just before it is placed (:func:`crossing`). Spot model: the far-field
    values include the dividends still to come (:func:`dividends_ahead`). Escrowed model
    (American; a European one has no events and is the flat problem): the nodes stand for
    ``S* = S - PV_t(D)``, the march goes one step at a time with the exercise and far-field
    values of the spot ``S* + PV_t(D)``, the jump lowers that shift by the dividend, and the
    boundary is reported for the spot itself.

    Parameters
    ----------
    is_put, american, escrowed : bool
        Contract flags; the dividend model.
    expiry, rate, div_yield, vol : float
        Years to expiry and flat market data.
    x_min, h, n, strike_index : float, float, int, int
        The grid.
    h_coef : tuple of 3 floats
        Operator coefficients ``(lo, di, up)`` on spacing ``h``.
    tau, dt, theta : ndarray, shape (m,)
        The time grid (:func:`stopline.solve.time_grid_for`): a level on every ex-date.
    ev_idx, ev_amt : ndarray, shape (n_ev,)
        Levels of the ex-dates, increasing (int64), and the dividend / strike paid there.
    div_tau, div_amt : ndarray, shape (n_div,)
        Time to expiry of every ex-date and its dividend / strike, in the schedule's order.
    escrow_pv : float
        Present value of the dividends / strike at valuation (escrowed model; else unused).
    n_par : int
        0, or 1 to march the vol tangent alongside (into ``tan[0]``).
    v, payoff : ndarray, shape (n,)
        Written: value / strike and exercise value / strike at valuation.
    tan : ndarray, shape (n_par, n)
        Written: d(value / strike)/d vol at valuation.
    bnd : ndarray, shape (m + n_ev,)
        Written: critical log-moneyness of the spot after each step and, after the steps
        ending at an ex-date, one entry for the state just before it (as
        :attr:`stopline.solve.GridSolution.boundary_times` orders them).
    fitted : bool
        Passed on to :func:`march_direct_tangents`; False, as the general path marches with
        cash dividends (:func:`stopline.solve.fitted_boundary`). An argument rather than a
        constant so that the march compiled for the flat problem serves here too.
    """
    m = tau.shape[0]
    plan = np.empty((7, m))
    flat_plan(tau, h_coef, rate, div_yield, vol, False, plan)
    ahead = np.zeros(m)  # spot model: the dividends still to come, as the far field sees them
    pv_after = np.zeros(m)  # escrowed model: their present value
    df_plain = np.empty(m)  # the discount factor of the far field below the grid at a jump
    for k in range(m):
        df_plain[k] = plan[3, k]
    if escrowed:
        dividends_ahead(tau, expiry, rate, div_yield, div_tau, div_amt, False, pv_after)
    else:
        dividends_ahead(tau, expiry, rate, div_yield, div_tau, div_amt, True, ahead)
        lim = math.exp(x_min)
        for k in range(m):
            a = ahead[k]
            if is_put:
                cap = lim * plan[4, k]
                if cap < a:
                    a = cap
            plan[3, k] = plan[3, k] + a
        if is_put and american:
            # waiting for the dividends ahead to take the spot to zero (see
            # stopline.solve._solve_with_dividends): a floor under the far field
            wait = np.empty(m)
            put_after_dividends(tau, expiry, rate, div_yield, div_tau, div_amt, lim, wait)
            for k in range(m):
                floor = wait[k] + lim * plan[4, k]
                if floor > plan[3, k]:
                    plan[3, k] = floor
                if ahead[k] >= lim * plan[4, k] and wait[k] > df_plain[k]:
                    df_plain[k] = wait[k]
    ex = node_exp(x_min, h, n)
    payoff_nodes(ex, is_put, 1.0, strike_index, v)
    for j in range(n):
        payoff[j] = v[j]
    for p in range(n_par):
        for j in range(n):
            tan[p, j] = 0.0
    work = np.empty(n)
    held = np.empty(n)
    exv = np.empty(n)
    ex_k = np.empty(n)
    b_pv = np.zeros(m + ev_idx.shape[0])
    tan_work = np.empty((n_par, n))
    per_step = escrowed and american
    n_ev = ev_idx.shape[0]
    e = 0
    start = 0
    b = 0
    while start < m:
        last = ev_idx[e] if e < n_ev else m - 1
        if per_step:
            for k in range(start, last + 1):
                # the nodes stand for S* = S - PV: the march's spot is e^x + PV_t(D)
                for j in range(n):
                    ex_k[j] = ex[j] + pv_after[k]
                _march_piece(v, ex_k, x_min, h, plan, tau, dt, theta, k, k + 1, is_put,
                             american, vol, tan, bnd, b, fitted)
                b_pv[b] = pv_after[k]
                b += 1
        else:
            _march_piece(v, ex, x_min, h, plan, tau, dt, theta, start, last + 1, is_put,
                         american, vol, tan, bnd, b, fitted)
            b += last + 1 - start
        if e < n_ev and last == ev_idx[e]:
            d = ev_amt[e]
            if escrowed:
                pv_before = pv_after[last] + d
                _shifted_exercise(ex, pv_before, is_put, exv)
            else:
                pv_before = 0.0
                for j in range(n):
                    exv[j] = payoff[j]
            drop = 0.0 if escrowed else d
            if american:
                value_after_drop(v, x_min, h, drop, df_plain[last], plan[4, last], ahead[last],
                                 is_put, True, held)
            dividend_jump_tangents(v, tan, exv, x_min, h, drop, pv_before, df_plain[last],
                                   plan[4, last], ahead[last], is_put, american, work, tan_work)
            if american:
                for j in range(n):
                    held[j] -= exv[j]
                bnd[b] = crossing(held, exv, x_min, h, is_put)
            else:
                bnd[b] = math.nan
            b_pv[b] = pv_before
            b += 1
            for j in range(n):
                v[j] = work[j]
            for p in range(n_par):
                for j in range(n):
                    tan[p, j] = tan_work[p, j]
            e += 1
        start = last + 1
    if per_step:
        for i in range(b):
            bnd[i] = math.log(math.exp(bnd[i]) + b_pv[i])  # the critical spot S* + PV
        _shifted_exercise(ex, escrow_pv, is_put, payoff)


@njit(cache=True)
def price_pair_cash_dividends(
    is_put, american, escrowed, expiry, rate, div_yield, vol, x_spot, escrow_pv, strike, x_min,
    h, n, strike_index, coef_c, coef_f, tau_c, dt_c, theta_c, ev_idx_c, tau_f, dt_f, theta_f,
    ev_idx_f, ev_amt, div_tau, div_amt, n_par, out, bnd_x, raw, spot, fitted,
):
    """:func:`price_pair` with cash dividends: both grids of the Richardson pair
    (:func:`solve_cash_dividends`) and their read-off at the spot.

    ``tau_*, dt_*, theta_*`` are the coarse and fine time grids (a level on every ex-date),
    ``ev_idx_*`` the levels of the ex-dates on each, ``ev_amt`` the dividend / strike paid
    at each, ``div_tau, div_amt`` every dividend of the schedule. ``x_spot`` is
    ``ln((S - PV(D)) / K)`` under the escrowed model, where ``escrow_pv`` is ``PV(D) / K``.
    ``n_par`` is 0, or 1 for the vol tangent. ``out`` is laid out as :func:`price_pair`'s
    (the rate tangents, not marched here, are zero); ``bnd_x`` (fine steps + ex-dates) gets
    the fine grid's critical log-moneyness (of the spot), ``raw`` and ``spot`` the critical
    spots (no monotone fit: the boundary jumps at ex-dates). ``fitted``: False (see
    :func:`solve_cash_dividends`).
    """
    pv = escrow_pv if escrowed else 0.0
    for g in range(2):  # coarse, then fine; one call site each (compile time)
        fine = g == 1
        hg = 0.5 * h if fine else h
        ng = 2 * n - 1 if fine else n
        kg = strike_index
        if fine and strike_index >= 0:
            kg = 2 * strike_index
        tau = tau_f if fine else tau_c
        ev_idx = ev_idx_f if fine else ev_idx_c
        bnd = bnd_x if fine else np.empty(tau.shape[0] + ev_idx.shape[0])
        v = np.empty(ng)
        payoff = np.empty(ng)
        tan = np.empty((n_par, ng))
        solve_cash_dividends(
            is_put, american, escrowed, expiry, rate, div_yield, vol, x_min, hg, ng, kg,
            coef_f if fine else coef_c, tau, dt_f if fine else dt_c,
            theta_f if fine else theta_c, ev_idx, ev_amt, div_tau, div_amt, escrow_pv, n_par,
            v, payoff, tan, bnd, fitted,
        )
        x_b = bnd[bnd.shape[0] - 1] if american else math.nan
        if pv != 0.0 and math.isfinite(x_b):
            # the boundary of the spot, read in the frame of the nodes (S - PV)
            s_star = math.exp(x_b) - pv
            x_b = math.log(s_star) if s_star > 0.0 else -math.inf
        out[8 + 2 * g] = 0.0
        out[9 + 2 * g] = 0.0
        for i in range(n_par + 1):  # the values, then the tangent (read like a European)
            val, dlt, gam, exd = read_off(
                v if i == 0 else tan[i - 1], payoff, x_min, hg, x_spot, strike,
                american and i == 0, x_b if i == 0 else math.nan, is_put,
                pv if i == 0 else 0.0,
            )
            if i == 0:
                out[4 * g] = val
                out[4 * g + 1] = dlt
                out[4 * g + 2] = gam
                out[4 * g + 3] = 1.0 if exd else 0.0
            else:
                out[8 + 2 * g] = val
    boundary_spots(bnd_x, strike, False, is_put, raw, spot)
