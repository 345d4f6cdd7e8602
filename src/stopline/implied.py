"""Implied volatility: the flat vol at which stopline's price equals a quoted option price.

The price function inverted is :func:`stopline.pricing.price` itself, at the requested
accuracy, so a round trip (price, then implied vol, then price) returns the quote to within
the root-finding tolerance. That price is continuous in the vol: the grid is rebuilt for
each vol, its spacing moves continuously with it, and where its integer number of nodes
changes the price moves only at rounding level (measured below 1e-12 of the strike; see the
tests), so no fixed grid is needed for the search. It is piecewise smooth, with kinks where the discrete exercise
boundary crosses a node; and just outside the exercise region it can dip below the intrinsic
value and lose monotonicity at about the grid's error (1e-6 x strike at ``"standard"``),
where the result carries a note that the vol is poorly determined.

The search is a safeguarded secant method inside the bracket ``[0.001, 5]``:

1. a first guess from the European (Black-Scholes-Merton) inversion of the quote; when no
   European vol fits because the quote is at or above the European upper bound (an American
   put quoted above the discounted strike, say), only a large vol explains it and the guess
   is 2, the top of the first-guess range (the Brenner-Subrahmanyam approximation, which
   measures the time value from the intrinsic value, would start there near the bottom and
   widen by doubling: 4 more prices); otherwise Brenner-Subrahmanyam;
2. a quasi-Newton step that uses the European price as a model of the American one:
   ``v1 = BSM^{-1}(quote - (P(v0) - BSM(v0)))``, exact when the early-exercise premium does
   not depend on the vol;
3. secant steps (on the square root of the time value for an American option in the
   money, which is closer to linear in the vol near the exercise region), replaced by
   bisection whenever they would leave the bracket or stop shrinking fast (Brent's
   safeguard), until ``|P(v) - quote|`` is below a tolerance
   tied to the accuracy preset (1e-10 x strike at ``"standard"``).

A typical contract needs 2 to 6 price calls at ``"standard"``; a quote barely above the
intrinsic value of a deep in-the-money, long-dated American option can need 15 to 20.

Seeded start. A caller that has already priced the option (a cross-check prices each row at
its own vol, with vega, before asking for the quote's implied vol) passes that price as
``start``: it becomes the search's first point at no cost, and the first step is Newton's
with its vega, ``v1 = v0 - (P(v0) - quote) / vega``, corrected for curvature as in Halley's
method with the European model's ``vomma / vega``, instead of the European model's step. A
quote within a vol point of the start is then found in one to three price calls (one for
most quotes rounded from the start's own price); the secant steps and safeguards after the
first step are the same.
"""

from __future__ import annotations

import copy
import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

from ._validate import check_choice, check_real
from .contract import Option
from .errors import ConvergenceError, InputError
from .market import Market

if TYPE_CHECKING:
    from .pricing import Result

__all__ = [
    "ImpliedVolError",
    "ImpliedVolResult",
    "QuoteBounds",
    "VOL_BRACKET",
    "CAUSES",
    "implied_vol",
    "implied_vol_detail",
    "quote_bounds",
]

#: Values of :attr:`ImpliedVolError.cause`.
CAUSES = ("below_bound", "above_bound", "below_model", "above_model", "not_unique", "expired")
#: Volatilities searched: an implied vol outside this interval is reported as an error.
VOL_BRACKET = (0.001, 5.0)
#: Stop when ``|price - quote| <= tolerance x strike``, by accuracy preset.
PRICE_TOLERANCE = {"fast": 1e-8, "standard": 1e-10, "fine": 1e-12}
#: Stop when the bracket in vol is narrower than this.
VOL_TOLERANCE = 1e-12
#: Price calls allowed before giving up (bisection alone needs about 42).
MAX_PRICE_CALLS = 80
#: A vega (per unit vol) below this fraction of the strike earns a note in the result.
SMALL_VEGA = 1e-4


class ImpliedVolError(InputError):
    """No volatility in :data:`VOL_BRACKET` explains the quote, or many do.

    The message says which bound the quote violates, the bound's value and the quote.
    ``field`` is ``"quote"``; ``cause`` is one of :data:`CAUSES`, for programs that sort
    the failures of a chain.

    Parameters
    ----------
    quote : float
        The quote.
    reason : str
        The message after ``quote=...:``.
    cause : str
        ``"below_bound"`` (below intrinsic or the European lower bound), ``"above_bound"``
        (at or above the strike, spot or their discounted values), ``"below_model"`` /
        ``"above_model"`` (outside the prices of vols 0.001 to 5), ``"not_unique"`` (at the
        lower bound, where every low vol gives the quote) or ``"expired"``.
    """

    def __init__(self, quote: float, reason: str, cause: str) -> None:
        super().__init__("quote", quote, reason)
        self.cause = cause


