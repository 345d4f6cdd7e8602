"""Cross-check of third-party quotes: per-row outcomes, diagnoses, bad rows, batch, resume."""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import subprocess
import sys
from pathlib import Path

import pytest

from stopline import Market, Option, price
from stopline.crosscheck import (
    OUTPUT_COLUMNS,
    PARTIAL_NAME,
    CheckSettings,
    Tolerance,
    check_row,
    read_book,
    run_crosscheck,
    safe_cell,
)
from stopline.daycount import year_fraction
from stopline.errors import InputError

from ._bsm import bsm

BASE = {
    "id": "T1", "kind": "put", "style": "american", "spot": "100", "strike": "105",
    "expiry": "1.0", "rate": "0.05", "vol": "0.3", "quote": "", "div_yield": "0.02",
    "dividends": "", "valuation_date": "", "quote_vol": "",
}


def row(**kw: object) -> dict[str, str]:
    out = dict(BASE)
    out.update({k: str(v) for k, v in kw.items()})
    return out


def model(r: dict[str, str], *, style=None, vol=None, div_yield=None, expiry=None) -> float:
    exp = r["expiry"] if expiry is None else expiry
    try:
        exp = float(exp)
    except (TypeError, ValueError):
        pass
    opt = Option(r["kind"], float(r["strike"]), exp, style=style or r["style"])
    mkt = Market(float(r["spot"]), float(r["rate"]), float(r["vol"]) if vol is None else vol,
                 float(r["div_yield"] or 0) if div_yield is None else div_yield,
                 valuation_date=r["valuation_date"] or None)
    return price(opt, mkt).price


# --------------------------------------------------------------------------- one row


def test_own_price_is_ok_and_implies_the_input_vol():
    r = row()
    p = model(r)
    chk = check_row(row(quote=f"{p:.10f}"))
    assert chk.status == "ok" and chk.note == ""
    assert abs(chk.model_price - p) < 1e-12
    assert abs(chk.difference) < 1e-9
    # implied vol inverts the same pricer: the input vol back to the root-finder's accuracy
    assert abs(chk.implied_vol - 0.3) < 1e-6
    assert abs(chk.vol_difference) < 1e-6


def test_difference_is_quote_minus_model_and_tolerance_scales_with_vega():
    r = row(style="european", div_yield="0")
    p = model(r)
    chk = check_row(row(style="european", div_yield="0", quote=p + 0.2))
    assert chk.difference == pytest.approx(0.2, abs=1e-9)
    # vega (the model's identity vol T S^2 gamma for a flat European row, no re-solve) against
    # Black-Scholes-Merton vega (Black and Scholes 1973; closed form)
    vega = bsm("put", 100, 105, 1.0, 0.05, 0.0, 0.3)["vega"]
    assert chk.vega == pytest.approx(vega, rel=1e-3)
    assert chk.tolerance == pytest.approx(0.0025 * chk.vega, rel=1e-12)
    assert chk.status == "mismatch"


@pytest.mark.parametrize("dividends", ["", "0.5:0.0001"])
def test_vega_near_the_ends_of_the_vol_range(dividends):
    # compared with BSM vega (Black and Scholes 1973; closed form). Without dividends the
    # model's identity; with a (negligible) cash dividend, the tangent marched through the
    # dividend jump (at the ends of (0, 5] too, where a bump would be one-sided; measured
    # 1.5e-6 and 1e-4 relative from BSM, the dividend itself moving vega at vol 1.5 %)
    for vol in (4.995, 0.015):
        r = row(style="european", div_yield="0", vol=vol, dividends=dividends)
        chk = check_row(row(style="european", div_yield="0", vol=vol, dividends=dividends,
                            quote=model(r)))
        assert chk.status == "ok", chk.note
        exact = bsm("put", 100, 105, 1.0, 0.05, 0.0, vol)["vega"]
        assert chk.vega == pytest.approx(exact, rel=0.02, abs=1e-3)


