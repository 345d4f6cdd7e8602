"""Issue 6's exact checks at every accuracy preset, and fitted orders with dividends and curves.

Each preset promises a target error (in units of the strike): fast 1e-4, standard 1e-6,
fine 1e-8 (``stopline.pricing.PRESETS``). Where the issue names an exact identity or a
closed form, every preset is held to its own target here.
"""

from __future__ import annotations

import math

import pytest

from stopline import Market, Option, PiecewiseConstant, price
from stopline.pricing import PRESETS
from stopline.reference import rgw_american_call

from ._bsm import bsm
from .test_dividends import _european_one_dividend, _slope, _value

ACCURACIES = ("fast", "standard", "fine")
RATE = PiecewiseConstant([0.25, 0.6, 2.0], [0.01, 0.04, 0.07])
VOL = PiecewiseConstant([0.1, 0.4, 0.9], [0.45, 0.30, 0.22])
YIELD = PiecewiseConstant([0.3, 0.8, 5.0], [0.0, 0.02, 0.05])
# Roll-Geske-Whaley cases (S, K, T, r, vol, ex-date, dividend): the worked example, three
# with early exercise worth something, one whose dividend is too small for it (Merton 1973)
RGW_CASES = [
    (80.0, 82.0, 0.3333, 0.06, 0.30, 0.25, 4.0),
    (100.0, 100.0, 1.0, 0.05, 0.25, 0.5, 3.0),
    (50.0, 40.0, 0.75, 0.02, 0.45, 0.1, 1.5),
    (120.0, 100.0, 2.0, 0.08, 0.20, 1.9, 6.0),
    (100.0, 95.0, 1.0, 0.05, 0.30, 0.4, 2.0),
]


@pytest.mark.parametrize("accuracy", ACCURACIES)
@pytest.mark.parametrize("kind", ["put", "call"])
def test_escrowed_european_is_bsm_on_spot_less_pv_at_every_preset(kind: str, accuracy: str) -> None:
    # Exact identity: under the escrowed model S - PV(D) is lognormal, so Black-Scholes-Merton
    # (Black and Scholes 1973) on S - PV(D) is the price. Tolerance: the preset's target x K.
    # Measured: fast 2.7e-7, standard 2.8e-8, fine 2.5e-11 (x K).
    s, k, t, r, v = 100.0, 100.0, 1.0, 0.05, 0.25
    divs = [(0.3, 2.0), (0.8, 2.0)]
    pv = sum(a * math.exp(-r * td) for td, a in divs)
    res = price(Option(kind, k, t, "european"),
                Market(s, r, v, dividends=divs, dividend_model="escrowed"), accuracy=accuracy)
    exact = bsm(kind, s - pv, k, t, r, 0.0, v)["price"]
    assert abs(res.price - exact) <= PRESETS[accuracy].target * k


@pytest.mark.parametrize("accuracy", ACCURACIES)
@pytest.mark.parametrize("kind", ["put", "call"])
def test_curves_european_is_bsm_with_averages_at_every_preset(kind: str, accuracy: str) -> None:
    # Exact identity (Merton 1973): with deterministic r(t), q(t), vol(t) the European price is
    # Black-Scholes-Merton with the average rate and yield and the root-mean-square vol over
    # the life. Tolerance: the preset's target x K. Measured: fast 1.2e-6, standard 2.4e-8,
    # fine 3.3e-11 (x K).
    s, k, t = 95.0, 100.0, 1.0
    res = price(Option(kind, k, t, "european"), Market(s, RATE, VOL, div_yield=YIELD),
                accuracy=accuracy)
    exact = bsm(kind, s, k, t, RATE.average(t), YIELD.average(t), VOL.rms(t))["price"]
    assert abs(res.price - exact) <= PRESETS[accuracy].target * k


