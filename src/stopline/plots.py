"""Figures for people: the exercise boundary over the option's life, and the option across spot.

Each function returns a :class:`matplotlib.figure.Figure` (nothing is shown or saved), so a
caller can inspect or restyle it; :func:`save_figure` writes one atomically. Every figure
carries its title, labelled axes with units, and the caution text in small type.
"""

from __future__ import annotations

import datetime as _dt
import os
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ._atomic import atomic_write

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from .pricing import Result
    from .profile import ValueProfile

__all__ = ["plot_boundary", "plot_value_profile", "save_figure"]


# A restrained palette that stays legible in grey print: the line is near-black, the two
# regions differ in lightness as well as hue.
_INK = "#1b2631"
_EXERCISE = "#c8553d"
_HOLD = "#7fa7c9"
_MUTED = "#6c757d"
_ACCENT = "#2a6f4e"


def _describe(result_like) -> tuple[str, str]:  # noqa: ANN001 - Result or ValueProfile
    opt, mkt = result_like.option, result_like.market
    exp = opt.expiry.isoformat() if isinstance(opt.expiry, _dt.date) else f"{result_like.time_to_expiry:.4g} y"
    head = f"{opt.style.capitalize()} {opt.kind}, strike {opt.strike:g}, expiry {exp}"
    market = (
        f"spot {mkt.spot:g}   rate {_pct(mkt.rate, 2)}   dividend yield {_pct(mkt.div_yield, 2)}   "
        f"vol {_pct(mkt.vol, 1)}"
    )
    times, ignored = _ex_dates(result_like)
    if times.size or ignored:
        n = times.size
        market += f"   {n} cash dividend{'' if n == 1 else 's'}"
        if ignored:
            market += f" ({ignored} ignored: see warnings)"
    if mkt.valuation_date is not None:
        market += f"   valued {mkt.valuation_date.isoformat()}"
    return head, market


def _ex_dates(result_like) -> tuple[np.ndarray, int]:  # noqa: ANN001 - Result or ValueProfile
    """Ex-dates within the option's life (years from valuation) and how many were ignored."""
    from .dividends import dividend_schedule

    mkt = result_like.market
    divs = getattr(mkt, "dividends", ())
    if not divs:
        return np.empty(0), 0
    sched = dividend_schedule(divs, result_like.time_to_expiry, mkt.valuation_date)
    return np.asarray(sched.times), len(sched.warnings)


def _pct(value: object, digits: int) -> str:
    """A flat rate or vol as a percentage; a term structure by name."""
    return f"{value:.{digits}%}" if isinstance(value, (int, float)) else "term structure"


def _caution(fig: Figure, extra: str = "") -> None:
    """The caution (the command line's own words) in small type under the axes."""
    import textwrap

    from .cli._common import CAUTION

    text = textwrap.fill((extra + " " if extra else "") + CAUTION, width=150)
    fig.get_layout_engine().set(rect=(0.0, 0.045, 1.0, 0.955))
    fig.text(0.01, 0.008, text, fontsize=6.5, color=_MUTED, ha="left", va="bottom")


