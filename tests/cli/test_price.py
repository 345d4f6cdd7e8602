"""`stopline price` through typer's CliRunner: the text a person reads and the exit codes."""

from __future__ import annotations

import json

import pytest
from typer.testing import CliRunner

from stopline.cli import app

runner = CliRunner()
BASE = ["price", "--kind", "put", "--spot", "50", "--strike", "50", "--expiry", "0.416666666667",
        "--rate", "0.1", "--vol", "0.4"]


def test_price_table_shows_answers_and_caution() -> None:
    res = runner.invoke(app, BASE)
    assert res.exit_code == 0, res.output
    # Source: Hull's textbook American put example, 4.2842 (from memory)
    assert "4.2842" in res.output
    for word in ("delta", "gamma", "theta", "grid", "ACT/365F", "not investment advice"):
        assert word in res.output


def test_price_json_has_inputs_and_answers() -> None:
    res = runner.invoke(app, [*BASE, "--json", "--accuracy", "fast"])
    assert res.exit_code == 0
    obj = json.loads(res.stdout)
    for key in ("price", "delta", "gamma", "theta", "error_estimate", "spot", "strike", "vol", "rate"):
        assert key in obj
    assert obj["price"] == pytest.approx(4.2842, abs=2e-3)


@pytest.mark.parametrize(
    "change,needle",
    [
        (["--vol", "-0.4"], "vol=-0.4"),
        (["--vol", "abc"], "--vol"),
        (["--strike", "0"], "strike=0.0"),
        (["--expiry", "-1"], "expiry=-1.0"),
        (["--kind", "pot"], "--kind"),
        (["--expiry", "2020-01-01", "--valuation-date", "2021-01-01"], "before the valuation date"),
    ],
)
def test_bad_input_exits_nonzero_with_one_clear_line(change: list[str], needle: str) -> None:
    args = list(BASE)
    for i in range(0, len(change), 2):
        if change[i] in args:
            args[args.index(change[i]) + 1] = change[i + 1]
        else:
            args += change[i : i + 2]
    res = runner.invoke(app, args)
    assert res.exit_code != 0
    assert needle in res.output
    assert "Traceback" not in res.output


def test_price_shows_how_a_degenerate_input_was_answered() -> None:
    # a put below the perpetual critical spot (Merton 1973) at vol 1 % is exercised at once:
    # the table says so in a warning line and the JSON lists it
    args = ["price", "--kind", "put", "--spot", "90", "--strike", "100", "--expiry", "5",
            "--rate", "0.08", "--vol", "0.01"]
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.output
    assert "warning:" in res.output and "perpetual" in res.output
    assert "10.000000" in res.output
    obj = json.loads(runner.invoke(app, [*args, "--json"]).stdout)
    assert any("perpetual" in w for w in obj["warnings"])
