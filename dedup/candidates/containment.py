"""Exact candidates for containment: an inverted index of shingles with prefix filtering.

Containment decides on the larger direction (`dedup.verify.deciding_score`): for shingle
sets A and B with |A| <= |B|, ``|A ∩ B| / |A|``. It reaches t exactly when
``|A ∩ B| >= c(|A|)``, c(s) being the fewest shared shingles ``c`` with ``c / s >= t``
(computed with the same float64 division as the verify step).

Prefix filtering (Chaudhuri, Ganti, Kaushik 2006, *A primitive operator for similarity
joins*; Bayardo, Ma, Srikant 2007, *Scaling up all pairs similarity search*): order
every set's shingles the same way, rarest first (by document frequency, then value).
The |A ∩ B| >= c(|A|) shared shingles all lie in A, so at most |A| - p of them lie
after A's first p shingles; with p = |A| - c(|A|) + 1 at least one of them is among
the first p. So every pair whose containment reaches t has its smaller set A share one
of A's first p shingles with B. Each document probes the index of every set (all
shingles) with its own first p shingles and pairs with the documents larger than
itself (by size, then number) that it meets; the rarest-first order keeps the probes
on short posting lists, and shingles of a single document are left out of the index.

Each pair met is counted while probing and dropped once the shingles left could not
make up its shortfall (positional filtering, see `_probe`); the rest are counted in
full by a merge of their two sets. So the candidates are exactly the pairs whose
containment reaches t (recall 1.0); the verify step scores them as it scores LSH's.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ..features.segment_sort import sort_segments
from .blocks import grown, pairs_by_blocks

__all__ = ["containment_candidate_pairs", "fewest_shared"]


def fewest_shared(sizes: np.ndarray, threshold: float) -> np.ndarray:
    """c(s): the fewest shared shingles ``c`` with ``c / s >= threshold`` (float64, as the
    verify step divides), at least 1; for every size s >= 1.

    >>> fewest_shared(np.array([1, 10, 3]), 0.3).tolist()
    [1, 3, 1]
    """
    sizes = np.asarray(sizes, dtype=np.int64)
    safe = np.maximum(sizes, 1)
    need = np.clip(np.ceil(threshold * safe).astype(np.int64), 1, safe)
    # The product rounds; step to the first count whose quotient reaches the threshold.
    for _ in range(2):
        need = np.where((need > 1) & ((need - 1) / safe >= threshold), need - 1, need)
        need = np.where((need < safe) & (need / safe < threshold), need + 1, need)
    return need


def _rarest_first_ranks(shingles: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """Each document's shingles as ranks in the rarest-first order (sorted per document),
    the document frequency of each rank, and the first rank held by two documents or more."""
    values, inverse, df = np.unique(shingles, return_inverse=True, return_counts=True)
    order = np.lexsort((values, df))
    del values
    rank_of = np.empty(order.shape[0], dtype=np.int64)
    rank_of[order] = np.arange(order.shape[0], dtype=np.int64)
    ranks = rank_of[inverse.ravel()]
    del inverse, rank_of
    sort_segments(ranks, np.ascontiguousarray(offsets, dtype=np.int64))
    df_of_rank = df[order]
    first_shared = int(np.searchsorted(df_of_rank, 2))
    return ranks, df_of_rank, first_shared


@njit(cache=True, nogil=True)
def _postings(ranks, offsets, first_shared, df_of_rank):
    # Documents holding each rank from `first_shared` on (in document order), with the
    # rank's position in each document's rarest-first list.
    n_shared = df_of_rank.shape[0] - first_shared
    ptr = np.zeros(n_shared + 1, dtype=np.int64)
    for j in range(n_shared):
        ptr[j + 1] = ptr[j] + df_of_rank[first_shared + j]
    fill = ptr[:-1].copy()
    docs = np.empty(ptr[-1], dtype=np.int32)
    positions = np.empty(ptr[-1], dtype=np.int32)
    for d in range(offsets.shape[0] - 1):
        for k in range(offsets[d], offsets[d + 1]):
            j = ranks[k] - first_shared
            if j >= 0:
                docs[fill[j]] = d
                positions[fill[j]] = k - offsets[d]
                fill[j] += 1
    return ptr, docs, positions


@njit(cache=True, nogil=True)
def _overlap_reaches(ranks, a, a_end, b, b_end, need):
    # Whether the sorted runs ranks[a:a_end] and ranks[b:b_end] share at least `need` values;
    # given up as soon as the values left could not make up the shortfall.
    c = 0
    while a < a_end and b < b_end:
        if c + min(a_end - a, b_end - b) < need:
            return False
        x = ranks[a]
        y = ranks[b]
        if x == y:
            c += 1
            a += 1
            b += 1
        elif x < y:
            a += 1
        else:
            b += 1
    return c >= need


@njit(cache=True, nogil=True)
def _probe(first, last, ranks, offsets, need, first_shared, ptr, docs, positions):
    # Pairs of the documents first … last - 1 with larger documents met in their prefixes
    # whose overlap reaches the need. At each meeting (position i of d, j of e) the overlap
    # is at most the shingles met so far plus the fewer left on either side after them
    # (positional filtering: Xiao, Wang, Lin, Yu 2008, *Efficient similarity joins for
    # near duplicate detection*); a pair that falls short is dropped for good.
    n = offsets.shape[0] - 1
    seen = np.full(n, -1, dtype=np.int64)
    count = np.zeros(n, dtype=np.int64)  # shingles met so far; -1: dropped
    met = np.empty(n, dtype=np.int64)
    left = np.empty(1024, dtype=np.int64)
    right = np.empty(1024, dtype=np.int64)
    w = 0
    for d in range(first, last):
        a = offsets[d]
        size = offsets[d + 1] - a
        m = 0
        for i in range(size - need[d] + 1):
            j = ranks[a + i] - first_shared
            if j < 0:
                continue  # a shingle of this document alone
            for q in range(ptr[j], ptr[j + 1]):
                e = docs[q]
                other = offsets[e + 1] - offsets[e]
                if other < size or (other == size and e <= d):
                    continue
                if seen[e] != d:
                    seen[e] = d
                    count[e] = 0
                    met[m] = e
                    m += 1
                elif count[e] < 0:
                    continue
                count[e] += 1
                if count[e] + min(size - i - 1, other - positions[q] - 1) < need[d]:
                    count[e] = -1
        for k in range(m):
            e = met[k]
            if count[e] < 0:
                continue
            if _overlap_reaches(ranks, a, a + size, offsets[e], offsets[e + 1], need[d]):
                if w == left.shape[0]:
                    left = grown(left, w)
                    right = grown(right, w)
                left[w] = min(d, e)
                right[w] = max(d, e)
                w += 1
    return left[:w].copy(), right[:w].copy()


def containment_candidate_pairs(
    shingles: np.ndarray, shingle_offsets: np.ndarray, threshold: float, workers: int | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Pairs ``(left < right)`` whose containment (the larger direction) reaches
    ``threshold``, sorted: exactly those (see the module notes).

    Parameters
    ----------
    shingles, shingle_offsets : ndarray
        Each document's distinct shingles, ``shingles[shingle_offsets[d]:shingle_offsets[d + 1]]``.
    threshold : float
        In (0, 1].

    Notes
    -----
    Cost: one sort of all shingles (the order and the index, about 28 bytes a shingle),
    then per document the posting lists of its first p shingles — rare ones, so short,
    for a high threshold; at a low one p nears the whole set, but the most common
    shingles of each set (its last ones) are never probed — and one merge of two sets per
    pair that survives the positional bound. 24 bytes a pair found.

    Examples
    --------
    >>> sh = np.array([1, 2, 3, 4, 3, 4, 9, 7], np.uint64); off = np.array([0, 4, 6, 8])
    >>> left, right = containment_candidate_pairs(sh, off, 0.9)
    >>> list(zip(left.tolist(), right.tolist()))
    [(0, 1)]
    """
    offsets = np.ascontiguousarray(shingle_offsets, dtype=np.int64)
    n_docs = offsets.shape[0] - 1
    if n_docs < 2:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    ranks, df_of_rank, first_shared = _rarest_first_ranks(shingles, offsets)
    ptr, docs, positions = _postings(ranks, offsets, first_shared, df_of_rank)
    need = fewest_shared(np.diff(offsets), threshold)

    def search(first: int, last: int) -> tuple[np.ndarray, np.ndarray]:
        return _probe(first, last, ranks, offsets, need, first_shared, ptr, docs, positions)

    return pairs_by_blocks(search, n_docs, workers)
