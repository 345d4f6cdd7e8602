"""A validation run for people and machines: a self-contained HTML report and a JSON summary.

The report embeds its figures as base64 PNG images (matplotlib, Agg backend), so the single
file can be filed or mailed as it is: convergence (error against grid size, log-log, with the
fitted orders), the error map of a preset over moneyness and expiry, and the speed-accuracy
frontier of the finite-difference presets against binomial trees and approximations.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from .cli._common import CAUTION
from .validation import ORDER_BAND, Check, ValidationRun

__all__ = ["summary", "figures", "render_html", "write_report", "headline"]

# own palette (colour-blind safe pairs), one per method family / study
_COLOURS = ("#1f5f8b", "#c0541d", "#4f8a32", "#7d3c8a", "#6a6a6a", "#b08d1a", "#2a9d8f",
            "#9b2335")
_FAMILY_STYLE = {
    "PDE (stopline, method 'direct')": ("#1f5f8b", "o"),
    "PDE (stopline, method 'direct-plain')": ("#2a9d8f", "P"),
    "Leisen-Reimer (extrapolated)": ("#c0541d", "s"),
    "CRR-BS (extrapolated)": ("#4f8a32", "^"),
    "Barone-Adesi-Whaley 1987": ("#7d3c8a", "D"),
    "Bjerksund-Stensland 2002": ("#b08d1a", "v"),
}


#: What the provenance words in check sources mean (report and summary).
PROVENANCE = ("Published values marked 'recalled' are from memory: recalled from the "
              "publication rather than read in it, and re-derived independently where the "
              "check says so; values marked 'seen' were read in the publication.")


def _finite(x: object) -> object:
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


def _check_record(check: Check, section: str) -> dict[str, object]:
    rec = {k: _finite(v) for k, v in check.to_dict().items()}
    rec["section"] = section
    return rec


def headline(run: ValidationRun) -> list[tuple[str, str]]:
    """The few numbers a reader wants first, as ``(label, value)`` pairs."""
    rows: list[tuple[str, str]] = []
    for pt in run.frontier:
        if pt.family.startswith("PDE"):
            rows.append((f"preset {pt.setting}: random American sample, max |error| / K, "
                         "RMS rel. error, time per option",
                         f"{pt.max_abs_error:.1e}, {pt.rms_rel_error:.1e}, "
                         f"{1e3 * pt.seconds_per_option:.2f} ms"))
    for c in run.checks:
        if c.name.startswith("European vs closed form"):
            rows.append((c.name.replace("European vs closed form, ", "European: "),
                         f"{c.value:.1e} (target {c.tolerance:.0e})"))
    orders = [c.value for c in run.checks if "order" in c.name and "without" not in c.name]
    if orders:
        rows.append(("fitted convergence orders (with Rannacher start and graded steps)",
                     f"{min(orders):.2f} to {max(orders):.2f} (band {ORDER_BAND[0]}-"
                     f"{ORDER_BAND[1]})"))
    pubs = [c for c in run.checks if "published values" in c.name]
    if pubs:
        worst = max(pubs, key=lambda c: c.value / c.tolerance)
        rows.append(("published American tables: worst |difference| (tolerance)",
                     f"{worst.value:.1e} ({worst.tolerance:.0e}), {worst.name.split(':')[0]}"))
    rows.append(("checks passed", f"{len(run.checks) - len(run.failed)} of {len(run.checks)}"))
    return rows


def summary(run: ValidationRun) -> dict[str, object]:
    """The JSON summary: every check with its source, value, tolerance and verdict."""
    return {
        "tool": "stopline validate",
        "created": run.created,
        "mode": "quick" if run.quick else "full",
        "seconds": round(run.seconds, 2),
        "environment": run.environment,
        "caution": CAUTION,
        "provenance": PROVENANCE,
        "passed": run.passed,
        "n_checks": len(run.checks),
        "n_failed": len(run.failed),
        "headline": [{"label": a, "value": b} for a, b in headline(run)],
        "checks": [_check_record(c, s.key) for s in run.sections for c in s.checks],
        "speed_accuracy": [
            {k: _finite(v) for k, v in vars(pt).items()} for pt in run.frontier
        ],
    }


def _png(fig: object) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)  # type: ignore[attr-defined]
    return buf.getvalue()


def _caution_footer(fig: object) -> None:
    fig.text(0.01, 0.005, CAUTION, fontsize=6, color="#555555", ha="left",  # type: ignore[attr-defined]
             va="bottom", wrap=True)


def figures(run: ValidationRun) -> dict[str, bytes]:
    """The report's figures as PNG bytes: "convergence", "error_map", "frontier"."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import matplotlib.ticker

    out: dict[str, bytes] = {}
    # convergence: prices (absolute error) and gamma (relative error)
    fig, axes = plt.subplots(1, 2, figsize=(10, 4.4))
    for ax, want_gamma in zip(axes, (False, True), strict=True):
        curves = [c for c in run.curves if c.label.startswith("gamma") == want_gamma]
        for i, c in enumerate(curves):
            ax.loglog(c.size, c.error, marker="os^Dvx"[i % 6], color=_COLOURS[i % 8],
                      label=f"{c.label}: order {c.slope:.2f}")
        if curves:
            ref = curves[0]
            guide = ref.error[0] * (ref.size[0] / ref.size) ** 2
            ax.loglog(ref.size, guide, ls=":", color="#999999", label="slope 2 guide")
        ticks = sorted({float(x) for c in curves for x in c.size})
        ax.set_xticks(ticks)
        ax.set_xticklabels([f"{x:g}" for x in ticks], fontsize=7)
        ax.xaxis.set_minor_locator(matplotlib.ticker.NullLocator())
        ax.set_xlabel("grid size (space points per sd, or time levels)")
        ax.set_ylabel("relative gamma error" if want_gamma else "absolute price error")
        ax.set_title("gamma at the strike" if want_gamma else "prices")
        ax.legend(fontsize=6.5)
        ax.grid(True, which="both", alpha=0.25)
    fig.suptitle("Error against grid size (fitted order = slope against spacing)")
    fig.tight_layout(rect=(0, 0.04, 1, 1))
    _caution_footer(fig)
    out["convergence"] = _png(fig)
    plt.close(fig)

    # error map
    em = run.error_map
    fig, ax = plt.subplots(figsize=(7.5, 4.6))
    # zero error: the spot is in the exercise region, where the value is exact (intrinsic)
    logerr = np.ma.masked_where(em.error <= 0.0, np.log10(np.where(em.error > 0, em.error, 1.0)))
    cmap = matplotlib.colormaps["cividis"].with_extremes(bad="#d9d9d9")
    img = ax.imshow(logerr, origin="lower", aspect="auto", cmap=cmap, interpolation="nearest")
    cb = fig.colorbar(img, ax=ax)
    cb.set_label("log10 |error| / K  (grey: exercise region, exact)")
    ax.set_xticks(range(em.moneyness.size))
    ax.set_xticklabels([f"{m:.2f}" for m in em.moneyness], fontsize=7, rotation=45)
    ax.set_yticks(range(em.expiry.size))
    ax.set_yticklabels([f"{t:g}" for t in em.expiry], fontsize=7)
    ax.set_xlabel("moneyness S / K")
    ax.set_ylabel("expiry (years)")
    ax.set_title(em.title, fontsize=9)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    _caution_footer(fig)
    out["error_map"] = _png(fig)
    plt.close(fig)

    # speed-accuracy frontier
    fig, ax = plt.subplots(figsize=(7.5, 5.0))
    families: dict[str, list] = {}
    for pt in run.frontier:
        families.setdefault(pt.family, []).append(pt)
    for fam, pts in families.items():
        colour, marker = _FAMILY_STYLE.get(fam, ("#333333", "o"))
        x = [p.seconds_per_option for p in pts]
        y = [p.rms_rel_error for p in pts]
        ax.loglog(x, y, marker=marker, color=colour, label=fam, ls="-" if len(pts) > 1 else "")
        for i, p in enumerate(pts):
            if 0 < i < len(pts) - 1 and not fam.startswith("PDE"):
                continue  # label a tree series at its ends only, to keep the plot legible
            ax.annotate(p.setting, (p.seconds_per_option, p.rms_rel_error), fontsize=6,
                        xytext=(3, -9 if fam.startswith("CRR") else 3),
                        textcoords="offset points")
    ax.set_xlabel("time per option (seconds, one core)")
    ax.set_ylabel("RMS relative error (options worth >= 0.50)")
    ax.set_title("Speed against accuracy on the random sample", fontsize=10)
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=7)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    _caution_footer(fig)
    out["frontier"] = _png(fig)
    plt.close(fig)
    return out


