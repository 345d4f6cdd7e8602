"""price_many: the same answers as one price at a time, in order, over one or two processes."""

from __future__ import annotations

import numpy as np
import pytest

from stopline import Market, Option, price
from stopline.batch import BatchRowError, price_many
from stopline.errors import InputError


def _book(rng: np.random.Generator, n: int) -> tuple[list[Option], list[Market]]:
    opts, mkts = [], []
    for _ in range(n):
        kind = "put" if rng.random() < 0.5 else "call"
        opts.append(Option(kind, 100.0, float(rng.uniform(0.05, 3.0))))
        mkts.append(Market(float(rng.uniform(70, 130)), float(rng.uniform(0, 0.1)),
                           float(rng.uniform(0.1, 0.6)), div_yield=float(rng.uniform(0, 0.08))))
    return opts, mkts


@pytest.mark.parametrize("workers", [1, 2])
def test_batch_equals_single_prices_exactly(rng: np.random.Generator, workers: int) -> None:
    opts, mkts = _book(rng, 12)
    got = price_many(opts, mkts, accuracy="fast", workers=workers)
    assert len(got) == len(opts)
    for o, m, r in zip(opts, mkts, got, strict=True):
        one = price(o, m, accuracy="fast")
        assert r.option == o and r.market == m  # input order kept
        assert r.price == one.price and r.delta == one.delta and r.gamma == one.gamma
        assert r.theta == one.theta and r.error_estimate == one.error_estimate
        np.testing.assert_array_equal(r.boundary.spot, one.boundary.spot)


def test_grid_greeks_pass_through_and_equal_single_prices(rng: np.random.Generator) -> None:
    opts, mkts = _book(rng, 4)
    got = price_many(opts, mkts, accuracy="fast", greeks="grid")
    for o, m, r in zip(opts, mkts, got, strict=True):
        one = price(o, m, accuracy="fast", greeks="grid")
        assert r.price == one.price and r.delta == one.delta
        assert np.isnan(r.vega) and np.isnan(one.vega)  # "grid" leaves vega and rho out


def test_bad_greeks_is_refused() -> None:
    with pytest.raises(InputError, match="greeks"):
        price_many([Option("put", 100.0, 1.0)], Market(100.0, 0.0, 0.2), greeks="some")


def test_one_market_is_shared_by_every_option() -> None:
    mkt = Market(100.0, 0.03, 0.25)
    opts = [Option("put", k, 0.5) for k in (90.0, 100.0, 110.0)]
    got = price_many(opts, mkt, accuracy="fast", method="psor")
    assert [r.price for r in got] == [price(o, mkt, accuracy="fast", method="psor").price for o in opts]
    assert all(r.stats.method == "psor" for r in got)


def test_empty_batch_is_empty() -> None:
    assert price_many([], [], workers=2) == []


def test_length_mismatch_names_the_field() -> None:
    with pytest.raises(InputError, match="markets"):
        price_many([Option("put", 100.0, 1.0)] * 2, [Market(100.0, 0.0, 0.2)] * 3)


@pytest.mark.parametrize("workers", [0, 1.5, True])
def test_bad_workers_is_refused(workers: object) -> None:
    with pytest.raises(InputError, match="workers"):
        price_many([Option("put", 100.0, 1.0)], Market(100.0, 0.0, 0.2), workers=workers)  # type: ignore[arg-type]


def test_bad_accuracy_is_refused_before_any_row() -> None:
    with pytest.raises(InputError, match="accuracy"):
        price_many([Option("put", 100.0, 1.0)], Market(100.0, 0.0, 0.2), accuracy="rough")


@pytest.mark.parametrize("workers", [1, 2])
def test_a_bad_row_stops_the_batch_and_is_named(workers: int) -> None:
    mkt = Market(100.0, 0.03, 0.25, valuation_date="2026-12-01")
    opts = [Option("put", 100.0, 0.5)] * 3 + [Option("put", 100.0, "2026-06-01")]
    with pytest.raises(BatchRowError, match="row 3") as info:
        price_many(opts, mkt, accuracy="fast", workers=workers)
    assert info.value.row == 3
    assert isinstance(info.value.cause, InputError)


def test_a_row_that_is_not_an_option_is_named() -> None:
    with pytest.raises(BatchRowError, match="row 1"):
        price_many([Option("put", 100.0, 1.0), "put"], Market(100.0, 0.0, 0.2))  # type: ignore[list-item]
