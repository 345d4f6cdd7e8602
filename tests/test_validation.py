"""The validation harness on its reduced (quick) run: structure, sources, orders, report."""

from __future__ import annotations

import base64
import dataclasses
import json
from html.parser import HTMLParser

import pytest

from stopline.cli._common import CAUTION
from stopline.validation import ORDER_BAND, Check, run_validation
from stopline.validation_report import render_html, summary, write_report

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def run():
    return run_validation(quick=True)


class _Images(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.srcs: list[str] = []
        self.tags: list[str] = []

    def handle_starttag(self, tag: str, attrs: list) -> None:
        self.tags.append(tag)
        if tag == "img":
            self.srcs.append(dict(attrs)["src"])


def png_chunks(data: bytes) -> list[bytes]:
    """Chunk types of a PNG file, walking its length-prefixed chunks (PNG spec, W3C 2003)."""
    assert data[:8] == PNG_SIGNATURE
    pos, kinds = 8, []
    while pos < len(data):
        length = int.from_bytes(data[pos : pos + 4], "big")
        kinds.append(data[pos + 4 : pos + 8])
        pos += 12 + length
    assert pos == len(data)
    return kinds


def test_check_is_frozen() -> None:
    c = Check("x", "common practice", 1.0, 2.0, True, "")
    with pytest.raises(dataclasses.FrozenInstanceError):
        c.value = 3.0  # type: ignore[misc]


def test_summary_lists_every_check_with_a_source(run) -> None:
    s = json.loads(json.dumps(summary(run), allow_nan=False))
    assert s["mode"] == "quick"
    assert s["caution"] == CAUTION
    assert s["n_checks"] == len(s["checks"]) == len(run.checks) >= 40
    assert s["n_failed"] == sum(not c["passed"] for c in s["checks"])
    assert s["passed"] == (s["n_failed"] == 0)
    for c in s["checks"]:
        assert {"name", "source", "value", "tolerance", "passed"} <= set(c)
        assert c["name"].strip() and c["source"].strip()
        assert isinstance(c["passed"], bool)
        assert isinstance(c["value"], float) and isinstance(c["tolerance"], float)
    sections = {c["section"] for c in s["checks"]}
    assert sections == {"european", "convergence", "trees", "published", "identities",
                        "dividends", "sample"}


def test_published_checks_say_where_the_value_came_from(run) -> None:
    pubs = [c for c in run.checks if "published values" in c.name]
    assert len(pubs) == 5
    for c in pubs:
        assert "(recalled)" in c.source or "(seen)" in c.source


def test_order_checks_carry_slopes_in_band(run) -> None:
    # Source: second order of Crank-Nicolson with Rannacher start and graded steps (Rannacher
    # 1984; Forsyth & Vetzal 2002); band 1.8-2.2. "without" checks show the order is lost.
    orders = [c for c in run.checks if "order" in c.name]
    with_ = [c for c in orders if "without" not in c.name]
    without = [c for c in orders if "without" in c.name]
    assert len(with_) >= 5 and len(without) == 2
    for c in with_:
        assert ORDER_BAND[0] <= c.value <= ORDER_BAND[1], c
        assert c.passed
    for c in without:
        assert c.value < ORDER_BAND[0] and c.passed, c


def test_independent_sections_pass(run) -> None:
    # European presets against Black-Scholes, trees, published tables and identities: all
    # must hold. (The random-sample section is judged in the full run, the record.)
    for s in run.sections:
        if s.key != "sample":
            assert all(c.passed for c in s.checks), [c for c in s.checks if not c.passed]


def test_speed_accuracy_points(run) -> None:
    fams = {p.family for p in run.frontier}
    solvers = {"PDE (stopline, method 'direct')", "PDE (stopline, method 'direct-plain')"}
    assert solvers | {"Leisen-Reimer (extrapolated)", "CRR-BS (extrapolated)"} <= fams
    for family in solvers:
        pde = {p.setting: p for p in run.frontier if p.family == family}
        # each preset is more accurate than the one before (relative to the own fine grid)
        assert (pde["fast"].rms_rel_error > pde["standard"].rms_rel_error
                > pde["fine"].rms_rel_error), family
    assert all(p.seconds_per_option > 0 for p in run.frontier)


def test_report_parses_and_embeds_valid_pngs(run, tmp_path) -> None:
    report, summ = write_report(run, tmp_path / "out")
    text = report.read_text(encoding="utf-8")
    parser = _Images()
    parser.feed(text)
    assert len(parser.srcs) == 3
    for src in parser.srcs:
        assert src.startswith("data:image/png;base64,")
        kinds = png_chunks(base64.b64decode(src.split(",", 1)[1], validate=True))
        assert kinds[0] == b"IHDR" and kinds[-1] == b"IEND" and b"IDAT" in kinds
    assert CAUTION in text.replace("&#x27;", "'")
    assert "QUICK run" in text
    assert json.loads(summ.read_text())["n_checks"] == len(run.checks)
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["report.html", "summary.json"]


def test_failed_check_is_shown_in_report(run) -> None:
    bad = Check("deliberately failing", "common practice", 2.0, 1.0, False, "demo")
    sec = dataclasses.replace(run.sections[0], checks=run.sections[0].checks + (bad,))
    broken = dataclasses.replace(run, sections=(sec,) + run.sections[1:])
    assert not broken.passed and bad in broken.failed
    text = render_html(broken, {})
    assert "checks FAILED: " in text and "deliberately failing" in text
    assert summary(broken)["n_failed"] == len(run.failed) + 1


def test_published_tables_are_complete() -> None:
    # Geske & Johnson (1984) Table I: 3 strikes x 3 vols x 3 expiries; Broadie & Detemple
    # (1996) Table 1: 5 + 3 calls; HODIE (2018) Table 4: 7 puts (see REFERENCE_VALUES.md).
    from stopline._published import TABLES

    sizes = {t.key: len(t.cases) for t in TABLES}
    assert sizes == {"Geske-Johnson 1984": 27, "Hull example": 1, "Kim-Ma-Choe 2013": 5,
                     "Broadie-Detemple 1996": 8, "HODIE 2018": 7}
    assert all(t.provenance in ("recalled", "seen") for t in TABLES)


def test_full_sample_is_large_and_on_the_typical_domain() -> None:
    # The issue: a random sample of at least 500 contracts over the typical domain (the full
    # run's sample; the quick run uses 30 of the same draw).
    from stopline.validation import _sample

    full, quick = _sample(False), _sample(True)
    assert len(full) >= 500 and len(quick) < len(full)
    assert {c[0] for c in full} == {"put", "call"}
    for _kind, s, t, r, q, v in full:
        assert 70 <= s <= 130 and 0.05 <= t <= 3 and 0 <= r <= 0.1 and 0 <= q <= 0.08
        assert 0.1 <= v <= 0.6


def test_sample_reports_each_preset_with_errors_and_time(run) -> None:
    # The issue: RMS and max relative error of each preset, with the time taken, for the
    # default solver and, for comparison, the plain (unfitted) sweep, beside trees and both
    # approximations.
    from stopline.pricing import PRESETS

    for family in ("PDE (stopline, method 'direct')", "PDE (stopline, method 'direct-plain')"):
        pts = {p.setting: p for p in run.frontier if p.family == family}
        assert set(pts) == set(PRESETS)
        for p in pts.values():
            assert 0 < p.rms_rel_error <= p.max_rel_error and p.seconds_per_option > 0
    fams = {p.family for p in run.frontier}
    assert {"Barone-Adesi-Whaley 1987", "Bjerksund-Stensland 2002"} <= fams
    sample = next(s for s in run.sections if s.key == "sample")
    assert "RMS rel. error" in sample.tables[0].columns
    assert "ms / option" in sample.tables[0].columns


def test_error_map_spans_moneyness_and_expiry(run) -> None:
    em = run.error_map
    assert em.error.shape == (em.expiry.size, em.moneyness.size)
    assert em.moneyness.min() < 1.0 < em.moneyness.max() and em.expiry.size >= 3
    assert (em.error >= 0).all() and em.error.max() > 0


def test_curves_carry_the_order_checks_slopes(run) -> None:
    # The figure's fitted slopes are the values of the "order" checks they illustrate.
    order_values = {round(c.value, 12) for c in run.checks if "order" in c.name}
    for curve in run.curves:
        assert round(curve.slope, 12) in order_values, curve.label


def test_approximations_are_checked_as_approximations(run) -> None:
    # The issue: American PDE vs both approximations "with their known error sizes (they are
    # approximations: say so)"; and the reference methods against their own published
    # examples (Hull's CRR steps and Greeks, Barone-Adesi-Whaley and Bjerksund-Stensland
    # tables, the Roll-Geske-Whaley example).
    trees = next(s for s in run.sections if s.key == "trees")
    rel = [c for c in trees.checks if "approximation vs American PDE" in c.name]
    assert len(rel) == 2
    assert all("an approximation" in c.source for c in rel)
    names = " | ".join(c.name for c in run.checks)
    for prefix in ("reference CRR tree", "reference Barone-Adesi-Whaley",
                   "reference Bjerksund-Stensland (2002)", "reference Black-Scholes-Merton",
                   "reference Roll-Geske-Whaley"):
        assert prefix in names, prefix


def test_provenance_words_are_explained(run) -> None:
    # The issue: each published table says whether it is from memory. Sources say
    # "recalled" or "seen"; the summary and the report say what the words mean.
    from stopline.validation_report import PROVENANCE

    assert "'recalled' are from memory" in PROVENANCE and "'seen'" in PROVENANCE
    assert summary(run)["provenance"] == PROVENANCE
    text = render_html(run, {})
    assert "&#x27;recalled&#x27; are from memory" in text