_CSS = """
body { font-family: Georgia, 'Times New Roman', serif; max-width: 1100px; margin: 2em auto;
       color: #222; line-height: 1.4; padding: 0 1em; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; border-bottom: 1px solid #bbb; margin-top: 2em; }
table { border-collapse: collapse; font-size: 0.8em; margin: 0.8em 0; }
th, td { border: 1px solid #ccc; padding: 3px 6px; vertical-align: top; }
th { background: #eef2f5; text-align: left; }
td.num { text-align: right; font-family: monospace; }
.pass { color: #2b6e1f; font-weight: bold; }
.fail { color: #a3161b; font-weight: bold; }
.caution { border-left: 4px solid #b08d1a; background: #faf6e8; padding: 0.6em 1em; }
.verdict-pass { background: #e9f4e4; padding: 0.5em 1em; }
.verdict-fail { background: #f8e5e5; padding: 0.5em 1em; }
.note { font-size: 0.85em; color: #555; }
img { max-width: 100%; }
"""


def _cell(x: object) -> str:
    if isinstance(x, float):
        return f'<td class="num">{x:.6g}</td>'
    return f"<td>{html.escape(str(x))}</td>"


def _table(columns: tuple[str, ...], rows: list | tuple, caption: str = "",
           note: str = "") -> str:
    head = "".join(f"<th>{html.escape(c)}</th>" for c in columns)
    body = "".join("<tr>" + "".join(_cell(x) for x in row) + "</tr>" for row in rows)
    cap = f"<caption><b>{html.escape(caption)}</b></caption>" if caption else ""
    out = f"<table>{cap}<tr>{head}</tr>{body}</table>"
    if note:
        out += f'<p class="note">{html.escape(note)}</p>'
    return out


