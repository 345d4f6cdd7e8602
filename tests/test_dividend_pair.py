"""Cash dividends in one compiled call per Richardson pair
(:func:`stopline._kernels.price_pair_cash_dividends`): equal to the general path, its vega
tangent equal to central differences of its prices, its kernels equal to plain-NumPy twins
or to the general path's NumPy code."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from stopline import Market, Option, PiecewiseConstant, _kernels, pricing
from stopline.exercise import DirectSweep
from stopline.operator import coefficients, plan_steps
from stopline.pricing import price
from stopline.solve import (
    _crossing,
    _dividends_ahead,
    node_exp,
    payoff_on,
    problem_from_market,
    solve,
    time_grid_for,
)

from .test_kernels_dividends import _after_twin

#: Contracts with cash dividends: puts and calls, American and European, one to seven
#: dividends, large ones (a put's dropped spot below the grid), a yield on top, an ex-date a
#: day after valuation, dividends after expiry mixed in; the spot model, then the escrowed.
CASES = [
    (Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.3, dividends=[(0.3, 1.0), (0.8, 1.0)])),
    (Option("call", 100.0, 1.0), Market(105.0, 0.05, 0.3, dividends=[(0.3, 2.0), (0.8, 2.0)])),
    (Option("call", 50.0, 5 / 12, "european"),
     Market(52.0, 0.10, 0.40, dividends=[(3.5 / 12, 2.06)])),
    (Option("put", 50.0, 5 / 12), Market(52.0, 0.10, 0.40, dividends=[(3.5 / 12, 2.06)])),
    (Option("call", 100.0, 0.5),
     Market(100.0, 0.03, 0.2, div_yield=0.01, dividends=[(0.1, 0.5), (0.35, 0.5), (0.9, 1.0)])),
    (Option("put", 100.0, 2.0), Market(90.0, 0.05, 0.25, dividends=[(0.25 * i, 1.5) for i in range(1, 8)])),
    (Option("put", 100.0, 0.5, "european"), Market(60.0, 0.02, 0.6, dividends=[(0.2, 25.0)])),
    (Option("call", 100.0, 0.25), Market(130.0, 0.04, 0.35, dividends=[(1.0 / 365.0, 3.0)])),
    # an American put whose dividends can take the spot to zero (the far field's floor)
    (Option("put", 40.0, 1.0), Market(30.0, 0.05, 0.4, dividends=[(0.3, 6.0), (0.6, 6.0),
                                                                  (0.9, 6.0)])),
    (Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.3, dividends=[(0.3, 1.0), (0.8, 1.0)],
                                       dividend_model="escrowed")),
    (Option("call", 80.0, 0.5), Market(80.0, 0.06, 0.30, dividends=[(0.25, 4.0)],
                                       dividend_model="escrowed")),
    (Option("call", 100.0, 1.0), Market(110.0, 0.03, 0.25, div_yield=0.01,
                                        dividends=[(0.2, 1.5), (0.45, 1.5), (0.7, 1.5), (0.95, 1.5)],
                                        dividend_model="escrowed")),
    (Option("put", 50.0, 5 / 12, "european"),
     Market(52.0, 0.10, 0.40, dividends=[(3.5 / 12, 2.06)], dividend_model="escrowed")),
]


def _general(monkeypatch: pytest.MonkeyPatch, opt: Option, mkt: Market, **kw) -> pricing.Result:
    with monkeypatch.context() as m:
        m.setattr(pricing, "_ONE_CALL", False)
        return price(opt, mkt, **kw)


#: Relative agreement asked of each number. The kernel computes the far field's per-step
#: amounts (dividends ahead, their present values, a put's waiting floor) with the C
#: library's exp where the general path uses NumPy's, which may differ in the last bit; then
#: the grid values differ by an ulp or two (measured: 4e-16 on case 8, 2e-16 on case 11,
#: bitwise equal on the others), which a second difference over h^2 (gamma, and theta
#: built from it) and the pair's difference (the error estimate) magnify: measured 1.4e-16
#: on prices, 6e-14 on deltas, 1.9e-11 on gammas, 3.2e-12 on thetas, 3.1e-10 on error
#: estimates.
_REL = {"price": 1e-12, "delta": 1e-12, "rho": 1e-12, "vega": 1e-12,
        "gamma": 1e-10, "theta": 1e-10, "error_estimate": 1e-9}


def _assert_same(a: pricing.Result, b: pricing.Result, vega: bool = True) -> None:
    """Every number as :data:`_REL` asks; vega only if asked."""
    fields = ["price", "delta", "gamma", "theta", "rho", "error_estimate"] + (["vega"] if vega else [])
    for f in fields:
        x, y = getattr(a, f), getattr(b, f)
        if math.isnan(y):
            assert math.isnan(x), f
        else:
            assert x == pytest.approx(y, rel=_REL[f], abs=1e-300), f
    assert a.stats == b.stats and a.market == b.market and a.accuracy == b.accuracy
    np.testing.assert_allclose(a.boundary.time_to_expiry, b.boundary.time_to_expiry, rtol=1e-12,
                               atol=0.0)
    # the critical spot is read off the square roots of premiums of order h^2 next to the
    # boundary (_kernels.locate_boundary), which multiplies the paths' last-bit differences
    # in the values (their plans round apart) by about 1 / h: 1e-12 of the values, 1e-11 here
    for f in ("spot", "raw_spot"):
        np.testing.assert_allclose(getattr(a.boundary, f), getattr(b.boundary, f), rtol=1e-11,
                                   atol=0.0, equal_nan=True)


@pytest.mark.parametrize("case", CASES, ids=range(len(CASES)))
def test_compiled_pair_equals_general_path(monkeypatch: pytest.MonkeyPatch, case) -> None:
    opt, mkt = case
    for accuracy, greeks in (("standard", "grid"), ("fast", "full"), ("fast", "vega")):
        one = pricing._price_pair_dividends(opt, mkt, opt.time_to_expiry(None), accuracy, greeks,
                                            DirectSweep())
        assert one is not None  # the compiled path applies to every case here
        gen = _general(monkeypatch, opt, mkt, accuracy=accuracy, greeks=greeks)
        # vega: the compiled path's tangent against the general path's central difference of
        # prices re-solved at the vol +- 1 % of itself, whose truncation moves it (measured
        # gap up to 8e-4 relative; 8e-7 x K per unit vol on case 7, a call exercised before
        # tomorrow's ex-date, whose vega is nil)
        _assert_same(one, gen, vega=False)
        if greeks == "grid":
            assert math.isnan(one.vega) and math.isnan(one.rho)
        else:
            assert one.vega == pytest.approx(gen.vega, rel=2e-3, abs=2e-6 * opt.strike)
            assert math.isnan(one.rho) == (greeks == "vega")
        _assert_same(price(opt, mkt, accuracy=accuracy, greeks=greeks), one)


def test_plain_sweep_gives_the_same_numbers_with_dividends(monkeypatch: pytest.MonkeyPatch) -> None:
    # spot-model dividends: the default sweep fits the boundary (solve.fitted_boundary) and
    # the plain one does not, on both paths alike, and each names the solver asked for;
    # escrowed dividends are never fitted, so there the two sweeps agree
    opt, mkt = CASES[0]
    plain = DirectSweep(fitted=False)
    one = pricing._price_pair_dividends(opt, mkt, 1.0, "fast", "grid", plain)
    _assert_same(one, _general(monkeypatch, opt, mkt, accuracy="fast", greeks="grid",
                               method=plain))
    assert one.stats.method == "direct-plain"
    default = pricing._price_pair_dividends(opt, mkt, 1.0, "fast", "grid", DirectSweep())
    assert default.stats.method == "direct" and default.price != one.price
    esc = dataclasses.replace(mkt, dividend_model="escrowed")
    e_plain = pricing._price_pair_dividends(opt, esc, 1.0, "fast", "grid", plain)
    e_default = pricing._price_pair_dividends(opt, esc, 1.0, "fast", "grid", DirectSweep())
    assert e_default.price == e_plain.price


def test_dividends_after_expiry_take_the_flat_pair(monkeypatch: pytest.MonkeyPatch) -> None:
    opt = Option("put", 100.0, 0.5)
    mkt = Market(100.0, 0.05, 0.3, dividends=[(0.75, 1.0), (1.5, 1.0)])
    one = pricing._price_pair_dividends(opt, mkt, 0.5, "standard", "full", DirectSweep())
    gen = _general(monkeypatch, opt, mkt, accuracy="standard", greeks="full")
    _assert_same(one, gen)  # tangents on both paths: vega equal too
    assert all("after expiry" in w for w in one.stats.warnings[:2])  # the schedule's first


def test_compiled_pair_declines_what_it_does_not_solve() -> None:
    opt = Option("put", 100.0, 1.0)
    declined = [
        Market(100.0, 0.05, 0.3, dividends=[(1.0, 2.0)]),  # ex-date on the expiry date
        Market(100.0, 0.05, 0.3, dividends=[(1.0, 2.0)], dividend_model="escrowed"),
        Market(100.0, -0.01, 0.3, div_yield=-0.02, dividends=[(0.5, 2.0)]),  # two boundaries
        Market(100.0, PiecewiseConstant((0.5, 2.0), (0.03, 0.05)), 0.3, dividends=[(0.5, 2.0)]),
    ]
    for mkt in declined:
        assert pricing._price_pair_dividends(opt, mkt, 1.0, "fast", "grid", DirectSweep()) is None
        assert math.isfinite(price(opt, mkt, accuracy="fast", greeks="grid").price)


def _pair_raw(opt: Option, mkt: Market, vol: float, n_par: int) -> np.ndarray:
    """The kernel's output on the unbumped contract's grids, at another vol."""
    t = opt.time_to_expiry(None)
    p = problem_from_market(opt, mkt, t)
    preset = pricing.PRESETS["standard"]
    x_min, h, n, k_idx, _ = pricing._preset_layout(p.x_spot, t, p.rate, p.div_yield, p.vol,
                                                   opt.is_american, preset)
    events = p.dividend_tau if p.has_events else ()
    tc, tf, ic, i_f, b_tau = pricing._event_time_grids(t, events, pricing._coarse_levels(preset))
    ev_c, amt = pricing._events(ic, p.dividend_amount if events else ())
    ev_f, _ = pricing._events(i_f, p.dividend_amount if events else ())
    out = np.empty(_kernels.PAIR_OUT)
    bnd = np.empty((3, b_tau.shape[0]))
    _kernels.price_pair_cash_dividends(
        opt.is_put, opt.is_american, p.escrowed, t, p.rate, p.div_yield, vol, p.x_spot,
        p.escrow_pv, opt.strike, x_min, h, n, k_idx, coefficients(h, p.rate, p.div_yield, vol),
        coefficients(0.5 * h, p.rate, p.div_yield, vol), tc.tau, tc.dt, tc.theta, ev_c, tf.tau,
        tf.dt, tf.theta, ev_f, amt, np.asarray(p.dividend_tau), np.asarray(p.dividend_amount),
        n_par, out, bnd[0], bnd[1], bnd[2], False,
    )
    return out


@pytest.mark.parametrize("case", CASES, ids=range(len(CASES)))
def test_vega_tangent_is_the_derivative_of_the_prices(case) -> None:
    # Central differences of the kernel's prices on the same grids, bump 1e-5 in vol: the
    # truncation (~ bump^2) and rounding (~ 1e-16 x price / bump) errors are both near 1e-10
    # relative (measured gap up to 2.5e-10; 3.4e-8 when the tangent held the kink of an
    # averaged cell fixed).
    opt, mkt = case
    eps = 1e-5
    tan = _pair_raw(opt, mkt, mkt.vol, 1)
    up = _pair_raw(opt, mkt, mkt.vol + eps, 0)
    down = _pair_raw(opt, mkt, mkt.vol - eps, 0)
    for g in range(2):  # coarse, fine
        fd = (up[4 * g] - down[4 * g]) / (2.0 * eps)
        assert tan[8 + 2 * g] == pytest.approx(fd, rel=1e-9, abs=1e-9 * opt.strike)
        assert tan[9 + 2 * g] == 0.0  # no rate tangent here
    assert _pair_raw(opt, mkt, mkt.vol, 0)[:8].tolist() == tan[:8].tolist()  # values untouched


def test_vega_asks_for_no_rho(monkeypatch: pytest.MonkeyPatch) -> None:
    # greeks="vega" gives the vega of greeks="full" exactly, and rho NaN, on every path
    contracts = [
        (Option("put", 100.0, 0.7), Market(95.0, 0.04, 0.3, div_yield=0.01)),  # flat pair
        (Option("call", 100.0, 0.7, "european"), Market(95.0, 0.04, 0.3)),  # identity
        CASES[0],  # dividends, compiled
        (Option("put", 100.0, 0.7), Market(95.0, 0.04, 0.3, dividends=[(0.3, 1.0)],
                                          dividend_model="escrowed")),  # bumped re-solves
    ]
    for opt, mkt in contracts:
        full = price(opt, mkt, accuracy="fast")
        vega = price(opt, mkt, accuracy="fast", greeks="vega")
        assert vega.vega == full.vega and vega.price == full.price
        assert math.isnan(vega.rho) and math.isfinite(full.rho)
    opt, mkt = contracts[0]
    general = _general(monkeypatch, opt, mkt, accuracy="fast", greeks="vega")
    assert general.vega == pytest.approx(price(opt, mkt, accuracy="fast").vega, rel=1e-12)
    assert math.isnan(general.rho)


# ---------------------------------------------------------------------------------------------
# kernels against the general path's NumPy code and plain-NumPy twins
# ---------------------------------------------------------------------------------------------


def _setup(is_put: bool, n: int = 80) -> tuple[np.ndarray, np.ndarray, np.ndarray, float, float]:
    x0, h = -1.2, 2.4 / (n - 1)
    x = x0 + h * np.arange(n)
    s = np.exp(x)
    payoff = np.maximum(1.0 - s, 0.0) if is_put else np.maximum(s - 1.0, 0.0)
    v = payoff + 0.08 * np.exp(-x * x / 0.3)  # like an option some time before expiry
    tan = np.vstack([0.3 * np.exp(-(x - 0.1) ** 2 / 0.2), np.cos(3.0 * x)])  # two directions
    return v, tan, payoff, x0, h


def _lagrange_twin(v: np.ndarray, x: float, x0: float, h: float, d: float) -> tuple[int, np.ndarray]:
    """Nodes and weights of the limited cubic at ln(e^x - d) (above the first node), by
    np.polyfit of unit vectors: the interpolant's dependence on the values."""
    y = (math.log(math.exp(x) - d) - x0) / h
    i = min(int(math.floor(y)), v.size - 2)
    j0 = min(max(i - 1, 0), v.size - 4)
    nodes = np.arange(j0, j0 + 4, dtype=float)
    w = np.array([np.polyval(np.polyfit(nodes - j0, e, 3), y - j0) for e in np.eye(4)])
    val = float(w @ v[j0:j0 + 4])
    lo, hi = min(v[i], v[i + 1]), max(v[i], v[i + 1])
    if val < lo or val > hi:  # clamped: the value is a node's
        k = i if (v[i] < v[i + 1]) == (val < lo) else i + 1
        return k, np.array([1.0, 0.0, 0.0, 0.0])
    return j0, w


