"""Shared test set-up: the package from this checkout, strict floating point, a seeded rng."""

from __future__ import annotations

import sys
from pathlib import Path

import matplotlib
import numpy as np
import pytest

matplotlib.use("Agg")
np.seterr(all="raise", under="ignore")
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))


@pytest.fixture
def rng() -> np.random.Generator:
    """A random generator with a fixed seed."""
    return np.random.default_rng(20240607)


@pytest.fixture(autouse=True)
def _close_figures():
    """Close any figure a test opened."""
    yield
    if "matplotlib.pyplot" in sys.modules:
        sys.modules["matplotlib.pyplot"].close("all")
