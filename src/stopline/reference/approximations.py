"""Analytic approximations of American option prices.

* :func:`baw_price` - Barone-Adesi & Whaley (1987), quadratic approximation of the early
  exercise premium;
* :func:`bjerksund_stensland_price` - Bjerksund & Stensland (2002), value of exercising at
  a two-piece flat boundary (a lower bound on the American price).

Both are approximations: their error against the true American price is typically of the
order of 1e-3 to 1e-2 relative, larger for long expiries. They serve as independent,
order-of-magnitude checks.

Exercise is never optimal for a put with ``rate <= 0`` and ``div_yield >= rate``, nor for a
call with ``div_yield <= 0`` and ``rate >= div_yield``; both functions then return the
European value. When ``div_yield < rate < 0`` (put) or ``rate < div_yield < 0`` (call) the
American option has two exercise boundaries, which neither method covers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.optimize import brentq

from ..errors import InputError
from ._inputs import Contract, check_contract
from ._normal import bivariate_normal_cdf, norm_cdf

__all__ = ["ApproximationResult", "baw_price", "bjerksund_stensland_price"]


@dataclass(frozen=True)
class ApproximationResult:
    """Value of an American approximation and the exercise boundary it assumes.

    Attributes
    ----------
    value : float
        Approximate American value.
    critical_spot : float
        The method's exercise boundary at valuation (exercise a put at or below it, a call at
        or above it): Barone-Adesi-Whaley's critical price, Bjerksund-Stensland's flat
        trigger for the first period. ``0`` (put) or ``inf`` (call) when early exercise is
        never optimal.
    """

    value: float
    critical_spot: float


def _european(c: Contract) -> float:
    sd = c.vol * math.sqrt(c.expiry)
    d1 = (math.log(c.spot / c.strike) + (c.rate - c.div_yield) * c.expiry) / sd + 0.5 * sd
    d2 = d1 - sd
    df_r, df_q = math.exp(-c.rate * c.expiry), math.exp(-c.div_yield * c.expiry)
    if c.is_call:
        return c.spot * df_q * norm_cdf(d1) - c.strike * df_r * norm_cdf(d2)
    return c.strike * df_r * norm_cdf(-d2) - c.spot * df_q * norm_cdf(-d1)


def _no_early_exercise(c: Contract) -> bool:
    """True when an American option is worth its European twin; raises on two boundaries."""
    if c.is_call:
        if c.div_yield < 0.0 and c.rate < c.div_yield:
            raise InputError(
                "div_yield",
                c.div_yield,
                "with rate < div_yield < 0 the call has two exercise boundaries, outside this approximation",
            )
        return c.div_yield <= 0.0
    if c.rate < 0.0 and c.div_yield < c.rate:
        raise InputError(
            "rate",
            c.rate,
            "with div_yield < rate < 0 the put has two exercise boundaries, outside this approximation",
        )
    return c.rate <= 0.0


def baw_price(
    kind: str, spot: float, strike: float, expiry: float, rate: float, div_yield: float, vol: float
) -> ApproximationResult:
    """Barone-Adesi & Whaley (1987) quadratic approximation of an American put or call.

    The early exercise premium solves the Black-Scholes equation with the time derivative
    term scaled by ``1 - exp(-rate expiry)`` and dropped; the critical spot matches value and
    slope to the exercise value.

    Parameters
    ----------
    kind : {"put", "call"}
        Option type.
    spot, strike : float
        Spot and strike, > 0.
    expiry : float
        Time to expiry in years, in (0, 50].
    rate, div_yield : float
        Continuously compounded rate and dividend yield (cost of carry ``rate - div_yield``).
    vol : float
        Volatility, in (0, 5].

    Returns
    -------
    ApproximationResult
        Approximate value and critical spot.

    References
    ----------
    Barone-Adesi, G. and Whaley, R. E. (1987), "Efficient analytic approximation of American
    option values", Journal of Finance 42(2), 301-320.
    MacMillan, L. W. (1986), "Analytic approximation for the American put option", Advances in
    Futures and Options Research 1, 119-139.
    """
    c = check_contract(kind, spot, strike, expiry, rate, div_yield, vol)
    if _no_early_exercise(c):
        return ApproximationResult(_european(c), math.inf if c.is_call else 0.0)
    r, q, sig, t, k = c.rate, c.div_yield, c.vol, c.expiry, c.strike
    var = sig * sig
    n_ = 2.0 * (r - q) / var
    # 2 r / (var (1 - e^{-r t})), with its limit 2 / (var t) at r = 0.
    m_over_k = 2.0 / (var * t) if r == 0.0 else 2.0 * r / (var * -math.expm1(-r * t))
    root = math.sqrt((n_ - 1.0) ** 2 + 4.0 * m_over_k)
    sd = sig * math.sqrt(t)
    df_q = math.exp(-q * t)

    def d1(s: float) -> float:
        return (math.log(s / k) + (r - q) * t) / sd + 0.5 * sd

    def european(s: float) -> float:
        return _european(Contract(c.is_call, s, k, t, r, q, sig))

    if c.is_call:
        q2 = 0.5 * (-(n_ - 1.0) + root)

        def gap(s: float) -> float:
            return s - k - european(s) - (1.0 - df_q * norm_cdf(d1(s))) * s / q2

        hi = 2.0 * k
        while gap(hi) < 0.0:
            hi *= 2.0
        s_star = brentq(gap, k, hi, xtol=1e-12 * k, rtol=1e-14, maxiter=200)
        if c.spot >= s_star:
            return ApproximationResult(c.spot - k, s_star)
        a2 = (s_star / q2) * (1.0 - df_q * norm_cdf(d1(s_star)))
        return ApproximationResult(_european(c) + a2 * (c.spot / s_star) ** q2, s_star)

    q1 = 0.5 * (-(n_ - 1.0) - root)

    def gap_put(s: float) -> float:
        return k - s - european(s) + (1.0 - df_q * norm_cdf(-d1(s))) * s / q1

    s_star = brentq(gap_put, 1e-10 * k, k, xtol=1e-12 * k, rtol=1e-14, maxiter=200)
    if c.spot <= s_star:
        return ApproximationResult(k - c.spot, s_star)
    a1 = -(s_star / q1) * (1.0 - df_q * norm_cdf(-d1(s_star)))
    return ApproximationResult(_european(c) + a1 * (c.spot / s_star) ** q1, s_star)


# --------------------------------------------------------------------------------------
# Bjerksund-Stensland (2002)
# --------------------------------------------------------------------------------------


def _phi(
    s: float, t: float, gamma: float, h: float, i: float, r: float, b: float, sig: float
) -> float:
    """``e^{-r t} E[S_t^gamma 1{S_t <= h}; S stays below i on [0, t]]``."""
    var = sig * sig
    sd = sig * math.sqrt(t)
    lam = (-r + gamma * b + 0.5 * gamma * (gamma - 1.0) * var) * t
    d = (math.log(s / h) + (b + (gamma - 0.5) * var) * t) / sd
    kappa = 2.0 * b / var + 2.0 * gamma - 1.0
    return (
        math.exp(lam)
        * s**gamma
        * (norm_cdf(-d) - (i / s) ** kappa * norm_cdf(-(d + 2.0 * math.log(i / s) / sd)))
    )


def _psi(
    s: float,
    t2: float,
    gamma: float,
    h: float,
    i2: float,
    i1: float,
    t1: float,
    r: float,
    b: float,
    sig: float,
) -> float:
    """``e^{-r t2} E[S_t2^gamma 1{S_t2 <= h}; S below i2 on [0, t1] and below i1 on [t1, t2]]``."""
    var = sig * sig
    drift1 = (b + (gamma - 0.5) * var) * t1
    drift2 = (b + (gamma - 0.5) * var) * t2
    sd1, sd2 = sig * math.sqrt(t1), sig * math.sqrt(t2)
    e1 = (math.log(s / i1) + drift1) / sd1
    e2 = (math.log(i2 * i2 / (s * i1)) + drift1) / sd1
    e3 = (math.log(s / i1) - drift1) / sd1
    e4 = (math.log(i2 * i2 / (s * i1)) - drift1) / sd1
    f1 = (math.log(s / h) + drift2) / sd2
    f2 = (math.log(i2 * i2 / (s * h)) + drift2) / sd2
    f3 = (math.log(i1 * i1 / (s * h)) + drift2) / sd2
    f4 = (math.log(s * i1 * i1 / (h * i2 * i2)) + drift2) / sd2
    rho = math.sqrt(t1 / t2)
    lam = -r + gamma * b + 0.5 * gamma * (gamma - 1.0) * var
    kappa = 2.0 * b / var + 2.0 * gamma - 1.0
    return (
        math.exp(lam * t2)
        * s**gamma
        * (
            bivariate_normal_cdf(-e1, -f1, rho)
            - (i2 / s) ** kappa * bivariate_normal_cdf(-e2, -f2, rho)
            - (i1 / s) ** kappa * bivariate_normal_cdf(-e3, -f3, -rho)
            + (i1 / i2) ** kappa * bivariate_normal_cdf(-e4, -f4, -rho)
        )
    )


def _bjs_call(s: float, k: float, t: float, r: float, b: float, sig: float) -> tuple[float, float]:
    """Bjerksund-Stensland 2002 call with cost of carry ``b``; needs ``b < r``, ``r > 0``."""
    var = sig * sig
    disc = (b / var - 0.5) ** 2 + 2.0 * r / var
    if disc <= 0.0:
        raise InputError("rate", r, "gives no exercise boundary in the Bjerksund-Stensland call")
    beta = (0.5 - b / var) + math.sqrt(disc)
    b_inf = beta / (beta - 1.0) * k
    b_zero = max(k, r / (r - b) * k)
    t1 = 0.5 * (math.sqrt(5.0) - 1.0) * t
    h1 = -(b * t1 + 2.0 * sig * math.sqrt(t1)) * k * k / ((b_inf - b_zero) * b_zero)
    h2 = -(b * t + 2.0 * sig * math.sqrt(t)) * k * k / ((b_inf - b_zero) * b_zero)
    i1 = b_zero + (b_inf - b_zero) * -math.expm1(h1)
    i2 = b_zero + (b_inf - b_zero) * -math.expm1(h2)
    if s >= i2:
        return s - k, i2
    alpha1 = (i1 - k) * i1**-beta
    alpha2 = (i2 - k) * i2**-beta

    def phi(tt: float, gamma: float, h: float, i: float) -> float:
        return _phi(s, tt, gamma, h, i, r, b, sig)

    def psi(gamma: float, h: float) -> float:
        return _psi(s, t, gamma, h, i2, i1, t1, r, b, sig)

    value = (
        alpha2 * s**beta
        - alpha2 * phi(t1, beta, i2, i2)
        + phi(t1, 1.0, i2, i2)
        - phi(t1, 1.0, i1, i2)
        - k * phi(t1, 0.0, i2, i2)
        + k * phi(t1, 0.0, i1, i2)
        + alpha1 * phi(t1, beta, i1, i2)
        - alpha1 * psi(beta, i1)
        + psi(1.0, i1)
        - psi(1.0, k)
        - k * psi(0.0, i1)
        + k * psi(0.0, k)
    )
    return value, i2


def bjerksund_stensland_price(
    kind: str, spot: float, strike: float, expiry: float, rate: float, div_yield: float, vol: float
) -> ApproximationResult:
    """Bjerksund & Stensland (2002) approximation of an American put or call.

    The call is valued as the option exercised when the spot first reaches a flat trigger,
    with one trigger on ``[0, t1]`` and another on ``[t1, expiry]``, ``t1`` at the golden
    section of the expiry. An exercise strategy that is feasible but not optimal, so the
    value is a lower bound on the American price. A put is priced by the put-call
    transformation ``P(S, K, r, q) = C(K, S, q, r)``.

    Parameters
    ----------
    kind, spot, strike, expiry, rate, div_yield, vol
        As in :func:`baw_price`.

    Returns
    -------
    ApproximationResult
        Approximate value and the trigger of the first period (for a put, the spot at or
        below which it is exercised).

    References
    ----------
    Bjerksund, P. and Stensland, G. (2002), "Closed form valuation of American options",
    Discussion paper, Norwegian School of Economics (NHH).
    Bjerksund, P. and Stensland, G. (1993), "Closed-form approximation of American options",
    Scandinavian Journal of Management 9, S87-S99.
    McDonald, R. and Schroder, M. (1998), "A parity result for American options", Journal of
    Computational Finance 1(3), 5-13.
    """
    c = check_contract(kind, spot, strike, expiry, rate, div_yield, vol)
    if _no_early_exercise(c):
        return ApproximationResult(_european(c), math.inf if c.is_call else 0.0)
    if c.is_call:
        value, trigger = _bjs_call(c.spot, c.strike, c.expiry, c.rate, c.rate - c.div_yield, c.vol)
        return ApproximationResult(value, trigger)
    # Put-call transformation: swap spot with strike and rate with yield.
    value, trigger = _bjs_call(c.strike, c.spot, c.expiry, c.div_yield, c.div_yield - c.rate, c.vol)
    # The trigger scales with the strike: the transformed call (spot K, strike S) is
    # exercised when K >= S * trigger / S_strike, i.e. when S <= K * S / trigger.
    return ApproximationResult(value, c.strike * c.spot / trigger)
