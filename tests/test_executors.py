"""How a batch is cut into chunks for the workers (stopline._executors)."""

from __future__ import annotations

import pytest

from stopline._executors import MAX_CHUNK, chunked


@pytest.mark.parametrize(("n", "workers"), [(0, 2), (1, 2), (7, 2), (32, 2), (480, 2), (1000, 8), (50, 1)])
def test_chunks_keep_every_row_in_order_and_shrink_towards_the_end(n, workers):
    pairs = [(i, {"id": str(i)}) for i in range(n)]
    chunks = chunked(pairs, workers)
    assert [p for c in chunks for p in c] == pairs  # none dropped, none repeated, in order
    sizes = [len(c) for c in chunks]
    assert all(1 <= s <= MAX_CHUNK for s in sizes)
    assert sizes == sorted(sizes, reverse=True)  # guided: never larger than the one before
    if n:
        assert sizes[-1] == 1  # the last piece of work is one row: no worker waits long
    # while much is left, chunks are full (few round trips to the workers)
    if n >= 4 * workers * MAX_CHUNK:
        assert sizes[0] == MAX_CHUNK


def test_packed_results_rebuild_the_same_row_checks():
    # what a worker sends back (plain tuples, only the cells a check reads going out) must
    # give the parent exactly the RowCheck of a check in this process
    from stopline._executors import _slim, _unpack, check_packed
    from stopline.crosscheck import CheckSettings, check_rows

    rows = [
        {"id": "A", "kind": "put", "style": "american", "spot": "100", "strike": "105",
         "expiry": "0.5", "rate": "0.05", "vol": "0.3", "quote": "8.1", "desk": "x"},
        {"id": "B", "kind": "put", "style": "american", "spot": "100", "strike": "105",
         "expiry": "0.5", "rate": "0.05", "vol": "-1", "quote": "8.1"},
        {"id": "C", "kind": "call", "style": "european", "spot": "100", "strike": "95",
         "expiry": "1", "rate": "0.03", "vol": "0.2", "quote": "9", None: ["surplus"]},
    ]
    pairs = list(enumerate(rows))
    settings = CheckSettings()
    slim = _slim(pairs)
    assert "desk" not in slim[0][1] and slim[2][1][None] == ["surplus"]
    assert _unpack(check_packed(slim, settings)) == check_rows(pairs, settings)
