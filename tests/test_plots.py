"""Figures: rendered to real PNG files, carrying the data they claim to show."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import matplotlib.dates as mdates
import numpy as np
import pytest

from stopline import Market, Option, price
from stopline.cli._common import CAUTION
from stopline.plots import plot_boundary, plot_value_profile, save_figure
from stopline.profile import value_profile

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def _line(fig, label: str):  # noqa: ANN001, ANN202
    for ax in fig.axes:
        for line in ax.get_lines():
            if line.get_label() == label:
                return line
    raise AssertionError(f"no line labelled {label!r}")


def _texts(fig) -> str:  # noqa: ANN001
    parts = [t.get_text() for t in fig.texts]
    parts += [fig._suptitle.get_text()] if fig._suptitle is not None else []
    for ax in fig.axes:
        parts += [ax.get_title(loc="left"), ax.get_xlabel(), ax.get_ylabel()]
        parts += [t.get_text() for t in ax.texts]
    return "\n".join(parts)


def test_boundary_figure_in_years_holds_the_result_boundary(tmp_path: Path) -> None:
    # common practice: the drawn line is the computed boundary, point for point.
    res = price(Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.25, 0.01))
    fig = plot_boundary(res)
    line = _line(fig, "critical spot")
    years = res.time_to_expiry - res.boundary.time_to_expiry
    np.testing.assert_array_equal(line.get_xdata(), years[::-1])
    np.testing.assert_array_equal(line.get_ydata(), res.boundary.spot[::-1])
    text = _texts(fig)
    assert "EXERCISE" in text and "HOLD" in text and "American put" in text
    assert "(years)" in fig.axes[0].get_xlabel() and "currency" in fig.axes[0].get_ylabel()
    assert CAUTION.split(";")[0][:40] in text.replace("\n", " ")
    strike = [ln for ln in fig.axes[0].get_lines() if ln.get_label().startswith("strike")]
    assert strike and np.all(np.asarray(strike[0].get_ydata()) == 100.0)
    out = save_figure(fig, tmp_path / "b.png")
    data = out.read_bytes()
    assert data[:8] == PNG_MAGIC and len(data) > 20_000
    assert not list(tmp_path.glob(".*tmp"))  # the temporary file was moved into place


def test_boundary_figure_uses_calendar_dates(tmp_path: Path) -> None:
    # common practice (ACT/365 fixed): a point at time to expiry tau sits T - tau years after
    # the valuation date.
    res = price(Option("call", 100.0, "2027-09-17"),
                Market(105.0, 0.03, 0.3, 0.06, valuation_date=dt.date(2026, 12, 1)))
    fig = plot_boundary(res)
    x = np.asarray(_line(fig, "critical spot").get_xdata())
    start = mdates.date2num(dt.date(2026, 12, 1))
    assert x.min() == pytest.approx(start)
    assert x.max() == pytest.approx(start + 365.0 * (res.time_to_expiry - res.boundary.time_to_expiry[0]))
    assert "date" in fig.axes[0].get_xlabel()
    lo, hi = fig.axes[0].get_xlim()
    assert lo == pytest.approx(start) and hi == pytest.approx(mdates.date2num(dt.date(2027, 9, 17)))
    assert save_figure(fig, tmp_path / "c.png").read_bytes()[:8] == PNG_MAGIC


def test_boundary_figure_without_exercise_says_so() -> None:
    # Source: Merton (1973): an American call without dividends is never exercised early.
    fig = plot_boundary(price(Option("call", 100.0, 1.0), Market(100.0, 0.05, 0.2)))
    assert "never optimal" in _texts(fig)


def test_value_profile_figure_holds_the_profile(tmp_path: Path) -> None:
    # common practice: each panel's line is the profile's array.
    prof = value_profile(Option("put", 100.0, 0.5), Market(95.0, 0.05, 0.3))
    fig = plot_value_profile(prof)
    assert len(fig.axes) == 3
    for name in ("value", "payoff", "delta", "gamma"):
        line = _line(fig, name)
        np.testing.assert_array_equal(line.get_xdata(), prof.spot)
        np.testing.assert_array_equal(line.get_ydata(), getattr(prof, name))
    labels = [ax.get_ylabel() for ax in fig.axes]
    assert "value" in labels[0] and "delta" in labels[1] and "gamma" in labels[2]
    assert "spot price" in fig.axes[2].get_xlabel()
    assert "model-risk policy" in _texts(fig)
    data = save_figure(fig, tmp_path / "p.png").read_bytes()
    assert data[:8] == PNG_MAGIC and len(data) > 20_000


def test_saved_files_get_the_usual_permissions(tmp_path: Path) -> None:
    # common practice: an atomically written file is readable like any other (umask applies).
    import os

    fig = plot_value_profile(value_profile(Option("call", 100.0, 0.5), Market(100.0, 0.03, 0.2)))
    out = save_figure(fig, tmp_path / "m.png")
    mask = os.umask(0)
    os.umask(mask)
    assert out.stat().st_mode & 0o777 == 0o666 & ~mask


def test_boundary_figure_with_dividends_leaves_gaps_unshaded(tmp_path: Path) -> None:
    # common practice: before an ex-dividend date a put may have no exercise region (NaN);
    # the drawn line keeps those gaps instead of bridging them.
    from stopline import PiecewiseConstant

    mkt = Market(100.0, PiecewiseConstant((0.5, 2.0), (0.03, 0.05)), 0.3,
                 valuation_date="2026-12-01", dividends=[("2027-03-15", 1.5), ("2027-09-15", 1.5)])
    res = price(Option("put", 100.0, "2027-12-17"), mkt)
    b = res.boundary.spot
    assert np.isnan(b).any() and np.isfinite(b).any()
    fig = plot_boundary(res)
    y = np.asarray(_line(fig, "critical spot").get_ydata())
    np.testing.assert_array_equal(y, b[::-1])  # NaN where there is no exercise region
    assert "term structure" in _texts(fig) and "2 cash dividends" in _texts(fig)
    assert not [ln for ln in fig.axes[0].get_lines() if ln.get_label().startswith("limit")]
    assert save_figure(fig, tmp_path / "d.png").read_bytes()[:8] == PNG_MAGIC


def _decoded(path: Path) -> np.ndarray:
    """The PNG decoded to pixels (a real image, not only a file with the right magic)."""
    import matplotlib.image as mpimg

    return np.asarray(mpimg.imread(path))


@pytest.mark.parametrize("method", ["direct", "psor"])
def test_boundary_figure_shades_and_labels_regions_strike_and_spot(tmp_path: Path, method: str) -> None:
    # common practice: what the issue asks the figure to show (regions shaded and labelled,
    # strike and spot drawn), the caution in smaller type than the axis labels, and a
    # decodable image of the figure's size.
    res = price(Option("put", 100.0, 1.0), Market(95.0, 0.05, 0.3, 0.01), method=method)
    fig = plot_boundary(res)
    ax = fig.axes[0]
    labels = ax.get_legend_handles_labels()[1]
    for want in ("hold region", "exercise region", "critical spot", "strike 100", "spot today 95"):
        assert want in labels, want
    shaded = {c.get_label(): c for c in ax.collections}
    assert "exercise region" in shaded
    # the exercise region's top edge is the critical spot (a put is exercised below it)
    verts = np.concatenate([p.vertices for p in shaded["exercise region"].get_paths()])
    assert verts[:, 1].max() == pytest.approx(np.nanmax(res.boundary.spot))
    assert any(p.get_label() == "hold region" for p in ax.patches)
    spot = _line(fig, "spot today 95")
    assert list(spot.get_ydata()) == [95.0] and list(spot.get_xdata()) == [0.0]
    caution = [t for t in fig.texts if "model-risk policy" in t.get_text()]
    assert caution and caution[0].get_fontsize() < ax.xaxis.label.get_fontsize()
    assert fig._suptitle is not None and "When to exercise early" in fig._suptitle.get_text()
    pixels = _decoded(save_figure(fig, tmp_path / "b.png"))
    w, h = fig.get_size_inches() * 150
    assert pixels.shape[:2] == (round(h), round(w)) and pixels[..., :3].std() > 0.05


def test_value_profile_figure_is_a_decodable_image_in_print_sizes(tmp_path: Path) -> None:
    # common practice: a decodable image; the caution smaller than the axis labels; titled.
    fig = plot_value_profile(value_profile(Option("put", 100.0, 0.5), Market(95.0, 0.05, 0.3)))
    caution = [t for t in fig.texts if "model-risk policy" in t.get_text()]
    assert caution and caution[0].get_fontsize() < fig.axes[2].xaxis.label.get_fontsize()
    assert "Value across spot" in fig._suptitle.get_text()
    pixels = _decoded(save_figure(fig, tmp_path / "p.png"))
    w, h = fig.get_size_inches() * 150
    assert pixels.shape[:2] == (round(h), round(w)) and pixels[..., :3].std() > 0.05
