"""Looking a batch of references up in the submissions' shingles, compiled.

The references' shingles are never built as sets: each reference's k-word shingles are
hashed as they are read (the rolling polynomial of `dedup.check.shingles`, O(1) a
shingle), tested against a bit filter of the submission keys (2 MB, so it stays in
cache: most shingles of a reference are in no submission and stop there), and only
those that pass are searched in the sorted keys. What comes out is, per reference, the
distinct keys it holds.

Cost O(words) per batch, compiled, in parallel over references; the binary searches
O(log S) each for the few shingles passing the filter.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..features.hashing import ROLL_MULTIPLIER, fmix64, sort_unique_segments

__all__ = ["FILTER_BITS", "key_filter", "probe_batch"]

# Bits of the filter: 2^24 bits is 2 MB; with S keys a shingle in no submission passes
# with probability about S / 2^24 (2.4 % for 400,000 keys).
FILTER_BITS = 24
_SHIFT = np.uint64(64 - FILTER_BITS)


@njit(cache=True, nogil=True)
def _fill_filter(keys, bits):
    for i in range(keys.shape[0]):
        b = keys[i] >> _SHIFT
        bits[b >> np.uint64(6)] |= np.uint64(1) << (b & np.uint64(63))


def key_filter(keys: np.ndarray) -> np.ndarray:
    """The bit filter of sorted ``keys`` (uint64 words)."""
    bits = np.zeros(1 << (FILTER_BITS - 6), dtype=np.uint64)
    _fill_filter(keys, bits)
    return bits


@njit(cache=True, nogil=True)
def _probe_one(hashes, a, b, k, keys, bits, out, w, write):
    # Roll over the shingles of words [a, b); count (and with `write`, store from w) the
    # index of every shingle found in `keys`. Returns the count.
    n = b - a - k + 1
    if n <= 0:
        return 0
    lead = np.uint64(1)
    h = np.uint64(0)
    for j in range(k):
        h = h * ROLL_MULTIPLIER + hashes[a + j]
        if j > 0:
            lead *= ROLL_MULTIPLIER
    found = 0
    for s in range(n):
        if s > 0:
            h = (h - hashes[a + s - 1] * lead) * ROLL_MULTIPLIER + hashes[a + s + k - 1]
        v = fmix64(h)
        t = v >> _SHIFT
        if bits[t >> np.uint64(6)] & (np.uint64(1) << (t & np.uint64(63))):
            at = np.searchsorted(keys, v)
            if at < keys.shape[0] and keys[at] == v:
                if write:
                    out[w + found] = at
                found += 1
    return found


@njit(cache=True, parallel=True, nogil=True)
def _probe(hashes, offsets, k, keys, bits):
    n_docs = offsets.shape[0] - 1
    counts = np.zeros(n_docs, dtype=np.int64)
    empty = np.zeros(0, dtype=np.int64)
    for d in prange(n_docs):
        counts[d] = _probe_one(hashes, offsets[d], offsets[d + 1], k, keys, bits, empty, 0, False)
    hit_offsets = np.zeros(n_docs + 1, dtype=np.int64)
    for d in range(n_docs):
        hit_offsets[d + 1] = hit_offsets[d] + counts[d]
    out = np.empty(hit_offsets[n_docs], dtype=np.int64)
    for d in prange(n_docs):
        if counts[d]:
            _probe_one(hashes, offsets[d], offsets[d + 1], k, keys, bits, out, hit_offsets[d], True)
    return out, hit_offsets


def probe_batch(
    hashes: np.ndarray, offsets: np.ndarray, k: int, keys: np.ndarray, bits: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The distinct indices into ``keys`` of the k-word shingles of each text of a batch.

    ``hashes``/``offsets`` are the batch's word hashes (`dedup.align.WordSpans`), ``bits`` the
    `key_filter` of ``keys``. Returns ``(key_indices, offsets)``: text ``d`` holds
    ``key_indices[offsets[d]:offsets[d + 1]]``, sorted.
    """
    if keys.shape[0] == 0:
        return np.zeros(0, np.int64), np.zeros(offsets.shape[0], np.int64)
    found, found_offsets = _probe(
        np.ascontiguousarray(hashes, np.uint64), offsets.astype(np.int64), k, keys, bits
    )
    unique, unique_offsets = sort_unique_segments(found.astype(np.uint64), found_offsets)
    return unique.astype(np.int64), unique_offsets
