"""``stopline implied``: the CSV of answers, the smile plot and the exit codes."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stopline import Market, Option, price
from stopline.cli import app
from stopline.cli import implied as implied_cli
from stopline.cli._common import CAUTION

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "chain_quotes.csv"
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"

runner = CliRunner()


@pytest.fixture
def figures(monkeypatch: pytest.MonkeyPatch) -> list:
    """Collect the figures the command draws."""
    made: list = []
    real = implied_cli.smile_figure

    def spy(outcomes, title):  # noqa: ANN001, ANN202
        fig = real(outcomes, title)
        made.append(fig)
        return fig

    monkeypatch.setattr(implied_cli, "smile_figure", spy)
    return made


def _write(path: Path, header: list[str], rows: list[list[object]]) -> Path:
    with path.open("w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return path


def _read(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as fh:
        return list(csv.DictReader(fh))


def _quote(kind: str, s: float, k: float, t: float, r: float, v: float, q: float = 0.0) -> str:
    return f"{price(Option(kind, k, t), Market(s, r, v, q)).price:.10f}"


def test_small_chain_rows_kept_in_order_with_errors(tmp_path: Path, figures: list) -> None:
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "quote", "desk"]
    rows = [
        ["a", "put", "american", 100, 90, 0.5, 0.05, _quote("put", 100, 90, 0.5, 0.05, 0.30), "x"],
        ["b", "put", "american", 100, 100, 0.5, 0.05, _quote("put", 100, 100, 0.5, 0.05, 0.25), "y"],
        ["c", "call", "american", 100, 110, 1.0, 0.05, _quote("call", 100, 110, 1.0, 0.05, 0.22), "z"],
        ["bad-spot", "put", "american", -5, 100, 0.5, 0.05, "3.0", "w"],
        ["bad-quote", "put", "american", 100, 120, 0.5, 0.05, "19.0", "v"],  # intrinsic 20
        ["bad-kind", "straddle", "american", 100, 100, 0.5, 0.05, "5.0", "u"],
        ["no-quote", "call", "american", 100, 100, 0.5, 0.05, "", "t"],
    ]
    src = _write(tmp_path / "q.csv", header, rows)
    out = tmp_path / "out"
    res = runner.invoke(app, ["implied", str(src), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 1, res.output
    got = _read(out / "implied.csv")
    assert [r["id"] for r in got] == [r[0] for r in rows]
    assert list(got[0]) == header + ["implied_vol", "status", "note"]
    assert [r["desk"] for r in got] == ["x", "y", "z", "w", "v", "u", "t"]
    for r, vol in zip(got[:3], (0.30, 0.25, 0.22), strict=True):
        assert r["status"] == "ok" and r["note"] == ""
        assert abs(float(r["implied_vol"]) - vol) <= 1e-6
    by_id = {r["id"]: r for r in got}
    assert by_id["bad-spot"]["status"] == "error" and "spot=-5.0" in by_id["bad-spot"]["note"]
    assert "below the intrinsic value 20" in by_id["bad-quote"]["note"]
    assert "kind='straddle'" in by_id["bad-kind"]["note"]
    assert "quote" in by_id["no-quote"]["note"] and "missing" in by_id["no-quote"]["note"]
    assert all(by_id[i]["implied_vol"] == "" for i in ("bad-spot", "bad-quote", "bad-kind"))
    # the person reading the terminal sees the errors and the caution
    flat = " ".join(res.output.split())
    assert "3 ok, 4 error" in flat and "bad-quote" in flat
    assert " ".join(CAUTION.split()) in flat
    # smile: a real PNG; two expiries among the good rows -> two lines
    png = (out / "smile.png").read_bytes()
    assert png[:8] == PNG_MAGIC and len(png) > 1000
    (fig,) = figures
    ax = fig.axes[0]
    assert len(ax.get_lines()) == 2
    assert ax.get_xlabel().startswith("strike") and "%" in ax.get_ylabel()
    assert ax.get_title()
    assert any(CAUTION in t.get_text() for t in fig.texts)
    assert not list(out.glob(".*"))  # no temporary files left behind


def test_example_chain_in_parallel_recovers_its_smile(tmp_path: Path, figures: list) -> None:
    # The example's quotes are stopline prices at the vol in ``generating_vol``, rounded to
    # 4 decimals: the vol comes back to within 0.5e-4 / vega (plus the search tolerance).
    out = tmp_path / "out"
    res = runner.invoke(app, ["implied", str(EXAMPLE), "--out", str(out), "--workers", "2"])
    assert res.exit_code == 1, res.output  # two planted bad rows
    src = _read(EXAMPLE)
    got = _read(out / "implied.csv")
    assert [r["id"] for r in got] == [r["id"] for r in src]
    errors = [r for r in got if r["status"] == "error"]
    assert {r["id"] for r in errors} == {"QTDE-270319-P110-BAD", "QTDE-270618-C9O-BAD"}
    assert any("strike='9O'" in r["note"] for r in errors)
    checked = 0
    for r in got:
        if r["status"] != "ok":
            continue
        k, s, rate, q = float(r["strike"]), float(r["spot"]), float(r["rate"]), float(r["div_yield"])
        opt = Option(r["kind"], k, r["expiry"])
        v = float(r["generating_vol"])
        mkt = Market(s, rate, v, q, r["valuation_date"])
        h = 1e-4
        up = price(opt, Market(s, rate, v + h, q, r["valuation_date"])).price
        dn = price(opt, Market(s, rate, v - h, q, r["valuation_date"])).price
        vega = (up - dn) / (2 * h)
        assert abs(float(r["implied_vol"]) - v) <= 0.5e-4 / vega + 1e-6, (r, vega)
        assert mkt.vol == v
        checked += 1
    assert checked == 33
    (fig,) = figures
    assert len(fig.axes[0].get_lines()) == 3  # three expiries
    assert (out / "smile.png").read_bytes()[:8] == PNG_MAGIC


def test_all_good_rows_exit_zero(tmp_path: Path) -> None:
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "div_yield", "quote",
              "valuation_date"]
    q = _quote("put", 50, 50, 0.25, 0.03, 0.4, 0.01)
    rows = [["p1", "put", "american", 50, 50, 0.25, 0.03, 0.01, q, ""],
            ["p2", "put", "european", 50, 55, "2027-03-01", 0.03, "", 6.0, "2026-12-01"]]
    out = tmp_path / "o"
    res = runner.invoke(app, ["implied", str(_write(tmp_path / "q.csv", header, rows)),
                              "--out", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.output
    got = _read(out / "implied.csv")
    assert abs(float(got[0]["implied_vol"]) - 0.4) <= 1e-6
    assert got[1]["status"] == "ok" and 0.0 < float(got[1]["implied_vol"]) < 5.0


def test_date_expiry_without_valuation_date_names_the_field(tmp_path: Path) -> None:
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "quote"]
    rows = [["d", "call", "american", 100, 100, "2027-06-01", 0.03, 5.0]]
    out = tmp_path / "o"
    res = runner.invoke(app, ["implied", str(_write(tmp_path / "q.csv", header, rows)),
                              "--out", str(out), "--workers", "1"])
    assert res.exit_code == 1
    (row,) = _read(out / "implied.csv")
    assert row["status"] == "error" and "valuation_date" in row["note"]


def test_ragged_row_is_kept_as_an_error(tmp_path: Path) -> None:
    path = tmp_path / "q.csv"
    path.write_text("id,kind,style,spot,strike,expiry,rate,quote\n"
                    "short,put,american,100,100\n"
                    "long,put,american,100,100,0.5,0.05,5,extra\n")
    out = tmp_path / "o"
    res = runner.invoke(app, ["implied", str(path), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 1
    short, long_ = _read(out / "implied.csv")
    assert short["status"] == "error" and "fewer fields" in short["note"]
    assert long_["status"] == "error" and "more fields" in long_["note"]


def test_missing_column_is_a_clean_error(tmp_path: Path) -> None:
    path = _write(tmp_path / "q.csv", ["id", "kind", "spot"], [["a", "put", 100]])
    res = runner.invoke(app, ["implied", str(path), "--out", str(tmp_path / "o")])
    assert res.exit_code == 2
    assert "no column" in res.output and "strike" in res.output
    assert "Traceback" not in res.output


def test_missing_file_is_a_clean_error(tmp_path: Path) -> None:
    res = runner.invoke(app, ["implied", str(tmp_path / "nope.csv"), "--out", str(tmp_path)])
    assert res.exit_code == 2 and "nope.csv" in res.output


def test_smile_figure_without_any_good_row() -> None:
    bad = implied_cli.RowOutcome(math.nan, "error", "spot='x': must be a number")
    fig = implied_cli.smile_figure([bad], "empty")
    assert len(fig.axes[0].get_lines()) == 0
    assert any("no implied vol" in t.get_text() for t in fig.axes[0].texts)


def test_cash_dividends_column_is_read(tmp_path: Path) -> None:
    # common practice: the quote of an option on a stock paying a cash dividend inverts to the
    # vol it was priced at only if the dividend is in the model; without the column the vol
    # comes out different (so the column is read, not carried through unused)
    mkt = Market(100.0, 0.03, 0.3, dividends="0.2:2.5")
    q = f"{price(Option('put', 100.0, 0.5), mkt).price:.10f}"
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "dividends", "quote"]
    rows = [["div", "put", "american", 100, 100, 0.5, 0.03, "0.2:2.5", q],
            ["none", "put", "american", 100, 100, 0.5, 0.03, "", q],
            ["bad", "put", "american", 100, 100, 0.5, 0.03, "0.2:-1", q]]
    out = tmp_path / "o"
    res = runner.invoke(app, ["implied", str(_write(tmp_path / "q.csv", header, rows)),
                              "--out", str(out), "--workers", "1"])
    assert res.exit_code == 1, res.output
    div, none, bad = _read(out / "implied.csv")
    assert div["status"] == "ok" and abs(float(div["implied_vol"]) - 0.3) <= 1e-6
    assert none["status"] == "ok" and float(none["implied_vol"]) - 0.3 > 0.01
    assert bad["status"] == "error" and bad["note"].startswith("dividends=")
    assert bad["dividends"] == "0.2:-1"  # carried through as written


def test_column_named_twice_is_refused(tmp_path: Path) -> None:
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "quote", "spot"]
    path = _write(tmp_path / "q.csv", header, [["a", "put", "american", 100, 100, 0.5, 0.05, 5, 90]])
    res = runner.invoke(app, ["implied", str(path), "--out", str(tmp_path / "o")])
    assert res.exit_code == 2 and "twice" in res.output and "spot" in res.output
    assert "Traceback" not in res.output and not (tmp_path / "o").exists()


def test_default_uses_all_cores_and_shows_progress(tmp_path: Path) -> None:
    import os

    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "quote"]
    rows = [[f"r{i}", "put", "american", 100, k, 0.5, 0.05, _quote("put", 100, k, 0.5, 0.05, 0.3)]
            for i, k in enumerate((90.0, 100.0, 110.0))]
    res = runner.invoke(app, ["implied", str(_write(tmp_path / "q.csv", header, rows)),
                              "--out", str(tmp_path / "o")])
    assert res.exit_code == 0, res.output
    workers = min(os.cpu_count() or 1, len(rows))
    assert f"{workers} worker(s)" in " ".join(res.output.split())
    assert "implied vols" in res.stderr and "3/3" in res.stderr  # the progress bar, on stderr


def test_smile_line_goes_through_the_out_of_the_money_quote(tmp_path: Path, figures: list) -> None:
    # a put and a call at each strike, two vols: the line takes the put below the spot and
    # the call above it; the in-the-money ones are open markers off the line
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "quote"]
    rows = []
    for k in (90.0, 110.0):
        for kind in ("put", "call"):
            otm = (kind == "put") == (k < 100.0)
            v = 0.30 if otm else 0.40
            rows.append([f"{kind}{k:g}", kind, "american", 100, k, 0.5, 0.03,
                         _quote(kind, 100, k, 0.5, 0.03, v)])
    res = runner.invoke(app, ["implied", str(_write(tmp_path / "q.csv", header, rows)),
                              "--out", str(tmp_path / "o"), "--workers", "1"])
    assert res.exit_code == 0, res.output
    (fig,) = figures
    ax = fig.axes[0]
    (line,) = ax.get_lines()
    assert list(line.get_xdata()) == [90.0, 110.0]
    assert [round(y, 4) for y in line.get_ydata()] == [30.0, 30.0]
    off = [tuple(p) for c in ax.collections for p in c.get_offsets()]
    assert sorted((x, round(y, 4)) for x, y in off) == [(90.0, 40.0), (110.0, 40.0)]


def test_unusable_out_folder_is_a_clean_error(tmp_path: Path) -> None:
    header = ["id", "kind", "style", "spot", "strike", "expiry", "rate", "quote"]
    src = _write(tmp_path / "implied.csv", header, [["a", "put", "american", 100, 100, 0.5, 0.05, 5]])
    before = src.read_text()
    # --out is a file
    res = runner.invoke(app, ["implied", str(src), "--out", str(src)])
    assert res.exit_code == 2 and "--out=" in res.output and "cannot hold" in res.output
    # --out would overwrite the quotes themselves
    res = runner.invoke(app, ["implied", str(src), "--out", str(tmp_path)])
    assert res.exit_code == 2 and "would overwrite the quotes file" in res.output
    assert src.read_text() == before and "Traceback" not in res.output
