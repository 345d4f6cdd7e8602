"""Year fractions between dates.

stopline measures time in years. When expiries or ex-dividend dates are given as calendar
dates, the year fraction from the valuation date is ACT/365 fixed unless told otherwise
(common practice for equity options).
"""

from __future__ import annotations

import datetime as _dt

from .errors import InputError

__all__ = ["DAY_COUNTS", "DEFAULT_DAY_COUNT", "year_fraction", "parse_date"]

#: Supported conventions: days in the year for an actual-days numerator.
DAY_COUNTS: dict[str, float] = {"ACT/365F": 365.0, "ACT/360": 360.0}
DEFAULT_DAY_COUNT = "ACT/365F"


def parse_date(field: str, value: object) -> _dt.date:
    """Return a :class:`datetime.date` from a date, datetime or ISO string ``YYYY-MM-DD``."""
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    if isinstance(value, str):
        try:
            return _dt.date.fromisoformat(value.strip())
        except ValueError:
            pass
    raise InputError(field, value, "must be a date (YYYY-MM-DD)")


def year_fraction(start: _dt.date, end: _dt.date, day_count: str = DEFAULT_DAY_COUNT) -> float:
    """Year fraction from ``start`` to ``end`` (negative if ``end`` is earlier).

    Parameters
    ----------
    start, end : datetime.date
        The two dates.
    day_count : {"ACT/365F", "ACT/360"}
        Actual days divided by 365 or by 360.
    """
    try:
        basis = DAY_COUNTS[day_count]
    except KeyError:
        raise InputError("day_count", day_count, f"must be one of {', '.join(DAY_COUNTS)}") from None
    return (end - start).days / basis
