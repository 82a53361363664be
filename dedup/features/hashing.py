"""Stable 64-bit hashing of tokens and shingles, compiled with numba.

Python's ``hash()`` changes from process to process, so every hash here is our own:
FNV-1a over the UTF-8 bytes of a token, finished with the MurmurHash3 64-bit
finalizer (``fmix64``) so that nearby inputs land far apart. The same bytes give the
same hash on every machine, in every process, forever; tests pin a few values. The hash
of bytes itself lives in `dedup.kernels.hash64` (normalize uses it too) and is
re-exported here.

All kernels take a whole corpus at once as one byte buffer with document offsets
(``buf[doc_offsets[d]:doc_offsets[d + 1]]`` is document ``d``), so no Python code runs
per token or per shingle. Costs are linear in the number of bytes (times k for
shingles).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..kernels.hash64 import FNV_OFFSET, FNV_PRIME, fmix64, hash_bytes
from .segment_sort import sort_segments_count_unique

__all__ = [
    "FNV_OFFSET",
    "FNV_PRIME",
    "fmix64",
    "hash_bytes",
    "count_tokens",
    "token_hashes",
    "shingle_counts",
    "word_shingles",
    "rolling_word_shingles",
    "ROLL_MULTIPLIER",
    "char_ngram_counts",
    "char_ngrams",
    "sort_unique_segments",
    "sort_segments_count_unique",
]

_SPACE = np.uint8(0x20)
# The old private name of `hash_bytes`, for code that still uses it.
_hash_bytes = hash_bytes


@njit(cache=True, parallel=True, nogil=True)
def count_tokens(buf: np.ndarray, doc_offsets: np.ndarray) -> np.ndarray:
    """Number of space-separated tokens in each document; O(bytes)."""
    n_docs = doc_offsets.shape[0] - 1
    counts = np.zeros(n_docs, dtype=np.int64)
    for d in prange(n_docs):
        in_token = False
        c = 0
        for i in range(doc_offsets[d], doc_offsets[d + 1]):
            is_sep = buf[i] <= _SPACE
            if not is_sep and not in_token:
                c += 1
            in_token = not is_sep
        counts[d] = c
    return counts


@njit(cache=True, parallel=True, nogil=True)
def token_hashes(buf: np.ndarray, doc_offsets: np.ndarray, token_offsets: np.ndarray) -> np.ndarray:
    """Stable hash of every token, documents laid end to end as in ``token_offsets``.

    ``token_offsets`` is the exclusive cumulative sum of `count_tokens` (length
    ``n_docs + 1``). Cost O(bytes).
    """
    n_docs = doc_offsets.shape[0] - 1
    out = np.empty(token_offsets[n_docs], dtype=np.uint64)
    for d in prange(n_docs):
        t = token_offsets[d]
        i = doc_offsets[d]
        stop = doc_offsets[d + 1]
        while i < stop:
            while i < stop and buf[i] <= _SPACE:
                i += 1
            if i >= stop:
                break
            start = i
            while i < stop and buf[i] > _SPACE:
                i += 1
            out[t] = hash_bytes(buf, start, i)
            t += 1
    return out


@njit(cache=True, nogil=True)
def shingle_counts(token_offsets: np.ndarray, k: int) -> np.ndarray:
    """Shingles per document: ``n - k + 1``, at least one when a document has any token."""
    n_docs = token_offsets.shape[0] - 1
    counts = np.zeros(n_docs, dtype=np.int64)
    for d in range(n_docs):
        n = token_offsets[d + 1] - token_offsets[d]
        if n > 0:
            counts[d] = max(1, n - k + 1)
    return counts


@njit(cache=True, parallel=True, nogil=True)
def word_shingles(
    tokens: np.ndarray, token_offsets: np.ndarray, shingle_offsets: np.ndarray, k: int
) -> np.ndarray:
    """Order-sensitive hash of every run of ``k`` consecutive token hashes; O(tokens * k).

    A document shorter than ``k`` tokens gets a single shingle of all its tokens.
    """
    n_docs = token_offsets.shape[0] - 1
    out = np.empty(shingle_offsets[n_docs], dtype=np.uint64)
    for d in prange(n_docs):
        t0 = token_offsets[d]
        n = token_offsets[d + 1] - t0
        s0 = shingle_offsets[d]
        m = shingle_offsets[d + 1] - s0
        width = min(k, n)
        for s in range(m):
            h = FNV_OFFSET
            for j in range(width):
                h = fmix64((h ^ tokens[t0 + s + j]) * FNV_PRIME)
            out[s0 + s] = h
    return out


# Odd multiplier of the polynomial shingle hash (the 64-bit golden ratio, made 3 mod 4 so
# that P - 1 holds a single factor of two: two shingles of the same words in another
# order collide only when the word hashes differ by a multiple of 2^63).
ROLL_MULTIPLIER = np.uint64(0x9E3779B97F4A7C17)


@njit(cache=True, parallel=True, nogil=True)
def rolling_word_shingles(
    tokens: np.ndarray, token_offsets: np.ndarray, shingle_offsets: np.ndarray, k: int
) -> np.ndarray:
    """Shingle hashes of the ``binned`` scheme: fmix64 of the polynomial
    t0*P^(k-1) + t1*P^(k-2) + ... + t(k-1) mod 2^64 of ``k`` consecutive token hashes.

    The polynomial rolls from one shingle to the next (subtract the first word, shift,
    add the next), so a shingle costs O(1) instead of the O(k) of `word_shingles`. A
    document shorter than ``k`` tokens gets a single shingle of all its tokens.
    """
    n_docs = token_offsets.shape[0] - 1
    out = np.empty(shingle_offsets[n_docs], dtype=np.uint64)
    for d in prange(n_docs):
        t0 = token_offsets[d]
        n = token_offsets[d + 1] - t0
        s0 = shingle_offsets[d]
        m = shingle_offsets[d + 1] - s0
        if m == 0:
            continue
        width = min(k, n)
        lead = np.uint64(1)  # P^(width-1): the weight of the word that leaves
        h = np.uint64(0)
        for j in range(width):
            h = h * ROLL_MULTIPLIER + tokens[t0 + j]
            if j > 0:
                lead *= ROLL_MULTIPLIER
        out[s0] = fmix64(h)
        for s in range(1, m):
            h = (h - tokens[t0 + s - 1] * lead) * ROLL_MULTIPLIER + tokens[t0 + s + width - 1]
            out[s0 + s] = fmix64(h)
    return out


@njit(cache=True, parallel=True, nogil=True)
def char_ngram_counts(buf: np.ndarray, doc_offsets: np.ndarray, n: int) -> np.ndarray:
    """Character n-grams per document (UTF-8 aware), at least one for non-empty text."""
    n_docs = doc_offsets.shape[0] - 1
    counts = np.zeros(n_docs, dtype=np.int64)
    for d in prange(n_docs):
        chars = 0
        for i in range(doc_offsets[d], doc_offsets[d + 1]):
            if (buf[i] & 0xC0) != 0x80:
                chars += 1
        if chars > 0:
            counts[d] = max(1, chars - n + 1)
    return counts


@njit(cache=True, parallel=True, nogil=True)
def char_ngrams(buf: np.ndarray, doc_offsets: np.ndarray, gram_offsets: np.ndarray, n: int) -> np.ndarray:
    """Stable hash of every run of ``n`` characters (not bytes); O(bytes * n)."""
    n_docs = doc_offsets.shape[0] - 1
    out = np.empty(gram_offsets[n_docs], dtype=np.uint64)
    for d in prange(n_docs):
        start = doc_offsets[d]
        stop = doc_offsets[d + 1]
        # Byte positions where characters start, plus the end of the document.
        starts = np.empty(stop - start + 1, dtype=np.int64)
        chars = 0
        for i in range(start, stop):
            if (buf[i] & 0xC0) != 0x80:
                starts[chars] = i
                chars += 1
        starts[chars] = stop
        g0 = gram_offsets[d]
        m = gram_offsets[d + 1] - g0
        width = min(n, chars)
        for g in range(m):
            out[g0 + g] = hash_bytes(buf, starts[g], starts[g + width])
    return out


@njit(cache=True, parallel=True, nogil=True)
def _compact_segments(values: np.ndarray, offsets: np.ndarray, new_offsets: np.ndarray) -> np.ndarray:
    n_seg = offsets.shape[0] - 1
    out = np.empty(new_offsets[n_seg], dtype=values.dtype)
    for d in prange(n_seg):
        a = offsets[d]
        b = offsets[d + 1]
        w = new_offsets[d]
        if b > a:
            out[w] = values[a]
            w += 1
            for i in range(a + 1, b):
                if values[i] != values[i - 1]:
                    out[w] = values[i]
                    w += 1
    return out


def sort_unique_segments(values: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sort each segment and drop repeats, giving the set of each document.

    Returns ``(unique_values, unique_offsets)`` in the same CSR-like layout. The input
    array is sorted in place (see `dedup.features.segment_sort`): O(m) per segment of
    m uniform hashes, O(m log m) at worst.
    """
    uniques = sort_segments_count_unique(values, offsets)
    new_offsets = np.zeros(offsets.shape[0], dtype=np.int64)
    np.cumsum(uniques, out=new_offsets[1:])
    return _compact_segments(values, offsets, new_offsets), new_offsets
