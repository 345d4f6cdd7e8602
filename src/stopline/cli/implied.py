"""``stopline implied``: implied vols of a chain of quotes, a CSV of answers and a smile plot.

Input: a CSV with a header naming the columns ``id, kind, style, spot, strike, expiry, rate,
quote`` and optionally ``div_yield``, ``dividends`` (cash dividends ``WHEN:AMOUNT;...``, as in
``stopline crosscheck``), ``dividend_model`` (``spot``, the default, or ``escrowed``) and
``valuation_date`` (needed when ``expiry`` or an ex-date is a date; year fractions ACT/365
fixed). Other columns are carried through untouched; a column named twice is refused.

Output, in ``--out DIR``:

- ``implied.csv``: every input row, in input order, with ``implied_vol``, ``status``
  (``ok`` or ``error``) and ``note`` appended; a bad row is kept with ``status=error`` and a
  note naming the field and value.
- ``smile.png``: implied vol against strike, one line per expiry. Where an expiry has several
  quotes at one strike (a put and a call), the line goes through the out-of-the-money one (the
  put below the spot, the call above it: the better determined vol) and the others are drawn
  as open markers off the line.

Both are written atomically (a temporary file in DIR, then renamed). The exit code is 1 if
any row had an error (after everything is written), 2 for an unusable file.
"""

from __future__ import annotations

import csv
import math
import os
import tempfile
from dataclasses import dataclass
from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING

import typer

from ._common import CAUTION, guard

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = [
    "implied_cmd",
    "RowOutcome",
    "REQUIRED_COLUMNS",
    "OPTIONAL_COLUMNS",
    "solve_row",
    "smile_figure",
]

REQUIRED_COLUMNS = ("id", "kind", "style", "spot", "strike", "expiry", "rate", "quote")
OPTIONAL_COLUMNS = ("div_yield", "dividends", "dividend_model", "valuation_date")
ADDED_COLUMNS = ("implied_vol", "status", "note")


class Accuracy(str, Enum):
    fast = "fast"
    standard = "standard"
    fine = "fine"


@dataclass(frozen=True)
class RowOutcome:
    """The answer for one input row.

    Attributes
    ----------
    vol : float
        Implied vol, NaN when the row had an error.
    status : {"ok", "error"}
        Whether a vol was found.
    note : str
        Why not (field and value), or what a careful user should know; empty otherwise.
    strike, time_to_expiry : float
        For the smile plot (NaN when unreadable).
    expiry_label : str
        The expiry as written in the file (groups the smile's lines).
    price_calls : int
        Finite-difference prices computed for this row.
    kind : str
        ``"put"`` or ``"call"`` (empty when unreadable).
    spot : float
        The row's spot (NaN when unreadable); with ``kind``, says which quote at a strike is
        out of the money.
    """

    vol: float
    status: str
    note: str
    strike: float = math.nan
    time_to_expiry: float = math.nan
    expiry_label: str = ""
    price_calls: int = 0
    kind: str = ""
    spot: float = math.nan


def _number(row: dict[str, str | None], field: str, default: float | None = None) -> float:
    from ..errors import InputError

    text = row.get(field)
    if text is None or text.strip() == "":
        if default is not None:
            return default
        raise InputError(field, text if text is not None else "", "is missing")
    try:
        return float(text)
    except ValueError:
        raise InputError(field, text, "must be a number") from None


def solve_row(row: dict[str, str | None], accuracy: str = "standard") -> RowOutcome:
    """Implied vol of one CSV row (a dict of the row's text fields); never raises.

    Errors on purpose (bad field, quote outside its bounds) become ``status="error"`` with the
    message as the note.
    """
    from ..contract import Option
    from ..dividends import dividend_schedule
    from ..errors import StoplineError
    from ..implied import implied_vol_detail
    from ..market import Market
    from ._common import parse_expiry

    strike, t, label = math.nan, math.nan, (row.get("expiry") or "").strip()
    try:
        if None in row:
            raise _RowShape("row has more fields than the header")
        missing = [c for c in REQUIRED_COLUMNS if row.get(c) is None]
        if missing:
            raise _RowShape(f"row has fewer fields than the header (no {', '.join(missing)})")
        strike = _number(row, "strike")
        option = Option(
            (row["kind"] or "").strip(), strike, parse_expiry(label),
            style=(row["style"] or "").strip() or "american",
        )
        valuation = (row.get("valuation_date") or "").strip() or None
        market = Market(
            _number(row, "spot"), _number(row, "rate"), 0.2,
            div_yield=_number(row, "div_yield", 0.0), valuation_date=valuation,
            dividends=(row.get("dividends") or "").strip(),
            dividend_model=(row.get("dividend_model") or "").strip() or "spot",
        )
        t = option.time_to_expiry(market.valuation_date)
        ignored = dividend_schedule(market.dividends, t, market.valuation_date).warnings
        res = implied_vol_detail(option, market, _number(row, "quote"), accuracy=accuracy)
    except (StoplineError, _RowShape) as exc:
        return RowOutcome(math.nan, "error", str(exc), strike, t, label)
    except Exception as exc:  # noqa: BLE001 - a batch keeps every row; say it is unexpected
        return RowOutcome(math.nan, "error", f"unexpected {type(exc).__name__}: {exc} (please "
                          "report this row)", strike, t, label)
    # a dividend left out (after expiry, or on the valuation date) is said in the note
    note = "; ".join([*ignored, res.note] if res.note else ignored)
    return RowOutcome(res.vol, "ok", note, strike, t, label, res.price_calls, option.kind,
                      market.spot)