@dataclass(frozen=True)
class ImpliedVolResult:
    """An implied vol and how it was found.

    Attributes
    ----------
    vol : float
        Implied volatility, annualised, as a decimal.
    model_price : float
        stopline's price at ``vol`` (equals the quote to the tolerance).
    price_calls : int
        Finite-difference prices computed during the search.
    vega : float
        Slope of the price in the vol near the answer (per unit vol), from the last steps.
    note : str
        Anything a careful user should know (empty when all is well), e.g. a small vega.
    """

    vol: float
    model_price: float
    price_calls: int
    vega: float
    note: str = ""


@dataclass(frozen=True)
class QuoteBounds:
    """No-arbitrage bounds on a quote, with what each one is.

    Attributes
    ----------
    lower, upper : float
        The quote must lie strictly between them (at ``lower`` the vol may not be unique).
    lower_name, upper_name : str
        What each bound is, for messages (``"intrinsic value"``, ``"strike"`` ...).
    """

    lower: float
    upper: float
    lower_name: str
    upper_name: str


def _flat_equivalents(market: Market, t: float) -> tuple[float, float, float]:
    """Spot less the present value of cash dividends, average rate and average yield over
    ``t``: the flat market that gives the same European prices (exact for the escrowed model
    and for term structures of rate and yield; for the spot model of dividends, a spot that
    keeps the bounds below the true prices)."""
    from .dividends import dividend_schedule, present_value
    from .termstructure import PiecewiseConstant

    r = market.rate.average(t) if isinstance(market.rate, PiecewiseConstant) else market.rate
    q = (market.div_yield.average(t) if isinstance(market.div_yield, PiecewiseConstant)
         else market.div_yield)
    spot = market.spot
    if market.dividends:
        sched = dividend_schedule(market.dividends, t, market.valuation_date)
        if sched.times.size:
            spot -= present_value(sched.times, sched.amounts, market.rate)
    return max(spot, 1e-300), float(r), float(q)


def quote_bounds(option: Option, market: Market, time_to_expiry: float) -> QuoteBounds:
    """Model-free bounds on the price of the option.

    American: at least the intrinsic value and the European lower bound
    (``K e^{-rT} - S e^{-qT}`` for a put, ``S e^{-qT} - K e^{-rT}`` for a call), at most the
    strike (put) or the spot (call). European: between the European lower bound (or zero)
    and the discounted strike (put) or the spot discounted at the yield (call).

    References
    ----------
    Merton, R. C. (1973), Theory of rational option pricing, Bell J. Econ. 4(1).
    """
    return _bounds(option, time_to_expiry, *_flat_equivalents(market, time_to_expiry))


def _bounds(option: Option, t: float, s: float, r_avg: float, q_avg: float) -> QuoteBounds:
    """:func:`quote_bounds` from the flat equivalents of the market (:func:`_flat_equivalents`)."""
    k = option.strike
    dr, dq = math.exp(-r_avg * t), math.exp(-q_avg * t)
    if option.is_put:
        euro_low = max(k * dr - s * dq, 0.0)
        intrinsic = max(k - s, 0.0)
    else:
        euro_low = max(s * dq - k * dr, 0.0)
        intrinsic = max(s - k, 0.0)
    if option.is_american:
        if intrinsic >= euro_low:
            lower, lower_name = intrinsic, "intrinsic value"
        else:
            lower, lower_name = euro_low, "European lower bound"
        upper, upper_name = (k, "strike") if option.is_put else (s, "spot")
    else:
        lower, lower_name = euro_low, "European lower bound"
        if option.is_put:
            upper, upper_name = k * dr, "discounted strike"
        else:
            upper, upper_name = s * dq, "spot discounted at the yield"
    return QuoteBounds(lower, upper, lower_name, upper_name)


