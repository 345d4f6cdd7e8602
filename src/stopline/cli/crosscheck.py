"""``stopline crosscheck``: re-price a book of third-party quotes and explain every difference."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.console import Console
from rich.table import Table

from ._common import CAUTION, guard
from ._contract_options import Accuracy

__all__ = ["crosscheck_cmd", "run_and_report", "show_summary"]


def run_and_report(
    quotes: Path,
    out: Path,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    resume: bool = False,
    price_tolerance: float = 0.005,
    vol_tolerance: float = 0.25,
    accuracy: str = "standard",
    console: Console | None = None,
):  # noqa: ANN201 - CrossCheckRun, imported lazily
    """Run the cross-check with a progress bar, write results.csv and report.html.

    On Ctrl-C the finished rows are kept in ``out/partial.json`` and the command exits 130
    with a hint to ``--resume``.
    """
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeRemainingColumn,
    )

    from ..crosscheck import PARTIAL_NAME, CheckSettings, Tolerance, run_crosscheck
    from ..report import REPORT_NAME, write_report

    console = console or Console(stderr=True)
    settings = CheckSettings(Tolerance(price_tolerance, vol_tolerance), accuracy=accuracy)
    columns = (TextColumn("pricing"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn())
    with Progress(*columns, console=console, transient=True) as bar:
        task = bar.add_task("rows", total=None)

        def progress(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        try:
            run = run_crosscheck(quotes, out, settings=settings, workers=workers,
                                 scheduler=scheduler, resume=resume, on_progress=progress)
        except KeyboardInterrupt:
            bar.stop()
            typer.echo(
                f"stopline: interrupted; finished rows kept in {Path(out) / PARTIAL_NAME}. "
                "Run the same command with --resume to continue.", err=True,
            )
            raise typer.Exit(130) from None
    write_report(run, Path(out) / REPORT_NAME)
    return run


def show_summary(run, out: Path, console: Console | None = None) -> None:  # noqa: ANN001
    """Print rows by status, the worst mismatches and where the files are."""
    from ..report import REPORT_NAME

    console = console or Console()
    counts = run.counts()
    table = Table(title=f"Cross-check of {len(run.checks)} quotes", header_style="bold")
    table.add_column("status")
    table.add_column("rows", justify="right")
    for s in ("ok", "mismatch", "error"):
        table.add_row(s, str(counts[s]))
    console.print(table)
    mism = [(i, c) for i, c in enumerate(run.checks) if c.status == "mismatch"]
    mism.sort(key=lambda ic: -abs(ic[1].difference))
    if mism:
        worst = Table(title="Largest mismatches", header_style="bold")
        for col in ("id", "quote - model", "note"):
            worst.add_column(col, justify="right" if col == "quote - model" else "left")
        for i, c in mism[:5]:
            worst.add_row(str(run.rows[i].get("id") or ""), f"{c.difference:+.4f}", c.note)
        console.print(worst)
    rate = run.rows_priced / run.seconds if run.seconds > 0 else float("nan")
    console.print(f"{run.rows_priced} rows priced in {run.seconds:.1f} s on {run.workers} "
                  f"({rate:.0f} rows/s)", style="dim")
    console.print(f"results: {run.results_path}")
    console.print(f"report:  {Path(out) / REPORT_NAME}")
    console.print(CAUTION, style="italic dim")


@guard
def crosscheck_cmd(
    quotes: Path = typer.Argument(..., help="CSV of quotes with a header (see README)."),
    out: Path = typer.Option(Path("stopline-crosscheck"), "--out", help="Output folder."),
    workers: int = typer.Option(None, "--workers", min=1, help="Local processes (default: all cores)."),
    scheduler: str = typer.Option(None, "--scheduler",
                                  help="Dask scheduler address; price on that cluster."),
    resume: bool = typer.Option(False, "--resume", help="Continue an interrupted run in --out."),
    price_tolerance: float = typer.Option(0.005, "--price-tolerance", min=0.0,
                                          help="Smallest allowed |quote - model|, in money."),
    vol_tolerance: float = typer.Option(0.25, "--vol-tolerance", min=0.0,
                                        help="Allowed difference in vol points (times vega)."),
    accuracy: Accuracy = typer.Option(Accuracy.standard, "--accuracy", help="fast, standard or fine."),
) -> None:
    """Price every quote in a book, compare, and diagnose each mismatch.

    Writes OUT/results.csv (every input row with the model price, difference, implied vol, status and note) and OUT/report.html. Exits 1 when some row is in error, 130 on Ctrl-C (finished rows kept; continue with --resume).
    """
    run = run_and_report(quotes, out, workers=workers, scheduler=scheduler, resume=resume,
                         price_tolerance=price_tolerance, vol_tolerance=vol_tolerance,
                         accuracy=accuracy.value)
    show_summary(run, out)
    if run.has_errors:
        typer.echo(f"stopline: {run.counts()['error']} row(s) in error; see the note column of "
                   f"{run.results_path}", err=True)
        raise typer.Exit(1)