class _RowShape(Exception):
    """A ragged CSV row."""


def _solve_task(task: tuple[dict[str, str | None], str]) -> RowOutcome:
    return solve_row(*task)


def _read_quotes(path: Path) -> tuple[list[str], list[dict[str, str | None]]]:
    from ..errors import InputError

    if not path.is_file():
        raise InputError("QUOTES", str(path), "is not a readable file")
    with path.open(newline="", encoding="utf-8-sig") as fh:
        reader = csv.DictReader(fh)
        header = [h.strip() for h in (reader.fieldnames or [])]
        reader.fieldnames = header
        rows = list(reader)
    dupes = sorted({h for h in header if header.count(h) > 1})
    if dupes:
        raise InputError("QUOTES", str(path), f"names column(s) twice: {', '.join(dupes)} (which "
                         "one to read would be a guess)")
    missing = [c for c in REQUIRED_COLUMNS if c not in header]
    if missing:
        raise InputError("QUOTES", str(path), f"has no column {', '.join(missing)} (header: "
                         f"{', '.join(header) or 'empty'})")
    return header, rows


def _write_atomic(path: Path, write) -> None:  # noqa: ANN001 - callable(file path)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.stem}-", suffix=path.suffix)
    os.close(fd)
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _write_csv(path: Path, header: list[str], rows: list[dict[str, str | None]],
               outcomes: list[RowOutcome]) -> None:
    columns = [c for c in header if c not in ADDED_COLUMNS] + list(ADDED_COLUMNS)

    def write(tmp: str) -> None:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            out = csv.DictWriter(fh, fieldnames=columns, extrasaction="ignore")
            out.writeheader()
            for row, res in zip(rows, outcomes, strict=True):
                record = {c: ("" if row.get(c) is None else row[c]) for c in header}
                record["implied_vol"] = "" if res.status != "ok" else f"{res.vol:.10f}"
                record["status"] = res.status
                record["note"] = res.note
                out.writerow(record)

    _write_atomic(path, write)


def _one_per_strike(pts: list[RowOutcome]) -> tuple[list[RowOutcome], list[RowOutcome]]:
    """Split one expiry's answers into the smile's line (one per strike, by strike) and the
    rest: at a strike quoted more than once, the out-of-the-money quote goes on the line (the
    put below the spot, the call above it; at the spot, the first in the file)."""

    def rank(r: RowOutcome) -> int:
        if r.strike == r.spot:
            return 1
        otm = r.strike < r.spot if r.kind == "put" else r.strike > r.spot
        return 0 if otm else 2

    by_strike: dict[float, list[RowOutcome]] = {}
    for r in pts:
        by_strike.setdefault(r.strike, []).append(r)
    line, rest = [], []
    for strike in sorted(by_strike):
        same = by_strike[strike]
        best = min(range(len(same)), key=lambda i: (rank(same[i]), i))
        line.append(same[best])
        rest.extend(r for i, r in enumerate(same) if i != best)
    return line, rest


