"""Shared test set-up: strict floating point, a seeded generator, a headless plotting backend."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402


@pytest.fixture(autouse=True)
def _strict_floats():
    old = np.seterr(all="raise", under="ignore")
    yield
    np.seterr(**old)
    plt.close("all")


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator, so every run draws the same cases."""
    return np.random.default_rng(20261201)
