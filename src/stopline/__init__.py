"""stopline: American and European vanilla options by finite differences, with proof."""

from __future__ import annotations

from .batch import price_many
from .contract import Option
from .errors import ConvergenceError, InputError, StoplineError
from .exercise import METHODS, DirectSweep, ProjectedSOR
from .market import Market
from .pricing import PRESETS, ExerciseBoundary, GridSpec, Result, SolveStats, price

__all__ = [
    "Option",
    "Market",
    "price",
    "price_many",
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
]
__version__ = "0.1.0"
