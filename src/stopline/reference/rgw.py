"""Roll-Geske-Whaley: American call on a stock paying one known cash dividend."""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.optimize import brentq

from .._validate import check_real
from ..errors import InputError
from ._inputs import check_contract
from ._normal import bivariate_normal_cdf, norm_cdf

__all__ = ["RGWResult", "rgw_american_call"]


@dataclass(frozen=True)
class RGWResult:
    """Roll-Geske-Whaley value and the critical ex-dividend spot.

    Attributes
    ----------
    value : float
        American call value.
    critical_spot : float
        Escrowed spot ``S*`` (the spot just after the dividend is paid) above which exercise
        just before the ex-date is optimal; ``inf`` when early exercise is never optimal
        (the dividend is below ``strike (1 - exp(-rate (expiry - ex_time)))``), in which case
        the value is the Black-Scholes call on ``spot - PV(dividend)``.
    """

    value: float
    critical_spot: float


def _bs_call(s: float, k: float, tau: float, r: float, vol: float) -> float:
    sd = vol * math.sqrt(tau)
    d1 = (math.log(s / k) + r * tau) / sd + 0.5 * sd
    return s * norm_cdf(d1) - k * math.exp(-r * tau) * norm_cdf(d1 - sd)


def rgw_american_call(
    spot: float,
    strike: float,
    expiry: float,
    rate: float,
    div_yield: float,
    vol: float,
    ex_time: float,
    dividend: float,
) -> RGWResult:
    """American call with one cash dividend by the Roll-Geske-Whaley formula.

    The model is the escrowed one: ``S - D exp(-rate (ex_time - t))`` follows geometric
    Brownian motion with volatility ``vol`` until the ex-date. With no dividend yield an
    American call is exercised, if at all, just before the ex-date; the formula values that
    compound choice with the bivariate normal distribution. The critical ex-dividend spot
    ``I`` solves ``C_BS(I, strike, expiry - ex_time) = I + dividend - strike``.

    Parameters
    ----------
    spot, strike : float
        Spot (cum-dividend) and strike, > 0.
    expiry : float
        Time to expiry in years, in (0, 50].
    rate : float
        Continuously compounded rate.
    div_yield : float
        Must be 0: the formula assumes no continuous yield (kept for a uniform signature).
    vol : float
        Volatility of the escrowed spot, in (0, 5].
    ex_time : float
        Ex-dividend time in years, in (0, expiry).
    dividend : float
        Cash amount, >= 0, with present value below the spot.

    Returns
    -------
    RGWResult
        Value and critical ex-dividend spot.

    Raises
    ------
    InputError
        For inputs outside their domain.

    References
    ----------
    Roll, R. (1977), "An analytic valuation formula for unprotected American call options on
    stocks with known dividends", Journal of Financial Economics 5(2), 251-258.
    Geske, R. (1979), "A note on an analytical valuation formula for unprotected American
    call options on stocks with known dividends", Journal of Financial Economics 7(4),
    375-380.
    Whaley, R. E. (1981), "On the valuation of American call options on stocks with known
    dividends", Journal of Financial Economics 9(2), 207-211.
    """
    c = check_contract("call", spot, strike, expiry, rate, div_yield, vol)
    if c.div_yield != 0.0:
        raise InputError("div_yield", div_yield, "must be 0 for the Roll-Geske-Whaley formula")
    t = check_real("ex_time", ex_time, lo=0.0, hi=c.expiry, hi_open=True)
    dv = check_real("dividend", dividend, lo=0.0, lo_open=False)
    r, k, sig, big_t = c.rate, c.strike, c.vol, c.expiry
    s_ex = c.spot - dv * math.exp(-r * t)
    if s_ex <= 0.0:
        raise InputError("dividend", dividend, "present value must be below the spot")

    tau = big_t - t
    if dv <= k * -math.expm1(-r * tau):
        return RGWResult(_bs_call(s_ex, k, big_t, r, sig), math.inf)

    def excess(i: float) -> float:
        return _bs_call(i, k, tau, r, sig) - (i + dv - k)

    if dv >= k:
        # Exercise just before the ex-date is optimal at every spot.
        return RGWResult(c.spot - k * math.exp(-r * t), 0.0)
    # excess -> K - D > 0 as I -> 0 and -> K (1 - e^{-r tau}) - D < 0 as I -> inf.
    hi = k
    while excess(hi) > 0.0:
        hi *= 2.0
    lo = hi / 2.0 if hi > k else 1e-12 * k
    crit = brentq(excess, lo, hi, xtol=1e-13 * k, rtol=1e-15, maxiter=200)

    sd_t, sd_big = sig * math.sqrt(t), sig * math.sqrt(big_t)
    a1 = (math.log(s_ex / k) + r * big_t) / sd_big + 0.5 * sd_big
    a2 = a1 - sd_big
    b1 = (math.log(s_ex / crit) + r * t) / sd_t + 0.5 * sd_t
    b2 = b1 - sd_t
    rho = -math.sqrt(t / big_t)
    value = (
        s_ex * norm_cdf(b1)
        + s_ex * bivariate_normal_cdf(a1, -b1, rho)
        - k * math.exp(-r * big_t) * bivariate_normal_cdf(a2, -b2, rho)
        - (k - dv) * math.exp(-r * t) * norm_cdf(b2)
    )
    return RGWResult(value, crit)