def implied_vol(
    option: Option, market: Market, quote: float, *, accuracy: str = "standard",
    start: Result | None = None, start_vega: float | None = None,
) -> float:
    """The flat volatility at which stopline's price of ``option`` equals ``quote``.

    Parameters
    ----------
    option : Option
        The contract quoted (American or European).
    market : Market
        Spot, rate, yield and valuation date; ``market.vol`` is ignored.
    quote : float
        Observed option price, in the currency of the spot and strike.
    accuracy : {"fast", "standard", "fine"}
        Accuracy of the prices inverted (see :func:`stopline.price`).
    start : Result, optional
        A price already computed by :func:`stopline.price` for this option, at this
        accuracy, in this market at any flat vol (usually the market's own): the search
        starts there without pricing it again, with a Newton step corrected for curvature
        (a start outside :data:`VOL_BRACKET` is not used).
    start_vega : float, optional
        Slope of the price in the vol at ``start`` (per unit vol); default ``start.vega``
        (NaN when ``start`` was priced with ``greeks="grid"``, and then the first step is
        the European model's).

    Returns
    -------
    float
        Implied volatility, annualised, as a decimal, in ``[0.001, 5]``.

    Raises
    ------
    ImpliedVolError
        If the quote is outside its no-arbitrage bounds, outside the prices the model gives
        for vols in ``[0.001, 5]``, or at the intrinsic value inside the exercise region
        (where every low vol gives the same price, so the vol is not unique).
    InputError
        For an invalid quote or accuracy name.

    See Also
    --------
    implied_vol_detail : the same, with the price calls and the vega.

    References
    ----------
    Brenner, M. and Subrahmanyam, M. G. (1988), A simple formula to compute the implied
    standard deviation, Financial Analysts Journal 44(5). Brent, R. P. (1973), Algorithms
    for Minimization without Derivatives, ch. 4 (safeguarded secant within a bracket).
    Manaster, S. and Koehler, G. (1982), The calculation of implied variances from the
    Black-Scholes model: a note, J. Finance 37(1) (Newton's method from a start point).
    Halley, E. (1694), A new, exact and easy method of finding the roots of equations
    generally, Phil. Trans. R. Soc. 18 (the curvature-corrected first step).

    Examples
    --------
    >>> from stopline import Option, Market, price
    >>> opt, mkt = Option("put", 100.0, 0.5), Market(100.0, 0.05, 0.3)
    >>> q = price(opt, mkt).price
    >>> round(implied_vol(opt, mkt, q), 8)
    0.3
    """
    return implied_vol_detail(option, market, quote, accuracy=accuracy, start=start,
                              start_vega=start_vega).vol


