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
