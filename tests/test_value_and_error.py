"""pricing._value_and_error: price()'s price and error estimate without its Result.

The implied-vol search prices one contract many times and reads only those two numbers, so
it calls this instead of price(); it must give price()'s numbers exactly, on every path
(the one-call pairs, flat and with cash dividends, and the general path where they do not
apply), and the search must therefore return the same vols as through price().
"""

from __future__ import annotations

import numpy as np
import pytest

import stopline.pricing as pricing
from stopline import Market, Option, price
from stopline.implied import ImpliedVolError, implied_vol_detail


def _contracts(n: int, seed: int) -> list[tuple[Option, Market]]:
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        kind = ("put", "call")[i % 2]
        style = "european" if i % 7 == 3 else "american"
        t = float(rng.choice([0.02, 0.25, 1.0, 3.0]))
        k = float(rng.uniform(60.0, 150.0))
        vol = float(rng.choice([0.05, 0.2, 0.45, 1.2, 2.5]))
        divs: tuple = ()
        if i % 3 == 0:  # cash dividends, some after expiry, both models
            divs = tuple((float(w), float(rng.uniform(0.2, 3.0)))
                         for w in np.sort(rng.uniform(0.01, 1.3, int(rng.integers(1, 4)))) * t)
        rate = float(rng.choice([-0.01, 0.0, 0.04, 0.12]))
        q = float(rng.choice([0.0, 0.02, 0.15]))
        mkt = Market(100.0, rate, vol, q, dividends=divs,
                     dividend_model="escrowed" if i % 6 == 0 else "spot")
        out.append((Option(kind, k, t, style), mkt))
    return out


@pytest.mark.parametrize("accuracy", ["fast", "standard"])
def test_same_numbers_as_price(accuracy: str) -> None:
    # every path: flat pair, dividend pair (ex-dates before and after expiry), the general
    # path (extreme regimes: vol 2.5 over 3 years, calls through puts, exercised at once)
    for opt, mkt in _contracts(200, 5):
        res = price(opt, mkt, accuracy=accuracy, greeks="grid")
        assert pricing._value_and_error(opt, mkt, accuracy) == (res.price, res.error_estimate)
    short = Option("put", 100.0, 0.0)  # expired: the general path's intrinsic value
    assert pricing._value_and_error(short, Market(90.0, 0.03, 0.2), "standard") == (10.0, 0.0)


def test_implied_vols_as_through_price(monkeypatch: pytest.MonkeyPatch) -> None:
    # the search's answers are those of the search through price() itself, to the last bit,
    # on quotes near and away from the model (cash-dividend rows included)
    cases = []
    rng = np.random.default_rng(11)
    for opt, mkt in _contracts(200, 9):
        start = price(opt, mkt, greeks="vega")
        quote = start.price * float(rng.choice([1.0 + 1e-5, 1.002, 0.97, 1.1]))
        cases.append((opt, mkt, quote, start))

    def search() -> list[tuple]:
        out = []
        for opt, mkt, quote, start in cases:
            try:
                r = implied_vol_detail(opt, mkt, quote, start=start)
                out.append((r.vol, r.model_price, r.price_calls, r.vega, r.note))
            except ImpliedVolError as exc:
                out.append((exc.cause, str(exc)))
        return out

    fast = search()
    assert sum(len(r) == 5 for r in fast) >= 160  # most quotes have a vol

    def through_price(option, market, accuracy):
        res = price(option, market, accuracy=accuracy, greeks="grid")
        return res.price, res.error_estimate

    monkeypatch.setattr(pricing, "_value_and_error", through_price)
    assert search() == fast
