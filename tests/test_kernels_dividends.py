"""The dividend kernels against plain NumPy/SciPy twins (style rule: every kernel has one)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from stopline import _kernels


def _after_twin(v: np.ndarray, x: float, x0: float, h: float, d: float, df_r: float,
                df_q: float, is_put: bool, american: bool, ahead: float = 0.0) -> float:
    """Held value at ln(max(e^x - d, 0)): limited cubic Lagrange, far field below the grid
    (the forward s df_q lowered by the dividends ahead, not below zero)."""
    s = math.exp(x) - d
    if s <= math.exp(x0):
        s = max(s, 0.0)
        df_r = df_r + min(ahead, s * df_q)
        if not is_put:
            far = max(s * df_q - df_r, 0.0)
            return max(far, s - 1.0) if american else far
        far = max(df_r - s * df_q, 0.0)
        return max(far, 1.0 - s) if american else far
    y = (math.log(s) - x0) / h
    i = min(int(math.floor(y)), v.size - 2)
    j0 = min(max(i - 1, 0), v.size - 4)
    nodes = np.arange(j0, j0 + 4, dtype=float)
    val = float(np.polyval(np.polyfit(nodes, v[j0:j0 + 4], 3), y))
    return min(max(val, min(v[i], v[i + 1])), max(v[i], v[i + 1]))


def _jump_twin(v, payoff, x0, h, d, pv, df_r, df_q, is_put, american, ahead=0.0):
    n = v.size
    out = np.empty(n)

    def ex(x: float) -> float:
        s = math.exp(x) + pv
        return max(1.0 - s if is_put else s - 1.0, 0.0)

    def held(x: float) -> float:
        return _after_twin(v, x, x0, h, d, df_r, df_q, is_put, american, ahead)

    def f(x: float) -> float:
        return max(held(x), ex(x)) if american else held(x)

    for j in range(n):
        xj = x0 + j * h
        lo, hi = xj - h / 2, xj + h / 2
        kink = None
        if american and (held(lo) - ex(lo)) * (held(hi) - ex(hi)) < 0:
            kink = brentq(lambda x: held(x) - ex(x), lo, hi, xtol=1e-15)
        elif d > 0 and lo < math.log(d) < hi:
            kink = math.log(d)
        if kink is None:
            out[j] = max(held(xj), payoff[j]) if american else held(xj)
        else:
            out[j] = (quad(f, lo, kink, epsabs=1e-14)[0] + quad(f, kink, hi, epsabs=1e-14)[0]) / h
    return out


def _setup(is_put: bool, n: int = 80) -> tuple[np.ndarray, np.ndarray, float, float]:
    x0, h = -1.2, 2.4 / (n - 1)
    x = x0 + h * np.arange(n)
    s = np.exp(x)
    # a smooth value above the payoff, like an option some time before expiry
    v = np.where(is_put, np.maximum(1.0 - s, 0.0), np.maximum(s - 1.0, 0.0))
    v = v + 0.08 * np.exp(-x * x / 0.3)
    payoff = np.maximum(1.0 - s, 0.0) if is_put else np.maximum(s - 1.0, 0.0)
    return v, payoff, x0, h


@pytest.mark.parametrize("is_put", [True, False])
@pytest.mark.parametrize("american", [True, False])
@pytest.mark.parametrize("d", [0.05, 0.5])
@pytest.mark.parametrize("ahead", [0.0, 0.2])
def test_dividend_jump_matches_its_twin(is_put: bool, american: bool, d: float,
                                        ahead: float) -> None:
    v, payoff, x0, h = _setup(is_put)
    out = np.empty_like(v)
    _kernels.dividend_jump(v, payoff, x0, h, d, 0.0, 0.97, 0.99, ahead, is_put, american, out)
    twin = _jump_twin(v, payoff, x0, h, d, 0.0, 0.97, 0.99, is_put, american, ahead)
    # off the kink cells both evaluate the same interpolant; in a kink cell the kernel's
    # two-point Gauss rule on each side meets adaptive quadrature (measured gap <= 5e-9)
    np.testing.assert_allclose(out, twin, rtol=0, atol=2e-8)
    assert np.isfinite(out).all() and (out >= 0.0).all()
    if american:
        assert (out >= payoff).all()


@pytest.mark.parametrize("is_put", [True, False])
def test_escrowed_exercise_jump_matches_its_twin(is_put: bool) -> None:
    v, _, x0, h = _setup(is_put)
    pv = 0.04
    s = np.exp(x0 + h * np.arange(v.size)) + pv
    payoff = np.maximum(1.0 - s if is_put else s - 1.0, 0.0)
    out = np.empty_like(v)
    _kernels.dividend_jump(v, payoff, x0, h, 0.0, pv, 0.97, 0.99, 0.0, is_put, True, out)
    twin = _jump_twin(v, payoff, x0, h, 0.0, pv, 0.97, 0.99, is_put, True)
    np.testing.assert_allclose(out, twin, rtol=0, atol=2e-8)


@pytest.mark.parametrize("ahead", [0.0, 0.2])
def test_value_after_drop_matches_its_twin(ahead: float) -> None:
    v, _, x0, h = _setup(True)
    out = np.empty_like(v)
    _kernels.value_after_drop(v, x0, h, 0.3, 0.97, 0.99, ahead, True, True, out)
    twin = [_after_twin(v, x0 + j * h, x0, h, 0.3, 0.97, 0.99, True, True, ahead)
            for j in range(v.size)]
    np.testing.assert_allclose(out, twin, rtol=0, atol=1e-11)


@pytest.mark.parametrize("american", [True, False])
def test_far_field_below_the_grid_keeps_a_put_under_its_bound(american: bool) -> None:
    # No-arbitrage (Merton 1973): a put is worth at most the discounted strike (European) or
    # the strike (American). Dividends still ahead lower the forward of a spot dropped below
    # the grid, but not below zero, so the far field there stays at most df_r (or 1).
    v, _, x0, h = _setup(True)
    out = np.empty_like(v)
    _kernels.value_after_drop(v, x0, h, 0.9, 0.97, 0.99, 0.6, True, american, out)
    s = np.maximum(np.exp(x0 + h * np.arange(v.size)) - 0.9, 0.0)
    below = s <= math.exp(x0)
    assert below.sum() > 5
    bound = 1.0 if american else 0.97
    assert (out[below] <= bound + 1e-15).all()
    # where the dividends ahead exceed the dropped spot's forward the put is the bond
    wiped = below & (s * 0.99 <= 0.6)
    want = np.maximum(0.97, 1.0 - s[wiped]) if american else 0.97
    np.testing.assert_allclose(out[wiped], want, rtol=0, atol=1e-15)
