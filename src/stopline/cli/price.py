"""``stopline price``: one option, its Greeks and how they were computed."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.table import Table

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

__all__ = ["price_cmd"]


@guard
def price_cmd(
    kind: KindOpt,
    spot: SpotOpt,
    strike: StrikeOpt,
    expiry: ExpiryOpt,
    rate: RateOpt,
    vol: VolOpt,
    style: Annotated[Style, typer.Option("--style", help="american or european.")] = Style.american,
    div_yield: DivYieldOpt = 0.0,
    valuation_date: ValuationDateOpt = None,
    accuracy: AccuracyOpt = Accuracy.standard,
    method: MethodOpt = Method.direct,
    dividend: DividendOpt = None,
    dividend_model: DividendModelOpt = DividendModel.spot,
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object instead of a table."),
    plot: Path = typer.Option(
        None, "--plot", help="Also write a figure of value, payoff, delta and gamma across spot (PNG)."
    ),
) -> None:
    """Price one American or European option with its Greeks and error estimate."""
    from ..errors import InputError
    from ..pricing import price

    option, market = build_contract(kind, strike, expiry, style, spot, rate, vol, div_yield,
                                    valuation_date, dividend, dividend_model)
    if plot is not None and not plot.resolve().parent.is_dir():
        raise InputError("plot", str(plot), "its folder does not exist")
    res = price(option, market, accuracy=accuracy.value, method=method.value)
    if plot is not None:
        from ..plots import plot_value_profile, save_figure
        from ..profile import value_profile

        if res.stats.space_points == 0:
            raise InputError("expiry", expiry, "is the valuation date: no profile to draw")
        profile = value_profile(option, market, accuracy=accuracy.value, method=method.value)
        save_figure(plot_value_profile(profile), plot)
    if as_json:
        record = result_record(res)
        if plot is not None:
            record["plot"] = str(plot)
        typer.echo(json.dumps(record, indent=2))
        return
    show_result(res)
    if plot is not None:
        typer.echo(f"figure: {plot}")


def result_record(res) -> dict:  # noqa: ANN001 - Result, imported lazily
    """The JSON object ``--json`` prints: the inputs, the answers and how they were obtained."""
    opt, mkt, st = res.option, res.market, res.stats
    return {
        "kind": opt.kind,
        "style": opt.style,
        "spot": mkt.spot,
        "strike": opt.strike,
        "expiry": opt.expiry if isinstance(opt.expiry, float) else opt.expiry.isoformat(),
        "time_to_expiry": res.time_to_expiry,
        "rate": _curve_record(mkt.rate),
        "div_yield": _curve_record(mkt.div_yield),
        "vol": _curve_record(mkt.vol),
        "dividends": [
            {"ex_date": w.isoformat() if hasattr(w, "isoformat") else w, "amount": a}
            for w, a in mkt.dividends
        ],
        "dividend_model": mkt.dividend_model,
        "valuation_date": None if mkt.valuation_date is None else mkt.valuation_date.isoformat(),
        "price": res.price,
        "delta": res.delta,
        "gamma": res.gamma,
        "theta": res.theta,
        "vega": res.vega,
        "rho": res.rho,
        "error_estimate": res.error_estimate,
        "accuracy": res.accuracy,
        "method": st.method,
        "space_points": st.space_points,
        "time_levels": st.time_levels,
        "psor_iterations": st.psor_iterations,
        "day_count": st.day_count,
        "warnings": list(st.warnings),
        "caution": CAUTION,
    }


def _curve_record(value):  # noqa: ANN001, ANN202 - float or PiecewiseConstant
    """A flat number as is; a term structure as its times and values."""
    if hasattr(value, "times"):
        return {"times": list(value.times), "values": list(value.values)}
    return value


def _curve_text(value) -> str:  # noqa: ANN001 - float or PiecewiseConstant
    """``4.0000%``, or ``4.0000% to 0.5y, 4.5000% after`` for a term structure."""
    if not hasattr(value, "times"):
        return f"{value:.4%}"
    parts = [f"{v:.4%} to {t:g}y" for t, v in zip(value.times, value.values, strict=True)]
    return ", ".join(parts[:-1] + [f"{value.values[-1]:.4%} after {value.times[-2]:g}y"]) if len(
        parts) > 1 else f"{value.values[0]:.4%}"


def show_result(res) -> None:  # noqa: ANN001
    """Print a result for a person: what was priced, the answer, how it was computed."""
    console = Console()
    opt, mkt, st = res.option, res.market, res.stats
    title = f"{opt.style.capitalize()} {opt.kind}  K={opt.strike:g}  T={res.time_to_expiry:.6g}y"
    inputs = Table(title=title, show_header=False, box=None, pad_edge=False)
    inputs.add_column(style="dim")
    inputs.add_column(justify="right")
    inputs.add_row("spot", f"{mkt.spot:g}")
    inputs.add_row("rate", _curve_text(mkt.rate))
    inputs.add_row("dividend yield", _curve_text(mkt.div_yield))
    inputs.add_row("volatility", _curve_text(mkt.vol))
    for w, a in mkt.dividends:
        when = w.isoformat() if hasattr(w, "isoformat") else f"{w:g}y"
        inputs.add_row("cash dividend", f"{a:g} ex {when} ({mkt.dividend_model} model)")
    if mkt.valuation_date is not None:
        inputs.add_row("valuation date", mkt.valuation_date.isoformat())
    console.print(inputs)
    out = Table(show_header=True, header_style="bold", box=None)
    out.add_column("quantity")
    out.add_column("value", justify="right")
    out.add_column("meaning", style="dim")
    out.add_row("price", f"{res.price:.6f}", f"+/- {res.error_estimate:.1e} (two-grid estimate)")
    out.add_row("delta", f"{res.delta:.6f}", "dV/dS")
    out.add_row("gamma", f"{res.gamma:.6f}", "d2V/dS2")
    out.add_row("theta", f"{res.theta:.6f}", "dV/dt per year of calendar time")
    out.add_row("vega", f"{res.vega:.6f}", "dV/dvol per unit of vol (/100 per vol point)")
    out.add_row("rho", f"{res.rho:.6f}", "dV/drate per unit of rate (/10,000 per basis point)")
    console.print(out)
    grid = (
        f"grid {st.space_points} x {st.time_levels} (and {st.coarse_space_points} x "
        f"{st.coarse_time_levels}), {st.method}, accuracy {res.accuracy}, "
        f"spot range {st.domain[0]:.4g}..{st.domain[1]:.4g}, times {st.day_count}"
    )
    if st.psor_iterations:
        grid += f", {st.psor_iterations} PSOR sweeps"
    console.print(grid, style="dim")
    for w in st.warnings:
        console.print(f"warning: {w}", style="yellow")
    console.print(CAUTION, style="italic dim")