def implied_vol_detail(
    option: Option, market: Market, quote: float, *, accuracy: str = "standard",
    start: Result | None = None, start_vega: float | None = None,
) -> ImpliedVolResult:
    """Like :func:`implied_vol`, returning the vol with the search's record.

    ``price_calls`` counts the prices computed by the search (not ``start``).

    Returns
    -------
    ImpliedVolResult

    Raises
    ------
    InputError
        As :func:`implied_vol`; also naming ``start`` when it prices another option,
        another market or at another accuracy.
    """
    from .pricing import _value_and_error

    quote = check_real("quote", quote, lo=0.0, lo_open=False)
    acc = check_choice("accuracy", accuracy, tuple(PRICE_TOLERANCE))
    t = option.time_to_expiry(market.valuation_date)
    k = option.strike
    if t == 0.0:
        raise ImpliedVolError(quote, "the option expires now: its price is the intrinsic value "
                              "whatever the vol, so no vol is implied", "expired")
    # the flat equivalents once (with cash dividends they sum the schedule's present value)
    s_eff, r_avg, q_avg = _flat_equivalents(market, t)
    bounds = _bounds(option, t, s_eff, r_avg, q_avg)
    ftol = PRICE_TOLERANCE[acc] * k
    _check_quote(quote, bounds, ftol)
    seed = _seed(start, start_vega, option, market, acc)
    calls = 0
    error_estimates: dict[float, float] = {}

    def model(vol: float) -> float:
        nonlocal calls
        calls += 1
        # the market at this vol, without re-running Market's checks (the rest was checked
        # when it was built, and every vol tried lies in VOL_BRACKET, inside VOL_RANGE)
        mkt = copy.copy(market)
        object.__setattr__(mkt, "vol", float(vol))
        # price(..., greeks="grid")'s price and error estimate, without its Result
        value, error_estimates[vol] = _value_and_error(option, mkt, acc)
        return value

    lo, hi = VOL_BRACKET
    if quote <= bounds.lower + ftol:
        # At the lower bound: the quote is explained only if some vol prices the option at
        # the bound, and then every lower vol does too (the price increases with the vol).
        # Try moderate vols first: extreme ones need large grids.
        for v in (0.2, 0.02, lo):
            p_v = model(v)
            if p_v <= quote + ftol:
                raise ImpliedVolError(
                    quote,
                    f"equals the {bounds.lower_name} {bounds.lower:.6g}; the model gives this "
                    f"price for every vol from {lo:g} up to at least {v:g} (the spot is in the "
                    "exercise region or the time value is nil), so the vol is not unique",
                    "not_unique",
                )
        raise ImpliedVolError(
            quote,
            f"is below the lowest price the model gives, {p_v:.6g} at vol {lo:g} "
            f"({bounds.lower_name} {bounds.lower:.6g})",
            "below_model",
        )
    euro = _EuropeanModel(option.is_put, s_eff, k, t, r_avg, q_avg)
    if seed is not None:
        v0 = seed[0]
        error_estimates[v0] = seed[3]
    else:
        v0 = euro.initial_guess(quote)
    transform = None
    if option.is_american and bounds.lower_name == "intrinsic value" and bounds.lower > 0.0:
        # in the money: the time value grows like (vol - vol*)^2 where the spot leaves the
        # exercise region, so its square root is closer to linear for the secant
        floor = bounds.lower
        def transform(p: float) -> float:
            return math.sqrt(max(p - floor, 0.0))
    vol, p, vega = _search(model, quote, euro, v0, lo, hi, ftol, bounds, transform,
                           None if seed is None else seed[1:3])
    notes = []
    if vega < SMALL_VEGA * k:
        notes.append(f"vega {vega:.3g} per unit vol is small (< {SMALL_VEGA:g} x strike): the "
                     "vol is poorly determined by the quote")
    if quote - bounds.lower <= error_estimates[vol]:
        notes.append(f"the quote is within the price's error estimate ({error_estimates[vol]:.2g})"
                     f" of the {bounds.lower_name}: the vol is poorly determined by the quote")
    return ImpliedVolResult(float(vol), float(p), calls, float(vega), "; ".join(notes))


def _seed(
    start: Result | None, start_vega: float | None, option: Option, market: Market, acc: str
) -> tuple[float, float, float, float] | None:
    """``(vol, price, vega, error_estimate)`` of the start, checked; None without a start,
    or when it is at a vol the search does not try (a vol curve, or outside
    :data:`VOL_BRACKET`).

    The vega is NaN when neither ``start_vega`` nor ``start.vega`` is a positive number.
    """
    if start is None:
        return None
    if start.option != option:
        raise InputError("start", start.option, f"prices another option than {option}")
    # "exact": price() solved no grid (zero-volatility limit), whatever the accuracy asked
    if start.accuracy not in (acc, "exact"):
        raise InputError("start", start.accuracy, f"was priced at another accuracy than {acc!r}")
    vol = start.market.vol
    lo, hi = VOL_BRACKET
    if not isinstance(vol, float) or not (lo <= vol <= hi):
        return None
    if start.market is not market and dataclasses.replace(market, vol=vol) != start.market:
        raise InputError("start", start.market, "was priced in another market (other than the vol)")
    vega = start.vega if start_vega is None else check_real("start_vega", start_vega)
    if not (vega > 0.0 and math.isfinite(vega)):
        vega = math.nan
    return vol, float(start.price), float(vega), float(start.error_estimate)


def _check_quote(quote: float, bounds: QuoteBounds, ftol: float) -> None:
    if quote < bounds.lower - ftol:
        raise ImpliedVolError(
            quote, f"is below the {bounds.lower_name} {bounds.lower:.6g}: no vol explains it",
            "below_bound",
        )
    if quote >= bounds.upper:
        raise ImpliedVolError(
            quote,
            f"is at or above the no-arbitrage upper bound, the {bounds.upper_name} "
            f"{bounds.upper:.6g}: no vol explains it",
            "above_bound",
        )