@pytest.mark.parametrize("is_put", [True, False])
@pytest.mark.parametrize("american", [True, False])
@pytest.mark.parametrize(("d", "ahead"), [(0.05, 0.0), (0.5, 0.0), (0.5, 0.2)])
def test_dividend_jump_tangents_values_equal_dividend_jump(is_put, american, d, ahead) -> None:
    v, tan, payoff, x0, h = _setup(is_put)
    out, out_t = np.empty_like(v), np.empty_like(tan)
    _kernels.dividend_jump_tangents(v, tan, payoff, x0, h, d, 0.0, 0.97, 0.99, ahead, is_put,
                                    american, out, out_t)
    ref = np.empty_like(v)
    _kernels.dividend_jump(v, payoff, x0, h, d, 0.0, 0.97, 0.99, ahead, is_put, american, ref)
    assert out.tolist() == ref.tolist()  # the same operations: bitwise equal
    # tangents: central differences of the jump in each direction (the jump is linear in
    # the values away from the limiter's switches and the kink cells, so only rounding, 1e-10,
    # remains there; in a kink cell the kink's motion counts, measured 4e-8 without it)
    eps = 1e-6
    for p in range(tan.shape[0]):
        up, down = np.empty_like(v), np.empty_like(v)
        _kernels.dividend_jump(v + eps * tan[p], payoff, x0, h, d, 0.0, 0.97, 0.99, ahead,
                               is_put, american, up)
        _kernels.dividend_jump(v - eps * tan[p], payoff, x0, h, d, 0.0, 0.97, 0.99, ahead,
                               is_put, american, down)
        fd = (up - down) / (2.0 * eps)
        np.testing.assert_allclose(out_t[p], fd, rtol=0, atol=1e-8)
        # off the averaged cells, the twin's weights applied to the tangent
        x = x0 + h * np.arange(v.size)
        checked = 0
        for j in range(v.size):
            s = math.exp(x[j]) - d
            gaps = [_after_twin(v, z, x0, h, d, 0.97, 0.99, is_put, True, ahead)
                    - max(1.0 - math.exp(z) if is_put else math.exp(z) - 1.0, 0.0)
                    for z in (x[j] - 0.5 * h, x[j] + 0.5 * h)]
            cell_kink = (american and gaps[0] * gaps[1] < 0.0) or (
                d > 0 and abs(x[j] - math.log(d)) <= h)
            if s <= math.exp(x0) or cell_kink or (american and ref[j] <= payoff[j]):
                continue
            j0, w = _lagrange_twin(v, x[j], x0, h, d)
            assert out_t[p, j] == pytest.approx(float(w @ tan[p, j0:j0 + 4]), rel=1e-10, abs=1e-13)
            checked += 1
        assert checked >= 5  # (a call before a large dividend is mostly exercised)


