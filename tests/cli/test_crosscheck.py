"""``stopline crosscheck`` and ``stopline demo`` through typer's CliRunner."""

from __future__ import annotations

import csv

from typer.testing import CliRunner

from stopline.cli import app
from stopline.cli._common import CAUTION

from ..test_crosscheck import model, row, small_book, write_book

runner = CliRunner()


def flat(text: str) -> str:
    return " ".join(text.split())


def test_crosscheck_writes_files_and_exits_1_when_a_row_is_in_error(tmp_path):
    book = small_book(tmp_path)
    out = tmp_path / "out"
    res = runner.invoke(app, ["crosscheck", str(book), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 1, res.output
    assert (out / "results.csv").exists() and (out / "report.html").exists()
    text = flat(res.stdout)
    assert "ok │ 6" in text and "mismatch │ 1" in text and "error │ 1" in text
    assert "priced as European" in text
    assert flat(CAUTION) in text
    assert "1 row(s) in error" in res.stderr
    assert "Traceback" not in res.output


def test_clean_book_exits_0(tmp_path):
    good = row(id="G")
    good["quote"] = f"{model(good):.6f}"
    off = row(id="M", strike="110")
    off["quote"] = f"{model(off) + 1.0:.6f}"
    res = runner.invoke(app, ["crosscheck", str(write_book(tmp_path / "b.csv", [good, off])),
                              "--out", str(tmp_path / "o1"), "--workers", "1"])
    assert res.exit_code == 0, res.output  # a mismatch is not an error
    assert "ok │ 1" in flat(res.stdout) and "mismatch │ 1" in flat(res.stdout)


def test_tolerance_options(tmp_path):
    book = small_book(tmp_path)
    res = runner.invoke(app, ["crosscheck", str(book), "--out", str(tmp_path / "o"), "--workers",
                              "1", "--price-tolerance", "5", "--vol-tolerance", "0"])
    with (tmp_path / "o" / "results.csv").open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert res.exit_code == 1
    assert {r["status"] for r in rows} == {"ok", "error"}
    assert all(float(r["tolerance"]) == 5.0 for r in rows if r["status"] == "ok")


def test_missing_column_is_one_line_exit_2(tmp_path):
    p = tmp_path / "q.csv"
    p.write_text("id,kind,style,spot,strike,expiry,rate,vol\n")
    res = runner.invoke(app, ["crosscheck", str(p), "--out", str(tmp_path / "o")])
    assert res.exit_code == 2
    assert res.stderr.strip().count("\n") == 0
    assert "lacks required column(s): quote" in res.stderr
    assert "Traceback" not in res.output


def test_resume_option_after_interrupt(tmp_path, monkeypatch):
    import stopline.crosscheck as cc

    book = small_book(tmp_path, n_ok=8)
    out = tmp_path / "out"
    real = cc.check_rows
    calls = {"n": 0}

    def flaky(rows, settings):  # test hook: Ctrl-C after the second chunk
        calls["n"] += 1
        if calls["n"] > 2:
            raise KeyboardInterrupt
        return real(rows, settings)

    monkeypatch.setattr(cc, "check_rows", flaky)
    res = runner.invoke(app, ["crosscheck", str(book), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 130
    assert "--resume" in res.stderr and (out / "partial.json").exists()
    monkeypatch.setattr(cc, "check_rows", real)
    res = runner.invoke(app, ["crosscheck", str(book), "--out", str(out), "--workers", "1", "--resume"])
    assert res.exit_code == 1  # the book has one bad row
    assert "8 rows priced" in flat(res.stdout)  # 10 rows, 2 kept from the first run
    assert not (out / "partial.json").exists()


def test_demo_finds_every_planted_problem(tmp_path):
    out = tmp_path / "demo"
    res = runner.invoke(app, ["demo", "--out", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.output
    assert "report.html" in flat(res.stdout) and flat(CAUTION) in flat(res.stdout)
    with (out / "results.csv").open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    expected = {"european": "european", "no_dividends": "no_dividends", "act360": "act360"}
    for r in rows:
        planted, status, note = r["planted"], r["status"], r["note"]
        if planted == "":
            assert status == "ok", (r["id"], note)  # clean quotes carry noise far inside tolerance
        elif planted == "error":
            assert status == "error"
        elif planted == "unexplained":
            assert status == "mismatch" and note.startswith("no simple cause found")
        elif planted == "vol":
            assert status == "mismatch"
            assert ("different volatility" in note) or ("third party's own vol" in note)
        else:
            assert status == "mismatch" and note.startswith("reproduced by")
            assert {"european": "European", "no_dividends": "dividends left out",
                    "act360": "ACT/360"}[planted] in note.split(";")[0], note
    assert set(expected) <= {r["planted"] for r in rows}
    assert sum(r["status"] == "error" for r in rows) == 7
    assert any(r["comment"].startswith("'=") for r in rows)  # escaped on the way out
