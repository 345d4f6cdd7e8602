"""Shared test set-up: strict floating point, a seeded generator, a headless plotting backend.

Property tests draw the same examples on every run (hypothesis ``derandomize``), so that the
suite, and CI's verdict on a change, is reproducible. ``HYPOTHESIS_PROFILE=explore`` draws
fresh random examples instead: run it to search for new failures, and keep each one found as
an ``@example`` regression case in the test file.
"""

from __future__ import annotations

import os

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from hypothesis import settings  # noqa: E402

settings.register_profile("repeatable", derandomize=True, print_blob=True)
settings.register_profile("explore", derandomize=False, print_blob=True)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "repeatable"))


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
