"""The contract: what is being priced, independent of the market."""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass

from ._validate import check_choice, check_real
from .daycount import DEFAULT_DAY_COUNT, parse_date, year_fraction
from .errors import InputError

__all__ = ["Option", "KINDS", "STYLES", "MAX_EXPIRY_YEARS", "STRIKE_RANGE"]

KINDS = ("put", "call")
STYLES = ("american", "european")
#: Longest expiry accepted, in years.
MAX_EXPIRY_YEARS = 50.0
#: Smallest and largest strike accepted.
STRIKE_RANGE = (1e-4, 1e8)


@dataclass(frozen=True)
class Option:
    """A vanilla put or call with American or European exercise.

    Parameters
    ----------
    kind : {"put", "call"}
        Right to sell (put) or buy (call) at the strike.
    strike : float
        Strike price, > 0.
    expiry : float or datetime.date or str
        Time to expiry in years (0 to 50; 0 means the option expires now and is worth its
        intrinsic value), or an expiry date (``datetime.date`` or ISO ``"YYYY-MM-DD"``), in
        which case the market's ``valuation_date`` turns it into years.
    style : {"american", "european"}
        Exercise at any time up to expiry, or only at expiry.

    Examples
    --------
    >>> Option("put", 100.0, 0.5)
    Option(kind='put', strike=100.0, expiry=0.5, style='american')
    """

    kind: str
    strike: float
    expiry: float | _dt.date
    style: str = "american"

    def __post_init__(self) -> None:
        object.__setattr__(self, "kind", check_choice("kind", self.kind, KINDS))
        object.__setattr__(self, "style", check_choice("style", self.style, STYLES))
        lo, hi = STRIKE_RANGE
        object.__setattr__(self, "strike", check_real("strike", self.strike, lo=lo, hi=hi, lo_open=False))
        if isinstance(self.expiry, (_dt.date, str)):
            object.__setattr__(self, "expiry", parse_date("expiry", self.expiry))
        else:
            object.__setattr__(
                self,
                "expiry",
                check_real("expiry", self.expiry, lo=0.0, hi=MAX_EXPIRY_YEARS, lo_open=False),
            )

    @property
    def is_put(self) -> bool:
        """True for a put."""
        return self.kind == "put"

    @property
    def is_american(self) -> bool:
        """True for American exercise."""
        return self.style == "american"

    def time_to_expiry(
        self, valuation_date: _dt.date | None, day_count: str = DEFAULT_DAY_COUNT
    ) -> float:
        """Time to expiry in years.

        Parameters
        ----------
        valuation_date : datetime.date or None
            Needed when the expiry is a date.
        day_count : str
            Convention for a date expiry (see :mod:`stopline.daycount`).

        Raises
        ------
        InputError
            If the expiry is a date and no valuation date is given, or the expiry date lies
            before the valuation date or more than 50 years after it.
        """
        if not isinstance(self.expiry, _dt.date):
            return float(self.expiry)
        if valuation_date is None:
            raise InputError(
                "valuation_date", None, "is needed when the expiry is a date (expiry="
                f"{self.expiry.isoformat()})"
            )
        t = year_fraction(valuation_date, self.expiry, day_count)
        if t < 0.0:
            raise InputError(
                "expiry",
                self.expiry.isoformat(),
                f"is before the valuation date {valuation_date.isoformat()}",
            )
        if t > MAX_EXPIRY_YEARS:
            raise InputError(
                "expiry", self.expiry.isoformat(), f"is more than {MAX_EXPIRY_YEARS:g} years away"
            )
        return t
