"""Make the invented demo book of third-party quotes (examples/demo_quotes.csv).

Five fictional underlyings, a strip of strikes and expiries each, puts and calls. Every
"third-party" quote is stopline's own price plus small seeded noise, except for planted rows
priced under another assumption, or broken on purpose:

- ``european``: an American option quoted as if European (early exercise ignored);
- ``no_dividends``: the dividend yield or the cash dividends left out;
- ``vol``: a different volatility (some rows give that vol in ``quote_vol``);
- ``act360``: a date expiry counted ACT/360 instead of ACT/365;
- ``unexplained``: a quote no simple assumption reproduces;
- ``error``: a bad field (negative vol, missing strike, unknown kind, an ex-dividend date
  before the valuation date, ...).

The ``planted`` column records which, so the demo can show that each is found. The
``desk`` and ``comment`` columns are carried through untouched (some comments start with
``=``, ``+`` or ``@`` to show that results.csv escapes them).

Run from the repository root::

    python examples/make_demo_book.py

It writes examples/demo_quotes.csv and the identical package copy
src/stopline/data/demo_quotes.csv.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import io
import math
from pathlib import Path

import numpy as np

from stopline import Market, Option, price
from stopline.crosscheck import Tolerance, write_atomic
from stopline.daycount import year_fraction

SEED = 20261201
VALUATION = dt.date(2026, 12, 1)
RATE = 0.042
NOISE = 0.0008  # standard deviation of the noise added to clean quotes (money units)
PER_KIND = 4  # planted rows per kind of problem

# ticker: spot, at-the-money vol, skew per unit log-moneyness, dividend yield, style, date expiries
UNDERLYINGS = {
    "QZLK": (101.35, 0.27, -0.12, 0.011, "american", False),
    "VXRB": (47.80, 0.41, -0.20, 0.0, "american", True),
    "ZQPN": (238.10, 0.22, -0.10, 0.034, "american", False),
    "XJTW": (18.64, 0.62, -0.25, 0.0, "american", True),
    "KQZR": (73.20, 0.31, -0.15, 0.026, "european", True),
}
MONEYNESS = (0.8, 0.9, 0.95, 1.0, 1.05, 1.1, 1.2)
EXPIRY_DATES = (dt.date(2027, 1, 15), dt.date(2027, 3, 19), dt.date(2027, 6, 18), dt.date(2027, 12, 17))
DESKS = ("flow-1", "flow-2", "exotics")
#: Quarterly cash dividends (ex-date: amount) of the underlyings that pay cash.
CASH_DIVIDENDS = {
    "VXRB": "2027-02-12:0.35;2027-05-14:0.35;2027-08-13:0.35;2027-11-12:0.35",
}

COLUMNS = ("id", "underlying", "kind", "style", "spot", "strike", "expiry", "valuation_date",
           "rate", "div_yield", "dividends", "vol", "quote", "quote_vol", "desk", "comment",
           "planted")


def _strike(spot: float, m: float) -> float:
    step = 0.5 if spot < 30 else (1.0 if spot < 120 else 5.0)
    return round(spot * m / step) * step


def _value(option: Option, market: Market) -> float:
    return price(option, market, accuracy="standard").price


def _vega(option: Option, market: Market) -> float:
    up = dataclasses.replace(market, vol=market.vol + 0.01)
    dn = dataclasses.replace(market, vol=market.vol - 0.01)
    return (_value(option, up) - _value(option, dn)) / 0.02


def _base_rows() -> list[dict[str, object]]:
    rows = []
    for ticker, (spot, atm, skew, q, style, dated) in UNDERLYINGS.items():
        for e_i, e_date in enumerate(EXPIRY_DATES):
            t = year_fraction(VALUATION, e_date)
            expiry = e_date.isoformat() if dated else f"{t:.6f}"
            for m in MONEYNESS:
                k = _strike(spot, m)
                vol = round(atm + skew * math.log(k / spot) + 0.01 * e_i, 4)
                for kind in ("put", "call"):
                    if (kind == "put" and m > 1.1) or (kind == "call" and m < 0.9):
                        continue  # deep in-the-money wings are rarely quoted
                    rows.append({
                        "id": f"{ticker}-{e_date:%y%m}-{kind[0].upper()}{k:g}",
                        "underlying": ticker, "kind": kind, "style": style, "spot": spot,
                        "strike": f"{k:g}", "expiry": expiry,
                        "valuation_date": VALUATION.isoformat() if dated else "",
                        "rate": RATE, "div_yield": q, "vol": vol,
                        "dividends": CASH_DIVIDENDS.get(ticker, ""),
                        "quote_vol": "", "desk": DESKS[len(rows) % 3], "comment": "",
                        "planted": "",
                    })
    return rows


def _contract(row: dict[str, object], *, style: str | None = None, expiry: object = None,
              div_yield: float | None = None, vol: float | None = None,
              cash: bool = True) -> tuple[Option, Market]:
    exp = row["expiry"] if expiry is None else expiry
    try:
        exp = float(exp)
    except ValueError:
        pass
    opt = Option(row["kind"], float(row["strike"]), exp, style=style or row["style"])
    mkt = Market(float(row["spot"]), RATE, float(row["vol"]) if vol is None else vol,
                 float(row["div_yield"]) if div_yield is None else div_yield,
                 valuation_date=row["valuation_date"] or VALUATION.isoformat(),
                 dividends=str(row["dividends"]) if cash else "")
    return opt, mkt


def make_book(seed: int = SEED) -> list[dict[str, object]]:
    """The rows of the demo book (deterministic for a given seed)."""
    rng = np.random.default_rng(seed)
    rows = _base_rows()
    tol = Tolerance()
    clean: dict[int, float] = {}
    for i, row in enumerate(rows):
        opt, mkt = _contract(row)
        clean[i] = _value(opt, mkt)
    order = [int(i) for i in rng.permutation(len(rows))]
    used: set[int] = set()

    def plant(kind: str, ok, make) -> None:  # noqa: ANN001
        n = 0
        for i in order:
            if n == PER_KIND:
                return
            row = rows[i]
            if i in used or not ok(row):
                continue
            opt, mkt = _contract(row)
            quote = make(row)
            if abs(quote - clean[i]) < 1.5 * tol.allowed(_vega(opt, mkt)):
                continue  # too close to the model to be a visible problem
            row["quote"] = quote
            row["planted"] = kind
            used.add(i)
            n += 1
        raise RuntimeError(f"not enough candidates for {kind}")

    american = lambda r: r["style"] == "american"  # noqa: E731
    plant("european", lambda r: american(r) and r["kind"] == "put" and float(r["strike"]) > float(r["spot"]),
          lambda r: _value(*_contract(r, style="european")))
    plant("no_dividends", lambda r: float(r["div_yield"]) > 0 or bool(r["dividends"]),
          lambda r: _value(*_contract(r, div_yield=0.0, cash=False)))
    plant("act360", lambda r: bool(r["valuation_date"]),
          lambda r: _value(*_contract(r, expiry=year_fraction(
              VALUATION, dt.date.fromisoformat(str(r["expiry"])), "ACT/360"))))

    def shifted_vol(r: dict[str, object]) -> float:
        v = round(float(r["vol"]) + 0.02 * (1 if rng.random() < 0.5 else -1), 4)
        if rng.random() < 0.5:
            r["quote_vol"] = v
        return _value(*_contract(r, vol=v))

    plant("vol", lambda r: True, shifted_vol)
    plant("unexplained", lambda r: True,
          lambda r: _value(*_contract(r)) * 1.8 + 0.25)  # a price from some other book
    for i, row in enumerate(rows):
        if not row["planted"]:
            opt, _ = _contract(row)
            noisy = clean[i] + rng.normal(0.0, NOISE)
            if opt.is_american:
                s, k = float(row["spot"]), float(row["strike"])
                noisy = max(noisy, max(k - s, 0.0) if opt.is_put else max(s - k, 0.0))
            row["quote"] = max(noisy, 0.0)
    # broken rows: one field each
    broken = [i for i in order if i not in used][: 7]
    edits = [
        ("vol", "-0.25"), ("strike", ""), ("kind", "straddle"), ("spot", "n/a"),
        ("expiry", "2026-09-18"), ("dividends", "2026-06-15:0.42"),
        ("quote", "1.2.3"),
    ]
    for i, (col, value) in zip(broken, edits, strict=True):
        rows[i][col] = value
        rows[i]["planted"] = "error"
        if col == "expiry":
            rows[i]["valuation_date"] = VALUATION.isoformat()
    for i, text in zip(order[-4:], ("=check with desk", "+1 lot", "@ops review", "-stale?"), strict=True):
        rows[i]["comment"] = text
    for row in rows:
        if isinstance(row["quote"], float):
            row["quote"] = f"{row['quote']:.4f}"
    return rows


def to_csv(rows: list[dict[str, object]]) -> str:
    """CSV text of the book."""
    buf = io.StringIO(newline="")
    w = csv.DictWriter(buf, fieldnames=COLUMNS, lineterminator="\n")
    w.writeheader()
    for row in rows:
        w.writerow(row)
    return buf.getvalue()


def main() -> None:
    root = Path(__file__).resolve().parent.parent
    text = to_csv(make_book())
    for target in (root / "examples" / "demo_quotes.csv", root / "src" / "stopline" / "data" / "demo_quotes.csv"):
        write_atomic(target, text)
        print(f"wrote {target} ({text.count(chr(10)) - 1} quotes)")


if __name__ == "__main__":
    main()
