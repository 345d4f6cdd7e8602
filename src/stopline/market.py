"""The market: spot, rates, dividends and volatility seen on the valuation date."""

from __future__ import annotations

import datetime as _dt
import functools
import math
from collections.abc import Iterable
from dataclasses import dataclass

from ._validate import check_choice, check_real
from .daycount import parse_date
from .errors import InputError
from .termstructure import Curve, as_curve

__all__ = [
    "Market",
    "SPOT_RANGE",
    "RATE_RANGE",
    "YIELD_RANGE",
    "VOL_RANGE",
    "DIVIDEND_MODELS",
    "parse_dividends",
]

#: Accepted ranges (inclusive unless noted in the error message).
SPOT_RANGE = (0.0, 1e9)
RATE_RANGE = (-0.25, 1.0)
YIELD_RANGE = (-0.25, 1.0)
VOL_RANGE = (0.0, 5.0)
#: How a cash dividend acts on the price process (see :mod:`stopline.dividends`).
DIVIDEND_MODELS = ("spot", "escrowed")

Dividend = tuple[_dt.date | float, float]


@dataclass(frozen=True)
class Market:
    """Market data for one underlying on one valuation date.

    Parameters
    ----------
    spot : float
        Price of the underlying, > 0.
    rate : float or PiecewiseConstant
        Risk-free rate, continuously compounded, per year (may be negative); a
        :class:`~stopline.PiecewiseConstant` gives a term structure in years from valuation.
    vol : float or PiecewiseConstant
        Volatility of the underlying, annualised, as a decimal (0.25 for 25 %), in (0, 5].
    div_yield : float or PiecewiseConstant, optional
        Continuous dividend yield (or borrow-adjusted carry), per year.
    valuation_date : datetime.date or str, optional
        Needed when expiries or ex-dates are dates; year fractions are ACT/365 fixed.
    dividends : sequence of (ex-date or years, amount), or str, optional
        Cash dividends: the ex-date (a date, an ISO string, or years from valuation) and the
        amount per share, > 0. A string is read by :func:`parse_dividends`. Dividends after
        the option's expiry are ignored (with a warning in ``Result.stats.warnings``).
    dividend_model : {"spot", "escrowed"}
        ``"spot"``: the spot drops by the amount on the ex-date. ``"escrowed"``: the spot
        minus the present value of the dividends up to expiry follows the lognormal model.
    """

    spot: float
    rate: Curve
    vol: Curve
    div_yield: Curve = 0.0
    valuation_date: _dt.date | None = None
    dividends: tuple[Dividend, ...] = ()
    dividend_model: str = "spot"

    def __post_init__(self) -> None:
        lo, hi = SPOT_RANGE
        object.__setattr__(self, "spot", check_real("spot", self.spot, lo=lo, hi=hi))
        lo, hi = RATE_RANGE
        object.__setattr__(self, "rate", as_curve("rate", self.rate, lo, hi, lo_open=False))
        lo, hi = YIELD_RANGE
        object.__setattr__(
            self, "div_yield", as_curve("div_yield", self.div_yield, lo, hi, lo_open=False)
        )
        lo, hi = VOL_RANGE
        object.__setattr__(self, "vol", as_curve("vol", self.vol, lo, hi, lo_open=True))
        if self.valuation_date is not None:
            object.__setattr__(
                self, "valuation_date", parse_date("valuation_date", self.valuation_date)
            )
        object.__setattr__(
            self, "dividend_model",
            check_choice("dividend_model", self.dividend_model, DIVIDEND_MODELS),
        )
        divs = self.dividends
        if isinstance(divs, str):
            divs = parse_dividends(divs)
        object.__setattr__(self, "dividends", _check_dividends(divs, self.valuation_date))

    @functools.cached_property
    def has_term_structure(self) -> bool:
        """True if the rate, the yield or the vol is a curve rather than a number (computed
        once: every price asks)."""
        return not (isinstance(self.rate, float) and isinstance(self.div_yield, float)
                    and isinstance(self.vol, float))


def _check_dividends(divs: object, valuation_date: _dt.date | None) -> tuple[Dividend, ...]:
    if divs is None:
        return ()
    if not isinstance(divs, Iterable):
        raise InputError("dividends", divs, "must be a list of (ex-date or years, amount) pairs")
    out: list[Dividend] = []
    for item in divs:
        if isinstance(item, str) or not isinstance(item, Iterable) or len(tuple(item)) != 2:
            raise InputError("dividends", item, "each entry must be an (ex-date or years, amount) pair")
        when, amount = tuple(item)
        amount = check_real("dividends", amount, lo=0.0)
        if isinstance(when, (_dt.date, str)):
            when = parse_date("dividends", when)
            if valuation_date is not None and when < valuation_date:
                raise InputError(
                    "dividends", when.isoformat(),
                    f"ex-date is before the valuation date {valuation_date.isoformat()}",
                )
        else:
            if isinstance(when, bool) or not isinstance(when, (int, float)) or not math.isfinite(when):
                raise InputError("dividends", when, "ex-date must be a date or years from valuation")
            when = float(when)
            if when < 0.0:
                raise InputError("dividends", when, "ex-date is before the valuation date (negative years)")
        out.append((when, amount))
    return tuple(out)


def parse_dividends(text: str | None) -> list[Dividend]:
    """Read cash dividends from text: ``WHEN:AMOUNT`` items separated by ``;``.

    ``WHEN`` is an ex-date ``YYYY-MM-DD`` or years from valuation; ``AMOUNT`` is the cash
    amount per share. Empty text gives no dividends.

    Parameters
    ----------
    text : str or None
        E.g. ``"2027-03-15:0.42;2027-06-15:0.42"`` or ``"0.25:1.0"``.

    Returns
    -------
    list of (datetime.date or float, float)

    Raises
    ------
    InputError
        Naming the field ``dividends`` and the item that cannot be read.

    Examples
    --------
    >>> parse_dividends("2027-03-15:0.42; 0.5:1")
    [(datetime.date(2027, 3, 15), 0.42), (0.5, 1.0)]
    """
    if text is None:
        return []
    out: list[Dividend] = []
    for raw in str(text).split(";"):
        item = raw.strip()
        if not item:
            continue
        when_s, sep, amount_s = item.rpartition(":")
        if not sep or not when_s.strip() or not amount_s.strip():
            raise InputError("dividends", item, "must be DATE_OR_YEARS:AMOUNT, e.g. 2027-03-15:0.42")
        try:
            amount = float(amount_s)
        except ValueError:
            raise InputError("dividends", item, "amount must be a number") from None
        when_s = when_s.strip()
        when: _dt.date | float
        try:
            when = float(when_s)
        except ValueError:
            try:
                when = parse_date("dividends", when_s)
            except InputError:
                raise InputError(
                    "dividends", item, "ex-date must be a date YYYY-MM-DD or years from valuation"
                ) from None
        if not math.isfinite(amount) or amount <= 0.0:
            raise InputError("dividends", item, "amount must be a finite number > 0")
        out.append((when, amount))
    return out