def test_american_vega_agrees_with_fine_prices():
    # vega of a flat American row comes with its price (tangents marched with the solution);
    # checked against a central difference of "fine" prices (common practice), within the
    # 0.1 % stated for Result.vega
    chk = check_row(row(quote="9"))
    opt, h = Option("put", 105.0, 1.0), 2e-3
    up = price(opt, Market(100.0, 0.05, 0.3 + h, 0.02), accuracy="fine", greeks="grid").price
    down = price(opt, Market(100.0, 0.05, 0.3 - h, 0.02), accuracy="fine", greeks="grid").price
    assert chk.vega == pytest.approx((up - down) / (2 * h), rel=1e-3)


class CountPrices:
    """Test hook: count price() calls (the cross-check's and the implied-vol search's, which
    takes price()'s numbers without its Result: ``pricing._value_and_error``, a "grid" price)."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        import stopline.crosscheck as cc
        import stopline.pricing as pricing

        self.calls: list[str] = []
        real = pricing.price
        real_value = pricing._value_and_error

        def counted(*args, **kwargs):
            self.calls.append(kwargs.get("greeks", "full"))
            return real(*args, **kwargs)

        def counted_value(*args, **kwargs):
            self.calls.append("grid")
            return real_value(*args, **kwargs)

        monkeypatch.setattr(pricing, "price", counted)
        monkeypatch.setattr(cc, "price", counted)
        monkeypatch.setattr(pricing, "_value_and_error", counted_value)


@pytest.mark.parametrize(
    ("edit", "most"),
    [
        ({}, 3),  # price with vega (one solve pair with a tangent), then 1-2 for the implied vol
        ({"style": "european"}, 3),  # vega from the model's identity, no re-solve
        ({"dividends": "0.25:1.5", "div_yield": "0"}, 3),  # tangent through the dividend jump
        ({"dividends": "0.25:1.5", "style": "european"}, 3),  # likewise
    ],
)
def test_an_ok_row_costs_few_prices(monkeypatch, edit, most):
    # what the cross-check costs per row, by count (not time): a quote rounded to 4 decimals
    # from the row's own price; before the implied vol was started at the row's price with
    # its vega, this took 5 to 9 prices
    quote = f"{check_row(row(quote='9', **edit)).model_price:.4f}"
    count = CountPrices(monkeypatch)
    chk = check_row(row(quote=quote, **edit))
    assert chk.status == "ok"
    assert len(count.calls) <= most, count.calls
    # one price asks for vega (no rho: the check does not use it), the rest for prices only
    assert count.calls[0] == "vega" and set(count.calls[1:]) <= {"grid"}, count.calls


def test_row_below_the_implied_vol_bracket_still_gets_an_implied_vol():
    # the row's own vol (0.0005) is below the search's bracket [0.001, 5]: its price cannot
    # start the search, which then starts as without a start
    chk = check_row(row(vol="0.0005", quote="5.1"))
    assert chk.status == "mismatch"
    assert 0.001 < chk.implied_vol < 0.5 and "vol points from the input" in chk.note


def test_tolerance_floor_and_overrides():
    assert Tolerance().allowed(0.1) == 0.005  # floor wins for tiny vega
    assert Tolerance().allowed(40.0) == pytest.approx(0.1)  # 0.25 vol points x 40
    assert Tolerance(0.02, 1.0).allowed(1.0) == 0.02
    assert Tolerance(0.0, 1.0).allowed(3.0) == pytest.approx(0.03)
    with pytest.raises(InputError, match="tolerance.price"):
        Tolerance(-1.0)


def test_price_tolerance_override_turns_a_mismatch_ok():
    p = model(row())
    assert check_row(row(quote=p + 0.2)).status == "mismatch"
    loose = CheckSettings(Tolerance(price=0.25))
    assert check_row(row(quote=p + 0.2), loose).status == "ok"
    assert check_row(row(quote=p + 0.2), CheckSettings(Tolerance(vol_points=5.0))).status == "ok"


# --------------------------------------------------------------------------- diagnoses


def test_european_quote_of_an_american_put_is_diagnosed():
    r = row()
    q = model(r, style="european")
    chk = check_row(row(quote=q))
    assert chk.status == "mismatch"
    assert chk.causes[0] == "european"
    assert "priced as European (early exercise ignored)" in chk.note


def test_american_quote_of_a_european_option_is_diagnosed():
    r = row(style="european")
    q = model(r, style="american")
    chk = check_row(row(style="european", quote=q))
    assert chk.status == "mismatch" and "american" in chk.causes


def test_dividends_left_out_is_diagnosed():
    r = row(kind="call", strike="95", div_yield="0.04")
    q = model(r, div_yield=0.0)
    chk = check_row(row(kind="call", strike="95", div_yield="0.04", quote=q))
    assert chk.status == "mismatch" and chk.causes == ("no_dividends",)
    assert "dividends left out (yield 0.04 dropped)" in chk.note


def test_act360_is_diagnosed_for_a_date_expiry():
    kw = dict(expiry="2027-12-17", valuation_date="2026-12-01", vol="0.6", strike="100")
    t360 = year_fraction(dt.date(2026, 12, 1), dt.date(2027, 12, 17), "ACT/360")
    q = model(row(**kw), expiry=t360)
    chk = check_row(row(quote=q, **kw))
    assert chk.status == "mismatch" and chk.causes[0] == "act360"
    assert "ACT/360" in chk.note


def test_act360_not_tried_for_a_year_expiry():
    r = row(vol="0.6")
    q = model(r, expiry=1.0 * 365 / 360)
    chk = check_row(row(vol="0.6", quote=q))
    assert chk.status == "mismatch" and "act360" not in chk.causes


def test_different_vol_is_diagnosed_with_vol_points():
    q = model(row(), vol=0.32)
    chk = check_row(row(quote=q))
    assert chk.status == "mismatch" and chk.causes == ("vol",)
    assert chk.vol_difference == pytest.approx(0.02, abs=1e-6)
    assert "+2.00 vol points" in chk.note


def test_third_party_vol_column_is_tried():
    q = model(row(), vol=0.28)
    chk = check_row(row(quote=q, quote_vol="0.28"))
    assert chk.causes[0] == "quote_vol"
    assert "third party's own vol 0.28 (-2.00 vol points from 0.3)" in chk.note


def test_far_quote_has_no_simple_cause():
    q = model(row()) * 2.0
    chk = check_row(row(quote=q))
    assert chk.status == "mismatch" and chk.causes == ()
    assert chk.note.startswith("no simple cause found")
    assert "vol points from the input" in chk.note


def test_quote_below_intrinsic_has_no_simple_cause_and_no_implied_vol():
    chk = check_row(row(strike="130", quote="20"))  # intrinsic value is 30
    assert chk.status == "mismatch"
    assert chk.note.startswith("no simple cause found (no volatility reproduces the quote")
    assert chk.implied_vol != chk.implied_vol  # NaN
    cells = chk.cells()
    assert cells["implied_vol"] == "" and cells["vol_difference"] == ""


# --------------------------------------------------------------------------- bad rows


@pytest.mark.parametrize(
    ("edit", "fragment"),
    [
        ({"spot": ""}, "spot='': is missing"),
        ({"strike": "abc"}, "strike='abc': is not a number"),
        ({"vol": "-0.2"}, "vol=-0.2: must be in (0, 5]"),
        ({"kind": "straddle"}, "kind='straddle'"),
        ({"style": "bermudan"}, "style='bermudan'"),
        ({"expiry": "2026-06-01", "valuation_date": "2026-12-01"}, "expiry='2026-06-01': is before"),
        ({"expiry": "2027-06-01"}, "valuation_date=None: is needed"),
        ({"expiry": "soon"}, "expiry='soon'"),
        ({"quote": "-1"}, "quote='-1': must be >= 0"),
        ({"quote": "nan"}, "quote='nan': must be finite"),
        ({"quote_vol": "7"}, "quote_vol='7'"),
        ({"id": ""}, "id='': is missing"),
        ({"valuation_date": "1/12/2026"}, "valuation_date='1/12/2026'"),
        ({"dividends": "2026-11-15:0.42", "valuation_date": "2026-12-01"}, "dividends='2026-11-15'"),
        ({"dividends": "2027-03-15=0.42"}, "dividends='2027-03-15=0.42'"),
        ({"dividends": "2027-03-15:0"}, "amount must be a finite number > 0"),
    ],
)
def test_bad_field_gives_error_naming_field_and_value(edit, fragment):
    r = row(quote="5")
    r.update(edit)
    chk = check_row(r)
    assert chk.status == "error"
    assert fragment in chk.note


def test_surplus_cells_are_an_error():
    r = row(quote="5")
    r[None] = ["x", "y"]
    chk = check_row(r)
    assert chk.status == "error" and "2 more cell(s) than the header" in chk.note


# --------------------------------------------------------------------------- CSV safety


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("=SUM(A1)", "'=SUM(A1)"), ("+1 lot", "'+1 lot"), ("@ops", "'@ops"), ("-stale?", "'-stale?"),
        ("-0.0123", "-0.0123"), ("+3.5", "+3.5"), ("-1e-05", "-1e-05"), ("abc", "abc"), ("", ""),
        ("\tx", "'\tx"),
    ],
)
def test_safe_cell(text, expected):
    # formula-looking text is escaped, numbers are not (OWASP CSV injection: common practice)
    assert safe_cell(text) == expected


# --------------------------------------------------------------------------- the book


def write_book(path: Path, rows: list[dict[str, str]], extra: tuple[str, ...] = ("desk",)) -> Path:
    cols = list(BASE) + list(extra)
    with path.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=cols, lineterminator="\n")
        w.writeheader()
        for r in rows:
            w.writerow({c: r.get(c, "") for c in cols})
    return path


def small_book(tmp_path: Path, n_ok: int = 6) -> Path:
    rows = []
    for i in range(n_ok):
        r = row(id=f"OK{i}", strike=str(90 + 4 * (i % 8)), kind="put" if i % 2 else "call")
        r["quote"] = f"{model(r):.6f}"
        r["desk"] = "=cmd|' /C calc'!A0" if i == 0 else f"desk-{i}"
        rows.append(r)
    european = row(id="EU", strike="110")
    european["quote"] = f"{model(european, style='european'):.6f}"
    rows.insert(2, european)
    rows.insert(4, row(id="BAD", vol="-0.3", quote="4", desk="-0.0123"))
    return write_book(tmp_path / "book.csv", rows)


def read_results(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as fh:
        return list(csv.DictReader(fh))


def test_book_header_problems_name_the_column(tmp_path):
    p = tmp_path / "q.csv"
    p.write_text("id,kind,style,spot,strike,expiry,rate,vol\nA,put,american,1,1,1,0,0.2\n")
    with pytest.raises(InputError, match="lacks required column.*quote"):
        read_book(p)
    p.write_text("id,kind,style,spot,strike,expiry,rate,vol,quote,vol\n")
    with pytest.raises(InputError, match="repeats column.*vol"):
        read_book(p)
    p.write_text("id,kind,style,spot,strike,expiry,rate,vol,quote,status\n")
    with pytest.raises(InputError, match="already has output column.*status"):
        read_book(p)
    with pytest.raises(InputError, match="cannot be read"):
        read_book(tmp_path / "missing.csv")


def test_run_keeps_every_row_in_order_with_its_columns(tmp_path):
    book = small_book(tmp_path)
    before = book.read_bytes()
    run = run_crosscheck(book, tmp_path / "out", workers=1)
    assert book.read_bytes() == before  # input never modified
    res = read_results(run.results_path)
    with book.open(newline="") as fh:
        src = list(csv.DictReader(fh))
    assert [r["id"] for r in res] == [r["id"] for r in src]
    assert list(res[0]) == list(src[0]) + list(OUTPUT_COLUMNS)
    for a, b in zip(res, src, strict=True):
        for col in src[0]:
            if col != "desk":
                assert a[col] == b[col]
    assert res[0]["desk"] == "'=cmd|' /C calc'!A0"  # escaped
    bad = next(r for r in res if r["id"] == "BAD")
    assert bad["desk"] == "-0.0123"  # a number stays a number
    assert bad["status"] == "error" and "vol=-0.3" in bad["note"]
    assert next(r for r in res if r["id"] == "EU")["status"] == "mismatch"
    assert run.counts() == {"ok": 6, "mismatch": 1, "error": 1}
    assert run.has_errors
    assert not list((tmp_path / "out").glob("*.tmp")) and not (tmp_path / "out" / PARTIAL_NAME).exists()


def test_unexpected_exception_becomes_a_row_error(tmp_path, monkeypatch):
    import stopline.crosscheck as cc

    real = cc.check_row

    def buggy(raw, settings=None):  # a bug that hits one row only
        if raw["id"] == "OK1":
            raise ZeroDivisionError("float division by zero")
        return real(raw, settings)

    monkeypatch.setattr(cc, "check_row", buggy)
    run = run_crosscheck(small_book(tmp_path), tmp_path / "out", workers=1)
    res = read_results(run.results_path)
    assert len(res) == 8
    bad = next(r for r in res if r["id"] == "OK1")
    assert bad["status"] == "error"
    assert bad["note"] == "unexpected error (please report): ZeroDivisionError: float division by zero"


def test_output_next_to_input_refuses_to_overwrite_it(tmp_path):
    book = write_book(tmp_path / "results.csv", [row(quote="5")])
    with pytest.raises(InputError, match="would overwrite the quotes file"):
        run_crosscheck(book, tmp_path, workers=1)


def test_two_processes_give_the_same_results(tmp_path):
    book = small_book(tmp_path)
    a = run_crosscheck(book, tmp_path / "one", workers=1)
    b = run_crosscheck(book, tmp_path / "two", workers=2)
    assert b.workers == "2 processes"
    assert a.results_path.read_bytes() == b.results_path.read_bytes()


class Stop:
    """Test hook: raise KeyboardInterrupt once ``n`` rows are finished (a simulated Ctrl-C)."""

    def __init__(self, n: int) -> None:
        self.n = n

    def __call__(self, done: int, total: int) -> None:
        if done >= self.n:
            raise KeyboardInterrupt


@pytest.mark.parametrize("workers", [1, 2])
def test_interrupt_keeps_finished_rows_and_resume_finishes(tmp_path, workers):
    book = small_book(tmp_path, n_ok=30)  # 32 rows, chunks of 8 down to 1 on 2 processes
    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        run_crosscheck(book, out, workers=workers, on_progress=Stop(4))
    assert not (out / "results.csv").exists()
    saved = json.loads((out / PARTIAL_NAME).read_text())
    kept = len(saved["done"])
    # finished rows are kept, including chunks that completed while the pool stopped
    assert 4 <= kept < 32
    resumed = run_crosscheck(book, out, workers=workers, resume=True)
    assert resumed.rows_priced == 32 - kept
    assert not (out / PARTIAL_NAME).exists()
    clean = run_crosscheck(book, tmp_path / "clean", workers=1)
    assert resumed.results_path.read_bytes() == clean.results_path.read_bytes()


def test_checkpoint_is_written_during_the_run(tmp_path):
    book = small_book(tmp_path)
    out = tmp_path / "out"
    seen = []

    def look(done: int, total: int) -> None:
        if (out / PARTIAL_NAME).exists():
            seen.append(len(json.loads((out / PARTIAL_NAME).read_text())["done"]))

    run_crosscheck(book, out, workers=1, on_progress=look, checkpoint_seconds=0.0)
    assert seen and seen == sorted(seen) and 1 <= seen[0] < 8  # finished rows, before the end
    assert not (out / PARTIAL_NAME).exists()  # removed once results.csv is written


def test_resume_refuses_other_settings_or_another_book(tmp_path):
    book = small_book(tmp_path)
    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        run_crosscheck(book, out, workers=1, on_progress=Stop(2))
    with pytest.raises(InputError, match="other settings"):
        run_crosscheck(book, out, workers=1, resume=True, settings=CheckSettings(Tolerance(0.01)))
    book.write_text(book.read_text() + "X,put,american,1,1,1,0,0.2,0.1,,,,,\n")
    with pytest.raises(InputError, match="different quotes file"):
        run_crosscheck(book, out, workers=1, resume=True)


def test_dask_is_not_imported_without_a_scheduler(tmp_path):
    book = small_book(tmp_path, n_ok=1)
    code = (
        "import sys; from stopline.crosscheck import run_crosscheck; "
        f"run_crosscheck({str(book)!r}, {str(tmp_path / 'o')!r}, workers=1); "
        "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')))"
    )
    src = str(Path(__file__).resolve().parent.parent / "src")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env={"PYTHONPATH": src, "PATH": ""})
    assert out.stdout.strip() == "[]"


def test_dask_cluster_gives_the_same_results(tmp_path):
    distributed = pytest.importorskip("distributed")
    book = small_book(tmp_path, n_ok=4)
    local = run_crosscheck(book, tmp_path / "local", workers=1)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        remote = run_crosscheck(book, tmp_path / "dask", scheduler=cluster.scheduler_address)
    assert remote.workers.startswith("Dask cluster at tcp://127.0.0.1:")
    assert remote.results_path.read_bytes() == local.results_path.read_bytes()


def test_demo_book_copies_are_identical():
    root = Path(__file__).resolve().parent.parent
    example = (root / "examples" / "demo_quotes.csv").read_bytes()
    packaged = (root / "src" / "stopline" / "data" / "demo_quotes.csv").read_bytes()
    assert example == packaged
    rows = list(csv.DictReader(io.StringIO(example.decode())))
    assert 200 <= len(rows) <= 300
    assert {r["planted"] for r in rows} >= {"european", "no_dividends", "vol", "act360",
                                            "unexplained", "error"}


def test_cash_dividends_are_priced_and_their_omission_is_diagnosed():
    # common practice: a quote computed without the cash dividend is explained by leaving it out
    r = row(dividends="0.25:1.5", div_yield="0", quote="9.0")
    bare = model(row(div_yield="0"))
    chk = check_row(row(dividends="0.25:1.5", div_yield="0", quote=f"{bare:.10f}"))
    assert chk.status == "mismatch"
    assert "dividends left out" in chk.note
    assert check_row(r).status != "error"


def test_other_dividend_model_is_tried():
    # common practice: vendors differ in how a cash dividend moves the spot (spot drop vs
    # escrowed); a quote from the escrowed model is explained by switching models
    opt = Option("call", 95.0, 1.0)
    esc = Market(100.0, 0.05, 0.3, dividends=[(0.5, 6.0)], dividend_model="escrowed")
    quote = price(opt, esc).price
    chk = check_row(row(kind="call", strike="95", div_yield="0", dividends="0.5:6", quote=f"{quote:.10f}"))
    assert chk.status == "mismatch", chk.note
    assert "escrowed dividend model" in chk.note


def test_dividend_after_expiry_is_named_on_ok_and_mismatch_rows():
    # the schedule's warning rides on the row's note whatever the status: alone on an ok
    # row, after the diagnosis on a mismatch (an ex-date after expiry changes no price)
    late = "1.5:0.8"
    own = model(row())
    ok = check_row(row(quote=own, dividends=late))
    assert ok.status == "ok" and ok.causes == ()
    assert ok.note == "dividend 0.8 at 1.5y ignored: its ex-date is after expiry"
    far = check_row(row(quote=model(row(), style="european"), dividends=late))
    assert far.status == "mismatch" and far.causes[0] == "european"
    assert far.note.startswith("reproduced by priced as European")
    assert far.note.endswith("; dividend 0.8 at 1.5y ignored: its ex-date is after expiry")
    # and the dividend that does not count leaves the numbers as without it
    plain = check_row(row(quote=own))
    assert (ok.model_price, ok.implied_vol, ok.tolerance) == (plain.model_price, plain.implied_vol,
                                                             plain.tolerance)
