"""``stopline demo``: price the bundled invented book and show the answers."""

from __future__ import annotations

import csv
from importlib import resources

from rich.console import Console
from rich.table import Table

from ._common import CAUTION, guard

__all__ = ["demo_cmd", "demo_book_path"]


def demo_book_path():  # noqa: ANN201 - importlib Traversable
    """The invented demo book shipped with the package (fictional underlyings)."""
    return resources.files("stopline") / "data" / "demo_book.csv"


@guard
def demo_cmd() -> None:
    """Price the bundled demo book (invented underlyings) and print the answers."""
    from .. import Market, Option
    from ..pricing import price

    console = Console()
    table = Table(title="stopline demo book (fictional underlyings)", header_style="bold")
    for col in ("id", "kind", "style", "spot", "strike", "years", "vol", "price", "delta",
                "gamma", "theta", "+/-"):
        table.add_column(col, justify="left" if col in ("id", "kind", "style") else "right")
    with demo_book_path().open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    for row in rows:
        opt = Option(row["kind"], float(row["strike"]), float(row["expiry"]), style=row["style"])
        mkt = Market(float(row["spot"]), float(row["rate"]), float(row["vol"]),
                     div_yield=float(row["div_yield"]))
        res = price(opt, mkt)
        table.add_row(row["id"], opt.kind, opt.style, f"{mkt.spot:g}", f"{opt.strike:g}",
                      f"{res.time_to_expiry:g}", f"{mkt.vol:.0%}", f"{res.price:.4f}",
                      f"{res.delta:.4f}", f"{res.gamma:.4f}", f"{res.theta:.3f}",
                      f"{res.error_estimate:.0e}")
    console.print(table)
    console.print(CAUTION, style="italic dim")
