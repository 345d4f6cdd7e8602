"""stopline: American and European vanilla options by finite differences, with proof."""

from __future__ import annotations

from .contract import Option
from .errors import ConvergenceError, InputError, StoplineError
from .exercise import METHODS, DirectSweep, ProjectedSOR
from .market import Market
from .pricing import PRESETS, ExerciseBoundary, GridSpec, Result, SolveStats, price
from .profile import ValueProfile, value_profile

__all__ = [
    "Option",
    "Market",
    "price",
    "Result",
    "ExerciseBoundary",
    "SolveStats",
    "GridSpec",
    "PRESETS",
    "METHODS",
    "DirectSweep",
    "ProjectedSOR",
    "StoplineError",
    "InputError",
    "ConvergenceError",
    "value_profile",
    "ValueProfile",
]
__version__ = "0.1.0"
