"""Stand-in for :mod:`stopline.implied` until that module lands (branch ``implied``).

Same signature and error type as the planned ``stopline.implied.implied_vol``; the cross-check
imports the real module when it exists and this one otherwise. Delete this file once
``stopline.implied`` is merged.
"""

from __future__ import annotations

from scipy.optimize import brentq

from .contract import Option
from .errors import InputError
from .market import Market
from .pricing import price

__all__ = ["ImpliedVolError", "implied_vol"]

_VOL_LO, _VOL_HI = 1e-3, 4.0


class ImpliedVolError(ValueError):
    """No volatility in the searched range reproduces the quote."""


def implied_vol(option: Option, market: Market, quote: float, *, accuracy: str = "standard") -> float:
    """Volatility at which the model price equals ``quote`` (Brent's method).

    Parameters
    ----------
    option : Option
        The contract.
    market : Market
        Market data; its ``vol`` is ignored.
    quote : float
        Price to match.
    accuracy : str
        Pricing preset for each trial price.

    Returns
    -------
    float
        The implied volatility.

    Raises
    ------
    ImpliedVolError
        If the quote lies outside the prices reachable with vol in [0.1 %, 400 %].

    References
    ----------
    Brent, R. P. (1973), Algorithms for Minimization without Derivatives, ch. 4.
    """
    if not quote >= 0.0:
        raise InputError("quote", quote, "must be a number >= 0")

    def gap(v: float) -> float:
        m = Market(market.spot, market.rate, v, market.div_yield, market.valuation_date)
        return price(option, m, accuracy=accuracy).price - quote

    lo, hi = gap(_VOL_LO), gap(_VOL_HI)
    if lo > 0.0:
        raise ImpliedVolError(
            f"quote {quote:g} is below the model value at the lowest vol searched "
            f"({lo + quote:.6g} at vol {_VOL_LO:g})"
        )
    if hi < 0.0:
        raise ImpliedVolError(
            f"quote {quote:g} is above the model value at the highest vol searched "
            f"({hi + quote:.6g} at vol {_VOL_HI:g})"
        )
    return float(brentq(gap, _VOL_LO, _VOL_HI, xtol=1e-7, rtol=1e-10, maxiter=100))
