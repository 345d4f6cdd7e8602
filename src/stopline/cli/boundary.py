"""``stopline boundary``: the early-exercise boundary as a figure and a table of points."""

from __future__ import annotations

from pathlib import Path

import typer

from ._common import CAUTION, guard, parse_expiry
from .price import Accuracy, DividendModel, Kind, Method, Style

__all__ = ["boundary_cmd"]


@guard
def boundary_cmd(
    kind: Kind = typer.Option(..., "--kind", help="put or call."),
    spot: float = typer.Option(..., "--spot", help="Price of the underlying."),
    strike: float = typer.Option(..., "--strike", help="Strike price."),
    expiry: str = typer.Option(..., "--expiry", help="Years to expiry, or a date YYYY-MM-DD."),
    rate: float = typer.Option(..., "--rate", help="Risk-free rate, continuous, decimal."),
    vol: float = typer.Option(..., "--vol", help="Volatility, annual, decimal (0.25 = 25%)."),
    style: Style = typer.Option(Style.american, "--style", help="american (a european option has no boundary)."),
    div_yield: float = typer.Option(0.0, "--div-yield", help="Dividend yield, continuous."),
    valuation_date: str = typer.Option(
        None, "--valuation-date", help="YYYY-MM-DD; needed with a date expiry (dates on the axis)."
    ),
    accuracy: Accuracy = typer.Option(Accuracy.standard, "--accuracy", help="fast, standard or fine."),
    method: Method = typer.Option(Method.direct, "--method", help="direct (Brennan-Schwartz) or psor."),
    dividend: list[str] = typer.Option(
        None, "--dividend",
        help="Cash dividend EX_DATE_OR_YEARS:AMOUNT (e.g. 2027-03-15:0.42); repeat for more.",
    ),
    dividend_model: DividendModel = typer.Option(
        DividendModel.spot, "--dividend-model",
        help="spot (spot drops on the ex-date) or escrowed (spot less PV of dividends is lognormal).",
    ),
    out: Path = typer.Option(Path("boundary.png"), "--out", help="Figure to write (PNG)."),
    csv_path: Path = typer.Option(None, "--csv", help="Also write the boundary points as CSV."),
) -> None:
    """Draw when an American option should be exercised: critical spot against time."""
    from .. import Market, Option
    from ..boundary import write_boundary_csv
    from ..errors import InputError
    from ..market import parse_dividends
    from ..plots import plot_boundary, save_figure
    from ..pricing import price

    if style is Style.european:
        raise InputError("style", "european", "has no early-exercise boundary; use american")
    for field, path in (("out", out), ("csv", csv_path)):
        if path is not None and not path.resolve().parent.is_dir():
            raise InputError(field, str(path), "its folder does not exist")
    option = Option(kind.value, strike, parse_expiry(expiry), style=style.value)
    dividends = [d for text in dividend or () for d in parse_dividends(text)]
    market = Market(
        spot, rate, vol, div_yield=div_yield, valuation_date=valuation_date,
        dividends=dividends, dividend_model=dividend_model.value,
    )
    res = price(option, market, accuracy=accuracy.value, method=method.value)
    if res.boundary.spot.size == 0:
        raise InputError("expiry", expiry, "is the valuation date: there is no boundary to draw")
    save_figure(plot_boundary(res), out)
    typer.echo(f"figure: {out}")
    if csv_path is not None:
        write_boundary_csv(res, csv_path)
        typer.echo(f"points: {csv_path} ({res.boundary.spot.size} rows)")
    star = res.boundary.spot[-1]
    side = "at or below" if option.is_put else "at or above"
    if star == star:  # not NaN
        typer.echo(f"critical spot today: {star:.6g} (exercise {side} it); spot {spot:g}")
    elif (res.boundary.spot == res.boundary.spot).any():
        typer.echo("no early exercise today; the figure shows when it would be optimal")
    else:
        typer.echo("early exercise is not optimal at any time for this contract")
    typer.echo(CAUTION)
