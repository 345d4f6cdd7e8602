"""Binomial trees: published values, closed forms, a NumPy twin of the kernel, and the
cash-dividend lattices against independent quadratures."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from stopline.errors import InputError
from stopline.reference import (
    DIVIDEND_TREE_METHODS,
    bbsr_price,
    bsm_price,
    crr_price,
    lr_extrapolated_price,
    lr_price,
    rgw_american_call,
    tree_price_cash_dividends,
    tree_price_escrowed,
)
from stopline.reference._kernels import (
    exdate_crossings,
    interp_layer,
    smoothed_exdate_step,
)

# --------------------------------------------------------------------------------------
# NumPy twin of the binomial kernel
# --------------------------------------------------------------------------------------


def _numpy_tree(kind, style, s0, k, t, r, q, vol, n, u, d, p, bs_last=False):
    """Backward induction with whole levels as arrays (independent of the numba kernel)."""
    sign = 1.0 if kind == "call" else -1.0
    dt = t / n
    disc = math.exp(-r * dt)
    m = n - 1 if bs_last else n
    spots = s0 * u ** np.arange(m + 1) * d ** (m - np.arange(m + 1))
    if bs_last:
        values = bsm_price(kind, spots, k, dt, r, q, vol)
    else:
        values = np.maximum(sign * (spots - k), 0.0)
    if style == "american":
        values = np.maximum(values, sign * (spots - k))
    for i in range(m - 1, -1, -1):
        spots = s0 * u ** np.arange(i + 1) * d ** (i - np.arange(i + 1))
        values = disc * (p * values[1:] + (1 - p) * values[:-1])
        if style == "american":
            values = np.maximum(values, sign * (spots - k))
    return float(values[0])


def _crr_params(t, r, q, vol, n):
    dt = t / n
    u = math.exp(vol * math.sqrt(dt))
    return u, 1 / u, (math.exp((r - q) * dt) - 1 / u) / (u - 1 / u)


def _lr_params(s0, k, t, r, q, vol, n):
    # Leisen & Reimer (1996), Peizer-Pratt inversion method 2, written out independently.
    def h(z):
        return 0.5 + np.sign(z) * np.sqrt(
            0.25 - 0.25 * np.exp(-((z / (n + 1 / 3 + 0.1 / (n + 1))) ** 2) * (n + 1 / 6))
        )

    d1 = (math.log(s0 / k) + (r - q + vol * vol / 2) * t) / (vol * math.sqrt(t))
    d2 = d1 - vol * math.sqrt(t)
    p, pbar = h(d2), h(d1)
    m = math.exp((r - q) * t / n)
    u = m * pbar / p
    return u, (m - p * u) / (1 - p), p


TWIN_CASES = [
    ("put", "american", 50.0, 50.0, 5 / 12, 0.10, 0.0, 0.40),
    ("call", "american", 100.0, 95.0, 0.5, 0.03, 0.07, 0.20),
    ("put", "european", 36.0, 40.0, 1.0, 0.06, 0.01, 0.30),
    ("call", "american", 80.0, 100.0, 2.0, -0.01, 0.02, 0.50),
]


@pytest.mark.parametrize("case", TWIN_CASES)
def test_kernel_matches_numpy_twin(case: tuple) -> None:
    # STYLE.md: each numba kernel has a NumPy twin and they agree (to rounding).
    kind, style, s, k, t, r, q, v = case
    for n in (1, 2, 7, 150):
        u, d, p = _crr_params(t, r, q, v, n)
        twin = _numpy_tree(kind, style, s, k, t, r, q, v, n, u, d, p)
        assert crr_price(kind, style, s, k, t, r, q, v, n) == pytest.approx(
            twin, rel=1e-12, abs=1e-12
        )
        twin = _numpy_tree(kind, style, s, k, t, r, q, v, n, u, d, p, bs_last=True)
        got = crr_price(kind, style, s, k, t, r, q, v, n, bs_last_step=True)
        assert got == pytest.approx(twin, rel=1e-12, abs=1e-12)
    for n in (1, 9, 151):
        u, d, p = _lr_params(s, k, t, r, q, v, n)
        twin = _numpy_tree(kind, style, s, k, t, r, q, v, n, u, d, p)
        assert lr_price(kind, style, s, k, t, r, q, v, n) == pytest.approx(
            twin, rel=1e-12, abs=1e-12
        )


# --------------------------------------------------------------------------------------
# Published American values
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "steps, printed, digits",
    [(5, 4.49, 2), (30, 4.263, 3), (50, 4.272, 3), (100, 4.278, 3), (500, 4.283, 3)],
)
def test_hull_crr_put(steps: int, printed: float, digits: int) -> None:
    # Hull, Options, Futures, and Other Derivatives, numerical procedures chapter (recalled,
    # REFERENCE_VALUES.md): American put S = K = 50, r = 0.1, vol 0.4, T = 5/12; exact to
    # the printed digits.
    value = crr_price("put", "american", 50.0, 50.0, 5 / 12, 0.10, 0.0, 0.40, steps)
    assert round(value, digits) == printed


def test_hull_put_converged() -> None:
    # Hull (recalled, REFERENCE_VALUES.md): converged American value 4.2842 (+-1e-4).
    assert lr_extrapolated_price(
        "put", "american", 50.0, 50.0, 5 / 12, 0.1, 0.0, 0.4, 1001
    ) == pytest.approx(4.2842, abs=1e-4)
    assert bbsr_price("put", "american", 50.0, 50.0, 5 / 12, 0.1, 0.0, 0.4, 2000) == pytest.approx(
        4.2842, abs=1e-4
    )


# Geske & Johnson (1984), J. Finance 39(5), Table I, "true" values (recalled, +-1e-4);
# S = 40, r = 0.0488, q = 0, T = 0.0833 / 0.3333 / 0.5833 exactly.
GESKE_JOHNSON = {
    (35, 0.2): (0.0062, 0.2004, 0.4328),
    (40, 0.2): (0.8522, 1.5798, 1.9904),
    (45, 0.2): (5.0000, 5.0883, 5.2670),
    (35, 0.3): (0.0774, 0.6975, 1.2198),
    (40, 0.3): (1.3099, 2.4825, 3.1696),
    (45, 0.3): (5.0597, 5.7056, 6.2436),
    (35, 0.4): (0.2466, 1.3460, 2.1549),
    (40, 0.4): (1.7681, 3.3874, 4.3526),
    (45, 0.4): (5.2868, 6.5099, 7.3830),
}


def _geske_johnson_cases():
    for (strike, vol), row in GESKE_JOHNSON.items():
        for t, published in zip((0.0833, 0.3333, 0.5833), row, strict=True):
            marks = []
            if (strike, vol, t) == (40, 0.4, 0.5833):
                # Our converged value is 4.35271 (LR and BBSR trees agree to 2e-6; T = 7/12
                # gives 4.35282), 1.1e-4 above the recalled 4.3526, which looks one unit low in
                # its last digit. Kept strict so a fix of the table shows.
                marks = [pytest.mark.xfail(strict=True, reason="recalled entry 1.1e-4 off")]
            yield pytest.param(strike, vol, t, published, marks=marks)


@pytest.mark.parametrize("strike, vol, t, published", list(_geske_johnson_cases()))
def test_geske_johnson_table(strike: int, vol: float, t: float, published: float) -> None:
    value = lr_extrapolated_price("put", "american", 40.0, strike, t, 0.0488, 0.0, vol, 801)
    assert value == pytest.approx(published, abs=1e-4)


def test_kim_ma_choe_table() -> None:
    # Kim, Ma & Choe (2013), J. Appl. Math. 128025, binomial column (seen): K = 100,
    # r = 0.05, vol 0.2, T = 1; converged values +-1e-4.
    for s, published in zip(
        (80, 90, 100, 110, 120), (20.0000, 11.4927, 6.0904, 2.9865, 1.3671), strict=True
    ):
        value = lr_extrapolated_price("put", "american", s, 100.0, 1.0, 0.05, 0.0, 0.2, 1001)
        assert value == pytest.approx(published, abs=1e-4)


def test_put_with_dividend_yield_table() -> None:
    # HODIE finite-difference paper, Adv. Difference Equations (2018), Table 4 "true
    # values" (seen, +-2e-4): K = 100, r = 0.04, q = 0.02, vol 0.3, T = 1.
    spots = (75.9572, 83.9457, 92.7743, 102.5315, 113.3148, 125.2323, 138.4031)
    published = (25.32986, 19.49691, 14.26265, 9.84354, 6.36558, 3.83337, 2.13784)
    for s, p in zip(spots, published, strict=True):
        value = lr_extrapolated_price("put", "american", s, 100.0, 1.0, 0.04, 0.02, 0.3, 1001)
        assert value == pytest.approx(p, abs=2e-4)


def test_longstaff_schwartz_continuous_values() -> None:
    # Longstaff & Schwartz (2001), RFS 14(1), Table 1 parameters (recalled); continuous
    # American values from REFERENCE_VALUES.md's independent recomputation (+-1e-4).
    for s, value in zip(
        (36, 38, 40, 42, 44), (4.4867, 3.2572, 2.3196, 1.6212, 1.1130), strict=True
    ):
        assert lr_extrapolated_price(
            "put", "american", s, 40.0, 1.0, 0.06, 0.0, 0.2, 1001
        ) == pytest.approx(value, abs=1e-4)


def _broadie_detemple_cases():
    # Broadie & Detemple (1996), RFS 9(4), Table 1 (recalled, +-2e-4): K = 100, r = 0.03,
    # q = 0.07, T = 0.5.
    rows = [(0.2, (80, 90, 100, 110, 120), (0.2194, 1.3864, 4.7825, 11.0978, 20.0005)),
            (0.4, (80, 90, 100), (2.6889, 5.7223, 10.2385))]  # fmt: skip
    for vol, spots, published in rows:
        for s, p in zip(spots, published, strict=True):
            marks = []
            if (vol, s) == (0.4, 90):
                # Our converged value is 5.72207 (LR and BBSR trees agree to 2e-6), 2.3e-4
                # below the recalled 5.7223. Kept strict so a fix of the table shows.
                marks = [pytest.mark.xfail(strict=True, reason="recalled entry 2.3e-4 off")]
            yield pytest.param(vol, s, p, marks=marks)


@pytest.mark.parametrize("vol, spot, published", list(_broadie_detemple_cases()))
def test_broadie_detemple_calls(vol: float, spot: float, published: float) -> None:
    value = lr_extrapolated_price("call", "american", spot, 100.0, 0.5, 0.03, 0.07, vol, 1001)
    assert value == pytest.approx(published, abs=2e-4)


# --------------------------------------------------------------------------------------
# Closed forms, symmetry, convergence
# --------------------------------------------------------------------------------------


def test_american_call_without_dividends_is_european() -> None:
    # Merton (1973): no early exercise for a call without dividends; 10.45058 (REFERENCE_VALUES.md).
    assert lr_extrapolated_price(
        "call", "american", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2, 1001
    ) == pytest.approx(10.45058, abs=1e-5)


@pytest.mark.parametrize("case", TWIN_CASES)
def test_european_trees_converge_to_bsm(case: tuple) -> None:
    # Black-Scholes (1973) as the limit of the trees (Cox-Ross-Rubinstein 1979).
    kind, _, s, k, t, r, q, v = case
    exact = bsm_price(kind, s, k, t, r, q, v)
    assert lr_price(kind, "european", s, k, t, r, q, v, 1001) == pytest.approx(
        exact, rel=1e-6, abs=1e-7
    )
    assert lr_extrapolated_price(kind, "european", s, k, t, r, q, v, 501) == pytest.approx(
        exact, rel=1e-6, abs=1e-7
    )
    assert bbsr_price(kind, "european", s, k, t, r, q, v, 2000) == pytest.approx(
        exact, rel=1e-5, abs=1e-6
    )
    assert crr_price(kind, "european", s, k, t, r, q, v, 2000) == pytest.approx(
        exact, rel=2e-3, abs=2e-3
    )


def test_leisen_reimer_second_order() -> None:
    # Leisen & Reimer (1996): second-order convergence of European prices for odd steps;
    # fitted slope of log(error) on log(steps) in [1.8, 2.2].
    exact = bsm_price("put", 95.0, 100.0, 0.75, 0.04, 0.01, 0.3)
    steps = np.array([51, 101, 201, 401, 801])
    errors = [
        abs(lr_price("put", "european", 95.0, 100.0, 0.75, 0.04, 0.01, 0.3, int(n)) - exact)
        for n in steps
    ]
    slope = -np.polyfit(np.log(steps), np.log(errors), 1)[0]
    assert 1.8 < slope < 2.2


def test_put_call_symmetry() -> None:
    # McDonald & Schroder (1998), J. Comput. Finance 1(3): C(S, K, r, q) = P(K, S, q, r);
    # REFERENCE_VALUES.md: S = 110, K = 100, r = 0.03, q = 0.07, vol 0.3, T = 1: 15.79702.
    call = lr_extrapolated_price("call", "american", 110.0, 100.0, 1.0, 0.03, 0.07, 0.3, 1001)
    put = lr_extrapolated_price("put", "american", 100.0, 110.0, 1.0, 0.07, 0.03, 0.3, 1001)
    assert call == pytest.approx(15.79702, abs=1e-4)
    assert put == pytest.approx(15.79702, abs=1e-4)
    # The CRR tree is the mirror image of its symmetric twin: equal to rounding.
    c = crr_price("call", "american", 110.0, 100.0, 1.0, 0.03, 0.07, 0.3, 300)
    p = crr_price("put", "american", 100.0, 110.0, 1.0, 0.07, 0.03, 0.3, 300)
    assert c == pytest.approx(p, rel=1e-11)


def test_extrapolated_trees_agree(rng: np.random.Generator) -> None:
    # Common practice: two independent converged trees agree; relative 1e-5 or 5e-6 (the BBSR
    # error at 3000 steps) over random American options of the Broadie-Detemple (1996)
    # benchmark ranges.
    for _ in range(6):
        kind = "put" if rng.uniform() < 0.5 else "call"
        s, t = rng.uniform(70, 130), rng.uniform(0.1, 1.0)
        r, q, v = rng.uniform(0, 0.1), rng.uniform(0, 0.1), rng.uniform(0.1, 0.6)
        lr = lr_extrapolated_price(kind, "american", s, 100.0, t, r, q, v, 1501)
        bb = bbsr_price(kind, "american", s, 100.0, t, r, q, v, 3000)
        assert bb == pytest.approx(lr, rel=1e-5, abs=5e-6)


def test_extrapolated_accuracy_claim() -> None:
    # trees.py docstring: LR extrapolated ~1e-6 relative at 2000 steps, BBSR a few 1e-6 at
    # 4000, against a three times finer extrapolated tree (common practice).
    for s in (40.0, 45.0):
        fine = lr_extrapolated_price("put", "american", s, 45.0, 0.5833, 0.0488, 0.0, 0.3, 6001)
        lr = lr_extrapolated_price("put", "american", s, 45.0, 0.5833, 0.0488, 0.0, 0.3, 2001)
        bb = bbsr_price("put", "american", s, 45.0, 0.5833, 0.0488, 0.0, 0.3, 4000)
        assert lr == pytest.approx(fine, rel=2e-6)
        assert bb == pytest.approx(fine, rel=5e-6)


def test_tree_input_errors() -> None:
    with pytest.raises(InputError, match="odd"):
        lr_price("put", "american", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2, 100)
    with pytest.raises(InputError, match="even"):
        bbsr_price("put", "american", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2, 101)
    with pytest.raises(InputError, match="style"):
        crr_price("put", "bermudan", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2, 10)
    with pytest.raises(InputError, match="steps"):
        crr_price("put", "american", 100.0, 100.0, 1.0, 0.05, 0.0, 0.2, 0)
    with pytest.raises(InputError, match="too few"):
        crr_price("put", "american", 100.0, 100.0, 10.0, 0.5, 0.0, 0.05, 10)


# --------------------------------------------------------------------------------------
# Cash dividends
# --------------------------------------------------------------------------------------


def _spot_model_quadrature(kind, american_call, s0, k, t, r, q, vol, t_div, amount):
    """One dividend, spot model, by quadrature over the spot at the ex-date.

    European: e^{-r t_d} E[V_BS(max(S - D, 0), T - t_d)]. American call with q = 0: exercise
    is optimal, if ever, just before the ex-date, so e^{-r t_d} E[max(S - K, C_BS(S - D))].
    """
    tau = t - t_div
    mu, sd = (r - q - vol * vol / 2) * t_div, vol * math.sqrt(t_div)

    def after(s):
        x = s - amount
        if x <= 0:
            return 0.0 if kind == "call" else k * math.exp(-r * tau)
        return bsm_price(kind, x, k, tau, r, q, vol)

    def before(s):
        return max(after(s), s - k) if american_call else after(s)

    kinks = [amount]
    if american_call:
        kinks.append(brentq(lambda s: s - k - after(s), k, 20 * k + amount, xtol=1e-13))
    edges = sorted(
        [-12.0, 12.0] + [z for z in ((math.log(x / s0) - mu) / sd for x in kinks) if -12 < z < 12]
    )
    total = 0.0
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        total += quad(
            lambda z: (
                math.exp(-z * z / 2) / math.sqrt(2 * math.pi) * before(s0 * math.exp(mu + sd * z))
            ),
            a,
            b,
            epsabs=1e-13,
            epsrel=1e-13,
            limit=200,
        )[0]
    return math.exp(-r * t_div) * total


SPOT_CASES = [
    # kind, american call?, S, K, T, r, q, vol, t_div, D
    ("put", False, 100.0, 100.0, 1.0, 0.05, 0.0, 0.3, 0.5, 5.0),
    ("call", False, 100.0, 100.0, 1.0, 0.05, 0.02, 0.3, 0.5, 5.0),
    ("put", False, 10.0, 10.0, 1.0, 0.05, 0.0, 0.6, 0.9, 6.0),
    ("call", True, 100.0, 100.0, 1.0, 0.05, 0.0, 0.3, 0.5, 5.0),
    ("call", True, 80.0, 82.0, 1 / 3, 0.06, 0.0, 0.3, 0.25, 4.0),
]


@pytest.mark.parametrize("case", SPOT_CASES)
def test_spot_model_against_quadrature(case: tuple) -> None:
    # Independent check: quadrature of the exact expectation (common practice); the
    # extrapolated lattice is within 1e-6 relative at 2000 steps.
    kind, american_call, s, k, t, r, q, v, td, d = case
    exact = _spot_model_quadrature(kind, american_call, s, k, t, r, q, v, td, d)
    style = "american" if american_call else "european"
    value = tree_price_cash_dividends(kind, style, s, k, t, r, q, v, [(td, d)], 2000)
    assert value == pytest.approx(exact, rel=1e-6)


@pytest.mark.parametrize("case", [SPOT_CASES[0], SPOT_CASES[3], SPOT_CASES[4]])
def test_spot_model_second_order(case: tuple) -> None:
    # Vellekoop & Nieuwenhuis (2006) lattice with smoothed steps and Richardson
    # extrapolation: errors against the quadrature fall ~4x per doubling; fitted order in
    # the house band [1.8, 2.2].
    kind, american_call, s, k, t, r, q, v, td, d = case
    exact = _spot_model_quadrature(*case)
    style = "american" if american_call else "european"
    steps = np.array([250, 500, 1000, 2000])
    errors = [
        abs(tree_price_cash_dividends(kind, style, s, k, t, r, q, v, [(td, d)], int(n)) - exact)
        for n in steps
    ]
    slope = -np.polyfit(np.log(steps), np.log(errors), 1)[0]
    assert 1.8 < slope < 2.2


@pytest.mark.parametrize("method", DIVIDEND_TREE_METHODS)
@pytest.mark.parametrize("case", TWIN_CASES)
def test_no_dividends_is_the_plain_tree(case: tuple, method: str) -> None:
    # Common practice: with no dividend before expiry the dividend lattices are the plain
    # trees (ex-dates at or after expiry and zero amounts are ignored).
    kind, style, s, k, t, r, q, v = case
    plain = (
        crr_price(kind, style, s, k, t, r, q, v, 400)
        if method == "crr"
        else bbsr_price(kind, style, s, k, t, r, q, v, 400)
    )
    for divs in ([], [(t, 3.0), (t + 1.0, 1.0)], [(0.5 * t, 0.0)]):
        assert tree_price_cash_dividends(
            kind, style, s, k, t, r, q, v, divs, 400, method=method
        ) == pytest.approx(plain, rel=1e-12)
        assert tree_price_escrowed(
            kind, style, s, k, t, r, q, v, divs, 400, method=method
        ) == pytest.approx(plain, rel=1e-12)


def test_hull_dividend_tree_example() -> None:
    # Hull, dividend tree example (recalled, re-derived 4.4404; REFERENCE_VALUES.md):
    # American put S = 52, K = 50, r = 0.1, vol 0.4, T = 5 months, D = 2.06 at 3.5 months,
    # 5 equal steps, tree on S - PV(D): 4.44.
    value = tree_price_escrowed(
        "put",
        "american",
        52.0,
        50.0,
        5 / 12,
        0.1,
        0.0,
        0.4,
        [(3.5 / 12, 2.06)],
        5,
        method="crr",
        align_steps=False,
    )
    assert round(value, 2) == 4.44
    assert value == pytest.approx(4.4404, abs=1e-4)


@pytest.mark.parametrize("kind", ["put", "call"])
def test_escrowed_european_is_bsm_on_spot_minus_pv(kind: str) -> None:
    # Escrowed-dividend model (DESIGN.md): European = Black-Scholes on S - PV(D), exactly.
    divs = [(0.2, 1.5), (0.7, 2.0)]
    pv = sum(d * math.exp(-0.04 * t) for t, d in divs)
    exact = bsm_price(kind, 100.0 - pv, 95.0, 1.0, 0.04, 0.01, 0.25)
    # Aligned pieces: the strike sits on a node at expiry, smooth convergence, 1e-6.
    value = tree_price_escrowed(kind, "european", 100.0, 95.0, 1.0, 0.04, 0.01, 0.25, divs, 2000)
    assert value == pytest.approx(exact, rel=1e-6)
    # One equal-step tree (Hull's procedure): plain BBSR on S - PV(D), strike off the
    # nodes, 1e-5.
    value = tree_price_escrowed(
        kind, "european", 100.0, 95.0, 1.0, 0.04, 0.01, 0.25, divs, 2000, align_steps=False
    )
    assert value == pytest.approx(exact, rel=1e-5)


def test_escrowed_american_call_is_rgw() -> None:
    # Roll (1977), Geske (1979), Whaley (1981): exact for the escrowed model with one
    # dividend and no yield; the aligned lattice agrees to 1e-6 relative.
    exact = rgw_american_call(80.0, 82.0, 1 / 3, 0.06, 0.0, 0.3, 0.25, 4.0).value
    value = tree_price_escrowed(
        "call", "american", 80.0, 82.0, 1 / 3, 0.06, 0.0, 0.3, [(0.25, 4.0)], 2000
    )
    assert value == pytest.approx(exact, rel=1e-6)


def test_spot_model_put_call_parity() -> None:
    # Common practice: European parity with cash dividends, C - P = S - PV(D) - K e^{-rT}
    # (the floor max(S - D, 0) is never reached at these parameters).
    args = (100.0, 90.0, 1.5, 0.03, 0.0, 0.25, [(0.4, 2.0), (0.9, 2.0), (1.4, 2.0)], 2000)
    call = tree_price_cash_dividends("call", "european", *args)
    put = tree_price_cash_dividends("put", "european", *args)
    pv = sum(2.0 * math.exp(-0.03 * t) for t in (0.4, 0.9, 1.4))
    assert call - put == pytest.approx(100.0 - pv - 90.0 * math.exp(-0.03 * 1.5), abs=1e-6)


def test_spot_model_american_put_converges_and_is_bounded() -> None:
    # Common practice: self-convergence (2000 vs 4000 steps, 1e-5 relative), American >=
    # European >= 0, American >= exercise value; the plain CRR lattice approaches it too.
    args = (100.0, 100.0, 1.0, 0.05, 0.0, 0.3, [(0.3, 2.0), (0.8, 2.0)])
    coarse = tree_price_cash_dividends("put", "american", *args, 2000)
    fine = tree_price_cash_dividends("put", "american", *args, 4000)
    assert coarse == pytest.approx(fine, rel=1e-5)
    euro = tree_price_cash_dividends("put", "european", *args, 2000)
    assert fine > euro > 0.0
    assert tree_price_cash_dividends("put", "american", *args, 2000, method="crr") == pytest.approx(
        fine, rel=1e-3
    )


def test_same_date_dividends_merge() -> None:
    # Common practice: two payments on one ex-date act as one of their sum.
    a = tree_price_cash_dividends(
        "put", "american", 50.0, 50.0, 1.0, 0.05, 0.0, 0.3, [(0.5, 1.0), (0.5, 2.0)], 200
    )
    b = tree_price_cash_dividends(
        "put", "american", 50.0, 50.0, 1.0, 0.05, 0.0, 0.3, [(0.5, 3.0)], 200
    )
    assert a == b


def test_dividend_tree_input_errors() -> None:
    args = ("put", "american", 100.0, 100.0, 1.0, 0.05, 0.0, 0.3)
    with pytest.raises(InputError, match="dividend amount"):
        tree_price_cash_dividends(*args, [(0.5, -1.0)], 100)
    with pytest.raises(InputError, match="dividend time"):
        tree_price_cash_dividends(*args, [(0.0, 1.0)], 100)
    with pytest.raises(InputError, match="dividends"):
        tree_price_cash_dividends(*args, [(0.5,)], 100)
    with pytest.raises(InputError, match="crr, bbsr"):
        tree_price_cash_dividends(*args, [(0.5, 1.0)], 100, method="trinomial")
    with pytest.raises(InputError, match="too few to interpolate"):
        tree_price_cash_dividends(*args[:4], 50.0, 0.05, 0.0, 0.8, [(0.5, 1.0)], 100)
    with pytest.raises(InputError, match="present value"):
        tree_price_escrowed(*args, [(0.5, 60.0), (0.6, 60.0)], 100)


# --------------------------------------------------------------------------------------
# Kernels of the dividend lattice
# --------------------------------------------------------------------------------------


def test_interpolation_is_exact_for_quintics() -> None:
    # Common practice: six-point Lagrange interpolation reproduces polynomials of degree 5
    # (in spot) between the nodes; linear in spot below the lowest node.
    x0, h = math.log(50.0), 0.03
    spots = np.exp(x0 + h * np.arange(40))
    coeffs = [0.3, -1.2, 0.7, 2.0, -0.5, 0.1]
    values = np.polyval(coeffs, spots / 50.0)
    for s in np.exp(np.linspace(x0, x0 + 39 * h, 57)):
        expected = np.polyval(coeffs, s / 50.0)
        assert interp_layer(x0, h, values, 0.0, float(s)) == pytest.approx(
            expected, rel=1e-12, abs=1e-12
        )
    assert interp_layer(x0, h, values, 7.0, 20.0) == pytest.approx(
        7.0 + (values[0] - 7.0) * 0.4, rel=1e-14
    )
    assert interp_layer(x0, h, values, 7.0, -1.0) == 7.0


def test_smoothed_step_matches_quadrature() -> None:
    # Common practice: the smoothed step is disc * E[f(y e^{drift + sd Z})] for the kinked
    # f(y) = max(V(y - D), y - K), here with V a smooth function given on a log lattice.
    x0, h, strike, shift = math.log(20.0), 0.01, 100.0, 3.0
    grid = np.exp(x0 + h * np.arange(300))
    values = 0.6 * grid - 40.0 + 25.0 * np.exp(-((np.log(grid) - 4.6) ** 2))
    crossings = exdate_crossings(
        True, strike, x0, h, values, 0.0, shift, 0.0, np.exp(np.linspace(3.3, 5.5, 400))
    )
    assert crossings.size == 1
    kinks = np.append(crossings, shift)
    nodes, weights = np.polynomial.legendre.leggauss(8)
    spots = np.array([70.0, 95.0, 120.0])
    drift, sd, disc = -0.001, 0.05, 0.999
    got = smoothed_exdate_step(
        True,
        True,
        strike,
        x0,
        h,
        values,
        0.0,
        shift,
        0.0,
        spots,
        drift,
        sd,
        disc,
        kinks,
        nodes,
        weights,
    )

    def f(y):
        return max(interp_layer(x0, h, values, 0.0, y - shift), y - strike)

    for y, value in zip(spots, got, strict=True):
        zc = (math.log(crossings[0] / y) - drift) / sd
        pts = [zc] if -8 < zc < 8 else None
        exact = (
            disc
            * quad(
                lambda z, y=y: (
                    math.exp(-z * z / 2) / math.sqrt(2 * math.pi) * f(y * math.exp(drift + sd * z))
                ),
                -8,
                8,
                points=pts,
                epsabs=1e-12,
                limit=400,
            )[0]
        )
        assert value == pytest.approx(exact, abs=1e-9)
