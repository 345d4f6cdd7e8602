"""``price()`` at the edges of its domain: low vol with a large drift, long and very
volatile lives, spots beyond the perpetual boundary, options never exercised early.

The domain study (benchmarks/domain_study.py) measures every preset over the whole domain;
these are its findings kept as checks against independent values.
"""

from __future__ import annotations

import math

import pytest

from stopline import DirectSweep, Market, Option, price
from stopline.reference import perpetual_american

from ._bsm import bsm


@pytest.mark.parametrize(
    "kind,v,r,q,t",
    [
        ("put", 0.01, 0.08, 0.02, 30.0),  # the reported case: presets disagreed by 3.9e-5 x K
        ("put", 0.01, 0.25, 0.0, 50.0),  # priced 0 before (boundary between the nodes)
        ("call", 0.01, 0.0, 0.1, 30.0),
    ],
)
def test_low_vol_long_american_approaches_the_perpetual_value(
    kind: str, v: float, r: float, q: float, t: float
) -> None:
    # Source: Merton (1973), perpetual American option (stopline.reference.perpetual_american,
    # itself checked against published values). With vol 1 % and a drift of 6-25 % a year
    # away from exercise, paths reach the boundary within months or never: the chance of a
    # first touch after T is below 1e-12 here, so the T-year and perpetual values agree to
    # far below the tolerances (fine measured 1e-10 x K off).
    k = 100.0
    ref = perpetual_american(kind, k, k, r, q, v).value
    tol = {"fast": 1e-5, "standard": 1e-6, "fine": 1e-8}
    for acc, bound in tol.items():
        res = price(Option(kind, k, t), Market(k, r, v, q), accuracy=acc, greeks="grid")
        assert res.price == pytest.approx(ref, abs=bound * k), acc
        assert res.stats.space_points < 10_000  # the grid ends where the option is negligible


@pytest.mark.parametrize("kind,s,r,q,v", [("put", 60.0, 0.08, 0.0, 0.2), ("call", 180.0, 0.03, 0.1, 0.25),
                                          ("put", 1.0, 0.25, 0.0, 0.01)])
def test_spot_beyond_the_perpetual_boundary_is_exercised_at_once(
    kind: str, s: float, r: float, q: float, v: float
) -> None:
    # Merton (1973): a finite-life American option is worth no more than the perpetual one,
    # which equals its intrinsic value beyond S*; so the price is the intrinsic value
    k = 100.0
    star = perpetual_american(kind, s, k, r, q, v).critical_spot
    assert (s <= star) if kind == "put" else (s >= star)
    res = price(Option(kind, k, 5.0), Market(s, r, v, q))
    assert res.price == abs(k - s)
    assert res.delta == (-1.0 if kind == "put" else 1.0)
    assert res.gamma == res.theta == 0.0
    if v < 0.05:
        # at low vol (a grid of many nodes) the answer comes without a grid, and says so
        assert res.vega == res.rho == 0.0
        assert any("perpetual" in w for w in res.stats.warnings)
    # continuity: just inside the holding region the grid (or, at low vol, closed-form bounds
    # that pin the value: stopline.perpetual) gives nearly the intrinsic value
    inside = star * (1.02 if kind == "put" else 0.98)
    held = price(Option(kind, k, 5.0), Market(inside, r, v, q), greeks="grid")
    intrinsic = max(k - inside, 0.0) if kind == "put" else max(inside - k, 0.0)
    assert not any("exercised at once" in w for w in held.stats.warnings)
    assert intrinsic - 1e-9 * k <= held.price < intrinsic + 1e-2 * k


@pytest.mark.parametrize("kind,r,q", [("put", -0.05, 0.0), ("put", -0.02, 0.25), ("call", 0.25, 0.0),
                                      ("call", 0.1, -0.02)])
@pytest.mark.parametrize("v,t", [(5.0, 50.0), (0.01, 30.0)])
def test_american_never_exercised_early_equals_black_scholes(
    kind: str, r: float, q: float, v: float, t: float
) -> None:
    # Merton (1973): a put with r <= 0 <= q (a call with q <= 0 <= r) is worth its European
    # value; source of that value: Black-Scholes-Merton closed form (tests/_bsm.py).
    # Before, the American grid at vol 5, T 50 was 6.8e-5 x K off at "standard".
    k = 100.0
    for m in (0.5, 1.0, 2.0):
        res = price(Option(kind, k, t), Market(k * m, r, v, q))
        ex = bsm(kind, k * m, k, t, r, q, v)
        assert res.price == pytest.approx(ex["price"], abs=1e-6 * k)
        assert res.delta == pytest.approx(ex["delta"], abs=1e-5)
        assert all(math.isnan(x) for x in res.boundary.spot)  # no exercise region


