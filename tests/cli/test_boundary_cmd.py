"""``stopline boundary`` and ``stopline price --plot`` through typer's CliRunner."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from stopline import Market, Option, price
from stopline.cli import app

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
CONTRACT = ["--kind", "put", "--spot", "100", "--strike", "100", "--rate", "0.05", "--vol", "0.3"]


@pytest.fixture
def runner() -> CliRunner:
    return CliRunner()


def test_boundary_writes_png_and_csv(runner: CliRunner, tmp_path: Path) -> None:
    # common practice: the CSV holds the library's boundary, from valuation to expiry, dated.
    png, table = tmp_path / "b.png", tmp_path / "b.csv"
    args = ["boundary", *CONTRACT, "--expiry", "2027-06-18", "--valuation-date", "2026-12-01",
            "--div-yield", "0.01", "--out", str(png), "--csv", str(table)]
    r = runner.invoke(app, args)
    assert r.exit_code == 0, r.output
    assert png.read_bytes()[:8] == PNG_MAGIC
    assert "critical spot today" in r.output and "model-risk policy" in r.output
    rows = list(csv.DictReader(table.open()))
    res = price(Option("put", 100.0, "2027-06-18"),
                Market(100.0, 0.05, 0.3, 0.01, valuation_date="2026-12-01"))
    assert len(rows) == res.boundary.spot.size
    assert rows[0]["date"] == "2026-12-01" and rows[-1]["date"] <= "2027-06-18"
    spots = np.array([float(row["critical_spot"]) for row in rows])
    np.testing.assert_allclose(spots, res.boundary.spot[::-1], rtol=1e-9)
    assert np.all(np.diff(spots) >= 0)  # from valuation towards expiry a put's boundary rises
    assert not list(tmp_path.glob(".*tmp"))


def test_boundary_rejects_a_european_option(runner: CliRunner, tmp_path: Path) -> None:
    # common practice: bad input -> one line naming the field, exit 2, no traceback.
    r = runner.invoke(app, ["boundary", *CONTRACT, "--expiry", "1", "--style", "european",
                            "--out", str(tmp_path / "x.png")])
    assert r.exit_code == 2
    assert "style='european'" in r.output and "Traceback" not in r.output
    assert not (tmp_path / "x.png").exists()


def test_boundary_rejects_a_missing_folder(runner: CliRunner, tmp_path: Path) -> None:
    r = runner.invoke(app, ["boundary", *CONTRACT, "--expiry", "1",
                            "--out", str(tmp_path / "nope" / "x.png")])
    assert r.exit_code == 2 and "out=" in r.output and "does not exist" in r.output


def test_boundary_needs_a_valuation_date_with_a_date_expiry(runner: CliRunner, tmp_path: Path) -> None:
    r = runner.invoke(app, ["boundary", *CONTRACT, "--expiry", "2027-06-18",
                            "--out", str(tmp_path / "x.png")])
    assert r.exit_code == 2 and "valuation_date" in r.output


def test_price_shows_vega_and_rho_and_writes_plot(runner: CliRunner, tmp_path: Path) -> None:
    # Source: Black-Scholes (1973) closed form for the European vega and rho (tests/_bsm.py).
    from .._bsm import bsm

    fig = tmp_path / "p.png"
    args = ["price", *CONTRACT, "--expiry", "1", "--style", "european", "--json", "--plot", str(fig)]
    r = runner.invoke(app, args)
    assert r.exit_code == 0, r.output
    rec = json.loads(r.output)
    ex = bsm("put", 100.0, 100.0, 1.0, 0.05, 0.0, 0.3)
    assert rec["vega"] == pytest.approx(ex["vega"], rel=1e-3)
    assert rec["rho"] == pytest.approx(ex["rho"], rel=1e-3)
    assert rec["plot"] == str(fig) and fig.read_bytes()[:8] == PNG_MAGIC
    table = runner.invoke(app, ["price", *CONTRACT, "--expiry", "1"])
    assert table.exit_code == 0 and "vega" in table.output and "rho" in table.output


def test_boundary_takes_cash_dividends(runner: CliRunner, tmp_path: Path) -> None:
    # common practice: the same dividend flags as `stopline price`; rows match the library.
    png, table = tmp_path / "d.png", tmp_path / "d.csv"
    r = runner.invoke(app, ["boundary", *CONTRACT, "--expiry", "1", "--dividend", "0.3:1.5",
                            "--dividend", "0.8:1.5", "--out", str(png), "--csv", str(table)])
    assert r.exit_code == 0, r.output
    rows = list(csv.DictReader(table.open()))
    res = price(Option("put", 100.0, 1.0), Market(100.0, 0.05, 0.3, dividends=[(0.3, 1.5), (0.8, 1.5)]))
    got = np.array([float(row["critical_spot"]) if row["critical_spot"] else np.nan for row in rows])
    np.testing.assert_allclose(got, res.boundary.spot[::-1], rtol=1e-9)
    assert png.read_bytes()[:8] == PNG_MAGIC


def _pixels(path: Path) -> np.ndarray:
    import matplotlib.image as mpimg

    return np.asarray(mpimg.imread(path))


@pytest.mark.parametrize("method", ["direct", "psor"])
def test_boundary_in_years_with_either_solver(runner: CliRunner, tmp_path: Path, method: str) -> None:
    # common practice: without dates the CSV counts years from valuation (date column empty),
    # its points are the library's with the same solver, and the PNG decodes to the figure's
    # size (8 x 5.2 inches at 150 dpi).
    png, table = tmp_path / "y.png", tmp_path / "y.csv"
    r = runner.invoke(app, ["boundary", *CONTRACT, "--expiry", "0.75", "--method", method,
                            "--out", str(png), "--csv", str(table)])
    assert r.exit_code == 0, r.output
    rows = list(csv.DictReader(table.open()))
    res = price(Option("put", 100.0, 0.75), Market(100.0, 0.05, 0.3), method=method)
    assert all(row["date"] == "" for row in rows)
    years = np.array([float(row["years_from_valuation"]) for row in rows])
    np.testing.assert_allclose(years, 0.75 - res.boundary.time_to_expiry[::-1], rtol=0, atol=1e-9)
    got = np.array([float(row["critical_spot"]) for row in rows])
    np.testing.assert_allclose(got, res.boundary.spot[::-1], rtol=1e-9)
    assert f"critical spot today: {res.boundary.spot[-1]:.6g}" in r.output
    assert _pixels(png).shape[:2] == (780, 1200)


def test_price_plot_of_an_american_option(runner: CliRunner, tmp_path: Path) -> None:
    # common practice: `price --plot` writes the value/delta/gamma figure (7.5 x 8.5 inches at
    # 150 dpi) next to the usual table, which still carries the caution.
    fig = tmp_path / "v.png"
    r = runner.invoke(app, ["price", *CONTRACT, "--expiry", "0.5", "--method", "psor",
                            "--plot", str(fig)])
    assert r.exit_code == 0, r.output
    assert f"figure: {fig}" in r.output.replace("\n", "") and "model-risk" in r.output
    px = _pixels(fig)
    assert px.shape[:2] == (1275, 1125) and px[..., :3].std() > 0.05


def test_price_plot_rejects_a_missing_folder(runner: CliRunner, tmp_path: Path) -> None:
    # common practice: bad input -> one line naming the field, exit 2, no traceback.
    r = runner.invoke(app, ["price", *CONTRACT, "--expiry", "1", "--plot", str(tmp_path / "no" / "v.png")])
    assert r.exit_code == 2 and "plot=" in r.output and "Traceback" not in r.output


def test_boundary_takes_the_same_contract_and_market_flags_as_price() -> None:
    # common practice: one set of contract and market flags for both commands; each adds
    # only its own outputs (price: --json, --plot; boundary: --out, --csv).
    import typer.main

    commands = typer.main.get_command(app).commands
    flags = {name: {o for p in commands[name].params for o in p.opts} for name in ("price", "boundary")}
    assert flags["price"] - {"--json", "--plot"} == flags["boundary"] - {"--out", "--csv"}
    assert {"--kind", "--spot", "--strike", "--expiry", "--rate", "--vol", "--div-yield",
            "--valuation-date", "--dividend", "--dividend-model", "--accuracy",
            "--method"} <= flags["boundary"]