def _checks_table(checks: tuple[Check, ...]) -> str:
    head = "".join(f"<th>{c}</th>" for c in ("", "check", "value", "tolerance", "source",
                                            "detail"))
    rows = []
    for c in checks:
        mark = '<span class="pass">pass</span>' if c.passed else '<span class="fail">FAIL</span>'
        rows.append(
            f"<tr><td>{mark}</td><td>{html.escape(c.name)}</td>"
            f'<td class="num">{c.value:.3g}</td><td class="num">{c.tolerance:.3g}</td>'
            f"<td>{html.escape(c.source)}</td><td>{html.escape(c.detail)}</td></tr>"
        )
    return f"<table><tr>{head}</tr>{''.join(rows)}</table>"


def _img(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return f'<p><img alt="{html.escape(alt)}" src="data:image/png;base64,{data}"></p>'


def render_html(run: ValidationRun, figs: dict[str, bytes] | None = None) -> str:
    """The self-contained HTML report of a run."""
    figs = figures(run) if figs is None else figs
    n, nf = len(run.checks), len(run.failed)
    verdict_cls = "verdict-pass" if nf == 0 else "verdict-fail"
    verdict = (f"All {n} checks passed." if nf == 0
               else f"{nf} of {n} checks FAILED: " + "; ".join(c.name for c in run.failed))
    mode = ("QUICK run (reduced cases, for tests; not the validation record)" if run.quick
            else "full run")
    env = ", ".join(f"{k} {v}" for k, v in run.environment.items())
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        "<title>stopline validation record</title>",
        f"<style>{_CSS}</style></head><body>",
        "<h1>stopline validation record</h1>",
        f"<p class='note'>Generated {html.escape(run.created)} by <code>stopline validate</code>"
        f" ({html.escape(mode)}) in {run.seconds:.0f} s; {html.escape(env)}.</p>",
        f"<div class='caution'><b>Caution.</b> {html.escape(CAUTION)}</div>",
        f"<p class='{verdict_cls}'>{html.escape(verdict)}</p>",
        "<h2>Headline numbers</h2>",
        _table(("quantity", "value"), headline(run)),
        "<p class='note'>How to read this record: every check compares a stopline price "
        "with an answer it does not produce itself (a closed form, an independent binomial "
        "tree or approximation, a published table, an exact identity, or the same equation "
        "solved on much finer grids), names the source of that answer, and states the "
        "tolerance it is held to. " + html.escape(PROVENANCE) + " The published "
        "table carries an independent Leisen-Reimer tree beside each value. The "
        "Barone-Adesi-Whaley and Bjerksund-Stensland formulas are approximations: they appear "
        "with their own error sizes, not as references.</p>",
    ]
    for s in run.sections:
        parts.append(f"<h2 id='{html.escape(s.key)}'>{html.escape(s.title)}</h2>")
        parts.append(f"<p>{html.escape(s.intro)}</p>")
        parts.append(_checks_table(s.checks))
        for t in s.tables:
            parts.append(_table(t.columns, t.rows, t.title, t.note))
        if s.key == "convergence" and "convergence" in figs:
            parts.append(_img(figs["convergence"], "error against grid size, log-log"))
        if s.key == "sample":
            if "frontier" in figs:
                parts.append(_img(figs["frontier"], "speed-accuracy frontier"))
            if "error_map" in figs:
                parts.append("<p>Where the standard preset's error sits, over moneyness and "
                             "expiry (American put, against the fine preset):</p>")
                parts.append(_img(figs["error_map"], "error map over moneyness and expiry"))
    parts.append(f"<div class='caution'>{html.escape(CAUTION)}</div></body></html>")
    return "\n".join(parts)


def _write_atomic(path: Path, text: str) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.chmod(tmp, 0o644)  # mkstemp creates 0600; a report is for readers
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_report(run: ValidationRun, out_dir: str | os.PathLike[str]) -> tuple[Path, Path]:
    """Write ``report.html`` and ``summary.json`` into ``out_dir`` (created if missing).

    Each file is written to a temporary file in the same folder and moved into place, so a
    reader never sees a half-written report.

    Returns
    -------
    (Path, Path)
        The report and the summary.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    report, summ = out / "report.html", out / "summary.json"
    _write_atomic(report, render_html(run))
    _write_atomic(summ, json.dumps(summary(run), indent=2, allow_nan=False) + "\n")
    return report, summ
