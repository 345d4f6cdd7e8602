"""Pieces shared by the commands: contract and market flags, error guard, caution text."""

from __future__ import annotations

import functools
import math
import os
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


#: A kernel whose cached machine code means the others are cached too (compiled together).
_MARKER_KERNEL = "_kernels.price_pair-"


def kernels_cached(cache_dir: str | None = None) -> bool | None:
    """Whether numba's on-disk cache holds stopline's compiled kernels.

    None when it cannot tell (the package folder is not writable, so numba caches elsewhere,
    or ``NUMBA_CACHE_DIR`` moves the cache).
    """
    if cache_dir is None:
        if os.environ.get("NUMBA_CACHE_DIR"):
            return None
        package = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
        if not os.access(package, os.W_OK):
            return None
        cache_dir = os.path.join(package, "__pycache__")
    try:
        names = os.listdir(cache_dir)
    except OSError:
        return False
    return any(n.startswith(_MARKER_KERNEL) and n.endswith(".nbi") for n in names)


def first_run_notice(cache_dir: str | None = None) -> None:
    """One line on stderr before the first run compiles the kernels (about ten seconds)."""
    if kernels_cached(cache_dir) is False:
        typer.echo(
            "first run after install: compiling the numerical kernels once (about 10 s on 2 "
            "cores); later runs load them from disk",
            err=True,
        )


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
