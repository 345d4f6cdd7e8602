"""Closed-form prices: Black-Scholes-Merton European options and perpetual American options.

Conventions: time in years, ``rate`` and ``div_yield`` continuously compounded, ``vol``
annualised. Greeks are derivatives of the price: theta with respect to calendar time (per
year, so usually negative), vega per unit of volatility (per 1.00, not per 1 %), rho per unit
of the rate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import ndtr

from .._validate import check_real
from ..contract import MAX_EXPIRY_YEARS, STRIKE_RANGE
from ..errors import InputError
from ..market import RATE_RANGE, SPOT_RANGE, VOL_RANGE, YIELD_RANGE
from ._inputs import check_contract, check_kind

__all__ = ["BSMResult", "PerpetualResult", "bsm", "bsm_price", "perpetual_american"]

FloatOrArray = float | NDArray[np.float64]

_INV_SQRT_2PI = 1.0 / math.sqrt(2.0 * math.pi)


@dataclass(frozen=True)
class BSMResult:
    """Price and Greeks of a European option under Black-Scholes-Merton.

    Each field is a float when every input was a scalar, otherwise an ndarray of the
    broadcast shape of the inputs.

    Attributes
    ----------
    price : float or ndarray
        Option value.
    delta : float or ndarray
        dV/dS.
    gamma : float or ndarray
        d2V/dS2.
    theta : float or ndarray
        dV/dt, per year of calendar time (equal to -dV/d(expiry)).
    vega : float or ndarray
        dV/dvol, per unit of volatility.
    rho : float or ndarray
        dV/drate, per unit of the rate.
    """

    price: FloatOrArray
    delta: FloatOrArray
    gamma: FloatOrArray
    theta: FloatOrArray
    vega: FloatOrArray
    rho: FloatOrArray


@dataclass(frozen=True)
class PerpetualResult:
    """Value of a perpetual American option and its constant exercise boundary.

    Attributes
    ----------
    value : float
        Option value at the given spot.
    critical_spot : float
        Spot at which exercise becomes optimal: exercise a put at or below it, a call at or
        above it.
    """

    value: float
    critical_spot: float


def _check_array(
    field: str, value: ArrayLike, lo: float, hi: float, lo_open: bool = True
) -> NDArray[np.float64]:
    """Return ``value`` as a float array after checking every element lies in range."""
    if np.ndim(value) == 0:
        item = value.item() if isinstance(value, np.ndarray | np.generic) else value
        return np.asarray(check_real(field, item, lo=lo, hi=hi, lo_open=lo_open))
    arr = np.asarray(value, dtype=np.float64)
    low = arr <= lo if lo_open else arr < lo
    bad = ~np.isfinite(arr) | low | (arr > hi)
    if bad.any():
        first = arr[bad].flat[0]
        left = "(" if lo_open else "["
        raise InputError(field, float(first), f"every element must be in {left}{lo:g}, {hi:g}]")
    return arr


def _scalar_or_array(x: NDArray[np.float64], scalar: bool) -> FloatOrArray:
    return float(x) if scalar else x


def bsm(
    kind: str,
    spot: ArrayLike,
    strike: ArrayLike,
    expiry: ArrayLike,
    rate: ArrayLike,
    div_yield: ArrayLike,
    vol: ArrayLike,
) -> BSMResult:
    """Black-Scholes-Merton price and Greeks of a European put or call.

    The numeric inputs broadcast against each other like numpy arrays.

    Parameters
    ----------
    kind : {"put", "call"}
        Option type.
    spot, strike : float or array_like
        Spot and strike, > 0.
    expiry : float or array_like
        Time to expiry in years, in (0, 50].
    rate, div_yield : float or array_like
        Risk-free rate and continuous dividend yield, continuously compounded.
    vol : float or array_like
        Volatility, in (0, 5].

    Returns
    -------
    BSMResult
        Price, delta, gamma, theta (per year), vega and rho (per unit).

    Raises
    ------
    InputError
        If any input lies outside its domain.

    References
    ----------
    Black, F. and Scholes, M. (1973), "The pricing of options and corporate liabilities",
    Journal of Political Economy 81(3), 637-654.
    Merton, R. C. (1973), "Theory of rational option pricing", Bell Journal of Economics and
    Management Science 4(1), 141-183.
    """
    is_call = check_kind(kind)
    scalar = all(np.ndim(v) == 0 for v in (spot, strike, expiry, rate, div_yield, vol))
    s = _check_array("spot", spot, *SPOT_RANGE)
    k = _check_array("strike", strike, *STRIKE_RANGE, lo_open=False)
    t = _check_array("expiry", expiry, 0.0, MAX_EXPIRY_YEARS)
    r = _check_array("rate", rate, *RATE_RANGE, lo_open=False)
    q = _check_array("div_yield", div_yield, *YIELD_RANGE, lo_open=False)
    v = _check_array("vol", vol, *VOL_RANGE)
    s, k, t, r, q, v = np.broadcast_arrays(s, k, t, r, q, v)

    sqrt_t = np.sqrt(t)
    sd = v * sqrt_t
    d1 = (np.log(s / k) + (r - q + 0.5 * v * v) * t) / sd
    d2 = d1 - sd
    df_r = np.exp(-r * t)
    df_q = np.exp(-q * t)
    pdf_d1 = _INV_SQRT_2PI * np.exp(-0.5 * d1 * d1)
    sign = 1.0 if is_call else -1.0
    n1 = ndtr(sign * d1)
    n2 = ndtr(sign * d2)

    price = sign * (s * df_q * n1 - k * df_r * n2)
    delta = sign * df_q * n1
    gamma = df_q * pdf_d1 / (s * sd)
    vega = s * df_q * pdf_d1 * sqrt_t
    theta = -s * df_q * pdf_d1 * v / (2.0 * sqrt_t) + sign * (q * s * df_q * n1 - r * k * df_r * n2)
    rho = sign * k * t * df_r * n2
    return BSMResult(
        price=_scalar_or_array(price, scalar),
        delta=_scalar_or_array(delta, scalar),
        gamma=_scalar_or_array(gamma, scalar),
        theta=_scalar_or_array(theta, scalar),
        vega=_scalar_or_array(vega, scalar),
        rho=_scalar_or_array(rho, scalar),
    )


def bsm_price(
    kind: str,
    spot: ArrayLike,
    strike: ArrayLike,
    expiry: ArrayLike,
    rate: ArrayLike,
    div_yield: ArrayLike,
    vol: ArrayLike,
) -> FloatOrArray:
    """Black-Scholes-Merton price of a European put or call (the ``price`` of :func:`bsm`).

    References
    ----------
    Black, F. and Scholes, M. (1973); Merton, R. C. (1973). See :func:`bsm`.
    """
    return bsm(kind, spot, strike, expiry, rate, div_yield, vol).price


def perpetual_american(
    kind: str, spot: float, strike: float, rate: float, div_yield: float, vol: float
) -> PerpetualResult:
    """Perpetual American put or call: value and optimal exercise boundary.

    With ``lam`` the root of ``vol**2/2 lam (lam - 1) + (rate - div_yield) lam - rate = 0``
    (negative for the put, above one for the call), the boundary is
    ``S* = strike lam / (lam - 1)`` and the value ``(strike - S*) (S / S*)**lam`` for a put
    above ``S*`` (``(S* - strike) (S / S*)**lam`` for a call below it); beyond ``S*`` the
    value is the exercise value.

    Parameters
    ----------
    kind : {"put", "call"}
        Option type.
    spot, strike : float
        Spot and strike, > 0.
    rate, div_yield : float
        Continuously compounded rate and dividend yield. A put needs ``rate > 0`` and a call
        ``div_yield > 0``: otherwise exercise is never optimal and the value is not attained.
    vol : float
        Volatility, in (0, 5].

    Returns
    -------
    PerpetualResult
        Value at ``spot`` and the critical spot.

    Raises
    ------
    InputError
        For inputs outside their domain, including ``rate <= 0`` for a put or
        ``div_yield <= 0`` for a call.

    References
    ----------
    Merton, R. C. (1973), "Theory of rational option pricing", Bell Journal of Economics and
    Management Science 4(1), 141-183, section 8.
    McKean, H. P. (1965), appendix to Samuelson, "Rational theory of warrant pricing",
    Industrial Management Review 6(2), 13-31.
    """
    c = check_contract(kind, spot, strike, 1.0, rate, div_yield, vol)
    if not c.is_call and c.rate <= 0.0:
        raise InputError("rate", rate, "must be > 0 for a perpetual put to have a boundary")
    if c.is_call and c.div_yield <= 0.0:
        raise InputError(
            "div_yield", div_yield, "must be > 0 for a perpetual call to have a boundary"
        )
    half_var = 0.5 * c.vol * c.vol
    b = c.rate - c.div_yield - half_var
    disc2 = b * b + 4.0 * half_var * c.rate
    if disc2 < 0.0:
        raise InputError(
            "rate", rate, "gives no real exercise boundary with this div_yield and vol"
        )
    disc = math.sqrt(disc2)
    # Roots of half_var lam^2 + b lam - rate = 0, each written without cancellation.
    if c.is_call:
        lam = (-b + disc) / (2.0 * half_var) if b <= 0.0 else 2.0 * c.rate / (b + disc)
    else:
        lam = (-b - disc) / (2.0 * half_var) if b >= 0.0 else -2.0 * c.rate / (disc - b)
    s_star = c.strike * lam / (lam - 1.0)
    if c.is_call:
        if c.spot >= s_star:
            return PerpetualResult(c.spot - c.strike, s_star)
        return PerpetualResult((s_star - c.strike) * (c.spot / s_star) ** lam, s_star)
    if c.spot <= s_star:
        return PerpetualResult(c.strike - c.spot, s_star)
    return PerpetualResult((c.strike - s_star) * (c.spot / s_star) ** lam, s_star)
