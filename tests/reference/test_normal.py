"""Bivariate normal distribution function against direct quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import ndtr

from stopline.errors import InputError
from stopline.reference import bivariate_normal_cdf


def _by_quadrature(h: float, k: float, rho: float) -> float:
    """P(X <= h, Y <= k) = int_{-inf}^{h} phi(x) Phi((k - rho x) / sqrt(1 - rho^2)) dx."""
    s = math.sqrt(1.0 - rho * rho)

    def integrand(x: float) -> float:
        return math.exp(-0.5 * x * x) / math.sqrt(2.0 * math.pi) * ndtr((k - rho * x) / s)

    lo = min(h, -10.0) - 30.0
    return quad(integrand, lo, h, epsabs=1e-15, epsrel=1e-13, limit=400)[0]


@pytest.mark.parametrize("rho", [-0.999, -0.9, -0.5, -0.1, 0.0, 0.3, 0.77, 0.95, 0.999])
@pytest.mark.parametrize(
    "h, k",
    [(0.0, 0.0), (0.0, 1.3), (-0.7, 0.0), (1.2, -0.4), (-2.5, -1.0), (3.0, 2.0), (-4.0, 5.0)],
)
def test_matches_quadrature(h: float, k: float, rho: float) -> None:
    # Definition of the bivariate normal (common practice); quadrature to ~1e-14.
    assert bivariate_normal_cdf(h, k, rho) == pytest.approx(_by_quadrature(h, k, rho), abs=2e-13)


def test_random_points_against_quadrature(rng: np.random.Generator) -> None:
    # Common practice: agreement with direct quadrature over random arguments.
    for h, k, rho in zip(
        rng.uniform(-4, 4, 40), rng.uniform(-4, 4, 40), rng.uniform(-0.99, 0.99, 40), strict=True
    ):
        assert bivariate_normal_cdf(h, k, rho) == pytest.approx(
            _by_quadrature(h, k, rho), abs=2e-13
        )


def test_limits_and_symmetry() -> None:
    # Common practice: independence, perfect correlation, infinite limits, exchange symmetry.
    assert bivariate_normal_cdf(0.4, -1.1, 0.0) == pytest.approx(ndtr(0.4) * ndtr(-1.1), abs=1e-15)
    assert bivariate_normal_cdf(0.4, -1.1, 1.0) == pytest.approx(ndtr(-1.1), abs=1e-15)
    assert bivariate_normal_cdf(0.4, -0.1, -1.0) == pytest.approx(ndtr(0.4) - ndtr(0.1), abs=1e-15)
    assert bivariate_normal_cdf(0.4, -1.1, -1.0) == 0.0
    assert bivariate_normal_cdf(math.inf, 0.3, 0.5) == pytest.approx(ndtr(0.3), abs=1e-15)
    assert bivariate_normal_cdf(-math.inf, 0.3, 0.5) == 0.0
    assert bivariate_normal_cdf(0.0, 0.0, 0.5) == pytest.approx(1.0 / 3.0, abs=1e-15)
    assert bivariate_normal_cdf(0.7, -0.2, 0.4) == pytest.approx(
        bivariate_normal_cdf(-0.2, 0.7, 0.4), abs=1e-15
    )


def test_rejects_bad_inputs() -> None:
    with pytest.raises(InputError, match="rho"):
        bivariate_normal_cdf(0.0, 0.0, 1.5)
    with pytest.raises(InputError, match="h"):
        bivariate_normal_cdf(float("nan"), 0.0, 0.5)
