"""Grid builders: strike on a node, spot inside, nesting of refined grids, graded levels."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stopline.grid import build_space_grid, build_time_grid


@pytest.mark.parametrize("x_spot", [-0.4, 0.0, 0.013, 0.3])
def test_space_grid_has_strike_on_node_and_spot_inside(x_spot: float) -> None:
    g = build_space_grid(x_spot, 0.2, 0.01, width_sd=5.0, points_per_sd=10)
    assert g.x[g.strike_index] == pytest.approx(0.0, abs=1e-14)
    assert g.x_min <= x_spot - 4.9 * 0.2 and g.x_max >= x_spot + 4.9 * 0.2
    f = g.refined()
    assert f.n == 2 * g.n - 1 and np.allclose(f.x[::2], g.x)
    assert f.x[f.strike_index] == pytest.approx(0.0, abs=1e-14)


def test_time_grid_is_graded_with_rannacher_half_steps() -> None:
    # Rannacher (1984): the first intervals become two implicit half steps each
    t = build_time_grid(2.0, 16, rannacher=2)
    assert t.tau[-1] == 2.0 and np.all(np.diff(t.tau) > 0)
    assert t.dt.sum() == pytest.approx(2.0)
    assert list(t.theta[:4]) == [1.0] * 4 and np.all(t.theta[4:] == 0.5)
    levels = 2.0 * (np.arange(1, 17) / 16) ** 2
    assert np.all(np.isin(np.round(levels, 14), np.round(t.tau, 14)))
    f = t.refined()
    assert np.all(np.isin(np.round(t.tau[t.theta == 0.5], 14), np.round(f.tau, 14)))


@pytest.mark.parametrize("mu,vol,t", [(0.06, 0.01, 30.0), (0.0, 0.2, 1.0), (-0.05, 0.3, 5.0), (0.25, 0.01, 50.0)])
@pytest.mark.parametrize("eps", [1e-7, 1e-12])
def test_negligible_reach_is_where_the_first_passage_chance_is_eps(
    mu: float, vol: float, t: float, eps: float
) -> None:
    # Source: first passage of Brownian motion with drift (reflection principle; Harrison
    # 1985, section 1.8), evaluated here with scipy's normal cdf in plain floats
    from scipy.stats import norm

    from stopline.grid import negligible_reach

    s = vol * math.sqrt(t)

    def chance(a: float) -> float:
        return norm.cdf((-a - mu * t) / s) + math.exp(-2 * mu * a / vol**2) * norm.cdf((-a + mu * t) / s)

    a = negligible_reach(mu, vol, t, eps)
    assert chance(a) <= eps * 1.0001
    assert chance(a * (1 - 2e-3)) > eps
    if mu == 0.0:
        # no drift: the chance is 2 N(-a / s)
        assert a == pytest.approx(s * norm.isf(eps / 2), rel=2e-3)
