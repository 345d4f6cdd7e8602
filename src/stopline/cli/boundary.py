"""``stopline boundary``: the early-exercise boundary as a figure and a table of points."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ._common import CAUTION, guard
from ._contract_options import (
    Accuracy,
    AccuracyOpt,
    DividendModel,
    DividendModelOpt,
    DividendOpt,
    DivYieldOpt,
    ExpiryOpt,
    KindOpt,
    Method,
    MethodOpt,
    RateOpt,
    SpotOpt,
    StrikeOpt,
    Style,
    ValuationDateOpt,
    VolOpt,
    build_contract,
)

__all__ = ["boundary_cmd"]


@guard
def boundary_cmd(
    kind: KindOpt,
    spot: SpotOpt,
    strike: StrikeOpt,
    expiry: ExpiryOpt,
    rate: RateOpt,
    vol: VolOpt,
    style: Annotated[
        Style, typer.Option("--style", help="american (a european option has no boundary).")
    ] = Style.american,
    div_yield: DivYieldOpt = 0.0,
    valuation_date: ValuationDateOpt = None,
    accuracy: AccuracyOpt = Accuracy.standard,
    method: MethodOpt = Method.direct,
    dividend: DividendOpt = None,
    dividend_model: DividendModelOpt = DividendModel.spot,
    out: Path = typer.Option(Path("boundary.png"), "--out", help="Figure to write (PNG)."),
    csv_path: Path = typer.Option(None, "--csv", help="Also write the boundary points as CSV."),
) -> None:
    """Draw when an American option should be exercised: critical spot against time."""
    from ..boundary import write_boundary_csv
    from ..errors import InputError
    from ..plots import plot_boundary, save_figure
    from ..pricing import price

    if style is Style.european:
        raise InputError("style", "european", "has no early-exercise boundary; use american")
    for field, path in (("out", out), ("csv", csv_path)):
        if path is not None and not path.resolve().parent.is_dir():
            raise InputError(field, str(path), "its folder does not exist")
    option, market = build_contract(kind, strike, expiry, style, spot, rate, vol, div_yield,
                                    valuation_date, dividend, dividend_model)
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
    for w in res.stats.warnings:
        typer.echo(f"warning: {w}")
    typer.echo(CAUTION)