@pytest.mark.parametrize("case", RGW_CASES)
def test_rgw_american_call_within_1e5_strike_at_fine_and_each_preset_target(case: tuple) -> None:
    # Source: stopline.reference.rgw_american_call (Roll 1977; Geske 1979; Whaley 1981) with
    # Owen's T bivariate normal (about 1e-16). Issue 6 asks for 1e-5 x K at "fine"; each
    # preset also meets its own target (measured: fast <= 1.5e-6, standard <= 5.9e-8,
    # fine <= 1.3e-9, x K).
    s, k, t, r, v, t_d, d = case
    exact = rgw_american_call(s, k, t, r, 0.0, v, t_d, d).value
    mkt = Market(s, r, v, dividends=[(t_d, d)], dividend_model="escrowed")
    for accuracy in ACCURACIES:
        got = price(Option("call", k, t), mkt, accuracy=accuracy).price
        assert abs(got - exact) <= PRESETS[accuracy].target * k, accuracy
        if accuracy == "fine":
            assert abs(got - exact) <= 1e-5 * k


# ---------------------------------------------------------------- fitted orders

KS = [8, 16, 32]  # points per standard deviation; time levels twice as many


def _order(opt: Option, mkt: Market, exact: float) -> float:
    return _slope(KS, [abs(_value(opt, mkt, kk, 2 * kk) - exact) for kk in KS])


@pytest.mark.parametrize("kind", ["put", "call"])
def test_second_order_spot_model_european_against_the_exact_integral(kind: str) -> None:
    # Source: Crank-Nicolson with Rannacher restarts (Rannacher 1984; Giles and Carter 2006),
    # the jump applied by interpolation with cell averaging at its kink (Pooley, Vetzal and
    # Forsyth 2003). Reference: the exact one-dividend integral (tests/test_dividends.py).
    # Band 1.8-2.2 (DEVELOPERS.md); measured 2.00.
    s, k, t, r, v, t_d, d = 52.0, 50.0, 5 / 12, 0.10, 0.40, 0.2, 2.06
    exact = _european_one_dividend(kind, s, k, t, r, v, t_d, d)
    order = _order(Option(kind, k, t, "european"), Market(s, r, v, dividends=[(t_d, d)]), exact)
    assert 1.8 <= order <= 2.2


@pytest.mark.parametrize("case", RGW_CASES[1:3])
def test_second_order_escrowed_american_call_against_rgw(case: tuple) -> None:
    # Source: as above; reference the Roll-Geske-Whaley formula (exact for this model).
    # Band 1.8-2.2; measured 1.99.
    s, k, t, r, v, t_d, d = case
    exact = rgw_american_call(s, k, t, r, 0.0, v, t_d, d).value
    mkt = Market(s, r, v, dividends=[(t_d, d)], dividend_model="escrowed")
    assert 1.8 <= _order(Option("call", k, t), mkt, exact) <= 2.2


@pytest.mark.parametrize("kind", ["put", "call"])
def test_second_order_european_on_curves_against_bsm(kind: str) -> None:
    # Source: as above, time levels on every breakpoint; reference Black-Scholes-Merton with
    # the averaged inputs (Merton 1973). Band 1.8-2.2; measured 2.14.
    exact = bsm(kind, 95.0, 100.0, 1.0, RATE.average(1.0), YIELD.average(1.0),
                VOL.rms(1.0))["price"]
    mkt = Market(95.0, RATE, VOL, div_yield=YIELD)
    assert 1.8 <= _order(Option(kind, 100.0, 1.0, "european"), mkt, exact) <= 2.2


@pytest.mark.parametrize(
    "mkt",
    [
        # four quarterly dividends and a yield (measured 1.94)
        Market(100.0, 0.05, 0.3, div_yield=0.01,
               dividends=[(0.2, 1.5), (0.45, 1.5), (0.7, 1.5), (0.95, 1.5)]),
        # two dividends on curves of rate and vol (measured 2.09)
        Market(100.0, RATE, VOL, dividends=[(0.3, 2.0), (0.8, 2.0)]),
    ],
    ids=["four-dividends-and-yield", "dividends-on-curves"],
)
def test_second_order_american_put_with_dividends(mkt: Market) -> None:
    # Source: as above; reference the same scheme on a grid four doublings finer (256 points
    # per standard deviation, 512 levels). Band 1.8-2.2.
    opt = Option("put", 100.0, 1.0)
    assert 1.8 <= _order(opt, mkt, _value(opt, mkt, 256, 512)) <= 2.2
