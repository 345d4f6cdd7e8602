"""Write examples/chain_quotes.csv: an invented option chain on a fictional underlying.

The underlying, Quillmoor Tidal Energy (ticker QTDE), does not exist. Quotes are stopline's
own American prices (accuracy "standard") at a known volatility smile, rounded to 4
decimals; the generating vol is kept in the column ``generating_vol`` so that
``stopline implied examples/chain_quotes.csv --out DIR`` can be checked against it. Two
rows are planted errors: a put quoted below its intrinsic value and a strike that is not a
number.

Run from the repository root: ``python examples/make_chain_quotes.py``.
"""

from __future__ import annotations

import csv
import datetime as dt
import math
from pathlib import Path

from stopline import Market, Option, price

SPOT, RATE, YIELD = 84.20, 0.041, 0.018
VALUATION = dt.date(2026, 12, 1)
EXPIRIES = (dt.date(2027, 1, 15), dt.date(2027, 3, 19), dt.date(2027, 6, 18))
STRIKES = (60, 65, 70, 75, 80, 85, 90, 95, 100, 105, 110)


def smile(strike: float, t: float) -> float:
    """Invented smile: skewed towards low strikes, flattening with expiry."""
    m = math.log(strike / SPOT) / math.sqrt(t)
    return 0.27 - 0.045 * m + 0.02 * m * m


def main() -> None:
    out = Path(__file__).with_name("chain_quotes.csv")
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "div_yield", "quote",
              "valuation_date", "generating_vol"]
    rows = []
    for e in EXPIRIES:
        t = (e - VALUATION).days / 365.0
        for k in STRIKES:
            kind = "put" if k < SPOT else "call"  # out of the money side of the chain
            vol = round(smile(k, t), 4)
            mkt = Market(SPOT, RATE, vol, YIELD, VALUATION)
            q = price(Option(kind, float(k), e.isoformat()), mkt).price
            rows.append([f"QTDE-{e:%y%m%d}-{kind[0].upper()}{k}", kind, "american", SPOT, k,
                         e.isoformat(), RATE, YIELD, f"{q:.4f}", VALUATION.isoformat(), vol])
    # planted errors: a 110 put quoted below its intrinsic value 25.80, and a strike typed
    # with the letter O for a zero
    rows.append(["QTDE-270319-P110-BAD", "put", "american", SPOT, 110, EXPIRIES[1].isoformat(),
                 RATE, YIELD, "25.1000", VALUATION.isoformat(), ""])
    rows.append(["QTDE-270618-C9O-BAD", "call", "american", SPOT, "9O",
                 EXPIRIES[2].isoformat(), RATE, YIELD, "1.2500", VALUATION.isoformat(), ""])
    with out.open("w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    print(f"wrote {out} ({len(rows)} rows)")


if __name__ == "__main__":
    main()
