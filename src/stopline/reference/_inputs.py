"""Checks shared by the reference methods; each raises :class:`~stopline.errors.InputError`.

The accepted ranges are those of :class:`stopline.Option` and :class:`stopline.Market`, except
that the time to expiry must be strictly positive (an expired option needs no reference).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from numbers import Integral

from .._validate import check_choice, check_real
from ..contract import KINDS, MAX_EXPIRY_YEARS, STRIKE_RANGE, STYLES
from ..errors import InputError
from ..market import RATE_RANGE, SPOT_RANGE, VOL_RANGE, YIELD_RANGE

__all__ = [
    "Contract",
    "check_contract",
    "check_kind",
    "check_style",
    "check_steps",
    "check_dividends",
    "present_value",
    "MAX_STEPS",
]

#: Largest number of tree steps accepted (the work grows as steps squared).
MAX_STEPS = 200_000


@dataclass(frozen=True)
class Contract:
    """Validated scalar inputs of one vanilla option under flat market data."""

    is_call: bool
    spot: float
    strike: float
    expiry: float
    rate: float
    div_yield: float
    vol: float


def check_kind(kind: object) -> bool:
    """Return True for ``"call"``, False for ``"put"``."""
    return check_choice("kind", kind, KINDS) == "call"


def check_style(style: object) -> bool:
    """Return True for ``"american"``, False for ``"european"``."""
    return check_choice("style", style, STYLES) == "american"


def check_contract(
    kind: object,
    spot: object,
    strike: object,
    expiry: object,
    rate: object,
    div_yield: object,
    vol: object,
) -> Contract:
    """Validate the common scalar inputs and return them as a :class:`Contract`."""
    return Contract(
        is_call=check_kind(kind),
        spot=check_real("spot", spot, lo=SPOT_RANGE[0], hi=SPOT_RANGE[1]),
        strike=check_real("strike", strike, lo=STRIKE_RANGE[0], hi=STRIKE_RANGE[1], lo_open=False),
        expiry=check_real("expiry", expiry, lo=0.0, hi=MAX_EXPIRY_YEARS),
        rate=check_real("rate", rate, lo=RATE_RANGE[0], hi=RATE_RANGE[1], lo_open=False),
        div_yield=check_real(
            "div_yield", div_yield, lo=YIELD_RANGE[0], hi=YIELD_RANGE[1], lo_open=False
        ),
        vol=check_real("vol", vol, lo=VOL_RANGE[0], hi=VOL_RANGE[1]),
    )


def check_steps(steps: object, *, minimum: int = 1, odd: bool = False, even: bool = False) -> int:
    """Return ``steps`` as an int after checking its range and parity."""
    if isinstance(steps, bool) or not isinstance(steps, Integral):
        raise InputError("steps", steps, "must be an integer")
    n = int(steps)
    if not minimum <= n <= MAX_STEPS:
        raise InputError("steps", steps, f"must be in [{minimum}, {MAX_STEPS}]")
    if odd and n % 2 == 0:
        raise InputError("steps", steps, "must be odd")
    if even and n % 2 == 1:
        raise InputError("steps", steps, "must be even")
    return n


def check_dividends(dividends: object, expiry: float) -> list[tuple[float, float]]:
    """Return the cash dividends paid before expiry, sorted by time, same-time ones merged.

    Parameters
    ----------
    dividends : sequence of (float, float)
        ``(time in years, cash amount)`` pairs. Times must be > 0 and amounts >= 0. A dividend
        whose ex-date is at or after expiry cannot affect the option and is dropped.
    expiry : float
        Time to expiry in years.

    Returns
    -------
    list of (float, float)
        The dividends with ``0 < time < expiry``, in increasing time.
    """
    if dividends is None:
        return []
    try:
        items = list(dividends)  # type: ignore[call-overload]
    except TypeError:
        raise InputError("dividends", dividends, "must be a sequence of (time, amount)") from None
    merged: dict[float, float] = {}
    for item in items:
        try:
            t_raw, d_raw = item
        except (TypeError, ValueError):
            raise InputError("dividends", item, "each must be a (time, amount) pair") from None
        t = check_real("dividend time", t_raw, lo=0.0)
        d = check_real("dividend amount", d_raw, lo=0.0, lo_open=False)
        if t >= expiry * (1.0 - 1e-12) or d == 0.0:
            continue
        merged[t] = merged.get(t, 0.0) + d
    return sorted(merged.items())


def present_value(dividends: list[tuple[float, float]], rate: float, at: float = 0.0) -> float:
    """Present value at time ``at`` of the dividends paid strictly after ``at``."""
    return math.fsum(d * math.exp(-rate * (t - at)) for t, d in dividends if t > at)
