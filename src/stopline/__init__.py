"""stopline: American and European vanilla options by finite differences, with proof."""

from __future__ import annotations

from .batch import price_many
from .contract import Option
from .crosscheck import CheckSettings, Tolerance, check_row, run_crosscheck
from .errors import ConvergenceError, InputError, StoplineError
from .exercise import METHODS, DirectSweep, ProjectedSOR
from .implied import ImpliedVolError, ImpliedVolResult, implied_vol, implied_vol_detail
from .market import Market, parse_dividends
from .pricing import PRESETS, ExerciseBoundary, GridSpec, Result, SolveStats, price
from .profile import ValueProfile, value_profile
from .termstructure import PiecewiseConstant

__all__ = [
    "run_crosscheck",
    "check_row",
    "CheckSettings",
    "Tolerance",
    "Option",
    "Market",
    "PiecewiseConstant",
    "parse_dividends",
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
    "value_profile",
    "ValueProfile",
    "implied_vol",
    "implied_vol_detail",
    "ImpliedVolResult",
    "ImpliedVolError",
]
__version__ = "0.1.0"
