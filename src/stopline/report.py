"""The cross-check report: one self-contained HTML file (figures embedded as base64 PNG).

It holds the summary (rows by status, the worst differences, the tolerance and conventions
used, the caution), a table of mismatches with their diagnoses, a table of rows in error, and
three figures from :mod:`stopline.plots_crosscheck`.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import math
from pathlib import Path

from .cli._common import CAUTION
from .crosscheck import CAUSE_LABELS, CrossCheckRun, RowCheck, write_atomic

__all__ = ["render_report", "write_report", "REPORT_NAME"]

REPORT_NAME = "report.html"
#: Rows listed under "worst differences".
WORST = 8

_STYLE = """
body { font-family: system-ui, sans-serif; margin: 2em auto; max-width: 70em; color: #222; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; margin-top: 1.6em; border-bottom: 1px solid #ccc; }
table { border-collapse: collapse; font-size: 0.85em; margin: 0.5em 0; }
th, td { border: 1px solid #ccc; padding: 0.2em 0.5em; text-align: left; vertical-align: top; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.id { white-space: nowrap; }
.caution { background: #fff6e0; border-left: 4px solid #d9a400; padding: 0.5em 1em; }
.figs img { width: 48%; min-width: 24em; margin: 0.3em; border: 1px solid #ddd; }
"""


def _e(x: object) -> str:
    return html.escape(str(x), quote=True)


def _n(x: float, digits: int = 4) -> str:
    return "" if math.isnan(x) else f"{x:.{digits}f}"


def _img(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return f'<img alt="{_e(alt)}" src="data:image/png;base64,{data}">'


def _row_table(run: CrossCheckRun, items: list[tuple[int, RowCheck]], with_numbers: bool) -> str:
    cols = ["row", "id", "kind", "style", "spot", "strike", "expiry"]
    if with_numbers:
        cols += ["quote", "model", "quote - model", "tolerance", "vol pts"]
    cols.append("note")
    out = ["<table><tr>" + "".join(f"<th>{_e(c)}</th>" for c in cols) + "</tr>"]
    for i, c in items:
        raw = run.rows[i]
        cells = [f'<td class="num">{i + 1}</td>']
        cells.append(f'<td class="id">{_e(raw.get("id") or "")}</td>')
        cells += [f"<td>{_e(raw.get(k) or '')}</td>" for k in ("kind", "style", "spot", "strike", "expiry")]
        if with_numbers:
            vp = 100.0 * c.vol_difference
            cells += [f'<td class="num">{v}</td>' for v in (
                _n(c.quote), _n(c.model_price), _n(c.difference), _n(c.tolerance), _n(vp, 2))]
        cells.append(f"<td>{_e(c.note)}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def render_report(run: CrossCheckRun, *, generated: _dt.datetime | None = None) -> str:
    """The report as an HTML string.

    Parameters
    ----------
    run : CrossCheckRun
        A finished cross-check.
    generated : datetime, optional
        Time stamp shown (default now, UTC).
    """
    from .plots_crosscheck import (
        difference_vs_moneyness_png,
        model_vs_quote_png,
        vol_points_histogram_png,
    )

    generated = generated or _dt.datetime.now(_dt.timezone.utc)
    counts = run.counts()
    tol = run.settings.tolerance
    indexed = list(enumerate(run.checks))
    mismatches = [(i, c) for i, c in indexed if c.status == "mismatch"]
    errors = [(i, c) for i, c in indexed if c.status == "error"]
    priced = [(i, c) for i, c in indexed if c.status != "error"]
    worst = sorted(priced, key=lambda ic: -abs(ic[1].difference))[:WORST]
    by_cause: dict[str, int] = {}
    for _, c in mismatches:
        for name in c.causes or ("",):
            label = CAUSE_LABELS.get(name, "no simple cause found")
            by_cause[label] = by_cause.get(label, 0) + 1
    total = len(run.checks)
    summary = "".join(
        f"<tr><th>{_e(s)}</th><td class=num>{counts[s]}</td></tr>" for s in ("ok", "mismatch", "error")
    )
    order = [*CAUSE_LABELS.values(), "no simple cause found"]
    causes = "".join(f"<tr><th>{_e(k)}</th><td class=num>{by_cause[k]}</td></tr>"
                     for k in order if k in by_cause)
    conventions = [
        "Model: Black-Scholes equation solved by Crank-Nicolson finite differences (stopline), "
        f"accuracy preset &quot;{_e(run.settings.accuracy)}&quot;, early exercise per each row's style.",
        "Times in years; from dates ACT/365 fixed. Rates and dividend yields continuously "
        "compounded; volatility annual, as a decimal.",
        f"Tolerance: |quote - model| &le; max({tol.price:g}, {tol.vol_points:g} vol points &times; vega), "
        "vega per unit of vol.",
        "Implied vol: the vol at which the model (same exercise style as the row) reproduces the quote.",
        "Diagnosis: a mismatch is re-priced as European (or American), without dividends, with "
        "ACT/360 time (date expiries) and with the third party's own vol; otherwise a different "
        f"vol explains it if the implied vol is within {100 * run.settings.max_vol_shift:g} vol points.",
    ]
    figs = [
        _img(model_vs_quote_png(run.checks), "Third-party quote against stopline model price"),
        _img(vol_points_histogram_png(run.checks, tol.vol_points), "Histogram of differences in vol points"),
        _img(difference_vs_moneyness_png(run.checks), "Price differences against moneyness"),
    ]
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        "<title>stopline cross-check report</title>",
        f"<style>{_STYLE}</style></head><body>",
        "<h1>stopline cross-check report</h1>",
        f"<p>Book <code>{_e(run.source)}</code>: {total} rows; generated "
        f"{_e(generated.strftime('%Y-%m-%d %H:%M UTC'))}; priced on {_e(run.workers)}.</p>",
        f'<p class="caution"><strong>Caution.</strong> {_e(CAUTION)}</p>',
        "<h2>Summary</h2>",
        f"<table><tr><th>status</th><th>rows</th></tr>{summary}</table>",
    ]
    if causes:
        parts.append("<table><tr><th>mismatches reproduced by (a row may have several)</th>"
                     f"<th>rows</th></tr>{causes}</table>")
    parts += ["<h3>Conventions and tolerance</h3><ul>"]
    parts += [f"<li>{c}</li>" for c in conventions]
    parts += ["</ul>", "<h3>Worst differences</h3>", _row_table(run, worst, True)]
    parts += ["<h2>Figures</h2>", '<div class="figs">', *figs, "</div>"]
    parts += [f"<h2>Mismatches ({len(mismatches)})</h2>"]
    parts.append(_row_table(run, mismatches, True) if mismatches else "<p>None.</p>")
    parts += [f"<h2>Rows in error ({len(errors)})</h2>"]
    parts.append(_row_table(run, errors, False) if errors else "<p>None.</p>")
    parts += [f'<p class="caution">{_e(CAUTION)}</p>', "</body></html>"]
    return "\n".join(parts) + "\n"


def write_report(run: CrossCheckRun, path: str | Path) -> Path:
    """Write :func:`render_report` to ``path`` atomically and return the path."""
    p = Path(path)
    write_atomic(p, render_report(run))
    return p
