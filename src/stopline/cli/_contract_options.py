"""The contract and market flags shared by ``price`` and ``boundary``, declared once."""

from __future__ import annotations

from enum import Enum
from typing import Annotated

import typer

from ._common import parse_expiry

__all__ = [
    "Kind", "Style", "Accuracy", "Method", "DividendModel",
    "KindOpt", "SpotOpt", "StrikeOpt", "ExpiryOpt", "RateOpt", "VolOpt", "DivYieldOpt",
    "ValuationDateOpt", "AccuracyOpt", "MethodOpt", "DividendOpt", "DividendModelOpt",
    "build_contract",
]


class Kind(str, Enum):
    put = "put"
    call = "call"


class Style(str, Enum):
    american = "american"
    european = "european"


class Accuracy(str, Enum):
    fast = "fast"
    standard = "standard"
    fine = "fine"


class Method(str, Enum):
    direct = "direct"
    psor = "psor"


class DividendModel(str, Enum):
    spot = "spot"
    escrowed = "escrowed"


KindOpt = Annotated[Kind, typer.Option("--kind", help="put or call.")]
SpotOpt = Annotated[float, typer.Option("--spot", help="Price of the underlying.")]
StrikeOpt = Annotated[float, typer.Option("--strike", help="Strike price.")]
ExpiryOpt = Annotated[str, typer.Option("--expiry", help="Years to expiry, or a date YYYY-MM-DD.")]
RateOpt = Annotated[float, typer.Option("--rate", help="Risk-free rate, continuous, decimal.")]
VolOpt = Annotated[float, typer.Option("--vol", help="Volatility, annual, decimal (0.25 = 25%).")]
DivYieldOpt = Annotated[float, typer.Option("--div-yield", help="Dividend yield, continuous.")]
ValuationDateOpt = Annotated[
    str | None,
    typer.Option("--valuation-date", help="YYYY-MM-DD; needed with a date expiry or ex-date."),
]
AccuracyOpt = Annotated[Accuracy, typer.Option("--accuracy", help="fast, standard or fine.")]
MethodOpt = Annotated[
    Method,
    typer.Option(
        "--method",
        help="direct (Brennan-Schwartz sweep) or psor (projected SOR, slower); both solve "
        "Crank-Nicolson steps with the exercise boundary fitted in its cell.",
    ),
]
DividendOpt = Annotated[
    list[str] | None,
    typer.Option(
        "--dividend",
        help="Cash dividend EX_DATE_OR_YEARS:AMOUNT (e.g. 2027-03-15:0.42); repeat for more.",
    ),
]
DividendModelOpt = Annotated[
    DividendModel,
    typer.Option(
        "--dividend-model",
        help="spot (spot drops on the ex-date) or escrowed (spot less PV of dividends is lognormal).",
    ),
]


def build_contract(
    kind: Kind, strike: float, expiry: str, style: Style, spot: float, rate: float, vol: float,
    div_yield: float, valuation_date: str | None, dividend: list[str] | None,
    dividend_model: DividendModel,
):  # noqa: ANN201 - (Option, Market), imported lazily
    """The Option and Market the flags describe (errors name the flag's field)."""
    from .. import Market, Option
    from ..market import parse_dividends

    option = Option(kind.value, strike, parse_expiry(expiry), style=style.value)
    dividends = [d for text in dividend or () for d in parse_dividends(text)]
    market = Market(
        spot, rate, vol, div_yield=div_yield, valuation_date=valuation_date,
        dividends=dividends, dividend_model=dividend_model.value,
    )
    return option, market