def _search(
    model: Callable[[float], float], quote: float, euro: _EuropeanModel, v0: float, lo: float, hi: float, ftol: float,
    bounds: QuoteBounds, transform: Callable[[float], float] | None = None,
    known: tuple[float, float] | None = None,
) -> tuple[float, float, float]:
    """Safeguarded secant search for ``model(v) = quote`` in ``[lo, hi]``.

    The secant works on ``transform(price) - transform(quote)`` (an increasing transform;
    identity by default); the stopping test is on the price itself.

    ``known = (price, vega)`` is the price at ``v0`` already computed (not priced again) and
    the slope there (NaN if unknown); the first step is then Halley's (:func:`_halley`) when
    it stays within a factor of two of ``v0`` (else the European model's).

    Returns the vol, the model price there and a vega estimate (slope of the last secant).
    """
    tr = transform if transform is not None else (lambda p: p)
    t_quote = tr(quote)
    below: tuple[float, float] | None = None  # (vol, f) with f < 0, the largest such vol
    above: tuple[float, float] | None = None  # (vol, f) with f > 0, the smallest such vol
    hist: list[tuple[float, float, float]] = []  # (vol, price, transformed gap)
    steps: list[float] = []

    def evaluate(v: float, p: float | None = None) -> float:
        nonlocal below, above
        if p is None:
            p = model(v)
        f = tr(p) - t_quote
        hist.append((v, p, f))
        if f < 0.0 and (below is None or v > below[0]):
            below = (v, f)
        if f > 0.0 and (above is None or v < above[0]):
            above = (v, f)
        if v == lo and p > quote + ftol:
            raise ImpliedVolError(
                quote, f"is below the lowest price the model gives, {p:.6g} at vol "
                f"{lo:g} ({bounds.lower_name} {bounds.lower:.6g})", "below_model")
        if v == hi and p < quote - ftol:
            raise ImpliedVolError(
                quote, f"is above the highest price the model gives, {p:.6g} at vol "
                f"{hi:g} (upper bound: {bounds.upper_name} {bounds.upper:.6g})", "above_model")
        return p

    v = min(max(v0, lo), hi)
    p = evaluate(v, None if known is None else known[0])
    vega0 = math.nan if known is None else known[1]
    while abs(p - quote) > ftol:
        a = below[0] if below is not None else lo
        b = above[0] if above is not None else hi
        if below is not None and above is not None and b - a <= VOL_TOLERANCE:
            break
        if len(hist) >= MAX_PRICE_CALLS:
            raise ConvergenceError(
                f"implied vol: no convergence after {len(hist)} price calls (quote={quote!r}, "
                f"bracket [{a:.6g}, {b:.6g}])")
        cand = None
        if len(hist) == 1 and math.isfinite(vega0):
            cand = _halley(v, p - quote, vega0, euro)
            if not (0.5 * v <= cand <= 2.0 * v):
                cand = None  # a long way off: the European model steps more safely
        if cand is None:
            cand = _candidate(hist, euro, quote)
        if below is not None and above is not None:
            # Brent's safeguard: bisect when the step leaves the bracket or fails to shrink
            # to half the step before last
            if (cand is None or not (a < cand < b)
                    or (len(steps) >= 2 and abs(cand - v) > 0.5 * steps[-2])):
                cand = 0.5 * (a + b)
        elif above is None:  # only prices below the quote seen: the root lies higher
            # widen by doubling, not by a jump to the end: prices at extreme vols need
            # large grids
            if cand is None or cand >= b:
                cand = min(hi, 2.0 * a)
            elif cand <= a:
                cand = min(hi, 2.0 * a)
        else:  # only prices above the quote seen: the root lies lower
            if cand is None or cand <= a:
                cand = max(lo, 0.25 * b)
            elif cand >= b:
                cand = max(lo, 0.25 * b)
        steps.append(abs(cand - v))
        v = cand
        p = evaluate(v)
    best_v, best_p, _ = min(hist, key=lambda h: abs(h[1] - quote))
    # the start's own vega when the quote is its price (no other point to take a slope from)
    vega = vega0 if len(hist) == 1 and math.isfinite(vega0) else _slope(hist, best_v, euro)
    return best_v, best_p, vega


def _halley(v: float, gap: float, vega: float, euro: _EuropeanModel) -> float:
    """Halley's step from ``v`` to a zero of ``gap`` with slope ``vega``, the curvature
    taken from the European model (``vomma / vega = d1 d2 / vol``); Newton's step when the
    curvature term would change it by more than half."""
    newton = -gap / vega
    c = 0.5 * euro.vomma_over_vega(v) * newton
    return v + newton / (1.0 + c) if abs(c) <= 0.5 else v + newton


