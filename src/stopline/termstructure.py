"""Term structures of rates, yields and volatility: piecewise-constant curves in time.

A curve gives one value on each interval of calendar time measured in years from the
valuation date: ``values[i]`` on ``(times[i-1], times[i]]`` (``times[-1] = 0`` implied), and
``values[-1]`` after the last time. The finite-difference engine places a time level on every
breakpoint, so each step sees constant coefficients and the scheme keeps its order.

For a European option under piecewise-constant (or any deterministic) coefficients the
Black-Scholes-Merton formula holds with the averaged rate and yield and the root-mean-square
volatility over the option's life (Merton 1973); :meth:`PiecewiseConstant.average` and
:meth:`PiecewiseConstant.rms` give those.

References
----------
Merton, R. C. (1973), Theory of rational option pricing, Bell Journal of Economics and
Management Science 4(1) (Black-Scholes with deterministic time-dependent coefficients).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from ._validate import check_real
from .errors import InputError

__all__ = ["PiecewiseConstant", "Curve", "as_curve", "curve_values"]


@dataclass(frozen=True, eq=False)
class PiecewiseConstant:
    """A step function of time: ``values[i]`` up to ``times[i]``, flat after the last time.

    Parameters
    ----------
    times : sequence of float
        Ends of the intervals, in years from the valuation date, strictly increasing, > 0.
    values : sequence of float
        One value per interval, same length as ``times``; the last one also applies beyond
        ``times[-1]``.

    Examples
    --------
    A vol of 30 % for three months, then 25 %:

    >>> vol = PiecewiseConstant([0.25, 1.0], [0.30, 0.25])
    >>> vol(0.1), vol(0.5), vol(3.0)
    (0.3, 0.25, 0.25)
    """

    times: tuple[float, ...]
    values: tuple[float, ...]

    def __post_init__(self) -> None:
        try:
            times = tuple(float(t) for t in self.times)  # type: ignore[union-attr]
            values = tuple(float(v) for v in self.values)  # type: ignore[union-attr]
        except (TypeError, ValueError):
            raise InputError("times/values", (self.times, self.values), "must be sequences of numbers") from None
        if not times:
            raise InputError("times", self.times, "must hold at least one time")
        if len(times) != len(values):
            raise InputError(
                "values", self.values, f"must have one value per time ({len(times)} times)"
            )
        for t in times:
            check_real("times", t, lo=0.0)
        for v in values:
            check_real("values", v)
        if any(b <= a for a, b in zip(times, times[1:], strict=False)):
            raise InputError("times", self.times, "must be strictly increasing")
        object.__setattr__(self, "times", times)
        object.__setattr__(self, "values", values)

    def __call__(self, t: float) -> float:
        """Value at time ``t`` (years from valuation); a breakpoint belongs to the interval it ends."""
        i = int(np.searchsorted(self.times, t, side="left"))
        return self.values[min(i, len(self.values) - 1)]

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, PiecewiseConstant):
            return NotImplemented
        return self.times == other.times and self.values == other.values

    def __hash__(self) -> int:
        return hash((self.times, self.values))

    def __add__(self, shift: float) -> PiecewiseConstant:
        """The curve moved in parallel by ``shift`` (e.g. for a vega or rho bump)."""
        if isinstance(shift, bool) or not isinstance(shift, (int, float)):
            return NotImplemented
        return PiecewiseConstant(self.times, tuple(v + float(shift) for v in self.values))

    __radd__ = __add__

    def __sub__(self, shift: float) -> PiecewiseConstant:
        """The curve moved in parallel by ``-shift``."""
        if isinstance(shift, bool) or not isinstance(shift, (int, float)):
            return NotImplemented
        return self + (-float(shift))

    def breakpoints(self, horizon: float) -> tuple[float, ...]:
        """Times where the value changes, strictly inside ``(0, horizon)``."""
        out = []
        for i, t in enumerate(self.times[:-1]):
            if 0.0 < t < horizon and self.values[i] != self.values[i + 1]:
                out.append(t)
        return tuple(out)

    def integral(self, t0: float, t1: float) -> float:
        """``int_{t0}^{t1} f(t) dt`` for ``0 <= t0 <= t1``."""
        return _integral(self.times, self.values, t1, 1) - _integral(self.times, self.values, t0, 1)

    def integral_of_square(self, t0: float, t1: float) -> float:
        """``int_{t0}^{t1} f(t)^2 dt`` for ``0 <= t0 <= t1``."""
        return _integral(self.times, self.values, t1, 2) - _integral(self.times, self.values, t0, 2)

    def cumulative(self, t: FloatArray) -> FloatArray:
        """``int_0^t f(s) ds`` at every entry of ``t`` (all >= 0), shape like ``t``."""
        t = np.asarray(t, dtype=np.float64)
        times = np.asarray(self.times)
        values = np.asarray(self.values)
        starts = np.concatenate(([0.0], times[:-1]))
        cum = np.concatenate(([0.0], np.cumsum((times - starts) * values)))
        idx = np.minimum(np.searchsorted(times, t, side="left"), len(values) - 1)
        return cum[idx] + (t - starts[idx]) * values[idx]

    def average(self, horizon: float) -> float:
        """Mean value over ``(0, horizon]``."""
        return self.integral(0.0, horizon) / horizon

    def rms(self, horizon: float) -> float:
        """Root-mean-square value over ``(0, horizon]`` (the effective volatility)."""
        return math.sqrt(self.integral_of_square(0.0, horizon) / horizon)

    def extremes(self, horizon: float) -> tuple[float, float]:
        """Smallest and largest value taken on ``(0, horizon]``."""
        seen = [self(horizon)]
        for i, t in enumerate(self.times):
            seen.append(self.values[i])
            if t >= horizon:
                break
        return min(seen), max(seen)


def _integral(times: tuple[float, ...], values: tuple[float, ...], t: float, power: int) -> float:
    total = 0.0
    prev = 0.0
    for end, v in zip(times, values, strict=True):
        if t <= end:
            return total + (t - prev) * v**power
        total += (end - prev) * v**power
        prev = end
    return total + (t - prev) * values[-1] ** power


#: A market input that may be flat or a term structure.
Curve = float | PiecewiseConstant


def as_curve(field: str, value: object, lo: float, hi: float, *, lo_open: bool) -> Curve:
    """Check a flat value or every value of a curve against ``[lo, hi]``; return it."""
    if isinstance(value, PiecewiseConstant):
        for v in value.values:
            try:
                check_real(field, v, lo=lo, hi=hi, lo_open=lo_open)
            except InputError as exc:
                raise InputError(field, value, f"value {v:g} {exc.reason}") from None
        return value
    if isinstance(value, Sequence) and not isinstance(value, str):
        raise InputError(field, value, "must be a number or a stopline.PiecewiseConstant")
    return check_real(field, value, lo=lo, hi=hi, lo_open=lo_open)


def curve_values(curve: Curve, t_mid: FloatArray) -> FloatArray:
    """Values of a flat number or a curve at the times ``t_mid``, shape like ``t_mid``."""
    if isinstance(curve, PiecewiseConstant):
        idx = np.searchsorted(np.asarray(curve.times), t_mid, side="left")
        idx = np.minimum(idx, len(curve.values) - 1)
        return np.asarray(curve.values, dtype=np.float64)[idx]
    return np.full(np.shape(t_mid), float(curve))
