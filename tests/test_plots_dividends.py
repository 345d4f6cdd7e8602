"""The boundary figure with cash dividends: ex-dates marked, the jump drawn, nothing lost."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import matplotlib.dates as mdates
import numpy as np
import pytest

from stopline import Market, Option, price
from stopline.plots import plot_boundary, save_figure

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def _line(fig, label: str):  # noqa: ANN001, ANN202 - matplotlib objects
    found = [ln for ln in fig.axes[0].get_lines() if ln.get_label() == label]
    assert len(found) == 1, [ln.get_label() for ln in fig.axes[0].get_lines()]
    return found[0]


def _ex_date_lines(fig) -> list:  # noqa: ANN001
    ax = fig.axes[0]
    return [ln for ln in ax.get_lines() if ln.get_linestyle() == ":" and len(ln.get_xdata()) == 2
            and ln.get_xdata()[0] == ln.get_xdata()[1]]


def _subtitle(fig) -> str:  # noqa: ANN001
    return fig.axes[0].get_title(loc="left")


def test_call_exercised_only_before_the_ex_date_is_drawn(tmp_path: Path) -> None:
    # Source: Merton (1973): a call on a stock without a yield is exercised, if ever, only an
    # instant before an ex-date, so its boundary is one point (NaN elsewhere). A line through
    # NaN neighbours draws nothing there, so the figure marks that point and the ex-date.
    t, t_d = 0.5, 0.3
    res = price(Option("call", 100.0, t), Market(100.0, 0.05, 0.25, dividends=[(t_d, 5.0)]),
                accuracy="fast")
    crit = res.boundary.spot
    assert np.isfinite(crit).sum() == 1
    fig = plot_boundary(res)
    dot = _line(fig, "critical spot just before an ex-date")
    assert np.asarray(dot.get_xdata()) == pytest.approx([t_d], abs=1e-12)
    assert np.asarray(dot.get_ydata()) == pytest.approx([crit[np.isfinite(crit)][0]], rel=1e-15)
    ex = _line(fig, "ex-dividend date (the boundary jumps)")
    assert ex.get_xdata()[0] == pytest.approx(t_d, abs=1e-12)
    # the point is inside the drawn range, above the strike (a call's exercise region)
    lo, hi = fig.axes[0].get_ylim()
    assert 100.0 < dot.get_ydata()[0] < hi
    assert save_figure(fig, tmp_path / "call.png").read_bytes()[:8] == PNG_MAGIC


def test_put_boundary_jumps_at_the_marked_ex_date() -> None:
    # Source: Merton (1973): a put is not exercised just before a dividend larger than the
    # interest on the strike until the ex-date, so going forward in time the boundary is cut
    # off before the ex-date and restarts at it. The line holds the boundary unbridged (NaN
    # at the ex-date's state just before) and an ex-date marker sits where it restarts.
    t, t_d = 1.0, 0.5
    res = price(Option("put", 100.0, t), Market(100.0, 0.05, 0.3, dividends=[(t_d, 3.0)]),
                accuracy="fast")
    fig = plot_boundary(res)
    line = _line(fig, "critical spot")
    x, y = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
    at = np.flatnonzero(np.abs(x - t_d) < 1e-12)
    assert at.size == 2  # the ex-date's two states: just before it, then just after it
    assert np.isnan(y[at[0]]) and np.isfinite(y[at[1]])
    assert np.isfinite(y[at[1]:]).all()  # after the ex-date the boundary runs to expiry
    ex = _ex_date_lines(fig)
    assert len(ex) == 1 and ex[0].get_xdata()[0] == pytest.approx(t_d, abs=1e-12)
    # no isolated points to mark for this put
    assert not [ln for ln in fig.axes[0].get_lines() if "just before" in ln.get_label()]


def test_ex_dates_on_a_date_axis_and_ignored_dividends_are_said() -> None:
    # common practice: with a valuation date the axis is in dates (ACT/365 fixed), so the
    # ex-date marker sits on its calendar day; a dividend after expiry is not counted but the
    # figure says one was ignored (the reason is in Result.stats.warnings).
    mkt = Market(80.0, 0.06, 0.3, valuation_date="2026-12-01",
                 dividends=[("2027-02-01", 4.0), ("2027-06-01", 1.0)])
    res = price(Option("call", 82.0, "2027-03-01"), mkt, accuracy="fast")
    assert any("after expiry" in w for w in res.stats.warnings)
    fig = plot_boundary(res)
    ex = _ex_date_lines(fig)
    assert len(ex) == 1
    assert ex[0].get_xdata()[0] == pytest.approx(mdates.date2num(dt.date(2027, 2, 1)), abs=1e-9)
    assert "1 cash dividend (1 ignored" in _subtitle(fig)
