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


def _tiny_run(passed: bool):
    """A hand-made run with one check, to drive the exit code both ways."""
    import numpy as np

    from stopline.validation import (
        Check,
        ConvergenceCurve,
        ErrorMap,
        FrontierPoint,
        Section,
        ValidationRun,
    )

    check = Check("hand-made check", "common practice", 2.0 if not passed else 0.5, 1.0,
                  passed, "made in the test")
    emap = ErrorMap("tiny", np.array([0.9, 1.1]), np.array([0.5, 1.0]),
                    np.array([[1e-7, 2e-7], [3e-7, 4e-7]]))
    curve = ConvergenceCurve("prices", np.array([8.0, 16.0]), np.array([1e-3, 2.5e-4]), 2.0)
    gamma = ConvergenceCurve("gamma, hand-made", np.array([8.0, 16.0]), np.array([1e-2, 2.5e-3]),
                             2.0)
    point = FrontierPoint("PDE (stopline, method 'direct')", "fast", 1e-4, 1e-5, 1e-4, 1e-6)
    return ValidationRun((Section("european", "one", "one check", (check,)),), (curve, gamma),
                         emap, (point,), True, 0.1, "2026-12-02T00:00:00+00:00", {})


def test_validate_exits_1_when_a_check_fails(tmp_path, monkeypatch) -> None:
    # The issue: the command exits non-zero if any check fails (and 0 when all pass); the
    # files are written either way, so the failure can be read.
    import stopline.validation as validation

    for passed, code in ((False, 1), (True, 0)):
        monkeypatch.setattr(validation, "run_validation",
                            lambda quick=False, progress=None, p=passed: _tiny_run(p))
        out = tmp_path / f"val-{passed}"
        res = runner.invoke(app, ["validate", "--out", str(out)])
        assert res.exit_code == code, res.output
        summ = json.loads((out / "summary.json").read_text())
        assert summ["passed"] is passed and summ["n_failed"] == (0 if passed else 1)
        assert ("FAILED: hand-made check" in res.output) is not passed
        assert f"{int(passed)} of 1 checks passed" in res.output
        assert (out / "report.html").exists()
