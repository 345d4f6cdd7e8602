"""Reporting the exercise boundary: a monotone least-squares fit of the located points.

The kernels locate the critical spot after every time step, below the grid spacing (see
:func:`stopline._kernels.locate_boundary`). With a flat rate, yield and volatility the true
boundary is monotone in time to expiry: a put's critical spot falls, a call's rises
(Kim 1990). In the first few steps after expiry the exercise region spans only a few nodes
and the located points can step back by up to about one grid spacing; elsewhere they are
monotone already. :func:`monotone_fit` projects them onto monotone sequences in the least
squares sense (pool-adjacent-violators), which leaves monotone stretches untouched and
replaces each stretch that steps back by its mean. ``ExerciseBoundary.raw_spot`` keeps the
located points as they were.

References
----------
Ayer, M., Brunk, H. D., Ewing, G. M., Reid, W. T. and Silverman, E. (1955), An empirical
distribution function for sampling with incomplete information, Ann. Math. Statist. 26(4).
Kim, I. J. (1990), The analytic valuation of American options, Rev. Financial Stud. 3(4).
"""

from __future__ import annotations

import csv
import datetime as _dt
import os
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from . import _kernels
from ._atomic import atomic_write
from ._types import FloatArray

if TYPE_CHECKING:
    from .pricing import Result

__all__ = ["monotone_fit", "boundary_dates", "boundary_rows", "write_boundary_csv"]


def monotone_fit(values: FloatArray, *, decreasing: bool) -> FloatArray:
    """Least-squares monotone fit by pool-adjacent-violators; NaNs are kept in place.

    Parameters
    ----------
    values : ndarray, shape (n,)
        Points in order (here: critical spots by increasing time to expiry).
    decreasing : bool
        Fit a non-increasing sequence (puts) instead of a non-decreasing one (calls).

    Returns
    -------
    ndarray, shape (n,)
        The fit; equal to ``values`` wherever they are already monotone.
    """
    src = np.ascontiguousarray(values, dtype=np.float64)
    out = np.empty_like(src)
    _kernels.monotone_fit_into(src, bool(decreasing), out)
    return out


def boundary_dates(result: Result) -> list[_dt.date] | None:
    """Calendar date of each boundary point, or None without a valuation date and date expiry.

    A point at time to expiry ``tau`` falls ``T - tau`` years after valuation; years are
    turned into days at 365 a year (ACT/365 fixed, as the time to expiry was measured).
    """
    val, exp = result.market.valuation_date, result.option.expiry
    if val is None or not isinstance(exp, _dt.date):
        return None
    days = (result.time_to_expiry - result.boundary.time_to_expiry) * 365.0
    return [val + _dt.timedelta(days=float(round(d))) for d in days]


def boundary_rows(result: Result) -> list[dict[str, object]]:
    """The boundary as table rows, from valuation to expiry.

    Columns: ``years_from_valuation``, ``time_to_expiry``, ``date`` (ISO, or empty),
    ``critical_spot`` (the reported monotone fit) and ``located_spot`` (as located).
    """
    b = result.boundary
    dates = boundary_dates(result)
    rows = []
    for i in range(b.time_to_expiry.shape[0] - 1, -1, -1):
        tau = float(b.time_to_expiry[i])
        rows.append({
            "years_from_valuation": result.time_to_expiry - tau,
            "time_to_expiry": tau,
            "date": dates[i].isoformat() if dates is not None else "",
            "critical_spot": float(b.spot[i]),
            "located_spot": float(b.raw_spot[i]) if b.raw_spot.size else float(b.spot[i]),
        })
    return rows


def write_boundary_csv(result: Result, path: str | os.PathLike[str]) -> Path:
    """Write :func:`boundary_rows` to ``path`` as CSV, atomically; NaN is written as empty."""
    rows = boundary_rows(result)
    fields = ["years_from_valuation", "time_to_expiry", "date", "critical_spot", "located_spot"]

    def write(fh) -> None:  # noqa: ANN001
        w = csv.DictWriter(fh, fieldnames=fields)
        w.writeheader()
        for row in rows:
            w.writerow({
                k: ("" if isinstance(v, float) and not np.isfinite(v)
                    else (f"{v:.10g}" if isinstance(v, float) else v))
                for k, v in row.items()
            })

    return atomic_write(path, write)
