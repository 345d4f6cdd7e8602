"""Cross-checking a book of third-party option prices: every row priced, every difference explained.

A book is a CSV file with one quote per row (schema: :data:`REQUIRED_COLUMNS`,
:data:`OPTIONAL_COLUMNS`; other columns are carried through). Each row is priced by
:func:`stopline.price`, compared with the quote within a tolerance that scales with vega,
its implied volatility is backed out, and a mismatch is diagnosed by re-pricing under simple
alternative assumptions (:data:`ALTERNATIVES`) to find one that reproduces the quote.

A row that cannot be read or priced gets status ``"error"`` and a note naming the field and
value; it never stops the batch and never disappears from the results.

The batch driver (:func:`run_crosscheck`) spreads rows over processes or a Dask cluster
(:mod:`stopline._executors`), keeps a checkpoint of finished rows so an interrupted run can
resume, and writes ``results.csv`` atomically.
"""

from __future__ import annotations

import csv
import datetime as _dt
import hashlib
import io
import json
import math
import os
import tempfile
import time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path

from .contract import Option
from .daycount import DEFAULT_DAY_COUNT, parse_date, year_fraction
from .dividends import dividend_schedule
from .errors import InputError, StoplineError
from .implied import ImpliedVolError, implied_vol
from .market import VOL_RANGE, Market
from .pricing import PRESETS, Result, price

__all__ = [
    "REQUIRED_COLUMNS",
    "OPTIONAL_COLUMNS",
    "OUTPUT_COLUMNS",
    "STATUSES",
    "Tolerance",
    "CheckSettings",
    "CashDividend",
    "QuoteLine",
    "Alternative",
    "ALTERNATIVES",
    "CAUSE_LABELS",
    "RowCheck",
    "CrossCheckRun",
    "parse_quote",
    "check_row",
    "check_rows",
    "read_book",
    "run_crosscheck",
    "results_table",
    "safe_cell",
]

REQUIRED_COLUMNS = ("id", "kind", "style", "spot", "strike", "expiry", "rate", "vol", "quote")
OPTIONAL_COLUMNS = ("div_yield", "dividends", "dividend_model", "valuation_date", "quote_vol")
#: Columns added to every input row, in this order.
OUTPUT_COLUMNS = (
    "model_price", "difference", "implied_vol", "vol_difference", "tolerance", "status", "note",
)
STATUSES = ("ok", "mismatch", "error")
#: Vol bump (absolute) for vega by central difference when the Result carries no vega.
VEGA_BUMP = 0.01
#: Name of the checkpoint file kept in the output directory while a run is unfinished.
PARTIAL_NAME = "partial.json"
RESULTS_NAME = "results.csv"
_PARTIAL_FORMAT = "stopline-crosscheck-partial/1"


# --------------------------------------------------------------------------- settings


