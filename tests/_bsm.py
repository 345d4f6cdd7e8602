"""Black-Scholes-Merton closed forms for the tests (Black and Scholes 1973; Merton 1973).

Written from the published formulas with scipy.stats.norm, independently of stopline.
"""

from __future__ import annotations

import math

from scipy.stats import norm


def bsm(kind: str, s: float, k: float, t: float, r: float, q: float, v: float) -> dict[str, float]:
    """Price and Greeks (theta per year of calendar time, vega and rho per unit)."""
    sq = v * math.sqrt(t)
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * t) / sq
    d2 = d1 - sq
    dq, dr = math.exp(-q * t), math.exp(-r * t)
    pdf = norm.pdf(d1)
    gamma = dq * pdf / (s * sq)
    vega = s * dq * pdf * math.sqrt(t)
    if kind == "call":
        price = s * dq * norm.cdf(d1) - k * dr * norm.cdf(d2)
        delta = dq * norm.cdf(d1)
        theta = -s * dq * pdf * v / (2 * math.sqrt(t)) + q * s * dq * norm.cdf(d1) - r * k * dr * norm.cdf(d2)
        rho = k * t * dr * norm.cdf(d2)
    else:
        price = k * dr * norm.cdf(-d2) - s * dq * norm.cdf(-d1)
        delta = -dq * norm.cdf(-d1)
        theta = -s * dq * pdf * v / (2 * math.sqrt(t)) - q * s * dq * norm.cdf(-d1) + r * k * dr * norm.cdf(-d2)
        rho = -k * t * dr * norm.cdf(-d2)
    return {"price": price, "delta": delta, "gamma": gamma, "theta": theta, "vega": vega, "rho": rho}
