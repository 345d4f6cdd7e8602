"""The ``stopline`` command: thin commands over the library.

Each command lives in its own module and is registered here. Errors raised on purpose
(:class:`~stopline.errors.StoplineError`) become one line on stderr and a non-zero exit.
"""

from __future__ import annotations

import typer

from . import boundary as _boundary
from . import crosscheck as _crosscheck
from . import demo as _demo
from . import implied as _implied
from . import price as _price
from . import validate as _validate
from ._common import first_run_notice

app = typer.Typer(
    name="stopline",
    help="American and European options by Crank-Nicolson finite differences, with proof.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)
app.command("price")(_price.price_cmd)
app.command("demo")(_demo.demo_cmd)
app.command("boundary")(_boundary.boundary_cmd)
app.command("implied")(_implied.implied_cmd)
app.command("crosscheck")(_crosscheck.crosscheck_cmd)
app.command("validate")(_validate.validate_cmd)


@app.callback()
def _before_any_command() -> None:
    first_run_notice()


def main() -> None:
    """Console-script entry point."""
    app()


__all__ = ["app", "main"]