@dataclass(frozen=True)
class Tolerance:
    """How far a quote may sit from the model before it is a mismatch.

    The allowed absolute difference is ``max(price, vol_points / 100 * vega)``, with vega per
    unit of volatility: a quote within ``vol_points`` vol points of the model's vol passes.

    Attributes
    ----------
    price : float
        Floor in money units (default 0.005).
    vol_points : float
        Width in vol points (default 0.25, i.e. 0.0025 in vol).
    """

    price: float = 0.005
    vol_points: float = 0.25

    def __post_init__(self) -> None:
        for name in ("price", "vol_points"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (v >= 0 and math.isfinite(v)):
                raise InputError(f"tolerance.{name}", v, "must be a finite number >= 0")

    def allowed(self, vega: float) -> float:
        """The allowed absolute difference for an option with this vega."""
        return max(self.price, self.vol_points / 100.0 * max(vega, 0.0))


@dataclass(frozen=True)
class CheckSettings:
    """Everything besides the data that decides a row's outcome.

    Attributes
    ----------
    tolerance : Tolerance
        Mismatch threshold.
    accuracy : str
        Pricing preset (see :data:`stopline.PRESETS`).
    max_vol_shift : float
        Largest difference between implied and input vol (as a decimal, 0.05 = 5 vol points)
        that still counts as a simple explanation of a mismatch.
    """

    tolerance: Tolerance = field(default_factory=Tolerance)
    accuracy: str = "standard"
    max_vol_shift: float = 0.05

    def __post_init__(self) -> None:
        if self.accuracy not in PRESETS:
            raise InputError("accuracy", self.accuracy, f"must be one of {', '.join(PRESETS)}")
        if not (self.max_vol_shift > 0 and math.isfinite(self.max_vol_shift)):
            raise InputError("max_vol_shift", self.max_vol_shift, "must be a finite number > 0")

    def record(self) -> dict[str, object]:
        """Plain-data form (for the checkpoint and the report)."""
        return {
            "price_tolerance": self.tolerance.price,
            "vol_tolerance_points": self.tolerance.vol_points,
            "accuracy": self.accuracy,
            "max_vol_shift": self.max_vol_shift,
        }


# --------------------------------------------------------------------------- one row: reading


@dataclass(frozen=True)
class CashDividend:
    """One cash dividend: ex-dividend date (or years from valuation) and amount per share."""

    ex_date: _dt.date | float
    amount: float


@dataclass(frozen=True)
class QuoteLine:
    """One row of the book, read and checked.

    Attributes
    ----------
    id : str
        The row's identifier.
    option : Option
        The contract quoted.
    market : Market
        Spot, rate, yield, vol and valuation date of the row.
    quote : float
        The third party's price.
    quote_vol : float or None
        The third party's own vol, if given.
    dividends : tuple of CashDividend
        Cash dividends (empty if none).
    """

    id: str
    option: Option
    market: Market
    quote: float
    quote_vol: float | None = None
    dividends: tuple[CashDividend, ...] = ()

    @property
    def date_expiry(self) -> bool:
        """Whether the expiry was given as a date (so a day count applies)."""
        return isinstance(self.option.expiry, _dt.date)


def _text(raw: Mapping[str, object], name: str) -> str:
    value = raw.get(name)
    return "" if value is None else str(value).strip()


def _number(raw: Mapping[str, object], name: str, *, required: bool = True) -> float | None:
    text = _text(raw, name)
    if not text:
        if required:
            raise InputError(name, text, "is missing")
        return None
    try:
        value = float(text)
    except ValueError:
        raise InputError(name, text, "is not a number") from None
    if not math.isfinite(value):
        raise InputError(name, text, "must be finite")
    return value


def parse_cash_dividends(text: str) -> tuple[CashDividend, ...]:
    """Read ``"2027-03-15:0.42;2027-06-15:0.42"`` into cash dividends (empty text: none).

    Each ``;``-separated entry is ``WHEN:AMOUNT``: an ISO ex-date or years from valuation,
    and a cash amount per share > 0 (the text :func:`stopline.parse_dividends` reads).

    Raises
    ------
    InputError
        Naming the ``dividends`` field and the offending entry.
    """
    out = []
    for entry in (e.strip() for e in text.split(";")):
        if not entry:
            continue
        when_text, sep, amount_text = entry.partition(":")
        if not sep:
            raise InputError("dividends", entry, "each entry must be WHEN:AMOUNT, e.g. 2027-03-15:0.42")
        try:
            when: _dt.date | float = float(when_text)
        except ValueError:
            when = parse_date("dividends", when_text)
        else:
            if not (math.isfinite(when) and when >= 0.0):
                raise InputError("dividends", entry, "years from valuation must be >= 0")
        try:
            amount = float(amount_text)
        except ValueError:
            raise InputError("dividends", entry, "amount is not a number") from None
        if not (math.isfinite(amount) and amount > 0.0):
            raise InputError("dividends", entry, "amount must be a finite number > 0")
        out.append(CashDividend(when, amount))
    return tuple(out)


def apply_cash_dividends(market: Market, dividends: Sequence[CashDividend]) -> Market:
    """The market with cash dividends attached (spot model unless the market says otherwise).

    Raises
    ------
    InputError
        Naming ``dividends`` for an ex-date before the valuation date.
    """
    if not dividends:
        return market
    return replace(market, dividends=tuple((d.ex_date, d.amount) for d in dividends))


def _when(x: _dt.date | float) -> str:
    return x.isoformat() if isinstance(x, _dt.date) else f"{x:g}"


def parse_quote(raw: Mapping[str, object]) -> QuoteLine:
    """Read one row (column name -> cell text) into a :class:`QuoteLine`.

    Raises
    ------
    InputError
        For a missing or bad field; the message names it and its value.
    """
    row_id = _text(raw, "id")
    if not row_id:
        raise InputError("id", row_id, "is missing")
    valuation_text = _text(raw, "valuation_date")
    valuation = parse_date("valuation_date", valuation_text) if valuation_text else None
    expiry_text = _text(raw, "expiry")
    if not expiry_text:
        raise InputError("expiry", expiry_text, "is missing")
    try:
        expiry: float | _dt.date = float(expiry_text)
    except ValueError:
        expiry = parse_date("expiry", expiry_text)
    option = Option(_text(raw, "kind"), _number(raw, "strike"), expiry, style=_text(raw, "style"))
    div_yield = _number(raw, "div_yield", required=False) or 0.0
    market = Market(
        _number(raw, "spot"), _number(raw, "rate"), _number(raw, "vol"),
        div_yield=div_yield, valuation_date=valuation,
        dividend_model=_text(raw, "dividend_model") or "spot",
    )
    option.time_to_expiry(market.valuation_date)  # date checks: needs a valuation date, order
    quote = _number(raw, "quote")
    if quote < 0.0:
        raise InputError("quote", _text(raw, "quote"), "must be >= 0")
    quote_vol = _number(raw, "quote_vol", required=False)
    lo, hi = VOL_RANGE
    if quote_vol is not None and not (lo < quote_vol <= hi):
        raise InputError("quote_vol", _text(raw, "quote_vol"), f"must be in ({lo:g}, {hi:g}]")
    dividends = parse_cash_dividends(_text(raw, "dividends"))
    market = apply_cash_dividends(market, dividends)
    return QuoteLine(row_id, option, market, quote, quote_vol, dividends)


# --------------------------------------------------------------------------- diagnosis


@dataclass(frozen=True)
class Alternative:
    """An alternative assumption a third party may have made.

    Attributes
    ----------
    name : str
        Short key, e.g. ``"european"``.
    label : str
        Short phrase for summaries, e.g. ``"priced as European"``.
    build : callable
        ``build(line) -> (option, market, description) or None``: the re-priced inputs and a
        phrase for the note, or None when the alternative does not apply to the row.
    """

    name: str
    label: str
    build: Callable[[QuoteLine], tuple[Option, Market, str] | None]


def _as_european(line: QuoteLine) -> tuple[Option, Market, str] | None:
    o = line.option
    if not o.is_american:
        return None
    return Option(o.kind, o.strike, o.expiry, style="european"), line.market, \
        "priced as European (early exercise ignored)"


def _as_american(line: QuoteLine) -> tuple[Option, Market, str] | None:
    o = line.option
    if o.is_american:
        return None
    return Option(o.kind, o.strike, o.expiry, style="american"), line.market, \
        "priced as American (early exercise allowed)"


def _without_dividends(line: QuoteLine) -> tuple[Option, Market, str] | None:
    m = line.market
    if m.div_yield == 0.0 and not line.dividends:
        return None
    parts = []
    if m.div_yield != 0.0:
        parts.append(f"yield {m.div_yield:g}")
    if line.dividends:
        parts.append(f"{len(line.dividends)} cash dividend(s)")
    bare = replace(m, div_yield=0.0, **({"dividends": ()} if hasattr(m, "dividends") else {}))
    return line.option, bare, f"dividends left out ({' and '.join(parts)} dropped)"


def _act360(line: QuoteLine) -> tuple[Option, Market, str] | None:
    if not line.date_expiry or line.market.valuation_date is None:
        return None
    o = line.option
    t360 = year_fraction(line.market.valuation_date, o.expiry, "ACT/360")
    t365 = year_fraction(line.market.valuation_date, o.expiry, DEFAULT_DAY_COUNT)
    return Option(o.kind, o.strike, t360, style=o.style), line.market, \
        f"ACT/360 time instead of ACT/365 (T={t360:.6g} instead of {t365:.6g} years)"


def _other_dividend_model(line: QuoteLine) -> tuple[Option, Market, str] | None:
    m = line.market
    if not m.dividends:
        return None
    other = "escrowed" if m.dividend_model == "spot" else "spot"
    return line.option, replace(m, dividend_model=other), \
        f"the {other} dividend model instead of the {m.dividend_model} model"


def _quote_vol(line: QuoteLine) -> tuple[Option, Market, str] | None:
    m = line.market
    if line.quote_vol is None or line.quote_vol == m.vol:
        return None
    shifted = replace(m, vol=line.quote_vol)
    points = 100.0 * (line.quote_vol - m.vol)
    return line.option, shifted, \
        f"the third party's own vol {line.quote_vol:g} ({points:+.2f} vol points from {m.vol:g})"


#: Alternatives tried, in order, on every mismatch. Add one here to try it everywhere.
ALTERNATIVES: tuple[Alternative, ...] = (
    Alternative("european", "priced as European", _as_european),
    Alternative("american", "priced as American", _as_american),
    Alternative("no_dividends", "dividends left out", _without_dividends),
    Alternative("dividend_model", "the other cash-dividend model", _other_dividend_model),
    Alternative("act360", "ACT/360 time", _act360),
    Alternative("quote_vol", "the third party's own vol", _quote_vol),
)
#: Label of every cause a mismatch can be given (the alternatives, then a different vol).
CAUSE_LABELS: dict[str, str] = {a.name: a.label for a in ALTERNATIVES} | {
    "vol": "a different volatility (within the vol-shift limit)",
}


def _diagnose(
    line: QuoteLine, allowed: float, implied: float | None, implied_problem: str,
    settings: CheckSettings,
) -> tuple[str, tuple[str, ...]]:
    """Note and names of the alternatives that reproduce the quote within ``allowed``."""
    found: list[tuple[str, str]] = []
    for alt in ALTERNATIVES:
        built = alt.build(line)
        if built is None:
            continue
        option, market, phrase = built
        try:
            value = price(option, market, accuracy=settings.accuracy, greeks="grid").price
        except StoplineError:
            continue
        if abs(line.quote - value) <= allowed:
            found.append((alt.name, f"{phrase}: model {value:.6f}, quote - model {line.quote - value:+.6f}"))
    if found:
        names = tuple(n for n, _ in found)
        return "reproduced by " + "; also by ".join(p for _, p in found), names
    vol = line.market.vol
    if implied is not None and abs(implied - vol) <= settings.max_vol_shift:
        return (
            f"reproduced by a different volatility: the quote implies {implied:.6f}, "
            f"{100.0 * (implied - vol):+.2f} vol points from the input {vol:g}",
            ("vol",),
        )
    if implied is None:
        detail = f"no volatility reproduces the quote: {implied_problem}"
    else:
        detail = (f"the quote implies vol {implied:.6f}, {100.0 * (implied - vol):+.2f} vol points "
                  f"from the input, beyond {100.0 * settings.max_vol_shift:g}")
    return f"no simple cause found ({detail})", ()


# --------------------------------------------------------------------------- one row: checking


@dataclass(frozen=True)
class RowCheck:
    """The outcome for one row. Numbers are NaN where they could not be computed.

    Attributes
    ----------
    model_price : float
        stopline's price.
    difference : float
        ``quote - model_price``.
    implied_vol : float
        Volatility at which the model reproduces the quote (same exercise style as the row).
    vol_difference : float
        ``implied_vol - vol`` (decimal; 0.01 = one vol point).
    tolerance : float
        Allowed absolute difference for this row.
    status : {"ok", "mismatch", "error"}
        Outcome.
    note : str
        Diagnosis of a mismatch, reason for an error, empty when ok.
    causes : tuple of str
        Names of the alternatives that reproduce a mismatched quote (``"vol"`` for a
        different volatility).
    quote, vega, moneyness, time_to_expiry : float
        Kept for the report (moneyness is strike / spot).
    """

    model_price: float = math.nan
    difference: float = math.nan
    implied_vol: float = math.nan
    vol_difference: float = math.nan
    tolerance: float = math.nan
    status: str = "error"
    note: str = ""
    causes: tuple[str, ...] = ()
    quote: float = math.nan
    vega: float = math.nan
    moneyness: float = math.nan
    time_to_expiry: float = math.nan

    def cells(self) -> dict[str, str]:
        """The :data:`OUTPUT_COLUMNS` as CSV text (empty for NaN)."""
        return {
            "model_price": _fmt(self.model_price),
            "difference": _fmt(self.difference),
            "implied_vol": _fmt(self.implied_vol),
            "vol_difference": _fmt(self.vol_difference),
            "tolerance": _fmt(self.tolerance),
            "status": self.status,
            "note": self.note,
        }

    def record(self) -> dict[str, object]:
        """JSON-ready form (NaN as None)."""
        out = asdict(self)
        for k, v in out.items():
            if isinstance(v, float) and math.isnan(v):
                out[k] = None
            elif isinstance(v, tuple):
                out[k] = list(v)
        return out

    @classmethod
    def from_record(cls, rec: Mapping[str, object]) -> RowCheck:
        """Inverse of :meth:`record`."""
        kw = {}
        for f in cls.__dataclass_fields__:
            v = rec[f]
            if f == "causes":
                v = tuple(v)
            elif v is None:
                v = math.nan
            kw[f] = v
        return cls(**kw)


def _fmt(x: float) -> str:
    return "" if math.isnan(x) else f"{x:.6f}"


def _greeks_for(line: QuoteLine) -> str:
    """``greeks=`` for the row's price: ``"vega"``, so that price() gets vega from the solve
    itself (flat inputs, with or without cash dividends: a tangent marched with the
    solution, or for a European without dividends an identity of the model) and spends
    nothing on rho, which the check does not use."""
    return "vega"


def _vega(line: QuoteLine, res: Result, accuracy: str) -> float:
    """The Result's vega, else a central difference of prices at the vol +- VEGA_BUMP."""
    vega = res.vega
    if math.isfinite(vega):
        return float(vega)
    m = line.market
    up = m.vol + VEGA_BUMP if m.vol + VEGA_BUMP <= VOL_RANGE[1] else m.vol  # one-sided at the ends
    down = m.vol - VEGA_BUMP if m.vol > 2.0 * VEGA_BUMP else m.vol

    def at(v: float) -> float:
        if v == m.vol:
            return res.price
        return price(line.option, replace(m, vol=v), accuracy=accuracy, greeks="grid").price

    return (at(up) - at(down)) / (up - down)


def check_row(raw: Mapping[str, object], settings: CheckSettings | None = None) -> RowCheck:
    """Price one row, compare it with its quote and diagnose a mismatch.

    Never raises for bad data: a row that cannot be read or priced comes back with status
    ``"error"`` and a note naming the field and value.

    Parameters
    ----------
    raw : mapping of str to str
        One CSV row (column name -> cell text).
    settings : CheckSettings, optional
        Tolerance, accuracy and diagnosis limits.

    Returns
    -------
    RowCheck
    """
    settings = settings or CheckSettings()
    extra = raw.get(None)  # csv.DictReader puts surplus cells under the key None
    if extra:
        return RowCheck(note=f"row has {len(extra)} more cell(s) than the header: {list(extra)!r}")
    try:
        line = parse_quote(raw)
    except (StoplineError, ValueError) as exc:
        return RowCheck(note=str(exc))
    q = line.quote
    moneyness = line.option.strike / line.market.spot
    try:
        res = price(line.option, line.market, accuracy=settings.accuracy, greeks=_greeks_for(line))
        vega = _vega(line, res, settings.accuracy)
    except (StoplineError, ValueError) as exc:
        return RowCheck(note=f"pricing failed: {exc}", quote=q, moneyness=moneyness)
    t = res.time_to_expiry
    model = res.price
    diff = q - model
    allowed = settings.tolerance.allowed(vega)
    iv_problem = ""
    try:
        # the search starts from this row's own price and vega (Newton, with curvature): a
        # quote near the model costs one or two more prices, within a vol point at most three
        iv = float(implied_vol(line.option, line.market, q, accuracy=settings.accuracy,
                               start=res, start_vega=vega))
    except (ImpliedVolError, StoplineError, ValueError) as exc:
        iv, iv_problem = None, str(exc)
    # dividends left out of the pricing (ex-date after expiry, or on the valuation date)
    ignored = (dividend_schedule(line.market.dividends, t, line.market.valuation_date).warnings
               if line.market.dividends else ())
    status, causes = "ok", ()
    if abs(diff) <= allowed:
        note = "; ".join(ignored)
    else:
        status = "mismatch"
        why, causes = _diagnose(line, allowed, iv, iv_problem, settings)
        note = "; ".join((why, *ignored))
    return RowCheck(
        model_price=model, difference=diff,
        implied_vol=math.nan if iv is None else iv,
        vol_difference=math.nan if iv is None else iv - line.market.vol,
        tolerance=allowed, status=status, note=note, causes=causes, quote=q, vega=vega,
        moneyness=moneyness, time_to_expiry=t,
    )


def check_rows(
    rows: Iterable[tuple[int, Mapping[str, object]]], settings: CheckSettings
) -> list[tuple[int, RowCheck]]:
    """Check a chunk of ``(index, row)`` pairs; the unit of work sent to a worker.

    An unexpected exception on one row (a bug, not bad data) becomes that row's error note
    with the exception's type, so one row cannot sink the batch.
    """
    out = []
    for i, raw in rows:
        try:
            chk = check_row(raw, settings)
        except Exception as exc:  # noqa: BLE001 - reported on the row, never dropped
            chk = RowCheck(note=f"unexpected error (please report): {type(exc).__name__}: {exc}")
        out.append((i, chk))
    return out


# --------------------------------------------------------------------------- the book


def read_book(path: str | os.PathLike[str]) -> tuple[list[str], list[dict[str, object]]]:
    """Read a book: its header and its rows, in file order (blank lines skipped).

    Raises
    ------
    InputError
        If the file cannot be read, has no header, repeats a column, lacks a required
        column or already has one of the output columns.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise InputError("quotes", str(p), f"cannot be read ({exc.strerror})") from None
    except UnicodeDecodeError:
        raise InputError("quotes", str(p), "is not UTF-8 text") from None
    reader = csv.DictReader(io.StringIO(text, newline=""))
    header = [h.strip() for h in (reader.fieldnames or [])]
    if not header:
        raise InputError("quotes", str(p), "has no header row")
    dupes = sorted({h for h in header if header.count(h) > 1})
    if dupes:
        raise InputError("quotes", str(p), f"repeats column(s): {', '.join(dupes)}")
    missing = [c for c in REQUIRED_COLUMNS if c not in header]
    if missing:
        raise InputError("quotes", str(p), f"lacks required column(s): {', '.join(missing)}")
    clash = [c for c in OUTPUT_COLUMNS if c in header]
    if clash:
        raise InputError("quotes", str(p), f"already has output column(s): {', '.join(clash)}")
    reader.fieldnames = header
    rows = [dict(r) for r in reader]
    return header, rows


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


_UMASK = _current_umask()

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def safe_cell(text: str) -> str:
    """Escape a text cell a spreadsheet would run as a formula; numbers are left alone.

    A cell starting with ``= + - @`` (or tab, carriage return) is prefixed with a single
    quote unless it reads as a number (so ``-0.0123`` stays a number).

    References
    ----------
    OWASP, "CSV Injection" (common practice).
    """
    if not text or not text.startswith(_FORMULA_START):
        return text
    try:
        float(text)
    except ValueError:
        return "'" + text
    return text


def results_table(
    header: Sequence[str], rows: Sequence[Mapping[str, object]], checks: Sequence[RowCheck]
) -> str:
    """The results as CSV text: every input column, then :data:`OUTPUT_COLUMNS`."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\n")
    columns = list(header) + list(OUTPUT_COLUMNS)
    writer.writerow([safe_cell(c) for c in columns])
    for raw, chk in zip(rows, checks, strict=True):
        cells = [str(raw.get(h)) if raw.get(h) is not None else "" for h in header]
        out = chk.cells()
        cells += [out[c] for c in OUTPUT_COLUMNS]
        writer.writerow([safe_cell(c) for c in cells])
    return buf.getvalue()


