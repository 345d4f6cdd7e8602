"""Black-Scholes-Merton prices and Greeks; perpetual American options."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stopline.errors import InputError
from stopline.reference import bsm, bsm_price, lr_extrapolated_price, perpetual_american

CASES = [
    # kind, spot, strike, expiry, rate, div_yield, vol
    ("call", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2),
    ("put", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2),
    ("call", 90.0, 105.0, 0.3, 0.03, 0.07, 0.45),
    ("put", 120.0, 95.0, 2.5, -0.01, 0.02, 0.15),
    ("put", 42.0, 40.0, 0.5, 0.10, 0.0, 0.2),
]


def test_textbook_values() -> None:
    # Black-Scholes (1973) call, S = K = 100, r = 0.05, vol 0.2, T = 1: 10.45058
    # (REFERENCE_VALUES.md, "American call without dividends = European call", Merton 1973).
    assert bsm_price("call", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2) == pytest.approx(10.45058, abs=1e-5)
    # Hull, Options, Futures, and Other Derivatives, Black-Scholes worked example (from
    # memory): S = 42, K = 40, r = 0.10, vol 0.2, T = 0.5 -> call 4.76, put 0.81.
    assert bsm_price("call", 42.0, 40.0, 0.5, 0.10, 0.0, 0.2) == pytest.approx(4.76, abs=5e-3)
    assert bsm_price("put", 42.0, 40.0, 0.5, 0.10, 0.0, 0.2) == pytest.approx(0.81, abs=5e-3)


def test_hull_greeks_example() -> None:
    # Hull, Options, Futures, and Other Derivatives, Greek letters chapter (from memory): a
    # call with S = 49, K = 50, r = 0.05, vol 0.2, T = 20 weeks (0.3846), no dividends:
    # price 2.40, delta 0.522, gamma 0.066, theta -4.31 per year, vega 12.1 per unit of
    # volatility, rho 8.91 per unit of the rate. Each within half a unit of its last printed
    # digit.
    g = bsm("call", 49.0, 50.0, 0.3846, 0.05, 0.0, 0.2)
    printed = {"price": (2.40, 2), "delta": (0.522, 3), "gamma": (0.066, 3),
               "theta": (-4.31, 2), "vega": (12.1, 1), "rho": (8.91, 2)}
    for name, (value, digits) in printed.items():
        assert getattr(g, name) == pytest.approx(value, abs=0.5 * 10.0**-digits), name


def test_put_call_parity(rng: np.random.Generator) -> None:
    # Common practice: C - P = S e^{-qT} - K e^{-rT}, vectorised over random inputs.
    n = 200
    s, k = rng.uniform(50, 150, n), rng.uniform(50, 150, n)
    t, r = rng.uniform(0.01, 5, n), rng.uniform(-0.02, 0.1, n)
    q, v = rng.uniform(0, 0.1, n), rng.uniform(0.05, 1.0, n)
    call, put = bsm("call", s, k, t, r, q, v), bsm("put", s, k, t, r, q, v)
    np.testing.assert_allclose(
        call.price - put.price, s * np.exp(-q * t) - k * np.exp(-r * t), atol=1e-10
    )
    np.testing.assert_allclose(call.delta - put.delta, np.exp(-q * t), atol=1e-12)
    np.testing.assert_allclose(call.gamma, put.gamma, rtol=1e-12)
    np.testing.assert_allclose(call.vega, put.vega, rtol=1e-12)


@pytest.mark.parametrize("case", CASES)
def test_greeks_match_numeric_derivatives(case: tuple) -> None:
    # Common practice: analytic Greeks against scipy.differentiate on the price.
    derivative = pytest.importorskip("scipy.differentiate").derivative  # scipy >= 1.15
    kind, s, k, t, r, q, v = case
    res = bsm(kind, s, k, t, r, q, v)

    def d(f, x, step):
        out = derivative(f, x, initial_step=step, tolerances={"rtol": 1e-10})
        assert out.success
        return float(out.df)

    assert res.delta == pytest.approx(
        d(lambda x: bsm_price(kind, x, k, t, r, q, v), s, 0.05 * s), rel=1e-8
    )
    assert res.gamma == pytest.approx(
        d(lambda x: bsm(kind, x, k, t, r, q, v).delta, s, 0.05 * s), rel=1e-7
    )
    assert res.vega == pytest.approx(
        d(lambda x: bsm_price(kind, s, k, t, r, q, x), v, 0.02), rel=1e-8
    )
    assert res.rho == pytest.approx(
        d(lambda x: bsm_price(kind, s, k, t, x, q, v), r, 0.01), rel=1e-8
    )
    # Theta is per year of calendar time: -dV/d(expiry).
    assert res.theta == pytest.approx(
        -d(lambda x: bsm_price(kind, s, k, x, r, q, v), t, 0.1 * t), rel=1e-8
    )


@pytest.mark.parametrize("case", CASES)
def test_greeks_satisfy_the_pde(case: tuple) -> None:
    # Black-Scholes (1973) equation: theta + vol^2 S^2 gamma / 2 + (r - q) S delta - r V = 0.
    kind, s, k, t, r, q, v = case
    g = bsm(kind, s, k, t, r, q, v)
    residual = g.theta + 0.5 * v * v * s * s * g.gamma + (r - q) * s * g.delta - r * g.price
    assert abs(residual) < 1e-11 * max(1.0, g.price)


def test_vectorised_matches_scalar_and_types() -> None:
    # Common practice: broadcasting gives the same numbers as scalar calls; scalars give floats.
    spots = np.array([80.0, 100.0, 125.0])
    vols = np.array([[0.1], [0.3]])
    res = bsm("put", spots, 100.0, 0.75, 0.04, 0.01, vols)
    assert res.price.shape == (2, 3)
    for i, v in enumerate(vols[:, 0]):
        for j, s in enumerate(spots):
            one = bsm("put", float(s), 100.0, 0.75, 0.04, 0.01, float(v))
            assert isinstance(one.price, float)
            assert res.price[i, j] == pytest.approx(one.price, rel=1e-14)
            assert res.theta[i, j] == pytest.approx(one.theta, rel=1e-13)


def test_bsm_rejects_bad_inputs() -> None:
    with pytest.raises(InputError, match="vol"):
        bsm("call", 100.0, 100.0, 1.0, 0.05, 0.0, 0.0)
    with pytest.raises(InputError, match="spot"):
        bsm("call", [100.0, -1.0], 100.0, 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(InputError, match="expiry"):
        bsm("put", 100.0, 100.0, 0.0, 0.05, 0.0, 0.2)
    with pytest.raises(InputError, match="kind"):
        bsm("straddle", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2)


def test_perpetual_put_published_values() -> None:
    # Merton (1973) perpetual put, values from REFERENCE_VALUES.md (+-1e-4).
    res = perpetual_american("put", 100.0, 100.0, 0.05, 0.0, 0.2)
    assert res.critical_spot == pytest.approx(71.4286, abs=1e-4)
    assert res.value == pytest.approx(12.3200, abs=1e-4)
    res = perpetual_american("put", 100.0, 100.0, 0.05, 0.02, 0.3)
    assert res.critical_spot == pytest.approx(47.3828, abs=1e-4)
    assert res.value == pytest.approx(26.8545, abs=1e-4)


@pytest.mark.parametrize(
    "kind, r, q",
    [("put", 0.05, 0.0), ("put", 0.03, 0.06), ("call", 0.02, 0.05), ("call", -0.01, 0.03)],
)
def test_perpetual_ode_and_smooth_pasting(kind: str, r: float, q: float) -> None:
    # Merton (1973): V solves vol^2 S^2 V''/2 + (r - q) S V' - r V = 0 in continuation and
    # meets the exercise value with matching slope at the boundary.
    vol, strike = 0.25, 100.0
    crit = perpetual_american(kind, 100.0, strike, r, q, vol).critical_spot
    sign = 1.0 if kind == "call" else -1.0

    def value(x):
        return np.array(
            [perpetual_american(kind, float(y), strike, r, q, vol).value for y in np.ravel(x)]
        ).reshape(np.shape(x))

    s = crit * (0.8 if kind == "call" else 1.3)
    h = 1e-3 * s
    v0, vp, vm = value(s), value(s + h), value(s - h)
    d1, d2 = (vp - vm) / (2 * h), (vp - 2 * v0 + vm) / (h * h)
    assert abs(0.5 * vol**2 * s * s * d2 + (r - q) * s * d1 - r * v0) < 1e-5
    inside, h = crit * (1.0 - sign * 1e-5), 1e-6 * crit
    slope = (value(inside + h) - value(inside - h)) / (2 * h)
    assert float(slope) == pytest.approx(sign, abs=1e-4)
    assert float(value(crit)) == pytest.approx(sign * (crit - strike), abs=1e-12)


def test_perpetual_call_put_symmetry() -> None:
    # McDonald & Schroder (1998): C(S, K, r, q) = P(K, S, q, r); boundaries S*_call = K^2/S*_put.
    call = perpetual_american("call", 90.0, 110.0, 0.02, 0.05, 0.3)
    put = perpetual_american("put", 110.0, 90.0, 0.05, 0.02, 0.3)
    assert call.value == pytest.approx(put.value, rel=1e-13)
    assert call.critical_spot * perpetual_american(
        "put", 110.0, 110.0, 0.05, 0.02, 0.3
    ).critical_spot == pytest.approx(110.0**2, rel=1e-13)


def test_perpetual_bounds_long_dated_american() -> None:
    # Common practice: a 50-year American put is just below the perpetual one (within 0.1 %).
    perpetual = perpetual_american("put", 100.0, 100.0, 0.05, 0.0, 0.2).value
    finite = lr_extrapolated_price("put", "american", 100.0, 100.0, 50.0, 0.05, 0.0, 0.2, 1001)
    assert finite < perpetual
    assert finite == pytest.approx(perpetual, rel=1e-3)


def test_perpetual_rejects_no_boundary() -> None:
    with pytest.raises(InputError, match="rate"):
        perpetual_american("put", 100.0, 100.0, 0.0, 0.0, 0.2)
    with pytest.raises(InputError, match="div_yield"):
        perpetual_american("call", 100.0, 100.0, 0.05, 0.0, 0.2)
    assert math.isfinite(perpetual_american("call", 100.0, 100.0, 0.05, 0.01, 0.2).critical_spot)
