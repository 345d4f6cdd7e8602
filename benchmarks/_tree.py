"""A minimal binomial tree for the benchmark, used when ``stopline.reference.trees`` is absent.

Cox-Ross-Rubinstein lattice with a Black-Scholes-Merton last step and Richardson extrapolation
over ``n / 2`` and ``n`` steps ("BBSR"), the tree Broadie and Detemple found the best value for
time among binomial methods for American options.

References
----------
Cox, J. C., Ross, S. A. and Rubinstein, M. (1979), Option pricing: a simplified approach,
Journal of Financial Economics 7(3).
Broadie, M. and Detemple, J. (1996), American option valuation: new bounds, approximations,
and a comparison of existing methods, Review of Financial Studies 9(4).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["bbsr_price"]


@njit(cache=True)
def _bsm(is_put, s, k, t, r, q, vol):
    sq = vol * math.sqrt(t)
    d1 = (math.log(s / k) + (r - q + 0.5 * vol * vol) * t) / sq
    d2 = d1 - sq
    dfr = math.exp(-r * t)
    dfq = math.exp(-q * t)
    if is_put:
        return k * dfr * 0.5 * math.erfc(d2 / math.sqrt(2.0)) - s * dfq * 0.5 * math.erfc(
            d1 / math.sqrt(2.0)
        )
    return s * dfq * 0.5 * math.erfc(-d1 / math.sqrt(2.0)) - k * dfr * 0.5 * math.erfc(
        -d2 / math.sqrt(2.0)
    )


@njit(cache=True)
def _crr_bs(is_put, american, s, k, t, r, q, vol, n):
    dt = t / n
    u = math.exp(vol * math.sqrt(dt))
    d = 1.0 / u
    p = (math.exp((r - q) * dt) - d) / (u - d)
    disc = math.exp(-r * dt)
    pu = disc * p
    pd = disc * (1.0 - p)
    # spot at lattice height j (j = -n .. n) is s u^j, stored at index j + n
    spots = np.empty(2 * n + 1)
    for j in range(2 * n + 1):
        spots[j] = s * math.exp((j - n) * vol * math.sqrt(dt))
    v = np.empty(n)
    m = n - 1
    for i in range(m + 1):
        si = spots[2 * i - m + n]
        e = _bsm(is_put, si, k, dt, r, q, vol)
        if american:
            x = k - si if is_put else si - k
            if x > e:
                e = x
        v[i] = e
    for step in range(m - 1, -1, -1):
        for i in range(step + 1):
            c = pu * v[i + 1] + pd * v[i]
            if american:
                si = spots[2 * i - step + n]
                x = k - si if is_put else si - k
                if x > c:
                    c = x
            v[i] = c
    return v[0]


def bbsr_price(
    kind: str, style: str, spot: float, strike: float, expiry: float, rate: float,
    div_yield: float, vol: float, steps: int,
) -> float:
    """BBSR price: ``2 V(n) - V(n / 2)`` with ``V`` the CRR price with a Black-Scholes last step."""
    is_put = kind == "put"
    american = style == "american"
    fine = _crr_bs(is_put, american, spot, strike, expiry, rate, div_yield, vol, steps)
    coarse = _crr_bs(is_put, american, spot, strike, expiry, rate, div_yield, vol, steps // 2)
    return 2.0 * fine - coarse