def write_atomic(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder and os.replace."""
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.chmod(tmp, 0o666 & ~_UMASK)
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


# --------------------------------------------------------------------------- the batch


@dataclass(frozen=True)
class CrossCheckRun:
    """A finished cross-check.

    Attributes
    ----------
    source : str
        Path of the book.
    header : list of str
        Input columns.
    rows : list of dict
        Input rows, in order.
    checks : list of RowCheck
        One per row, same order.
    settings : CheckSettings
        What decided the outcomes.
    results_path : pathlib.Path
        Where ``results.csv`` was written.
    seconds : float
        Wall time of the pricing (rows resumed from a checkpoint excluded).
    rows_priced : int
        Rows priced in this run (not taken from a checkpoint).
    workers : str
        How the rows were spread (e.g. ``"2 processes"``).
    """

    source: str
    header: list[str]
    rows: list[dict[str, object]]
    checks: list[RowCheck]
    settings: CheckSettings
    results_path: Path
    seconds: float
    rows_priced: int
    workers: str

    def counts(self) -> dict[str, int]:
        """Rows by status (every status present, possibly 0)."""
        out = dict.fromkeys(STATUSES, 0)
        for c in self.checks:
            out[c.status] += 1
        return out

    @property
    def has_errors(self) -> bool:
        """True if any row has status ``"error"``."""
        return any(c.status == "error" for c in self.checks)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _load_partial(path: Path, digest: str, settings: CheckSettings) -> dict[int, RowCheck]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return {}
    except (OSError, ValueError) as exc:
        raise InputError("resume", str(path), f"checkpoint cannot be read ({exc})") from None
    if data.get("format") != _PARTIAL_FORMAT:
        raise InputError("resume", str(path), "is not a stopline cross-check checkpoint")
    if data.get("input_sha256") != digest:
        raise InputError("resume", str(path), "was made from a different quotes file; "
                         "remove it or run without --resume")
    if data.get("settings") != settings.record():
        raise InputError("resume", str(path), f"was made with other settings {data.get('settings')}; "
                         "use the same tolerances and accuracy, or run without --resume")
    return {int(k): RowCheck.from_record(v) for k, v in data["done"].items()}


def _save_partial(path: Path, digest: str, settings: CheckSettings, done: Mapping[int, RowCheck]) -> None:
    data = {
        "format": _PARTIAL_FORMAT,
        "input_sha256": digest,
        "settings": settings.record(),
        "done": {str(i): done[i].record() for i in sorted(done)},
    }
    write_atomic(path, json.dumps(data))


def run_crosscheck(
    quotes: str | os.PathLike[str],
    out_dir: str | os.PathLike[str],
    *,
    settings: CheckSettings | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    resume: bool = False,
    on_progress: Callable[[int, int], None] | None = None,
    checkpoint_seconds: float = 2.0,
) -> CrossCheckRun:
    """Cross-check every row of a book and write ``out_dir/results.csv``.

    Parameters
    ----------
    quotes : path
        The book (CSV with a header; see :data:`REQUIRED_COLUMNS`). Never modified.
    out_dir : path
        Output folder (created if needed).
    settings : CheckSettings, optional
        Tolerance, accuracy, diagnosis limits.
    workers : int, optional
        Local processes (default: all cores). 1 prices in this process.
    scheduler : str, optional
        Address of a running Dask distributed scheduler; rows are priced on its workers.
    resume : bool
        Continue from ``out_dir/partial.json`` left by an interrupted run of the same book
        with the same settings.
    on_progress : callable, optional
        ``on_progress(done, total)`` after each finished chunk, in this process. An exception
        raised there (e.g. KeyboardInterrupt) stops the run after the checkpoint is saved.
    checkpoint_seconds : float
        Least time between two checkpoint writes (longer for a large book: at least twenty
        times the last write took).

    Returns
    -------
    CrossCheckRun

    Raises
    ------
    InputError
        For a book that cannot be read (the rows themselves never raise).
    KeyboardInterrupt
        Re-raised after the finished rows are saved to ``out_dir/partial.json``.
    """
    from ._executors import make_executor

    settings = settings or CheckSettings()
    src = Path(quotes)
    header, rows = read_book(src)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    results_path = out / RESULTS_NAME
    if results_path.resolve() == src.resolve():
        raise InputError("out", str(out), "would overwrite the quotes file; choose another folder")
    partial_path = out / PARTIAL_NAME
    digest = _digest(src)
    done = _load_partial(partial_path, digest, settings) if resume else {}
    done = {i: c for i, c in done.items() if 0 <= i < len(rows)}
    todo = [(i, rows[i]) for i in range(len(rows)) if i not in done]
    total = len(rows)
    executor = make_executor(workers=workers, scheduler=scheduler)
    if on_progress is not None:
        on_progress(len(done), total)
    last_save = time.monotonic()
    interval = checkpoint_seconds
    start = time.perf_counter()
    priced = 0
    try:
        for batch in executor.map_chunks(todo, settings):
            for i, chk in batch:
                done[i] = chk
            priced += len(batch)
            now = time.monotonic()
            if now - last_save >= interval:
                _save_partial(partial_path, digest, settings, done)
                last_save = time.monotonic()
                interval = max(checkpoint_seconds, 20.0 * (last_save - now))
            if on_progress is not None:
                on_progress(len(done), total)
    except BaseException:
        try:
            for batch in executor.drain():  # chunks that finished while stopping
                for i, chk in batch:
                    done[i] = chk
        finally:
            _save_partial(partial_path, digest, settings, done)
        raise
    finally:
        executor.close()
    seconds = time.perf_counter() - start
    checks = [done[i] for i in range(total)]
    write_atomic(results_path, results_table(header, rows, checks))
    if partial_path.exists():
        partial_path.unlink()
    return CrossCheckRun(str(src), header, rows, checks, settings, results_path, seconds,
                         priced, executor.description)
