"""The perpetual American option and how close a finite life comes to it.

A finite-life American option is worth at most the perpetual one (Merton 1973), and at least
what the perpetual option's exercise rule earns when it is cut off at expiry: exercise when the
spot first reaches the perpetual critical spot, if that happens before expiry. That rule's value
is the payoff at the critical spot times ``E[e^{-r tau}; tau <= T]`` for the first-passage time
``tau`` of the log-spot, a Brownian motion with drift, to the critical level, which has a closed
form. When the two bounds are closer than a preset's target, the price is known without a grid:
the far corners of the domain (vol 5 for 50 years), where a grid would need more nodes than it
may have.

References
----------
Merton, R. C. (1973), Theory of rational option pricing, Bell J. Econ. Manag. Sci. 4(1)
(perpetual American options). Harrison, J. M. (1985), Brownian Motion and Stochastic Flow
Systems, Wiley (first-passage times of Brownian motion with drift and their Laplace
transform).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.special import log_ndtr, ndtr

__all__ = ["PerpetualBounds", "perpetual_bounds", "hit_discount", "Bounds", "american_bounds"]


@dataclass(frozen=True)
class PerpetualBounds:
    """Bounds on a finite-life American option from the perpetual one, in units of the strike.

    Attributes
    ----------
    upper : float
        The perpetual option's value (Merton 1973).
    lower : float
        The value of the perpetual exercise rule cut off at expiry.
    critical : float
        The perpetual critical spot / strike.
    exponent : float
        ``lambda`` with ``upper = payoff(critical) (S / S*)^lambda`` (negative for a put,
        above 1 for a call).
    """

    upper: float
    lower: float
    critical: float
    exponent: float


def hit_discount(a: float, m: float, vol: float, rate: float, t: float) -> tuple[float, float]:
    """``E[e^{-r tau}]`` and ``E[e^{-r tau}; tau > t]`` for the first time ``tau`` that
    ``m u + vol W_u`` reaches ``a > 0`` (``rate > 0``).

    With ``g = sqrt(m^2 + 2 r vol^2)`` the first is ``exp(a (m - g) / vol^2)`` and

        E[e^{-r tau}; tau <= t] = exp(a (m - g) / vol^2) N((g t - a) / (vol sqrt t))
                                + exp(a (m + g) / vol^2) N((-g t - a) / (vol sqrt t)),

    so the second is the difference, computed from logarithms (the second exponential can
    overflow where its normal factor underflows).
    """
    g = math.sqrt(m * m + 2.0 * rate * vol * vol)
    sd = vol * math.sqrt(t)
    log_all = a * (m - g) / (vol * vol)
    # E[...; tau > t] = e^{a(m-g)/v^2} N((a - g t)/sd) - e^{a(m+g)/v^2} N((-a - g t)/sd)
    first = log_all + float(log_ndtr((a - g * t) / sd))
    second = a * (m + g) / (vol * vol) + float(log_ndtr((-a - g * t) / sd))
    late = math.exp(first) - math.exp(second) if second < 700.0 else math.inf
    return math.exp(log_all), max(late, 0.0)


def perpetual_bounds(
    is_put: bool, spot_over_strike: float, t: float, rate: float, div_yield: float, vol: float,
) -> PerpetualBounds | None:
    """Bounds on the American option of life ``t`` from the perpetual one, or None where the
    perpetual option has no finite critical spot (exercise never optimal: a put needs
    ``rate > 0``, a call ``div_yield > 0``) or the spot is already in its exercise region.

    A call is bounded through put-call symmetry (McDonald and Schroder 1998): the call on
    ``S`` with strike ``K`` is the put on ``K`` with strike ``S``, rate and yield swapped.
    """
    if not is_put:
        sym = perpetual_bounds(True, 1.0 / spot_over_strike, t, div_yield, rate, vol)
        if sym is None:
            return None
        s = spot_over_strike  # in units of the call's strike: scale the put's by S / K
        return PerpetualBounds(sym.upper * s, sym.lower * s, 1.0 / sym.critical,
                               1.0 - sym.exponent)
    if not (rate > 0.0 and vol > 0.0 and t > 0.0):
        return None
    mu = rate - div_yield - 0.5 * vol * vol
    lam = (-mu - math.sqrt(mu * mu + 2.0 * rate * vol * vol)) / (vol * vol)
    critical = lam / (lam - 1.0)
    if not critical > 0.0 or spot_over_strike <= critical:
        return None  # no critical spot left in floating point (rate far below vol^2), or
        # the spot already in the exercise region
    a = math.log(spot_over_strike / critical)  # down to the critical level: drift -mu
    whole, late = hit_discount(a, -mu, vol, rate, t)
    payoff = 1.0 - critical
    return PerpetualBounds(payoff * whole, payoff * (whole - late), critical, lam)


@dataclass(frozen=True)
class Bounds:
    """Bounds on a finite-life American option, in units of the strike, with the slope and
    curvature in the spot (per unit of spot / strike) of the bound that sets them.

    Attributes
    ----------
    upper, lower : float
        The value lies in ``[lower, upper]``.
    delta, gamma : float
        First and second derivatives in ``S / K`` of the perpetual option's value where it is
        the upper bound, else of the European value.
    """

    upper: float
    lower: float
    delta: float
    gamma: float


def _european(is_put: bool, s: float, t: float, r: float, q: float, vol: float
              ) -> tuple[float, float, float]:
    """Black-Scholes-Merton value, delta and gamma of a European option (strike 1)."""
    sd = vol * math.sqrt(t)
    d1 = (math.log(s) + (r - q) * t) / sd + 0.5 * sd
    dq, dr = math.exp(-q * t), math.exp(-r * t)
    gamma = dq * math.exp(-0.5 * d1 * d1) / (math.sqrt(2.0 * math.pi) * s * sd)
    if is_put:
        return dr * float(ndtr(sd - d1)) - s * dq * float(ndtr(-d1)), -dq * float(ndtr(-d1)), gamma
    return s * dq * float(ndtr(d1)) - dr * float(ndtr(d1 - sd)), dq * float(ndtr(d1)), gamma


def american_bounds(
    is_put: bool, spot_over_strike: float, t: float, rate: float, div_yield: float, vol: float,
) -> Bounds | None:
    """Bounds on the American option of life ``t`` that need no grid, or None.

    Below: the European value and the intrinsic value (an American option is worth at least
    both, Merton 1973), and the perpetual exercise rule cut off at expiry
    (:func:`perpetual_bounds`). Above: the perpetual option; without one, the strike for a put
    with ``rate >= 0`` and the spot for a call with ``div_yield >= 0`` (Merton 1973). None
    when there is no upper bound of these kinds.
    """
    s = spot_over_strike
    euro, e_delta, e_gamma = _european(is_put, s, t, rate, div_yield, vol)
    low = max(euro, (1.0 - s) if is_put else (s - 1.0), 0.0)
    perp = perpetual_bounds(is_put, s, t, rate, div_yield, vol)
    if perp is not None:
        lam = perp.exponent
        return Bounds(perp.upper, max(perp.lower, low), lam * perp.upper / s,
                      lam * (lam - 1.0) * perp.upper / (s * s))
    if is_put and rate >= 0.0:
        return Bounds(1.0, low, e_delta, e_gamma)
    if not is_put and div_yield >= 0.0:
        return Bounds(s, low, e_delta, e_gamma)
    return None