@pytest.mark.parametrize("accuracy", ["fast", "standard"])
def test_presets_agree_in_the_low_vol_corner(accuracy: str) -> None:
    # the presets' answers differ by at most the accuracy promised everywhere (1e-5 x K),
    # checked against "fine" over a small grid of the low-vol, long-life corner
    k = 100.0
    for kind in ("put", "call"):
        for r, q in ((0.08, 0.02), (0.02, 0.08), (0.25, 0.0), (0.0, 0.25)):
            for m in (0.9, 1.0, 1.1):
                mkt = Market(k * m, r, 0.01, q)
                a = price(Option(kind, k, 30.0), mkt, accuracy=accuracy, greeks="grid").price
                b = price(Option(kind, k, 30.0), mkt, accuracy="fine", greeks="grid").price
                assert abs(a - b) <= 1e-5 * k, (kind, r, q, m)


def test_unreliable_gamma_is_flagged_and_fitted_theta_matches_the_expiry_derivative() -> None:
    # Merton (1973): an American option is worth at least as much with a longer life, so its
    # calendar theta is <= 0. A long, very volatile call deep in the money: plain projected
    # Crank-Nicolson's undamped oscillations near the exercise boundary spoil its gamma (own
    # computation: the two grids' gammas differ by 72 %, theta comes out +5.3), and the result
    # says so. With the fitted boundary (the default) nothing is flagged and theta agrees with
    # a central difference of prices in the expiry (common practice) at every preset. Here
    # theta is a small difference of large terms (1/2 vol^2 S^2 gamma is 13.5 against a theta
    # of -0.75), so 1 % of theta asks gamma for 0.06 %; measured 0.16 % / 1.9 % / 0.8 % at
    # fast / standard / fine (the presets' own prices differ from each other by 1e-8 x K).
    opt, mkt = Option("call", 100.0, 10.0), Market(300.0, 0.02, 1.0, div_yield=0.05)
    cn = price(opt, mkt, greeks="grid", method=DirectSweep(fitted=False))
    assert any("gammas differ" in w for w in cn.stats.warnings)
    d = 1e-3
    for acc in ("fast", "standard", "fine"):
        fit = price(opt, mkt, greeks="grid", accuracy=acc)
        assert not any("gammas differ" in w for w in fit.stats.warnings)
        up, dn = (price(Option("call", 100.0, 10.0 + e), mkt, greeks="grid",
                        accuracy=acc).price for e in (d, -d))
        fd_theta = -(up - dn) / (2 * d)
        assert fit.theta <= 0.0
        assert fit.theta == pytest.approx(fd_theta, rel=2.5e-2), acc


def test_health_warning_spares_typical_contracts_and_flags_gross_disagreement() -> None:
    # Own computation: the error estimate is the finer grid's error before extrapolation, so
    # on the textbook put (Hull's example, S = K = 50, r = 10 %, vol 40 %, 5 months) it is
    # 1.1e-5 x K while the price is within 1e-7 x K of "fine": no warning. Ten times the
    # preset's promise (1e-5 x K at standard) is where price() starts to warn.
    from stopline.pricing import HEALTH_FACTOR, _health_warnings

    res = price(Option("put", 50.0, 5 / 12), Market(50.0, 0.10, 0.40))
    fine = price(Option("put", 50.0, 5 / 12), Market(50.0, 0.10, 0.40), accuracy="fine")
    assert res.error_estimate > 1e-5 * 50.0 and abs(res.price - fine.price) < 1e-6 * 50.0
    assert not res.stats.warnings
    k, promised = 100.0, 1e-5
    assert not _health_warnings(0.99 * HEALTH_FACTOR * promised * k, k, "standard", (1.0,))
    msg = _health_warnings(1.01 * HEALTH_FACTOR * promised * k, k, "standard", (1.0,))
    assert len(msg) == 1 and "grids differ" in msg[0]
