"""``stopline validate``: run the validation harness and file its report."""

from __future__ import annotations

from pathlib import Path

import typer

from ._common import CAUTION, guard

__all__ = ["validate_cmd"]


@guard
def validate_cmd(
    out: Path = typer.Option(..., "--out", help="Folder for report.html and summary.json."),
    quick: bool = typer.Option(
        False, "--quick", help="Fewer cases (seconds, for tests); not the validation record."
    ),
) -> None:
    """Check stopline against closed forms, trees, published tables and identities.

    Writes OUT/report.html (self-contained, figures embedded) and OUT/summary.json (every
    check with its source, value, tolerance and verdict). Exits 1 if any check fails.
    """
    from ..validation import run_validation
    from ..validation_report import write_report

    if out.exists() and not out.is_dir():
        from ..errors import InputError

        raise InputError("out", str(out), "is a file, not a folder")

    def say(section: str) -> None:
        typer.echo(f"  {section} ...", err=True)

    typer.echo("stopline validate: " + ("quick run" if quick else "full run"), err=True)
    run = run_validation(quick=quick, progress=say)
    report, summ = write_report(run, out)
    n, failed = len(run.checks), run.failed
    typer.echo(f"{n - len(failed)} of {n} checks passed in {run.seconds:.0f} s")
    for c in failed:
        typer.echo(f"FAILED: {c.name}: {c.value:.3g} (tolerance {c.tolerance:.3g}); {c.source}")
    typer.echo(f"report: {report}")
    typer.echo(f"summary: {summ}")
    typer.echo(CAUTION)
    if failed:
        raise typer.Exit(1)
