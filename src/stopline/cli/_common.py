"""Pieces shared by the commands: contract and market flags, error guard, caution text."""

from __future__ import annotations

import functools
import math
from collections.abc import Callable
from typing import Any, TypeVar

import typer

from ..errors import InputError, StoplineError

__all__ = ["CAUTION", "guard", "parse_expiry", "fail"]

#: Printed with every answer a person reads.
CAUTION = (
    "Model estimate under stated assumptions (lognormal spot; the given vol, rates and "
    "dividends); not investment advice. Use under your firm's model-risk policy."
)

F = TypeVar("F", bound=Callable[..., Any])


def fail(message: str, code: int = 2) -> typer.Exit:
    """Print ``message`` on stderr and return the exit to raise."""
    typer.echo(f"stopline: error: {message}", err=True)
    return typer.Exit(code)


def guard(func: F) -> F:
    """Turn the package's errors into one line on stderr and exit code 2 (no traceback)."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except StoplineError as exc:
            raise fail(str(exc)) from None

    return wrapper  # type: ignore[return-value]


def parse_expiry(text: str) -> float | str:
    """``--expiry``: years as a number, or an ISO date kept as text for the library."""
    try:
        value = float(text)
    except ValueError:
        if len(text) == 10 and text[4] == "-" and text[7] == "-":
            return text
        raise InputError("expiry", text, "must be years (e.g. 0.5) or a date YYYY-MM-DD") from None
    if not math.isfinite(value):
        raise InputError("expiry", text, "must be finite")
    return value
