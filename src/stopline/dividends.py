"""Discrete cash dividends: the schedule within an option's life and the two models.

Two ways of letting a cash dividend ``D`` paid at ex-date ``t_d`` act on the price process:

- ``"spot"``: the spot follows the lognormal model between ex-dates and drops by ``D`` at
  each one, so across it the value obeys ``V(S, t_d-) = V(max(S - D, 0), t_d+)`` (floored by
  the exercise value for an American option). The finite-difference engine applies this by
  interpolation on the grid at a time level placed on the ex-date
  (:func:`stopline._kernels.dividend_jump`).
- ``"escrowed"``: the spot minus the present value of the dividends up to expiry,
  ``S* = S - PV(D)``, follows the lognormal model with the given vol. A European option is
  then the Black-Scholes-Merton value on ``S*``; an American one is solved on ``S*`` with
  exercise value ``S* + PV_t(D) - K`` (call), whose present value of the dividends still to
  come drops at each ex-date. For a call with one dividend this is the model of the
  Roll-Geske-Whaley formula.

References
----------
Roll, R. (1977), An analytic valuation formula for unprotected American call options on
stocks with known dividends, J. Financial Economics 5. Geske, R. (1979), A note on an
analytical valuation formula for unprotected American call options on stocks with known
dividends, J. Financial Economics 7. Whaley, R. E. (1981), On the valuation of American call
options on stocks with known dividends, J. Financial Economics 9. Haug, E. G., Haug, J. and
Lewis, A. (2003), Back to basics: a new approach to the discrete dividend problem, Wilmott
Magazine (the spot model and the interpolation across the ex-date).
"""

from __future__ import annotations

import datetime as _dt
import functools
import math
from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from .daycount import DEFAULT_DAY_COUNT, year_fraction
from .errors import InputError
from .termstructure import Curve, PiecewiseConstant

__all__ = ["DividendSchedule", "dividend_schedule", "present_value"]

#: Ex-dates closer than this (years) are one event.
SAME_TIME = 1e-10


@dataclass(frozen=True)
class DividendSchedule:
    """Cash dividends within an option's life, merged by ex-date.

    Attributes
    ----------
    times : ndarray, shape (n_div,)
        Ex-dates in years from valuation, increasing, in ``(0, T]``.
    amounts : ndarray, shape (n_div,)
        Cash per share on each ex-date (several on one date are summed).
    warnings : tuple of str
        Dividends left out, and why.
    """

    times: FloatArray
    amounts: FloatArray
    warnings: tuple[str, ...] = ()


def _frozen_empty() -> FloatArray:
    out = np.empty(0)
    out.flags.writeable = False
    return out


#: The schedule of a market without cash dividends (shared; its arrays are read-only).
_NO_DIVIDENDS = DividendSchedule(_frozen_empty(), _frozen_empty())


def dividend_schedule(
    dividends: tuple[tuple[_dt.date | float, float], ...],
    expiry: float,
    valuation_date: _dt.date | None,
    day_count: str = DEFAULT_DAY_COUNT,
) -> DividendSchedule:
    """The dividends that fall within ``(0, T]``, in years from valuation.

    Parameters
    ----------
    dividends : tuple of (date or float, float)
        As held by :class:`~stopline.Market` (already checked).
    expiry : float
        Time to expiry ``T`` in years.
    valuation_date : datetime.date or None
        Needed for ex-dates given as dates.
    day_count : str
        Convention for dates.

    Raises
    ------
    InputError
        ``dividends`` if an ex-date lies before the valuation date; ``valuation_date`` if an
        ex-date is a date and there is none.
    """
    if not dividends:
        return _NO_DIVIDENDS
    try:
        return _cached_schedule(dividends, expiry, valuation_date, day_count)
    except TypeError:  # entries that cannot be a cache key (a list): built afresh
        return _build_schedule(dividends, expiry, valuation_date, day_count)


@functools.lru_cache(maxsize=1024)
def _cached_schedule(
    dividends: tuple[tuple[_dt.date | float, float], ...], expiry: float,
    valuation_date: _dt.date | None, day_count: str,
) -> DividendSchedule:
    """:func:`_build_schedule`, kept per process (a book prices each row several times, and
    its rows share dividend lists); the arrays are read-only, as they are shared."""
    out = _build_schedule(dividends, expiry, valuation_date, day_count)
    out.times.flags.writeable = False
    out.amounts.flags.writeable = False
    return out


def _build_schedule(
    dividends: tuple[tuple[_dt.date | float, float], ...], expiry: float,
    valuation_date: _dt.date | None, day_count: str,
) -> DividendSchedule:
    """The work of :func:`dividend_schedule` (see it)."""
    times: list[float] = []
    amounts: list[float] = []
    warnings: list[str] = []
    for when, amount in dividends:
        if isinstance(when, _dt.date):
            if valuation_date is None:
                raise InputError(
                    "valuation_date", None,
                    f"is needed when an ex-dividend date is a date (dividends={when.isoformat()})",
                )
            t = year_fraction(valuation_date, when, day_count)
            label = when.isoformat()
        else:
            t = float(when)
            label = f"{t:g}y"
        if t < 0.0:
            raise InputError("dividends", label, "ex-date is before the valuation date")
        if t == 0.0:
            warnings.append(
                f"dividend {amount:g} at {label} ignored: its ex-date is the valuation date, so "
                "the spot is taken as already ex-dividend"
            )
            continue
        if t > expiry + SAME_TIME:
            warnings.append(f"dividend {amount:g} at {label} ignored: its ex-date is after expiry")
            continue
        times.append(min(t, expiry))
        amounts.append(float(amount))
    order = np.argsort(times, kind="stable")
    t_sorted = np.asarray(times, dtype=np.float64)[order]
    a_sorted = np.asarray(amounts, dtype=np.float64)[order]
    merged_t: list[float] = []
    merged_a: list[float] = []
    for t, a in zip(t_sorted, a_sorted, strict=True):
        if merged_t and t - merged_t[-1] <= SAME_TIME:
            merged_a[-1] += a
        else:
            merged_t.append(float(t))
            merged_a.append(float(a))
    return DividendSchedule(
        np.asarray(merged_t, dtype=np.float64), np.asarray(merged_a, dtype=np.float64),
        tuple(warnings),
    )


def present_value(times: FloatArray, amounts: FloatArray, rate: Curve, at: float = 0.0) -> float:
    """Present value at time ``at`` of the dividends with ex-date after ``at``.

    Discounted at the risk-free rate (flat or a curve) from each ex-date back to ``at``.
    """
    total = 0.0
    for t, a in zip(times, amounts, strict=True):
        if t <= at:
            continue
        if isinstance(rate, PiecewiseConstant):
            total += a * math.exp(-rate.integral(at, t))
        else:
            total += a * math.exp(-float(rate) * (t - at))
    return total
