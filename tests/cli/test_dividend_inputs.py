"""Cash dividends on every command that takes a contract: flags, CSV columns, warnings."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stopline import Market, Option, price
from stopline.cli import app
from stopline.crosscheck import check_row

runner = CliRunner()
CALL = ["--kind", "call", "--spot", "80", "--strike", "82", "--rate", "0.06", "--vol", "0.3",
        "--accuracy", "fast"]
LATE = ["--expiry", "2027-03-01", "--valuation-date", "2026-12-01",
        "--dividend", "2027-02-01:4", "--dividend", "2027-06-01:1"]


def _write(path: Path, rows: list[dict[str, object]]) -> Path:
    with path.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return path


def _read(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as fh:
        return list(csv.DictReader(fh))


# ------------------------------------------------------------------ flags


@pytest.mark.parametrize("command", ["price", "boundary"])
def test_a_dividend_after_expiry_is_reported_by_every_command(command: str, tmp_path: Path) -> None:
    # The library ignores it with a warning (Result.stats.warnings); the person running the
    # command must see that warning too, not only the price.
    extra = ["--out", str(tmp_path / "b.png")] if command == "boundary" else []
    res = runner.invoke(app, [command, *CALL, *LATE, *extra])
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split())
    assert "warning: dividend 1 at 2027-06-01 ignored: its ex-date is after expiry" in text


def test_boundary_refuses_an_ex_date_before_valuation_naming_the_field(tmp_path: Path) -> None:
    res = runner.invoke(app, ["boundary", *CALL, "--expiry", "0.5", "--valuation-date",
                              "2026-12-01", "--dividend", "2026-11-30:1",
                              "--out", str(tmp_path / "b.png")])
    assert res.exit_code == 2
    assert "dividends='2026-11-30'" in res.output and "before the valuation date" in res.output
    assert "Traceback" not in res.output and not (tmp_path / "b.png").exists()


# ------------------------------------------------------------------ implied: CSV columns


def _implied_row(**kw: object) -> dict[str, object]:
    out: dict[str, object] = {"id": "QX1", "kind": "call", "style": "american", "spot": 80.0,
                              "strike": 82.0, "expiry": 0.5, "rate": 0.06, "quote": 0.0,
                              "dividends": "0.25:4", "dividend_model": "escrowed"}
    out.update(kw)
    return out


def test_implied_reads_dividends_and_the_dividend_model(tmp_path: Path) -> None:
    # Round trip (common practice): quotes priced by the library at vol 0.27 with a cash
    # dividend under each model give back 0.27 through the CSV; the inversion reproduces
    # price() to 1e-10 x strike (README), so the vol to about 1e-8.
    rows = []
    for model in ("spot", "escrowed"):
        mkt = Market(80.0, 0.06, 0.27, dividends=[(0.25, 4.0)], dividend_model=model)
        q = price(Option("call", 82.0, 0.5), mkt).price
        rows.append(_implied_row(id=f"QX-{model}", quote=f"{q:.12f}", dividend_model=model))
    plain = price(Option("call", 82.0, 0.5), Market(80.0, 0.06, 0.27)).price
    # a dividend after expiry (1.0 > 0.5) is ignored with a note; the model is the default
    rows.append(_implied_row(id="QX-late", quote=f"{plain:.12f}", dividends="1.0:4",
                             dividend_model=""))
    src = _write(tmp_path / "q.csv", rows)
    res = runner.invoke(app, ["implied", str(src), "--out", str(tmp_path / "o"), "--workers", "1"])
    assert res.exit_code == 0, res.output
    out = {r["id"]: r for r in _read(tmp_path / "o" / "implied.csv")}
    for key in ("QX-spot", "QX-escrowed", "QX-late"):
        assert out[key]["status"] == "ok", out[key]
        assert float(out[key]["implied_vol"]) == pytest.approx(0.27, abs=1e-7)
    assert "after expiry" in out["QX-late"]["note"]
    assert out["QX-spot"]["dividends"] == "0.25:4"  # carried through as written
    # the two models give different prices at the same vol, so the column is really used
    spot_q, esc_q = (float(out[k]["quote"]) for k in ("QX-spot", "QX-escrowed"))
    assert abs(spot_q - esc_q) > 1e-3


@pytest.mark.parametrize(
    ("cells", "field"),
    [({"dividend_model": "forward"}, "dividend_model"), ({"dividends": "0.25=4"}, "dividends"),
     ({"dividends": "-0.1:4"}, "dividends")],
)
def test_implied_bad_dividend_cells_are_error_rows_naming_the_field(
    tmp_path: Path, cells: dict[str, str], field: str
) -> None:
    good = _implied_row(id="ok", quote="3.0")
    bad = _implied_row(id="bad", quote="3.0", **cells)
    src = _write(tmp_path / "q.csv", [good, bad])
    res = runner.invoke(app, ["implied", str(src), "--out", str(tmp_path / "o"), "--workers", "1"])
    assert res.exit_code == 1
    out = _read(tmp_path / "o" / "implied.csv")
    assert [r["id"] for r in out] == ["ok", "bad"]
    assert out[0]["status"] == "ok" and out[1]["status"] == "error"
    assert f"{field}=" in out[1]["note"]


# ------------------------------------------------------------------ crosscheck: CSV columns


def _book_row(**kw: object) -> dict[str, str]:
    out = {"id": "BK1", "kind": "call", "style": "american", "spot": "100", "strike": "95",
           "expiry": "1.0", "rate": "0.05", "vol": "0.3", "quote": "", "div_yield": "0",
           "dividends": "0.5:6", "dividend_model": "", "valuation_date": "", "quote_vol": ""}
    out.update({k: str(v) for k, v in kw.items()})
    return out


def test_crosscheck_reads_the_dividend_model_column() -> None:
    # A quote from the escrowed model (Roll 1977; Geske 1979; Whaley 1981 model of a cash
    # dividend) is in line when the row says so, and is explained by the other model when the
    # row leaves the default (spot) model.
    esc = Market(100.0, 0.05, 0.3, dividends=[(0.5, 6.0)], dividend_model="escrowed")
    quote = price(Option("call", 95.0, 1.0), esc).price
    said = check_row(_book_row(quote=f"{quote:.10f}", dividend_model="escrowed"))
    assert said.status == "ok" and said.note == ""
    assert said.model_price == pytest.approx(quote, abs=1e-12)
    unsaid = check_row(_book_row(quote=f"{quote:.10f}"))
    assert unsaid.status == "mismatch" and "dividend_model" in unsaid.causes
    assert "escrowed dividend model instead of the spot model" in unsaid.note
    # and the other way round: a spot-model quote on an escrowed row points to the spot model
    spot_q = price(Option("call", 95.0, 1.0), Market(100.0, 0.05, 0.3, dividends=[(0.5, 6.0)])).price
    back = check_row(_book_row(quote=f"{spot_q:.10f}", dividend_model="escrowed"))
    assert back.status == "mismatch" and "dividend_model" in back.causes
    assert "spot dividend model instead of the escrowed model" in back.note


def test_crosscheck_bad_dividend_model_is_an_error_naming_the_field() -> None:
    chk = check_row(_book_row(quote="10", dividend_model="forward"))
    assert chk.status == "error" and "dividend_model='forward'" in chk.note


def test_crosscheck_notes_a_dividend_after_expiry(tmp_path: Path) -> None:
    # The row is priced without it (as the library does) and the note says so, in
    # results.csv too, so the reader of the book sees why the dividend made no difference.
    plain = price(Option("call", 95.0, 1.0), Market(100.0, 0.05, 0.3)).price
    chk = check_row(_book_row(quote=f"{plain:.10f}", dividends="1.5:6"))
    assert chk.status == "ok" and chk.model_price == pytest.approx(plain, abs=1e-12)
    assert "dividend 6 at 1.5y ignored: its ex-date is after expiry" in chk.note
    # a mismatch keeps its diagnosis and adds the same remark
    off = check_row(_book_row(quote=f"{plain + 1.0:.10f}", dividends="1.5:6"))
    assert off.status == "mismatch" and off.note.endswith("ignored: its ex-date is after expiry")
    src = _write(tmp_path / "book.csv", [_book_row(quote=f"{plain:.10f}", dividends="1.5:6")])
    res = runner.invoke(app, ["crosscheck", str(src), "--out", str(tmp_path / "o"),
                              "--workers", "1"])
    assert res.exit_code == 0, res.output
    (row,) = _read(tmp_path / "o" / "results.csv")
    assert row["status"] == "ok" and "after expiry" in row["note"]
    assert not math.isnan(float(row["model_price"]))