def _candidate(
    hist: list[tuple[float, float, float]], euro: _EuropeanModel, quote: float
) -> float | None:
    """Next vol to try: secant on the last two points, else a European-model step.

    None when the last two prices are equal: the price is flat there and neither step
    moves far enough.
    """
    v1, p1, f1 = hist[-1]
    if len(hist) >= 2:
        v0, _, f0 = hist[-2]
        if f1 == f0:
            return None  # flat (e.g. at intrinsic for every low vol): the caller widens
        if v1 != v0:
            slope = (f1 - f0) / (v1 - v0)
            if slope > 0.0:
                return v1 - f1 / slope
    return euro.model_step(v1, p1, quote)


def _slope(hist: list[tuple[float, float, float]], v: float, euro: _EuropeanModel) -> float:
    """Vega estimate at ``v``: the secant through the evaluated point nearest to it."""
    others = [(abs(u - v), u, p) for u, p, _ in hist if u != v]
    if not others:
        return euro.vega(v)
    p_v = next(p for u, p, _ in hist if u == v)
    _, u, p = min(others)
    return (p - p_v) / (u - v)


class _EuropeanModel:
    """Black-Scholes-Merton prices for the guesses and quasi-Newton steps of the search.

    References
    ----------
    Black, F. and Scholes, M. (1973); Merton, R. C. (1973). Brenner, M. and Subrahmanyam,
    M. G. (1988) for the at-the-money approximation of the first guess.
    """

    def __init__(self, is_put: bool, s: float, k: float, t: float, r: float, q: float) -> None:
        self.is_put, self.s, self.k, self.t = is_put, s, k, t
        self.fwd_s = s * math.exp(-q * t)  # spot discounted at the yield
        self.pv_k = k * math.exp(-r * t)  # discounted strike
        self.low = max(self.pv_k - self.fwd_s, 0.0) if is_put else max(self.fwd_s - self.pv_k, 0.0)
        self.high = self.pv_k if is_put else self.fwd_s

    def price(self, vol: float) -> float:
        sq = vol * math.sqrt(self.t)
        d1 = math.log(self.fwd_s / self.pv_k) / sq + 0.5 * sq
        d2 = d1 - sq
        if self.is_put:
            return self.pv_k * _ncdf(-d2) - self.fwd_s * _ncdf(-d1)
        return self.fwd_s * _ncdf(d1) - self.pv_k * _ncdf(d2)

    def vega(self, vol: float) -> float:
        sq = vol * math.sqrt(self.t)
        d1 = math.log(self.fwd_s / self.pv_k) / sq + 0.5 * sq
        return self.fwd_s * math.sqrt(self.t) * math.exp(-0.5 * d1 * d1) / math.sqrt(2 * math.pi)

    def vomma_over_vega(self, vol: float) -> float:
        """Second over first derivative of the price in the vol, ``d1 d2 / vol``."""
        sq = vol * math.sqrt(self.t)
        d1 = math.log(self.fwd_s / self.pv_k) / sq + 0.5 * sq
        return d1 * (d1 - sq) / vol

    def invert(self, target: float) -> float | None:
        """European implied vol of ``target`` in ``[0.0005, 10]``, or None if none fits."""
        from scipy.optimize import brentq

        a, b = 0.0005, 10.0
        if not (self.low < target < self.high):
            return None
        fa, fb = self.price(a) - target, self.price(b) - target
        if fa >= 0.0 or fb <= 0.0:
            return None
        return float(brentq(lambda v: self.price(v) - target, a, b, xtol=1e-12, rtol=1e-12))

    def initial_guess(self, quote: float) -> float:
        """European inversion of the quote; 2 for a quote at or above the European upper
        bound (only a large vol explains it); else Brenner-Subrahmanyam on its time value."""
        v = self.invert(quote)
        if v is not None:
            return v
        if quote >= self.high:
            return 2.0
        time_value = max(quote - max(self.low, abs(self.s - self.k)), 1e-12 * self.k)
        v = math.sqrt(2.0 * math.pi / self.t) * time_value / math.sqrt(self.s * self.k)
        return min(max(v, 0.05), 2.0)

    def model_step(self, vol: float, model_price: float, quote: float) -> float | None:
        """Quasi-Newton step: the European vol of the quote less the model's premium."""
        v = self.invert(quote - (model_price - self.price(vol)))
        if v is not None:
            return v
        vega = self.vega(vol)
        if vega <= 1e-300:
            return None
        return vol - (model_price - quote) / vega


def _ncdf(x: float) -> float:
    return 0.5 * math.erfc(-x / math.sqrt(2.0))
