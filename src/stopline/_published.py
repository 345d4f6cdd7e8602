"""Published reference values used by the validation harness, each with its source.

"recalled" marks a value recalled from the publication rather than read from it here (each was
re-derived independently with a fine binomial tree and agrees to the tolerance given); "seen"
marks a value read in the publication itself. Tolerances follow the printed precision of the
tables and must not be tightened. Contracts are ``(kind, spot, strike, expiry, rate,
div_yield, vol, value)`` for American options unless the table says otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["PublishedTable", "TABLES", "DOUBTFUL", "HULL_CRR_STEPS", "BAW_TABLE",
           "BJS_TABLE", "HULL_GREEKS", "PERPETUAL_PUTS", "RGW_EXAMPLE", "NSTT_BOUNDARY"]


@dataclass(frozen=True)
class PublishedTable:
    """American option values printed in one publication.

    Attributes
    ----------
    key : str
        Short label used in check names.
    source : str
        Author, year, journal and table.
    provenance : str
        "recalled" or "seen" (see the module docstring).
    tolerance : float
        Absolute tolerance on the price (the table's printed precision).
    cases : tuple of tuple
        ``(kind, spot, strike, expiry, rate, div_yield, vol, value)``.
    """

    key: str
    source: str
    provenance: str
    tolerance: float
    cases: tuple[tuple[str, float, float, float, float, float, float, float], ...]


def _geske_johnson() -> tuple:
    # T exactly 0.0833, 0.3333, 0.5833 (not 1/12, 4/12, 7/12).
    values = {
        35: {0.2: (0.0062, 0.2004, 0.4328), 0.3: (0.0774, 0.6975, 1.2198),
             0.4: (0.2466, 1.3460, 2.1549)},
        40: {0.2: (0.8522, 1.5798, 1.9904), 0.3: (1.3099, 2.4825, 3.1696),
             0.4: (1.7681, 3.3874, 4.3526)},
        45: {0.2: (5.0000, 5.0883, 5.2670), 0.3: (5.0597, 5.7056, 6.2436),
             0.4: (5.2868, 6.5099, 7.3830)},
    }
    out = []
    for k, by_vol in values.items():
        for vol, row in by_vol.items():
            for t, v in zip((0.0833, 0.3333, 0.5833), row, strict=True):
                out.append(("put", 40.0, float(k), t, 0.0488, 0.0, vol, v))
    return tuple(out)


TABLES: tuple[PublishedTable, ...] = (
    PublishedTable(
        "Geske-Johnson 1984",
        "Geske & Johnson (1984), J. Finance 39(5), Table I, 'true' values",
        "recalled", 1e-4, _geske_johnson(),
    ),
    PublishedTable(
        "Hull example",
        "Hull, Options, Futures, and Other Derivatives, numerical procedures chapter, "
        "converged American put",
        "recalled", 1e-4, (("put", 50.0, 50.0, 5 / 12, 0.10, 0.0, 0.40, 4.2842),),
    ),
    PublishedTable(
        "Kim-Ma-Choe 2013",
        "Kim, Ma & Choe (2013), J. Appl. Math., art. 128025, converged binomial values",
        "seen", 1e-4,
        tuple(("put", s, 100.0, 1.0, 0.05, 0.0, 0.2, v) for s, v in
              ((80.0, 20.0000), (90.0, 11.4927), (100.0, 6.0904), (110.0, 2.9865),
               (120.0, 1.3671))),
    ),
    PublishedTable(
        "Broadie-Detemple 1996",
        "Broadie & Detemple (1996), Rev. Financial Studies 9(4), Table 1, American calls",
        "recalled", 2e-4,
        tuple(("call", s, 100.0, 0.5, 0.03, 0.07, 0.2, v) for s, v in
              ((80.0, 0.2194), (90.0, 1.3864), (100.0, 4.7825), (110.0, 11.0978),
               (120.0, 20.0005)))
        + tuple(("call", s, 100.0, 0.5, 0.03, 0.07, 0.4, v) for s, v in
                ((80.0, 2.6889), (90.0, 5.7223), (100.0, 10.2385))),
    ),
    PublishedTable(
        "HODIE 2018",
        "HODIE finite-difference paper, Adv. Difference Equations (2018), "
        "doi 10.1186/s13662-018-1917-z, Table 4 'true values' (with a dividend yield)",
        "seen", 2e-4,
        tuple(("put", s, 100.0, 1.0, 0.04, 0.02, 0.3, v) for s, v in
              ((75.9572, 25.32986), (83.9457, 19.49691), (92.7743, 14.26265),
               (102.5315, 9.84354), (113.3148, 6.36558), (125.2323, 3.83337),
               (138.4031, 2.13784))),
    ),
)

#: Recalled entries that converged independent trees contradict, keyed by
#: ``(table key, spot, strike, expiry, vol)``. They keep their stated tolerance but are
#: checked against an independent tree instead of the printed value (the reason says why).
DOUBTFUL: dict[tuple[str, float, float, float, float], str] = {
    ("Geske-Johnson 1984", 40.0, 40.0, 0.5833, 0.4):
        "recalled 4.3526 lies 1.1e-4 below the converged 4.35271, on which Leisen-Reimer and "
        "CRR-BS trees at thousands of steps agree to 2e-6",
    ("Geske-Johnson 1984", 40.0, 45.0, 0.3333, 0.4):
        "recalled 6.5099 lies 1.0e-4 above the converged 6.50980, at the edge of the stated "
        "tolerance",
    ("Broadie-Detemple 1996", 90.0, 100.0, 0.5, 0.4):
        "recalled 5.7223 lies 2.3e-4 above the converged 5.72207, on which Leisen-Reimer and "
        "CRR-BS trees at thousands of steps agree to 2e-6",
}

#: Hull's CRR tree for the example put (S = K = 50, r = 0.10, vol 0.40, T = 5/12): steps and
#: the printed value, exact to the printed digits (recalled).
HULL_CRR_STEPS: tuple[tuple[int, float, int], ...] = (
    (5, 4.49, 2), (30, 4.263, 3), (50, 4.272, 3), (100, 4.278, 3), (500, 4.283, 3),
)

#: Barone-Adesi & Whaley (1987) approximation values, example table in Haug, The Complete
#: Guide to Option Pricing Formulas (recalled, +-3e-3): calls with q = r = 0.10, K = 100,
#: ``(expiry, vol, spot, value)``.
BAW_TABLE: tuple[tuple[float, float, float, float], ...] = tuple(
    (t, vol, s, v)
    for t, rows in (
        (0.1, {0.15: (0.0206, 1.8771, 10.0089), 0.25: (0.3159, 3.1280, 10.3919),
               0.35: (0.9495, 4.3777, 11.1679)}),
        (0.5, {0.15: (0.8208, 4.0842, 10.8087), 0.25: (2.7437, 6.8015, 13.0170),
               0.35: (5.0063, 9.5106, 15.5689)}),
    )
    for vol, vals in rows.items()
    for s, v in zip((90.0, 100.0, 110.0), vals, strict=True)
)

#: Bjerksund & Stensland (2002) approximation values, example table in Haug, The Complete
#: Guide to Option Pricing Formulas (recalled, printed to 4 decimals, +-1e-4): the calls of
#: :data:`BAW_TABLE`, ``(expiry, vol, spot, value)``.
BJS_TABLE: tuple[tuple[float, float, float, float], ...] = tuple(
    (t, vol, s, v)
    for t, rows in (
        (0.1, {0.15: (0.0205, 1.8757, 10.0000), 0.25: (0.3151, 3.1256, 10.3725),
               0.35: (0.9479, 4.3746, 11.1578)}),
        (0.5, {0.15: (0.8099, 4.0628, 10.7898), 0.25: (2.7180, 6.7661, 12.9814),
               0.35: (4.9665, 9.4608, 15.5137)}),
    )
    for vol, vals in rows.items()
    for s, v in zip((90.0, 100.0, 110.0), vals, strict=True)
)

#: Black-Scholes-Merton Greeks, worked example in Hull, Options, Futures, and Other
#: Derivatives, Greek letters chapter (recalled): call, S = 49, K = 50, r = 0.05, vol 0.2,
#: T = 0.3846 (20 weeks), no dividends; ``(greek, printed value, decimals printed)`` with
#: theta per year, vega per unit of vol and rho per unit of the rate.
HULL_GREEKS: tuple[tuple[str, float, int], ...] = (
    ("price", 2.40, 2), ("delta", 0.522, 3), ("gamma", 0.066, 3), ("theta", -4.31, 2),
    ("vega", 12.1, 1), ("rho", 8.91, 2),
)

#: Perpetual American puts (Merton 1973), K = 100: ``(rate, div_yield, vol, S*, V(100))``.
PERPETUAL_PUTS: tuple[tuple[float, float, float, float, float], ...] = (
    (0.05, 0.0, 0.2, 71.4286, 12.3200),
    (0.05, 0.02, 0.3, 47.3828, 26.8545),
)

#: Roll-Geske-Whaley worked example in Haug's Complete Guide (recalled; re-derived):
#: S, K, T, r, vol, ex-time, dividend, American call value, critical ex-dividend spot.
#: T is four months exactly: printed as 0.3333, but the critical spot 80.1173 is reproduced
#: only with T = 1/3 (T = 0.3333 gives 80.1162 and a value 1.3e-4 lower).
RGW_EXAMPLE = (80.0, 82.0, 1.0 / 3.0, 0.06, 0.30, 0.25, 4.0, 4.3860, 80.1173)

#: Nielsen, Skavhaug & Tveito (2002) parameter set 2 (recalled): K = 1, r = 0.1, vol 0.2,
#: T = 1, q = 0; critical spot at valuation 0.8627 +- 2e-4 (spread of published solvers,
#: seen in Clevenhaus et al., J. Risk Financial Manag. 13(6):124, 2020).
NSTT_BOUNDARY = (1.0, 0.1, 0.2, 1.0, 0.8627, 2e-4)
