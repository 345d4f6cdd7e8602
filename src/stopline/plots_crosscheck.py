"""Figures of a cross-check, as PNG bytes (for embedding in the HTML report).

Each function takes the row outcomes (:class:`stopline.crosscheck.RowCheck`) and returns one
PNG image. Rows with status ``"error"`` carry no price and are left out. Figures are drawn on
a bare :class:`matplotlib.figure.Figure` (no pyplot state) and carry the caution text.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence

import numpy as np
from matplotlib.figure import Figure

from .cli._common import CAUTION
from .crosscheck import RowCheck

__all__ = ["model_vs_quote_png", "vol_points_histogram_png", "difference_vs_moneyness_png"]

_OK = "#3d7a9e"
_MISMATCH = "#c8553d"


#: Vol-point differences beyond this are drawn at the edge of the histogram.
CLIP_POINTS = 10.0


def _figure(width: float, height: float) -> Figure:
    fig = Figure(figsize=(width, height), layout="constrained")
    fig.get_layout_engine().set(rect=(0.0, 0.06, 1.0, 0.94))  # room for the caution below
    return fig


def _png(fig: Figure) -> bytes:
    fig.text(0.01, 0.01, CAUTION, fontsize=5.5, color="#666666", ha="left", va="bottom", wrap=True)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    return buf.getvalue()


def _priced(checks: Sequence[RowCheck]) -> list[RowCheck]:
    return [c for c in checks if c.status != "error" and not math.isnan(c.model_price)]


def model_vs_quote_png(checks: Sequence[RowCheck]) -> bytes:
    """Scatter of the third party's quote against stopline's price, mismatches highlighted."""
    fig = _figure(6.0, 5.2)
    ax = fig.add_subplot()
    rows = _priced(checks)
    for status, colour, label in (("ok", _OK, "within tolerance"), ("mismatch", _MISMATCH, "mismatch")):
        pts = [(c.model_price, c.quote) for c in rows if c.status == status]
        if pts:
            x, y = np.array(pts).T
            ax.scatter(x, y, s=14, color=colour, label=f"{label} ({len(pts)})", alpha=0.8)
    if rows:
        hi = max(max(c.model_price for c in rows), max(c.quote for c in rows)) * 1.05
        ax.plot([0.0, hi], [0.0, hi], color="#999999", lw=0.8, ls="--", label="quote = model")
        ax.legend(loc="upper left", fontsize=8)
    ax.set_xlabel("stopline model price")
    ax.set_ylabel("third-party quote")
    ax.set_title("Quote against model")
    return _png(fig)


def vol_points_histogram_png(checks: Sequence[RowCheck], tolerance_points: float) -> bytes:
    """Histogram of implied minus input vol, in vol points, with the tolerance band marked.

    Differences beyond +/- :data:`CLIP_POINTS` are counted in the edge bins (and said so);
    the count axis is linear up to 10 rows and logarithmic above, so a few planted problems
    stay visible beside hundreds of clean rows.
    """
    fig = _figure(6.0, 4.4)
    ax = fig.add_subplot()
    pts = np.array([100.0 * c.vol_difference for c in _priced(checks)
                     if not math.isnan(c.vol_difference)])
    beyond = int(np.sum(np.abs(pts) > CLIP_POINTS))
    if pts.size:
        clipped = np.clip(pts, -CLIP_POINTS, CLIP_POINTS)
        ax.hist(clipped, bins=np.linspace(-CLIP_POINTS, CLIP_POINTS, 81), color=_OK,
                edgecolor="white", lw=0.4)
        ax.set_yscale("symlog", linthresh=10.0)
    if beyond:
        ax.text(0.98, 0.80, f"{beyond} row(s) beyond +/-{CLIP_POINTS:g}\nshown at the edges",
                transform=ax.transAxes, ha="right", va="top", fontsize=8)
    ax.axvspan(-tolerance_points, tolerance_points, color="#dddddd", alpha=0.6, zorder=0,
               label=f"+/- {tolerance_points:g} vol points")
    ax.set_xlabel("implied vol of quote - input vol (vol points)")
    ax.set_ylabel("rows")
    ax.set_title(f"Differences in vol points ({pts.size} rows with an implied vol)")
    ax.legend(fontsize=8)
    return _png(fig)


def difference_vs_moneyness_png(checks: Sequence[RowCheck]) -> bytes:
    """Price difference (quote - model) against moneyness K/S, mismatches highlighted."""
    fig = _figure(6.0, 4.4)
    ax = fig.add_subplot()
    rows = _priced(checks)
    for status, colour in (("ok", _OK), ("mismatch", _MISMATCH)):
        pts = [(c.moneyness, c.difference) for c in rows if c.status == status]
        if pts:
            x, y = np.array(pts).T
            ax.scatter(x, y, s=14, color=colour, label=status, alpha=0.8)
    ax.axhline(0.0, color="#999999", lw=0.8)
    ax.set_yscale("symlog", linthresh=0.01)  # linear within +/- 0.01, logarithmic beyond
    ax.set_xlabel("moneyness K / S")
    ax.set_ylabel("quote - model (linear within +/-0.01, log beyond)")
    ax.set_title("Differences against moneyness")
    if rows:
        ax.legend(fontsize=8)
    return _png(fig)