def plot_boundary(result: Result) -> Figure:
    """The critical spot against time, with the exercise and hold regions shaded.

    The horizontal axis runs from valuation to expiry: calendar dates when the market has a
    valuation date and the option a date expiry, years from valuation otherwise. The line
    with label ``"critical spot"`` holds ``result.boundary`` (its x data in years from
    valuation, or as Matplotlib date numbers).

    Parameters
    ----------
    result : Result
        An American option's result (a European one has no boundary to draw).
    """
    import matplotlib.dates as mdates
    from matplotlib.figure import Figure

    from .boundary import boundary_dates

    opt, mkt = result.option, result.market
    b = result.boundary
    t_exp = result.time_to_expiry
    years = t_exp - b.time_to_expiry
    dates = boundary_dates(result)
    if dates is not None:
        x0 = mdates.date2num(mkt.valuation_date)
        xs = x0 + years * 365.0
        x_end = x0 + t_exp * 365.0
    else:
        x0, xs, x_end = 0.0, years, t_exp
    # time to expiry rises along the arrays; from valuation to expiry is the reverse order
    # (kept as is, so an ex-date's two states stay in sequence)
    xs, spot = xs[::-1], b.spot[::-1]

    fig = Figure(figsize=(8.0, 5.2), layout="constrained")
    ax = fig.add_subplot()
    head, market = _describe(result)
    fig.suptitle(f"When to exercise early: {head}", fontsize=12, color=_INK, x=0.01, ha="left")
    ax.set_title(market, fontsize=8.5, color=_MUTED, loc="left")

    finite = np.isfinite(spot)
    k, s0 = opt.strike, mkt.spot
    vals = [k, s0] + ([float(np.nanmin(spot)), float(np.nanmax(spot))] if finite.any() else [])
    lo, hi = min(vals), max(vals)
    pad = 0.12 * (hi - lo) if hi > lo else 0.1 * k
    y_lo, y_hi = max(lo - pad, 0.0), hi + pad
    ax.set_xlim(x0, x_end)
    ax.set_ylim(y_lo, y_hi)

    if finite.any():
        xf, yf = xs[finite], spot[finite]
        # hold everywhere but the exercise region; where there is no exercise region (NaN,
        # e.g. just before an ex-dividend date) the whole column is hold
        ax.axhspan(y_lo, y_hi, color=_HOLD, alpha=0.22, lw=0, label="hold region")
        ex_lo, ex_hi = (np.full_like(spot, y_lo), spot) if opt.is_put else (spot, np.full_like(spot, y_hi))
        ax.fill_between(xs, ex_lo, ex_hi, where=finite, interpolate=False, color=_EXERCISE,
                        alpha=0.22, lw=0, label="exercise region")
        ax.plot(xs, spot, color=_INK, lw=2.0, label="critical spot")
        # a critical spot with no neighbour (a call exercised only just before an ex-date)
        # draws no line segment: mark it, with its exercise region as a bar
        before = np.concatenate(([False], finite[:-1]))
        after = np.concatenate((finite[1:], [False]))
        alone = finite & ~before & ~after
        if alone.any():
            ax.vlines(xs[alone], spot[alone], y_lo if opt.is_put else y_hi, color=_EXERCISE,
                      lw=3.0, alpha=0.55)
            ax.plot(xs[alone], spot[alone], ls="none", marker="o", ms=6, color=_INK,
                    label="critical spot just before an ex-date", zorder=4)
        mid = xf[len(xf) // 2]
        y_mid = yf[len(yf) // 2]
        ax.text(mid, 0.5 * (y_lo + y_mid) if opt.is_put else 0.5 * (y_hi + y_mid),
                "EXERCISE\n(worth more exercised now)", ha="center", va="center",
                fontsize=10, color=_EXERCISE, weight="bold")
        ax.text(mid, 0.5 * (y_hi + y_mid) if opt.is_put else 0.5 * (y_lo + y_mid),
                "HOLD\n(worth more kept alive)", ha="center", va="center",
                fontsize=10, color="#2f5d84", weight="bold")
        q, r = mkt.div_yield, mkt.rate
        limit = np.inf  # Kim's limit: flat rate and yield, no cash dividend at expiry
        if isinstance(q, (int, float)) and isinstance(r, (int, float)) and not getattr(mkt, "dividends", ()):
            if opt.is_put:
                limit = k * min(1.0, r / q) if q > 0 else k
            elif q > 0:
                limit = k * max(1.0, r / q)
        if np.isfinite(limit) and y_lo <= limit <= y_hi:
            ax.plot([x_end], [limit], marker="o", ms=6, mfc="white", mec=_INK, ls="none",
                    label="limit at expiry (Kim 1990)", clip_on=False)
    else:
        ax.fill_between([x0, x_end], y_lo, y_hi, color=_HOLD, alpha=0.22, lw=0, label="hold region")
        ax.text(0.5 * (x0 + x_end), 0.5 * (y_lo + y_hi),
                "HOLD throughout\n(early exercise is never optimal here)",
                ha="center", va="center", fontsize=10, color="#2f5d84", weight="bold")
    ex_times, _ = _ex_dates(result)
    for i, t_d in enumerate(ex_times):
        x_d = x0 + 365.0 * t_d if dates is not None else t_d
        ax.axvline(x_d, color=_ACCENT, lw=1.0, ls=":",
                   label="ex-dividend date (the boundary jumps)" if i == 0 else None)
    ax.axhline(k, color=_MUTED, lw=1.0, ls="--", label=f"strike {k:g}")
    ax.plot([x0], [s0], marker="D", ms=7, color=_ACCENT, ls="none", label=f"spot today {s0:g}",
            clip_on=False, zorder=5)

    if dates is not None:
        loc = mdates.AutoDateLocator()
        ax.xaxis.set_major_locator(loc)
        ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(loc))
        ax.set_xlabel("date (valuation to expiry)")
    else:
        ax.set_xlabel("time from valuation (years)")
    ax.set_ylabel("spot price of the underlying (currency of the strike)")
    ax.grid(True, color="#dddddd", lw=0.6)
    ax.legend(loc="best", fontsize=8, framealpha=0.9)
    _caution(fig, "Critical spot from the finer grid, located between nodes; "
             f"accuracy {result.accuracy}.")
    return fig


def plot_value_profile(profile: ValueProfile) -> Figure:
    """Value and payoff against spot, with delta and gamma panels below.

    Lines are labelled ``"value"``, ``"payoff"``, ``"delta"`` and ``"gamma"``; their data are
    the profile's arrays.

    Parameters
    ----------
    profile : ValueProfile
        From :func:`stopline.profile.value_profile`.
    """
    from matplotlib.figure import Figure

    opt, mkt = profile.option, profile.market
    fig = Figure(figsize=(7.5, 8.5), layout="constrained")
    axes = fig.subplots(3, 1, sharex=True, gridspec_kw={"height_ratios": [2.2, 1, 1]})
    head, market = _describe(profile)
    fig.suptitle(f"Value across spot: {head}", fontsize=12, color=_INK, x=0.01, ha="left")
    axes[0].set_title(market, fontsize=8.5, color=_MUTED, loc="left")
    s = profile.spot
    ex = profile.exercised
    axes[0].plot(s, profile.payoff, color=_MUTED, lw=1.2, ls="--", label="payoff")
    axes[0].plot(s, profile.value, color=_INK, lw=2.0, label="value")
    axes[1].plot(s, profile.delta, color=_ACCENT, lw=1.6, label="delta")
    axes[2].plot(s, profile.gamma, color="#7b4b94", lw=1.6, label="gamma")
    for ax in axes:
        if ex.any():
            ax.axvspan(s[ex].min(), s[ex].max(), color=_EXERCISE, alpha=0.15, lw=0,
                       label="exercise region" if ax is axes[0] else None)
        ax.axvline(opt.strike, color=_MUTED, lw=0.9, ls=":")
        ax.axvline(mkt.spot, color=_ACCENT, lw=0.9, ls="-.")
        ax.grid(True, color="#dddddd", lw=0.6)
    axes[0].axvline(opt.strike, color=_MUTED, lw=0.9, ls=":", label=f"strike {opt.strike:g}")
    axes[0].axvline(mkt.spot, color=_ACCENT, lw=0.9, ls="-.", label=f"spot today {mkt.spot:g}")
    axes[0].set_ylabel("option value\n(currency of the strike)")
    axes[1].set_ylabel("delta\n(per unit of spot)")
    axes[2].set_ylabel("gamma\n(per unit of spot squared)")
    axes[2].set_xlabel("spot price of the underlying (currency of the strike)")
    axes[0].legend(loc="best", fontsize=8, framealpha=0.9)
    _caution(fig, f"Values from two grids, extrapolated; accuracy {profile.accuracy}.")
    return fig


def save_figure(fig: Figure, path: str | os.PathLike[str], *, dpi: int = 150) -> Path:
    """Save ``fig`` to ``path`` atomically; the format follows the suffix (PNG by default)."""
    fmt = Path(path).suffix.lstrip(".").lower() or "png"
    return atomic_write(path, lambda fh: fig.savefig(fh, format=fmt, dpi=dpi), binary=True)
