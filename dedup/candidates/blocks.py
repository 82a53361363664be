"""Running a search kernel over blocks of documents, in threads, in a fixed order.

The exact searches (`containment_candidate_pairs`, `cosine_candidate_pairs`) probe an
index once per document; the probes are independent, so the documents are cut into
blocks and each block is searched by a compiled kernel that releases the interpreter
lock, in as many threads as numba uses. Each block returns its own pairs, joined in
block order, so the result does not depend on the threads.
"""

from __future__ import annotations

from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor

import numpy as np
from numba import njit

from ..features.segment_sort import sorted_distinct

__all__ = ["block_bounds", "pairs_by_blocks", "grown"]

# Documents per block: enough to keep a thread busy, few enough that the blocks share out evenly.
BLOCK_DOCS = 512


def block_bounds(n_docs: int, block: int = BLOCK_DOCS) -> list[tuple[int, int]]:
    """``(first, last)`` ranges of at most ``block`` documents covering ``0 … n_docs - 1``.

    >>> block_bounds(5, 2)
    [(0, 2), (2, 4), (4, 5)]
    """
    return [(first, min(first + block, n_docs)) for first in range(0, n_docs, block)]


@njit(cache=True, nogil=True)
def grown(values: np.ndarray, used: int) -> np.ndarray:
    """``values`` with twice the room, its first ``used`` entries kept (for kernels that
    append an unknown number of results)."""
    out = np.empty(max(2 * values.shape[0], 1024), dtype=values.dtype)
    out[:used] = values[:used]
    return out


def pairs_by_blocks(
    search: Callable[[int, int], tuple[np.ndarray, np.ndarray]], n_docs: int, workers: int | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Pairs ``(left < right)`` found by ``search(first, last)`` over every block, distinct
    and sorted by (left, right).

    ``search`` must be pure and release the interpreter lock to run in parallel; its
    pairs may come in any order and twice. Cost: the searches, then one sort of the pairs
    in place; each block's pairs are kept as one 8-byte key each until the end (24 bytes
    a pair at the peak, with the two arrays returned).
    """
    import numba

    bounds = block_bounds(n_docs)
    workers = max(1, min(workers or numba.get_num_threads(), len(bounds)))
    width = max(n_docs, 1)

    def keyed(bound: tuple[int, int]) -> np.ndarray:
        left, right = search(*bound)
        return left * width + right

    if workers == 1:
        parts = [keyed(bound) for bound in bounds]
    else:
        with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="dedup-search") as pool:
            parts = list(pool.map(keyed, bounds))
    keys = np.concatenate(parts) if parts else np.zeros(0, np.int64)
    del parts
    keys.sort()
    if keys.shape[0] > 1 and not np.all(keys[1:] != keys[:-1]):
        keys = sorted_distinct(keys)
    return keys // width, keys % width
