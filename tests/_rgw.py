"""Roll-Geske-Whaley value of an American call with one cash dividend, for the tests.

Written from the published formula (Roll 1977; Geske 1979; Whaley 1981; as set out in Haug,
The Complete Guide to Option Pricing Formulas), independently of stopline. The bivariate
normal is integrated with scipy's quad to ~1e-13.
"""

from __future__ import annotations

import math

from scipy.integrate import quad
from scipy.optimize import brentq
from scipy.stats import norm


def _bivariate(a: float, b: float, rho: float) -> float:
    s = math.sqrt(1.0 - rho * rho)
    return quad(lambda x: norm.pdf(x) * norm.cdf((b - rho * x) / s), -math.inf, a,
                epsabs=1e-14, epsrel=1e-13)[0]


def _bs_call(s: float, k: float, t: float, r: float, v: float) -> float:
    d1 = (math.log(s / k) + (r + 0.5 * v * v) * t) / (v * math.sqrt(t))
    return s * norm.cdf(d1) - k * math.exp(-r * t) * norm.cdf(d1 - v * math.sqrt(t))


def rgw_call(s: float, k: float, t: float, r: float, v: float, t_d: float, d: float) -> tuple[float, float]:
    """(value, critical ex-dividend spot) of the American call; dividend ``d`` at ``t_d``."""
    sp = s - d * math.exp(-r * t_d)
    crit = brentq(lambda x: _bs_call(x, k, t - t_d, r, v) - x - d + k, 1e-6 * k, 1e4 * k,
                  xtol=1e-13)
    a1 = (math.log(sp / k) + (r + 0.5 * v * v) * t) / (v * math.sqrt(t))
    a2 = a1 - v * math.sqrt(t)
    b1 = (math.log(sp / crit) + (r + 0.5 * v * v) * t_d) / (v * math.sqrt(t_d))
    b2 = b1 - v * math.sqrt(t_d)
    rho = -math.sqrt(t_d / t)
    value = (sp * norm.cdf(b1) + sp * _bivariate(a1, -b1, rho)
             - k * math.exp(-r * t) * _bivariate(a2, -b2, rho)
             - (k - d) * math.exp(-r * t_d) * norm.cdf(b2))
    return value, crit
