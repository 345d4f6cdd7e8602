"""``stopline validate`` through typer's CliRunner."""

from __future__ import annotations

import json

from typer.testing import CliRunner

from stopline.cli import app
from stopline.cli._common import CAUTION

runner = CliRunner()


def test_validate_quick_writes_report_and_summary(tmp_path) -> None:
    out = tmp_path / "val"
    res = runner.invoke(app, ["validate", "--out", str(out), "--quick"])
    summ = json.loads((out / "summary.json").read_text())
    assert (out / "report.html").read_text().startswith("<!DOCTYPE html>")
    # exit code follows the verdict: 0 when every check passed, 1 otherwise
    assert res.exit_code == (0 if summ["passed"] else 1), res.output
    assert f"{summ['n_checks'] - summ['n_failed']} of {summ['n_checks']} checks passed" in res.output
    assert CAUTION in res.output
    for c in summ["checks"]:
        if not c["passed"]:
            assert f"FAILED: {c['name']}" in res.output


def test_validate_refuses_a_file_as_folder(tmp_path) -> None:
    f = tmp_path / "report.txt"
    f.write_text("x")
    res = runner.invoke(app, ["validate", "--out", str(f), "--quick"])
    assert res.exit_code == 2
    assert "out" in res.output and str(f) in res.output
    assert "Traceback" not in res.output


def test_validate_is_listed() -> None:
    res = runner.invoke(app, ["--help"])
    assert res.exit_code == 0 and "validate" in res.output
