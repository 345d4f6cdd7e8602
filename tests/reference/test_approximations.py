"""Barone-Adesi-Whaley and Bjerksund-Stensland American approximations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from stopline import _published as pub
from stopline.errors import InputError
from stopline.reference import (
    baw_price,
    bjerksund_stensland_price,
    bsm_price,
    lr_extrapolated_price,
)
from stopline.reference.approximations import _phi, _psi

# Barone-Adesi & Whaley (1987) and Bjerksund & Stensland (2002), example tables in Haug, The
# Complete Guide to Option Pricing Formulas (from memory; BAW +-3e-3, BjS printed to 4
# decimals): American calls, b = 0 (q = r = 0.10), K = 100, S = 90 / 100 / 110. The values
# are kept once, in stopline._published (the validation record checks them too), as rows
# (expiry, vol, spot, value).
BAW = {(t, v, s): val for t, v, s, val in pub.BAW_TABLE}


@pytest.mark.parametrize("expiry, vol, s, published", pub.BAW_TABLE)
def test_baw_published_table(expiry: float, vol: float, s: float, published: float) -> None:
    value = baw_price("call", s, 100.0, expiry, 0.10, 0.10, vol).value
    assert value == pytest.approx(published, abs=3e-3)


@pytest.mark.parametrize("expiry, vol, s, published", pub.BJS_TABLE)
def test_bjerksund_stensland_published_table(
    expiry: float, vol: float, s: float, published: float
) -> None:
    approx = bjerksund_stensland_price("call", s, 100.0, expiry, 0.10, 0.10, vol)
    # printed to 4 decimals: within rounding (5e-5) plus the last digit's doubt
    assert approx.value == pytest.approx(published, abs=1e-4)
    # against each other: every entry of this table lies below the Barone-Adesi-Whaley
    # table's (both from memory, above), and so do the two formulas' values
    assert published < BAW[(expiry, vol, s)]
    assert approx.value < baw_price("call", s, 100.0, expiry, 0.10, 0.10, vol).value


def _grid():
    for kind in ("put", "call"):
        for s in (90.0, 100.0, 110.0):
            for t in (0.25, 0.5, 1.0):
                for vol in (0.2, 0.4):
                    for q in (0.0, 0.04):
                        if kind == "call" and q == 0.0:
                            continue
                        yield kind, s, 100.0, t, 0.05, q, vol


def test_error_sizes_against_tree() -> None:
    # Broadie & Detemple (1996) report errors of these approximations of the order of 1 %
    # (from memory); over this grid (T <= 1): max relative error 2e-2, RMS 1e-2.
    # Bjerksund & Stensland (2002): their value is that of a feasible exercise rule, so a
    # lower bound on the American price.
    baw_err, bjs_err = [], []
    for case in _grid():
        exact = lr_extrapolated_price(case[0], "american", *case[1:], 301)
        baw = baw_price(*case).value
        bjs = bjerksund_stensland_price(*case).value
        baw_err.append((baw - exact) / exact)
        bjs_err.append((bjs - exact) / exact)
        assert bjs <= exact * (1 + 2e-5)
    for err in (np.array(baw_err), np.array(bjs_err)):
        assert np.max(np.abs(err)) < 2e-2
        assert np.sqrt(np.mean(err**2)) < 1e-2


def test_no_early_exercise_cases_are_european() -> None:
    # Merton (1973): no early exercise for a call with q <= 0 (q <= r) or a put with r <= 0.
    for f in (baw_price, bjerksund_stensland_price):
        res = f("call", 95.0, 100.0, 1.0, 0.05, 0.0, 0.3)
        assert res.value == pytest.approx(
            bsm_price("call", 95.0, 100.0, 1.0, 0.05, 0.0, 0.3), rel=1e-13
        )
        assert res.critical_spot == math.inf
        res = f("put", 95.0, 100.0, 1.0, -0.01, 0.02, 0.3)
        assert res.value == pytest.approx(
            bsm_price("put", 95.0, 100.0, 1.0, -0.01, 0.02, 0.3), rel=1e-13
        )
        assert res.critical_spot == 0.0


def test_baw_smooth_pasting() -> None:
    # Barone-Adesi & Whaley (1987): at the critical spot the approximation meets the
    # exercise value with unit slope.
    for kind, sign in (("put", -1.0), ("call", 1.0)):
        args = (100.0, 0.75, 0.05, 0.06, 0.3)
        crit = baw_price(kind, 100.0, *args).critical_spot
        assert baw_price(kind, crit, *args).value == pytest.approx(sign * (crit - 100.0), abs=1e-9)
        inside, h = crit * (1 - sign * 1e-5), crit * 1e-6
        slope = (
            baw_price(kind, inside + h, *args).value - baw_price(kind, inside - h, *args).value
        ) / (2 * h)
        assert slope == pytest.approx(sign, abs=1e-4)
        beyond = crit * (1 + sign * 0.05)
        assert baw_price(kind, beyond, *args).value == sign * (beyond - 100.0)


def test_bjs_put_is_transformed_call() -> None:
    # McDonald & Schroder (1998) transformation as used by Bjerksund & Stensland (2002):
    # P(S, K, r, q) = C(K, S, q, r); the put trigger is below the strike.
    put = bjerksund_stensland_price("put", 95.0, 100.0, 1.0, 0.05, 0.01, 0.3)
    call = bjerksund_stensland_price("call", 100.0, 95.0, 1.0, 0.01, 0.05, 0.3)
    assert put.value == pytest.approx(call.value, rel=1e-14)
    assert 0.0 < put.critical_spot < 100.0
    assert bjerksund_stensland_price(
        "put", 0.99 * put.critical_spot, 100.0, 1.0, 0.05, 0.01, 0.3
    ).value == pytest.approx(100.0 - 0.99 * put.critical_spot, rel=1e-14)


def _killed_density(x: float, t: float, barrier: float, mu: float, vol: float) -> float:
    """Density of log(S_t / S_0) with the path kept below ``barrier`` (reflection principle)."""
    sd = vol * math.sqrt(t)

    def n(z):
        return math.exp(-z * z / 2) / math.sqrt(2 * math.pi)

    return (
        n((x - mu * t) / sd)
        - math.exp(2 * mu * barrier / vol**2) * n((x - 2 * barrier - mu * t) / sd)
    ) / sd


@pytest.mark.parametrize("gamma", [0.0, 1.0, 2.7])
@pytest.mark.parametrize("h", [90.0, 110.0, 125.0])
def test_bjs_phi_and_psi_by_quadrature(gamma: float, h: float) -> None:
    # Bjerksund & Stensland (2002) define phi and Psi as discounted expectations of S_T^gamma
    # below H with the path held below one trigger ([0, t]) or two ([0, t1], [t1, T]);
    # direct quadrature over the killed densities gives the same numbers.
    s, r, b, vol, t, t1, i2, i1 = 100.0, 0.05, -0.03, 0.3, 1.0, 0.618, 140.0, 125.0
    mu = b - vol * vol / 2
    a2 = math.log(i2 / s)
    phi = (
        math.exp(-r * t1)
        * quad(
            lambda x: _killed_density(x, t1, a2, mu, vol) * (s * math.exp(x)) ** gamma,
            -15,
            min(math.log(h / s), a2),
            epsabs=1e-13,
        )[0]
    )
    assert _phi(s, t1, gamma, h, i2, r, b, vol) == pytest.approx(phi, rel=1e-10)
    psi = (
        math.exp(-r * t1)
        * quad(
            lambda x: (
                _killed_density(x, t1, a2, mu, vol)
                * _phi(s * math.exp(x), t - t1, gamma, h, i1, r, b, vol)
            ),
            -15,
            math.log(i1 / s),
            epsabs=1e-13,
            limit=200,
        )[0]
    )
    assert _psi(s, t, gamma, h, i2, i1, t1, r, b, vol) == pytest.approx(psi, rel=1e-10)


def test_bjs_is_the_value_of_its_exercise_rule() -> None:
    # Bjerksund & Stensland (2002): the formula is the value of exercising when the spot
    # first reaches I2 on [0, t1] or I1 on [t1, T]. Assembled here independently: first
    # passage to I2, then at t1 the value of the one-trigger rule (Bjerksund & Stensland
    # 1993) integrated over the killed density.
    s, k, t, r, q, vol = 100.0, 100.0, 1.0, 0.05, 0.08, 0.25
    b = r - q
    res = bjerksund_stensland_price("call", s, k, t, r, q, vol)
    # Recompute the triggers as in the paper.
    var = vol * vol
    beta = (0.5 - b / var) + math.sqrt((b / var - 0.5) ** 2 + 2 * r / var)
    b_inf, b_zero = beta / (beta - 1) * k, max(k, r / (r - b) * k)
    t1 = 0.5 * (math.sqrt(5) - 1) * t

    def trigger(tt):
        h = -(b * tt + 2 * vol * math.sqrt(tt)) * k * k / ((b_inf - b_zero) * b_zero)
        return b_zero + (b_inf - b_zero) * (1 - math.exp(h))

    i1, i2 = trigger(t1), trigger(t)
    assert res.critical_spot == pytest.approx(i2, rel=1e-14)
    mu = b - var / 2
    a2 = math.log(i2 / s)

    # Exercise at I2 before t1: E[e^{-r tau}; tau <= t1] by the first-passage density.
    def passage(u):
        return (
            a2
            / (vol * math.sqrt(2 * math.pi * u**3))
            * math.exp(-((a2 - mu * u) ** 2) / (2 * var * u))
        )

    early = (i2 - k) * quad(lambda u: math.exp(-r * u) * passage(u), 0, t1, epsabs=1e-13)[0]

    def one_trigger(y):
        # Value at t1 of exercising at I1 on [t1, T] (Bjerksund & Stensland 1993 form).
        if y >= i1:
            return y - k
        tau, alpha = t - t1, (i1 - k) * i1**-beta

        def ph(g, h):
            return _phi(y, tau, g, h, i1, r, b, vol)

        return (
            alpha * y**beta
            - alpha * ph(beta, i1)
            + ph(1, i1)
            - ph(1, k)
            - k * ph(0, i1)
            + k * ph(0, k)
        )

    later = (
        math.exp(-r * t1)
        * quad(
            lambda x: _killed_density(x, t1, a2, mu, vol) * one_trigger(s * math.exp(x)),
            -12,
            a2,
            points=[math.log(i1 / s)],
            epsabs=1e-12,
            limit=200,
        )[0]
    )
    assert res.value == pytest.approx(early + later, rel=1e-9)


def test_double_boundary_cases_are_refused() -> None:
    # Battauz, De Donno & Sbuelz (2015): with q < r < 0 a put has two exercise boundaries.
    with pytest.raises(InputError, match="two exercise boundaries"):
        baw_price("put", 100.0, 100.0, 1.0, -0.01, -0.03, 0.2)
    with pytest.raises(InputError, match="two exercise boundaries"):
        bjerksund_stensland_price("call", 100.0, 100.0, 1.0, -0.03, -0.01, 0.2)
