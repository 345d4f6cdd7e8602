"""Option and Market: accepted inputs and errors that name the field, the value and the range."""

from __future__ import annotations

import datetime as dt
import math

import pytest

from stopline import InputError, Market, Option


@pytest.mark.parametrize(
    "kwargs,field",
    [
        ({"kind": "pot"}, "kind"),
        ({"style": "bermudan"}, "style"),
        ({"strike": 0.0}, "strike"),
        ({"strike": -5.0}, "strike"),
        ({"strike": "abc"}, "strike"),
        ({"expiry": -0.1}, "expiry"),
        ({"expiry": 51.0}, "expiry"),
        ({"expiry": math.nan}, "expiry"),
        ({"expiry": "2027-13-01"}, "expiry"),
    ],
)
def test_option_rejects_bad_input(kwargs: dict, field: str) -> None:
    # common practice: refuse inputs outside the domain, naming the field
    args = {"kind": "put", "strike": 100.0, "expiry": 1.0} | kwargs
    with pytest.raises(InputError) as info:
        Option(**args)
    assert info.value.field == field
    assert field in str(info.value) and repr(kwargs[field]) in str(info.value)


@pytest.mark.parametrize(
    "kwargs,field,range_text",
    [
        ({"vol": -0.2}, "vol", "(0, 5]"),
        ({"vol": 0.0}, "vol", "(0, 5]"),
        ({"vol": 7.0}, "vol", "(0, 5]"),
        ({"spot": 0.0}, "spot", "(0, 1e+09]"),
        ({"rate": 3.0}, "rate", "[-0.25, 1]"),
        ({"div_yield": -1.0}, "div_yield", "[-0.25, 1]"),
        ({"valuation_date": "yesterday"}, "valuation_date", "YYYY-MM-DD"),
    ],
)
def test_market_rejects_bad_input(kwargs: dict, field: str, range_text: str) -> None:
    # common practice: the message names the field, the value and the allowed range
    args = {"spot": 100.0, "rate": 0.05, "vol": 0.2} | kwargs
    with pytest.raises(InputError) as info:
        Market(**args)
    assert info.value.field == field
    assert range_text in str(info.value)


def test_date_expiry_needs_valuation_date_and_must_not_be_past() -> None:
    from stopline import price

    opt = Option("call", 100.0, "2027-01-15")
    with pytest.raises(InputError, match="valuation_date"):
        price(opt, Market(100.0, 0.05, 0.2))
    with pytest.raises(InputError, match="before the valuation date"):
        price(opt, Market(100.0, 0.05, 0.2, valuation_date=dt.date(2027, 2, 1)))


def test_inputs_are_normalised() -> None:
    opt = Option(" PUT ", 100, "2027-01-15", style="European")
    assert (opt.kind, opt.style, opt.expiry) == ("put", "european", dt.date(2027, 1, 15))
    assert Market(100, 0, 0.2, valuation_date="2026-12-01").valuation_date == dt.date(2026, 12, 1)