@pytest.mark.parametrize("is_put", [True, False])
def test_dividends_ahead_and_crossing_equal_the_general_path(is_put: bool) -> None:
    opt = Option("put" if is_put else "call", 100.0, 1.5)
    mkt = Market(95.0, 0.04, 0.3, div_yield=0.01, dividends=[(0.2, 1.0), (0.7, 1.2), (1.2, 1.4)])
    p = problem_from_market(opt, mkt, 1.5)
    tg = time_grid_for(p, 40)
    plan = plan_steps(tg, 0.02, p.rate, p.div_yield, p.vol)
    out = np.empty_like(tg.tau)
    for to_expiry in (True, False):
        _kernels.dividends_ahead(tg.tau, 1.5, p.rate, p.div_yield, np.asarray(p.dividend_tau),
                                 np.asarray(p.dividend_amount), to_expiry, out)
        np.testing.assert_allclose(out, _dividends_ahead(p, plan, to_expiry=to_expiry),
                                   rtol=1e-15, atol=0)
        assert out[0] == 0.0 and out[-1] > 0.0  # none still to come at expiry, all at valuation
    # the floor of an American put's far field (waiting for the dividends to wipe the spot
    # out), against the general path's NumPy rule, from a spot the dividends can wipe out
    from stopline.solve import _put_after_dividends

    for s_lo in (0.02, 0.3):
        _kernels.put_after_dividends(tg.tau, 1.5, p.rate, p.div_yield,
                                     np.asarray(p.dividend_tau), np.asarray(p.dividend_amount),
                                     s_lo, out)
        want = _put_after_dividends(p, plan, s_lo)
        np.testing.assert_allclose(out, want, rtol=1e-14, atol=0)
        assert want.max() > 0.0
    # the crossing of held and exercise value, on a gap that changes sign once
    v, _, payoff, x0, h = _setup(is_put)
    from stopline.grid import SpaceGrid

    space = SpaceGrid(x0, h, v.size, -1)
    gap = v - payoff - 0.05
    want = _crossing(gap, payoff, space, is_put)
    assert math.isfinite(want)
    assert _kernels.crossing(gap, payoff, x0, h, is_put) == want
    assert math.isnan(_kernels.crossing(np.ones_like(gap), payoff, x0, h, is_put))


