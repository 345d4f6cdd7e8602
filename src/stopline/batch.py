"""Many prices at once: :func:`price_many`, in this process or spread over worker processes.

Each row is priced by :func:`stopline.pricing.price` with the same arguments, so a batch
result is bitwise the result of the single call. With ``workers > 1`` the rows are cut into
contiguous chunks, priced in a pool of processes (each pays for its own interpreter only once:
the numba kernels load from the on-disk cache, or are inherited when the platform forks), and
put back in input order. A row that cannot be priced stops the whole batch with
:class:`BatchRowError` naming the row: no row is ever dropped silently.
"""

from __future__ import annotations

import os
from collections.abc import Sequence

from ._validate import check_choice
from .contract import Option
from .errors import InputError, StoplineError
from .exercise import ExerciseMethod, get_method
from .market import Market
from .pricing import GREEKS, PRESETS, Result, price

__all__ = ["BatchRowError", "price_many", "default_workers"]


class BatchRowError(StoplineError):
    """A row of a batch could not be priced.

    Attributes
    ----------
    row : int
        Zero-based position of the row in the batch.
    cause : StoplineError
        The error that row raised.
    """

    def __init__(self, row: int, cause: StoplineError) -> None:
        self.row = row
        self.cause = cause
        super().__init__(f"row {row}: {cause}")

    def __reduce__(self):  # noqa: ANN204 - keep the row and its cause across processes
        c = self.cause
        args = (c.field, c.value, c.reason) if isinstance(c, InputError) else c.args
        return (_rebuild_row_error, (self.row, type(c), args))


def _rebuild_row_error(row: int, cause_type: type[StoplineError], args: tuple) -> BatchRowError:
    return BatchRowError(row, cause_type(*args))


def _price_rows(
    start: int, options: Sequence[Option], markets: Sequence[Market], accuracy: str,
    method: ExerciseMethod, greeks: str,
) -> list[Result]:
    out = []
    for i, (opt, mkt) in enumerate(zip(options, markets, strict=True)):
        try:
            out.append(price(opt, mkt, accuracy=accuracy, method=method, greeks=greeks))
        except StoplineError as exc:
            raise BatchRowError(start + i, exc) from None
    return out


def _check_workers(workers: object) -> int:
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise InputError("workers", workers, "must be an integer >= 1")
    return workers


def price_many(
    options: Sequence[Option],
    markets: Sequence[Market] | Market,
    *,
    accuracy: str = "standard",
    method: str | ExerciseMethod = "direct",
    greeks: str = "full",
    workers: int = 1,
) -> list[Result]:
    """Price many options, in order, optionally over several processes.

    Parameters
    ----------
    options : sequence of Option
        The contracts.
    markets : Market or sequence of Market
        One market for every option, or one per option (same length as ``options``).
    accuracy : {"fast", "standard", "fine"}
        Preset for every row, as in :func:`stopline.price`.
    method : {"direct", "psor"} or a solver instance
        Exercise solver for every row.
    greeks : {"full", "grid", "vega"}
        As in :func:`stopline.price`: ``"grid"`` skips vega and rho (their tangents or
        re-solves), the choice for re-pricing a book; ``"vega"`` skips rho only.
    workers : int
        Processes to use; 1 prices in this process. More than the rows (or the cores) is
        allowed but gains nothing.

    Returns
    -------
    list of Result
        ``result[i]`` is ``price(options[i], markets[i], accuracy=accuracy, method=method,
        greeks=greeks)``.

    Raises
    ------
    InputError
        If ``markets`` does not match ``options`` in length, or ``workers`` is not >= 1.
    BatchRowError
        If a row cannot be priced; names the first such row (in input order for one
        worker, in chunk order for several) and carries the row's own error.

    References
    ----------
    The per-row method is that of :func:`stopline.price` (Crank-Nicolson with Rannacher start
    and Richardson extrapolation; Brennan and Schwartz, 1977, for the exercise constraint).

    Examples
    --------
    >>> from stopline import Market, Option
    >>> from stopline.batch import price_many
    >>> res = price_many([Option("put", k, 0.5) for k in (90.0, 100.0)], Market(100.0, 0.03, 0.25))
    >>> [round(float(r.price), 4) for r in res]
    [2.4877, 6.396]
    """
    n_workers = _check_workers(workers)
    check_choice("accuracy", accuracy, tuple(PRESETS))
    check_choice("greeks", greeks, GREEKS)
    solver = get_method(method)
    opts = list(options)
    if isinstance(markets, Market):
        mkts = [markets] * len(opts)
    else:
        mkts = list(markets)
        if len(mkts) != len(opts):
            raise InputError(
                "markets", f"<{len(mkts)} markets>", f"must be one Market or {len(opts)} of them"
            )
    for i, (o, m) in enumerate(zip(opts, mkts, strict=True)):
        if not isinstance(o, Option):
            raise BatchRowError(i, InputError("option", o, "must be an Option"))
        if not isinstance(m, Market):
            raise BatchRowError(i, InputError("market", m, "must be a Market"))
    n = len(opts)
    n_workers = min(n_workers, max(n, 1))
    if n_workers == 1:
        return _price_rows(0, opts, mkts, accuracy, solver, greeks)
    # imported here: a one-process batch (and ``import stopline``) need not load them
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    # a few chunks per worker balance uneven rows (long expiries cost more) at small overhead
    n_chunks = min(n, 4 * n_workers)
    bounds = [round(i * n / n_chunks) for i in range(n_chunks + 1)]
    ctx = mp.get_context("fork" if "fork" in mp.get_all_start_methods() else "spawn")
    with ProcessPoolExecutor(max_workers=n_workers, mp_context=ctx) as pool:
        futures = [
            pool.submit(_price_rows, a, opts[a:b], mkts[a:b], accuracy, solver, greeks)
            for a, b in zip(bounds[:-1], bounds[1:], strict=True)
        ]
        out: list[Result] = []
        for fut in futures:
            out.extend(fut.result())
    return out


def default_workers() -> int:
    """Cores this process may use (the natural ``workers`` for a large batch)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1
