"""Roll-Geske-Whaley American call with one cash dividend."""

from __future__ import annotations

import math

import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from stopline.errors import InputError
from stopline.reference import bsm_price, rgw_american_call, tree_price_escrowed


def test_haug_worked_example() -> None:
    # Worked example in Haug, The Complete Guide to Option Pricing Formulas (recalled;
    # REFERENCE_VALUES.md): S = 80, K = 82, D = 4 at t = 0.25, r = 0.06, vol 0.3:
    # 4.3860, critical ex-dividend spot 80.1173, exact to the printed digits. These digits
    # are those of T = 4/12; with T = 0.3333 as printed the formula gives 4.38590 and
    # 80.11625 (checked by quadrature below), so the example's 0.3333 stands for 4/12.
    res = rgw_american_call(80.0, 82.0, 4 / 12, 0.06, 0.0, 0.3, 0.25, 4.0)
    assert round(res.value, 4) == 4.3860
    assert round(res.critical_spot, 4) == 80.1173
    res = rgw_american_call(80.0, 82.0, 0.3333, 0.06, 0.0, 0.3, 0.25, 4.0)
    assert res.value == pytest.approx(4.385902, abs=1e-6)


def _by_quadrature(s, k, t, r, vol, t_div, amount):
    """e^{-r t_d} E[max(S*_{t_d} + D - K, C_BS(S*_{t_d}, K, T - t_d))], S* escrowed GBM."""
    s_ex = s - amount * math.exp(-r * t_div)
    tau = t - t_div

    def cont(x):
        return bsm_price("call", x, k, tau, r, 0.0, vol)

    mu, sd = (r - vol * vol / 2) * t_div, vol * math.sqrt(t_div)
    crit = brentq(lambda x: cont(x) - (x + amount - k), 1e-6 * k, 10 * k, xtol=1e-14)
    zc = (math.log(crit / s_ex) - mu) / sd

    def f(z):
        x = s_ex * math.exp(mu + sd * z)
        return math.exp(-z * z / 2) / math.sqrt(2 * math.pi) * max(x + amount - k, cont(x))

    total = (
        quad(f, -12, zc, epsabs=1e-14, limit=200)[0] + quad(f, zc, 12, epsabs=1e-14, limit=200)[0]
    )
    return math.exp(-r * t_div) * total, crit


@pytest.mark.parametrize(
    "case",
    [
        (80.0, 82.0, 0.3333, 0.06, 0.3, 0.25, 4.0),
        (100.0, 100.0, 1.0, 0.05, 0.25, 0.5, 3.0),
        (50.0, 40.0, 0.75, 0.02, 0.45, 0.1, 1.5),
        (120.0, 100.0, 2.0, 0.08, 0.2, 1.9, 6.0),
    ],
)
def test_matches_compound_expectation(case: tuple) -> None:
    # Whaley (1981): the formula is the closed form of exercise-or-continue at the ex-date;
    # the same expectation by quadrature agrees to 1e-10 (common practice).
    s, k, t, r, vol, td, d = case
    exact, crit = _by_quadrature(s, k, t, r, vol, td, d)
    res = rgw_american_call(s, k, t, r, 0.0, vol, td, d)
    assert res.value == pytest.approx(exact, rel=1e-10)
    assert res.critical_spot == pytest.approx(crit, rel=1e-10)


def test_matches_escrowed_tree() -> None:
    # Roll (1977), Geske (1979), Whaley (1981) vs the aligned escrowed lattice (Hull's
    # escrowed model); independent methods agree to 1e-6 relative.
    for s, k, td, d in ((100.0, 95.0, 0.4, 2.0), (100.0, 110.0, 0.8, 5.0)):
        rgw = rgw_american_call(s, k, 1.0, 0.05, 0.0, 0.3, td, d).value
        tree = tree_price_escrowed("call", "american", s, k, 1.0, 0.05, 0.0, 0.3, [(td, d)], 2000)
        assert rgw == pytest.approx(tree, rel=1e-6)


def test_bounds_and_limits() -> None:
    # Common practice: RGW >= Black's (1975) pseudo-American value, the larger of the
    # European call on S - PV(D) and the call expiring just before the ex-date.
    s, k, t, r, vol, td, d = 100.0, 100.0, 1.0, 0.05, 0.3, 0.5, 4.0
    value = rgw_american_call(s, k, t, r, 0.0, vol, td, d).value
    s_ex = s - d * math.exp(-r * td)
    black = max(
        bsm_price("call", s_ex, k, t, r, 0.0, vol), bsm_price("call", s, k, td, r, 0.0, vol)
    )
    assert value > black
    # A dividend below K (1 - e^{-r (T - t_d)}) never makes early exercise pay (Merton 1973).
    small = rgw_american_call(s, k, t, r, 0.0, vol, td, 1.0)
    assert small.critical_spot == math.inf
    assert small.value == pytest.approx(
        bsm_price("call", s - math.exp(-r * td), k, t, r, 0.0, vol), rel=1e-14
    )
    # A dividend above the strike: always exercise just before the ex-date.
    big = rgw_american_call(s, 30.0, t, r, 0.0, vol, td, 40.0)
    assert big.value == pytest.approx(s - 30.0 * math.exp(-r * td), rel=1e-14)


def test_rejects_bad_inputs() -> None:
    with pytest.raises(InputError, match="div_yield"):
        rgw_american_call(100.0, 100.0, 1.0, 0.05, 0.01, 0.3, 0.5, 2.0)
    with pytest.raises(InputError, match="ex_time"):
        rgw_american_call(100.0, 100.0, 1.0, 0.05, 0.0, 0.3, 1.0, 2.0)
    with pytest.raises(InputError, match="dividend"):
        rgw_american_call(100.0, 100.0, 1.0, 0.05, 0.0, 0.3, 0.5, 200.0)
