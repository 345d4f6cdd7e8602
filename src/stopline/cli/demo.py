"""``stopline demo``: cross-check the bundled invented book of quotes and show where the report is."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import typer

from ._common import guard

__all__ = ["demo_cmd", "demo_quotes_path"]


def demo_quotes_path():  # noqa: ANN201 - importlib Traversable
    """The invented book of third-party quotes shipped with the package (fictional underlyings).

    Made by ``examples/make_demo_book.py``; its ``planted`` column says which rows carry a
    planted problem.
    """
    return resources.files("stopline") / "data" / "demo_quotes.csv"


@guard
def demo_cmd(
    out: Path = typer.Option(Path("stopline-demo"), "--out", help="Output folder."),
    workers: int = typer.Option(None, "--workers", min=1, help="Local processes (default: all cores)."),
) -> None:
    """Cross-check the bundled demo book (invented underlyings, planted problems)."""
    from rich.console import Console

    from .crosscheck import run_and_report, show_summary

    console = Console()
    console.print("stopline demo: cross-checking an invented book of third-party quotes on five "
                  "fictional underlyings, with problems planted on purpose.")
    with resources.as_file(demo_quotes_path()) as quotes:
        run = run_and_report(Path(quotes), out, workers=workers)
    show_summary(run, out, console)
    planted = sum(1 for r in run.rows if r.get("planted") == "error")
    console.print(f"The {planted} rows in error were planted on purpose; open the report in a "
                  "browser to see every mismatch and its diagnosis.")
