"""``stopline price --dividend ... --dividend-model ...`` through typer's CliRunner."""

from __future__ import annotations

import json

import pytest
from typer.testing import CliRunner

from stopline import Market, Option, price
from stopline.cli import app
from stopline.cli._common import CAUTION

BASE = ["price", "--kind", "call", "--spot", "80", "--strike", "82", "--expiry", "0.3333",
        "--rate", "0.06", "--vol", "0.3", "--accuracy", "fast"]


def _run(*args: str):
    return CliRunner().invoke(app, [*BASE, *args])


def test_dividends_reach_the_library_and_the_json() -> None:
    res = _run("--dividend", "0.25:4", "--dividend", "0.30:0.5", "--dividend-model", "escrowed",
               "--json")
    assert res.exit_code == 0, res.output
    rec = json.loads(res.output)
    lib = price(Option("call", 82.0, 0.3333),
                Market(80.0, 0.06, 0.3, dividends=[(0.25, 4.0), (0.30, 0.5)],
                       dividend_model="escrowed"), accuracy="fast")
    assert rec["price"] == lib.price
    assert rec["dividends"] == [{"ex_date": 0.25, "amount": 4.0}, {"ex_date": 0.3, "amount": 0.5}]
    assert rec["dividend_model"] == "escrowed"


def test_semicolon_list_and_dates_in_the_table() -> None:
    res = _run("--dividend", "2027-01-15:1.5;2027-09-01:2", "--valuation-date", "2026-12-01")
    assert res.exit_code == 0, res.output
    assert "cash dividend" in res.output and "2027-01-15" in res.output
    assert "after expiry" in res.output  # the September dividend falls after expiry
    assert " ".join(CAUTION.split()[:4]) in " ".join(res.output.split())


@pytest.mark.parametrize("text", ["0.25", "0.25:-1", "someday:1"])
def test_bad_dividend_is_one_line_naming_the_field(text: str) -> None:
    res = _run("--dividend", text)
    assert res.exit_code == 2
    assert "dividends=" in res.output and "Traceback" not in res.output


def test_ex_date_before_valuation_is_refused() -> None:
    res = _run("--dividend", "2026-11-01:1", "--valuation-date", "2026-12-01")
    assert res.exit_code == 2
    assert "before the valuation date" in res.output