def smile_figure(outcomes: list[RowOutcome], title: str) -> Figure:
    """Implied vol (%) against strike, one line per expiry, with the caution in small type.

    At a strike quoted more than once for an expiry (a put and a call), the line goes through
    the out-of-the-money quote and the others are drawn as open markers of the same colour.

    Parameters
    ----------
    outcomes : list of RowOutcome
        Rows with ``status="error"`` are left out.
    title : str
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
        One ``Line2D`` per expiry on its only axes, in order of time to expiry.
    """
    from matplotlib.figure import Figure

    groups: dict[str, list[RowOutcome]] = {}
    for res in outcomes:
        if res.status == "ok":
            groups.setdefault(res.expiry_label, []).append(res)
    fig = Figure(figsize=(8.0, 5.4))
    fig.subplots_adjust(left=0.09, right=0.98, top=0.93, bottom=0.19)
    ax = fig.add_subplot()
    off_line = False
    for label, pts in sorted(groups.items(), key=lambda kv: kv[1][0].time_to_expiry):
        line, rest = _one_per_strike(pts)
        t = line[0].time_to_expiry
        (drawn,) = ax.plot([r.strike for r in line], [100.0 * r.vol for r in line], marker="o",
                           ms=3.5, lw=1.4,
                           label=f"{label} ({t:.3f} y)" if label != f"{t:g}" else f"{t:g} y")
        if rest:
            off_line = True
            ax.scatter([r.strike for r in rest], [100.0 * r.vol for r in rest], s=22,
                       facecolors="none", edgecolors=drawn.get_color(), linewidths=1.0)
    if off_line:
        ax.scatter([], [], s=22, facecolors="none", edgecolors="0.35", linewidths=1.0,
                   label="another quote at a strike on the line\n(in the money, or repeated)")
    ax.set_title(title)
    ax.set_xlabel("strike (currency of the spot)")
    ax.set_ylabel("implied volatility (% per year)")
    ax.grid(True, alpha=0.3)
    if groups:
        ax.legend(title="expiry", fontsize=8, title_fontsize=8)
    else:
        ax.text(0.5, 0.5, "no implied vol found", ha="center", va="center",
                transform=ax.transAxes)
    fig.text(0.01, 0.01, CAUTION + " Expiries from dates: ACT/365F.", fontsize=6,
             style="italic", color="0.35", wrap=True, va="bottom")
    return fig


def _prepare_out(out: Path, quotes: Path) -> None:
    """Create ``out`` and check it can take the answers before any work is done."""
    from ..errors import InputError

    try:
        out.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=out):
            pass
    except OSError as exc:
        raise InputError("--out", str(out), f"cannot hold the answers ({exc.strerror or exc})"
                         ) from None
    if (out / "implied.csv").resolve() == quotes.resolve():
        raise InputError("--out", str(out), "would overwrite the quotes file implied.csv; "
                         "choose another folder")


def _write_png(path: Path, fig: Figure) -> None:
    _write_atomic(path, lambda tmp: fig.savefig(tmp, format="png", dpi=130))


@guard
def implied_cmd(
    quotes: Path = typer.Argument(..., help="CSV of quotes with a header row."),
    out: Path = typer.Option(..., "--out", help="Directory for implied.csv and smile.png."),
    workers: int = typer.Option(
        None, "--workers", min=1, help="Processes to use (default: all cores)."
    ),
    accuracy: Accuracy = typer.Option(Accuracy.standard, "--accuracy",
                                      help="Accuracy of the prices inverted."),
) -> None:
    """Implied vols of a chain of American or European quotes, with a smile plot.

    Columns: id, kind, style, spot, strike, expiry (years or YYYY-MM-DD), rate, quote.
    Optional: div_yield, dividends (WHEN:AMOUNT;...), dividend_model (spot or escrowed),
    valuation_date. Other columns are carried through.
    Writes OUT/implied.csv and OUT/smile.png; exit code 1 if any row had an error.
    """
    from concurrent.futures import ProcessPoolExecutor

    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    header, rows = _read_quotes(quotes)
    _prepare_out(out, quotes)
    n_workers = workers or os.cpu_count() or 1
    n_workers = max(1, min(n_workers, len(rows)))
    console = Console(stderr=True)
    outcomes: list[RowOutcome] = []
    tasks = [(row, accuracy.value) for row in rows]
    with Progress("implied vols", BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                  console=console, transient=False) as bar:
        job = bar.add_task("rows", total=len(rows))
        if n_workers == 1:
            for task in tasks:
                outcomes.append(_solve_task(task))
                bar.advance(job)
        else:
            chunk = max(1, len(tasks) // (8 * n_workers))
            with ProcessPoolExecutor(max_workers=n_workers) as pool:
                for res in pool.map(_solve_task, tasks, chunksize=chunk):
                    outcomes.append(res)
                    bar.advance(job)
    _write_csv(out / "implied.csv", header, rows, outcomes)
    fig = smile_figure(outcomes, f"Implied volatility smile: {quotes.name}")
    _write_png(out / "smile.png", fig)
    n_err = sum(r.status == "error" for r in outcomes)
    calls = [r.price_calls for r in outcomes if r.status == "ok"]
    report = Console()
    report.print(f"{len(rows)} rows: {len(rows) - n_err} ok, {n_err} error"
                 + (f"; {sum(calls) / len(calls):.1f} price calls per vol" if calls else "")
                 + f" (accuracy {accuracy.value}, {n_workers} worker(s), dates ACT/365F)")
    for row, res in zip(rows, outcomes, strict=True):
        if res.status == "error":
            report.print(f"  row id={row.get('id')!r}: {res.note}", style="yellow",
                         markup=False, highlight=False)
    report.print(f"wrote {out / 'implied.csv'} and {out / 'smile.png'}")
    report.print(CAUTION, style="italic dim")
    if n_err:
        raise typer.Exit(1)
