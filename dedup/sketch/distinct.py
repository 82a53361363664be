"""The distinct values of a stream of 64-bit hashes, gathered chunk by chunk.

An open-addressing hash set (linear probing, at most half full) in compiled code: each
chunk costs one probe or two per value, whatever the number of repeats, and the set
holds only the distinct values. The TF-IDF statistics use it for the exact vocabulary
of a corpus (to measure how many terms share a hashed column), where sorting every
chunk's tokens cost more than all the rest of the document frequencies.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["DistinctSet"]

# Fibonacci hashing (Knuth, TAOCP vol. 3, 6.4): the top bits of v * K spread any keys.
_K = np.uint64(0x9E3779B97F4A7C15)


@njit(cache=True, nogil=True)
def _insert(table, bits, values, start, count, most):
    # Insert values[start:] until the set holds `most` values; returns (next value, count).
    mask = np.uint64(table.shape[0] - 1)
    shift = np.uint64(64 - bits)
    i = start
    while i < values.shape[0]:
        if count >= most:
            return i, count
        v = values[i]
        i += 1
        if v == 0:  # 0 marks an empty place; it is counted by the caller
            continue
        j = (v * _K) >> shift
        while True:
            held = table[j]
            if held == v:
                break
            if held == 0:
                table[j] = v
                count += 1
                break
            j = (j + np.uint64(1)) & mask
    return i, count


class DistinctSet:
    """Distinct uint64 values added chunk by chunk.

    >>> s = DistinctSet()
    >>> s.add(np.array([5, 0, 5, 7], np.uint64)); s.add(np.array([7, 9], np.uint64))
    >>> len(s), s.values().tolist()
    (4, [0, 5, 7, 9])
    """

    def __init__(self, bits: int = 12) -> None:
        self._bits = bits
        self._table = np.zeros(1 << bits, dtype=np.uint64)
        self._count = 0
        self._zero = False

    def __len__(self) -> int:
        return self._count + self._zero

    def add(self, values: np.ndarray) -> None:
        values = np.ascontiguousarray(values, dtype=np.uint64)
        if not self._zero and values.shape[0] and (values == 0).any():
            self._zero = True
        start = 0
        while True:
            start, self._count = _insert(
                self._table, self._bits, values, start, self._count, self._table.shape[0] // 2
            )
            if start >= values.shape[0]:
                return
            self._grow()

    def _grow(self) -> None:
        held = self._table[self._table != 0]
        self._bits += 1
        self._table = np.zeros(1 << self._bits, dtype=np.uint64)
        self._count = 0
        _insert(self._table, self._bits, held, 0, 0, held.shape[0] + 1)
        self._count = int(held.shape[0])

    def values(self) -> np.ndarray:
        """The distinct values, in increasing order."""
        held = np.sort(self._table[self._table != 0])
        return np.concatenate([np.zeros(1, np.uint64), held]) if self._zero else held