@pytest.mark.parametrize("model", ["spot", "escrowed"])
@pytest.mark.parametrize("american", [True, False])
@pytest.mark.parametrize("is_put", [True, False])
def test_solve_cash_dividends_equals_solve(american: bool, is_put: bool, model: str) -> None:
    # one grid: the compiled march against solve() (values, exercise value, boundary)
    opt = Option("put" if is_put else "call", 100.0, 1.0, "american" if american else "european")
    mkt = Market(100.0, 0.05, 0.3, dividends=[(0.3, 2.0), (0.8, 2.0)], dividend_model=model)
    p = problem_from_market(opt, mkt, 1.0)
    preset = pricing.PRESETS["fast"]
    x_min, h, n, k_idx, _ = pricing._preset_layout(p.x_spot, 1.0, p.rate, 0.0, p.vol, american,
                                                   preset)
    from stopline.grid import SpaceGrid

    space = SpaceGrid(x_min, h, n, k_idx)
    tg = time_grid_for(p, 16)
    ref = solve(p, space, tg, DirectSweep())
    events = p.dividend_tau if p.has_events else ()
    _, _, idx, _, _ = pricing._event_time_grids(1.0, events, 16)
    ev, amt = pricing._events(idx, p.dividend_amount if events else ())
    v, payoff, bnd = np.empty(n), np.empty(n), np.empty(tg.tau.shape[0] + ev.shape[0])
    _kernels.solve_cash_dividends(
        is_put, american, p.escrowed, 1.0, p.rate, p.div_yield, p.vol, x_min, h, n, k_idx,
        coefficients(h, p.rate, p.div_yield, p.vol), tg.tau, tg.dt, tg.theta, ev, amt,
        np.asarray(p.dividend_tau), np.asarray(p.dividend_amount), p.escrow_pv, 0, v, payoff,
        np.empty((0, n)), bnd, american and model == "spot",  # fitted as solve() does
    )
    np.testing.assert_allclose(v, ref.values, rtol=1e-13, atol=1e-16)
    np.testing.assert_allclose(payoff, ref.payoff, rtol=1e-14, atol=1e-16)
    np.testing.assert_allclose(bnd, ref.report.boundary_x, rtol=1e-13, equal_nan=True)
    assert np.array_equal(np.isnan(bnd), np.isnan(ref.report.boundary_x))
    if model == "spot" or not american:
        np.testing.assert_array_equal(payoff, payoff_on(space, is_put, ex=node_exp(space)))


def test_vega_does_not_depend_on_what_memory_held_before() -> None:
    # Regression: where the limiter returned the last node's value, the jump's tangent read
    # three nodes past the end of the grid (weights 0, but 0 x NaN is NaN), so vega came out
    # NaN or off whenever freed memory held NaNs (found by the cross-check benchmark's price
    # counts, which varied from run to run). A call whose dividends it may be exercised for,
    # priced after leaving NaNs in freed memory of the grid's sizes.
    opt = Option("call", 50.0, 0.5452)
    mkt = Market(47.8, 0.042, 0.421, dividends=[(0.2055, 0.35), (0.4548, 0.35)])
    clean = price(opt, mkt, greeks="vega")
    assert math.isfinite(clean.vega) and clean.vega > 0.0
    for _ in range(10):
        junk = [np.full(size, np.nan) for size in (4, 100, 220, 300, 439, 600, 1000) for _ in range(3)]
        del junk
        again = price(opt, mkt, greeks="vega")
        assert again.vega == clean.vega and again.price == clean.price
