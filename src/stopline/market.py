"""The market: spot, rates, dividend yield and volatility seen on the valuation date."""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass

from ._validate import check_real
from .daycount import parse_date

__all__ = ["Market", "SPOT_RANGE", "RATE_RANGE", "YIELD_RANGE", "VOL_RANGE"]

#: Accepted ranges (inclusive unless noted in the error message).
SPOT_RANGE = (0.0, 1e9)
RATE_RANGE = (-0.25, 1.0)
YIELD_RANGE = (-0.25, 1.0)
VOL_RANGE = (0.0, 5.0)


@dataclass(frozen=True)
class Market:
    """Market data for one underlying on one valuation date.

    Parameters
    ----------
    spot : float
        Price of the underlying, > 0.
    rate : float
        Risk-free rate, continuously compounded, per year (may be negative).
    vol : float
        Volatility of the underlying, annualised, as a decimal (0.25 for 25 %), in (0, 5].
    div_yield : float, optional
        Continuous dividend yield (or borrow-adjusted carry), per year.
    valuation_date : datetime.date or str, optional
        Needed when expiries are dates; year fractions are ACT/365 fixed.
    """

    spot: float
    rate: float
    vol: float
    div_yield: float = 0.0
    valuation_date: _dt.date | None = None

    def __post_init__(self) -> None:
        lo, hi = SPOT_RANGE
        object.__setattr__(self, "spot", check_real("spot", self.spot, lo=lo, hi=hi))
        lo, hi = RATE_RANGE
        object.__setattr__(self, "rate", check_real("rate", self.rate, lo=lo, hi=hi, lo_open=False))
        lo, hi = YIELD_RANGE
        object.__setattr__(
            self, "div_yield", check_real("div_yield", self.div_yield, lo=lo, hi=hi, lo_open=False)
        )
        lo, hi = VOL_RANGE
        object.__setattr__(self, "vol", check_real("vol", self.vol, lo=lo, hi=hi))
        if self.valuation_date is not None:
            object.__setattr__(
                self, "valuation_date", parse_date("valuation_date", self.valuation_date)
            )
