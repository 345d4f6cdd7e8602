"""Small checks used at the public boundary; each raises :class:`InputError` naming the field."""

from __future__ import annotations

import math
from numbers import Real

from .errors import InputError

__all__ = ["check_real", "check_choice"]


def check_real(
    field: str,
    value: object,
    *,
    lo: float | None = None,
    hi: float | None = None,
    lo_open: bool = True,
    hi_open: bool = False,
) -> float:
    """Return ``value`` as a float after checking it is a finite real number in range.

    Parameters
    ----------
    field : str
        Name used in the error message.
    value : object
        The value to check. Booleans and strings are refused.
    lo, hi : float, optional
        Bounds of the allowed interval; ``None`` means unbounded on that side.
    lo_open, hi_open : bool
        Whether each bound is excluded.

    Raises
    ------
    InputError
        If the value is not a finite real number in the interval.
    """
    if isinstance(value, bool) or not isinstance(value, Real):
        raise InputError(field, value, "must be a number")
    v = float(value)
    if not math.isfinite(v):
        raise InputError(field, value, "must be finite")
    lo_ok = lo is None or (v > lo if lo_open else v >= lo)
    hi_ok = hi is None or (v < hi if hi_open else v <= hi)
    if not (lo_ok and hi_ok):
        left = "(" if lo_open else "["
        right = ")" if hi_open else "]"
        lo_s = "-inf" if lo is None else f"{lo:g}"
        hi_s = "inf" if hi is None else f"{hi:g}"
        raise InputError(field, value, f"must be in {left}{lo_s}, {hi_s}{right}")
    return v


def check_choice(field: str, value: object, choices: tuple[str, ...]) -> str:
    """Return ``value`` lower-cased after checking it is one of ``choices``."""
    if not isinstance(value, str) or value.strip().lower() not in choices:
        raise InputError(field, value, f"must be one of {', '.join(choices)}")
    return value.strip().lower()
