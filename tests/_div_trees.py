"""Binomial trees with cash dividends, written for the tests independently of stopline.

Cox, Ross and Rubinstein (1979) trees. Two treatments of a cash dividend ``D`` at ``t_d``:

- escrowed (Hull, Options, Futures, and Other Derivatives, numerical procedures chapter):
  the tree is built for ``S* = S - PV(D)``; at nodes up to the ex-date the spot is
  ``S* + D e^{-r (t_d - t)}``, which sets the exercise value;
- spot drop: the tree is built for the spot; on the ex-date level the value just before is
  the value just after at ``max(S - D, 0)``, read by cubic interpolation in ``ln S`` between
  the level's nodes (the same treatment as the finite-difference engine), floored by the
  exercise value for an American option.

Both replace the last step by the Black-Scholes value (Broadie and Detemple 1996, "BBS"),
which makes the error close to ``c / n`` so that two trees extrapolate (Richardson).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import norm


def _crr(s0: float, t: float, r: float, vol: float, n: int,
         q: float = 0.0) -> tuple[float, float, float]:
    dt = t / n
    u = math.exp(vol * math.sqrt(dt))
    p = (math.exp((r - q) * dt) - 1 / u) / (u - 1 / u)
    return u, p, math.exp(-r * dt)


def _bs_last_step(sign: float, spot: np.ndarray, k: float, dt: float, r: float,
                  vol: float, q: float = 0.0) -> np.ndarray:
    """European value one step before expiry (Broadie and Detemple 1996, BBS tree)."""
    sq = vol * math.sqrt(dt)
    d1 = (np.log(spot / k) + (r - q + 0.5 * vol * vol) * dt) / sq
    d2 = d1 - sq
    return sign * (spot * math.exp(-q * dt) * norm.cdf(sign * d1)
                   - k * math.exp(-r * dt) * norm.cdf(sign * d2))


def escrowed_tree(kind: str, s: float, k: float, t: float, r: float, vol: float,
                  t_d: float, d: float, n: int, bbs: bool = True, q: float = 0.0) -> float:
    """American option, one dividend, escrowed model (Hull's known-dividend tree).

    ``bbs=False`` gives the plain CRR tree of the textbook example; ``q`` is a continuous
    yield paid on top of the cash dividend (``S*`` then grows at ``r - q``).
    """
    sign = 1.0 if kind == "call" else -1.0
    s_star = s - d * math.exp(-r * t_d)
    u, p, disc = _crr(s_star, t, r, vol, n, q)
    dt = t / n
    for step in range(n - 1, -1, -1):
        j = np.arange(step + 1)
        if step == n - 1 and bbs:
            v = _bs_last_step(sign, s_star * u ** (2.0 * j - step), k, dt, r, vol, q)
        elif step == n - 1:
            v = np.maximum(sign * (s_star * u ** (2.0 * np.arange(n + 1) - n) - k), 0.0)
            v = disc * (p * v[1:] + (1 - p) * v[:-1])
        else:
            v = disc * (p * v[1:] + (1 - p) * v[:-1])
        spot = s_star * u ** (2.0 * j - step)
        time = step * dt
        if time <= t_d + 1e-12:
            spot = spot + d * math.exp(-r * (t_d - time))
        v = np.maximum(v, sign * (spot - k))
    return float(v[0])


def _cubic_at(xs: np.ndarray, ys: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Four-point Lagrange interpolation on uniform nodes ``xs`` at each ``x`` (inside)."""
    h = xs[1] - xs[0]
    i = np.clip(np.floor((x - xs[0]) / h).astype(int) - 1, 0, xs.size - 4)
    t = (x - xs[i]) / h
    y0, y1, y2, y3 = ys[i], ys[i + 1], ys[i + 2], ys[i + 3]
    return (-(t - 1) * (t - 2) * (t - 3) / 6 * y0 + t * (t - 2) * (t - 3) / 2 * y1
            - t * (t - 1) * (t - 3) / 2 * y2 + t * (t - 1) * (t - 2) / 6 * y3)


def spot_drop_tree(kind: str, s: float, k: float, t: float, r: float, vol: float,
                   t_d: float, d: float, n: int, american: bool = True) -> float:
    """One cash dividend, the spot dropping by ``d`` at ``t_d`` (must be a whole step)."""
    sign = 1.0 if kind == "call" else -1.0
    u, p, disc = _crr(s, t, r, vol, n)
    step_d = round(t_d / t * n)
    if abs(step_d * t / n - t_d) > 1e-9:
        raise ValueError("t_d must fall on a step")
    dt = t / n
    for step in range(n - 1, -1, -1):
        j = np.arange(step + 1)
        spot = s * u ** (2.0 * j - step)
        if step == n - 1:
            v = _bs_last_step(sign, spot, k, dt, r, vol)
        else:
            v = disc * (p * v[1:] + (1 - p) * v[:-1])
        if step == step_d:
            dropped = spot - d
            xs = np.log(spot)
            out = np.empty_like(v)
            inside = dropped > spot[0]
            out[inside] = _cubic_at(xs, v, np.log(dropped[inside]))
            below = np.maximum(dropped[~inside], 0.0)
            tau = t - t_d
            if sign > 0:  # call far below the lowest node: worthless
                out[~inside] = 0.0
            else:
                floor = k - below if american else k * math.exp(-r * tau) - below
                out[~inside] = floor
            v = out
        if american:
            v = np.maximum(v, sign * (spot - k))
    return float(v[0])


def equal_variance_tree(kind: str, s: float, k: float, r: float, q: float, pieces: list[tuple[float, float, int]], *, american: bool = True) -> float:
    """CRR tree under piecewise-constant vol and rate: steps of equal variance.

    ``pieces`` lists ``(length in years, vol, steps)`` from valuation on; the steps must make
    ``vol^2 * length / steps`` the same for every piece, so that one up factor serves the
    whole tree and it recombines (common practice). ``r`` is a list of rates per piece.
    The last step is the Black-Scholes value (BBS).
    """
    var = pieces[0][1] ** 2 * pieces[0][0] / pieces[0][2]
    for length, vol, n in pieces:
        if abs(vol * vol * length / n - var) > 1e-14:
            raise ValueError("pieces must have equal variance per step")
    u = math.exp(math.sqrt(var))
    steps = []  # (dt, rate, vol) of every step from valuation
    for (length, vol, n), rate in zip(pieces, r, strict=True):
        steps += [(length / n, rate, vol)] * n
    sign = 1.0 if kind == "call" else -1.0
    n_all = len(steps)
    v = None
    for i in range(n_all - 1, -1, -1):
        dt, rate, vol = steps[i]
        j = np.arange(i + 1)
        spot = s * u ** (2.0 * j - i)
        if i == n_all - 1:
            sq = vol * math.sqrt(dt)
            d1 = (np.log(spot / k) + (rate - q + 0.5 * vol * vol) * dt) / sq
            d2 = d1 - sq
            v = sign * (spot * math.exp(-q * dt) * norm.cdf(sign * d1)
                        - k * math.exp(-rate * dt) * norm.cdf(sign * d2))
        else:
            p = (math.exp((rate - q) * dt) - 1 / u) / (u - 1 / u)
            v = math.exp(-rate * dt) * (p * v[1:] + (1 - p) * v[:-1])
        if american:
            v = np.maximum(v, sign * (spot - k))
    return float(v[0])
