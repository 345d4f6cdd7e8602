"""stopline: American and European vanilla options by finite differences, with proof."""

from __future__ import annotations

from .contract import Option
from .errors import ConvergenceError, InputError, StoplineError
from .market import Market

__all__ = ["Option", "Market", "StoplineError", "InputError", "ConvergenceError"]
__version__ = "0.1.0"
