"""The package's error types.

Every error stopline raises on purpose derives from :class:`StoplineError`, so a caller (and
the command line) can catch one type at its edge.
"""

from __future__ import annotations

__all__ = ["StoplineError", "InputError", "ConvergenceError"]


class StoplineError(Exception):
    """Base class of every error raised on purpose by stopline."""


class InputError(StoplineError, ValueError):
    """An input outside its allowed domain; the message names the field and the value.

    Parameters
    ----------
    field : str
        Name of the offending input, as the user wrote it (``"vol"``, ``"expiry"`` ...).
    value : object
        The value that was given.
    reason : str
        What is wrong, e.g. ``"must be in (0, 5]"``.
    """

    def __init__(self, field: str, value: object, reason: str) -> None:
        self.field = field
        self.value = value
        self.reason = reason
        super().__init__(f"{field}={value!r}: {reason}")


class ConvergenceError(StoplineError, RuntimeError):
    """An iterative method stopped at its iteration cap without meeting its tolerance."""
