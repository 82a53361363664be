"""Exact candidates for TF-IDF cosine: all-pairs similarity search with prefix filtering.

Rows are unit length, so the cosine of two texts is the dot product of their rows. The
search follows Bayardo, Ma and Srikant (WWW 2007, *Scaling up all pairs similarity
search*, algorithm All-Pairs) with the l2 bounds of Anastasiu and Karypis (ICDE 2014,
*L2AP: fast cosine similarity search with prefix l2-norm bounds*), on a static index:

1. Columns are ordered most frequent first; ``maxweight[j]`` is the largest weight of
   column j in any row.
2. Each row y is split at the first column where the bound of its *prefix* P (the more
   frequent columns before it) would reach t:
   ``bound(P) = min(Σ_P y_j · maxweight[j], ||y_P||)``. For any unit row x the dot product
   over P is at most bound(P) < t, so a pair reaching t shares a column of the rest of y,
   its *suffix*; only suffixes are indexed (each entry with ``||y||`` over the columns up
   to it).
3. Each row x walks its columns rarest first. It meets a row y first at their rarest
   shared suffix column j, and every shared column is then at most as rare as j, so the
   dot product is at most ``min(Σ_{i ≤ j} x_i · maxweight[i], ||x_{≤j}|| · ||y_{≤j}||)``: y
   is taken up only when that reaches t; x stops walking once
   ``min(Σ_{i ≤ j} x_i · maxweight[i], ||x_{≤j}||)`` is below t (no new row can reach it).
4. At each meeting the products met so far are summed; every shared column rarer than
   j has been met, so the dot product is at most that sum plus ``||x_{<j}|| · ||y_{<j}||``
   (the l2 positional bound of L2AP): a row whose bound falls below t is dropped.
5. The rows left are scored by a merge of the two rows; the pairs reaching t are kept.

So the pairs returned are exactly those whose cosine reaches t (recall 1.0), up to
rounding: every bound and the final score are compared with t - `MARGIN`, so rounding
can only add a pair a hair below t, never lose one. The verify step scores them again
with `dedup.sketch.tfidf.pair_cosines`, as it scores LSH's candidates.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from numba import njit

from .blocks import grown, pairs_by_blocks

__all__ = ["cosine_candidate_pairs", "MARGIN"]

# Slack on every bound: sums of a few thousand products round by far less.
MARGIN = 1e-9


def _frequent_first(rows: sp.csr_matrix) -> sp.csr_matrix:
    """The rows with columns renumbered most frequent first (ties by column), each row's
    entries sorted so. Only the columns used are numbered: nothing is sized by the
    feature space."""
    columns, inverse, df = np.unique(rows.indices, return_inverse=True, return_counts=True)
    order = np.lexsort((columns, -df))
    rank_of = np.empty(order.shape[0], dtype=np.int64)
    rank_of[order] = np.arange(order.shape[0], dtype=np.int64)
    ranked = sp.csr_matrix(
        (rows.data.astype(np.float64), rank_of[inverse.ravel()], rows.indptr.astype(np.int64)),
        shape=(rows.shape[0], max(order.shape[0], 1)),
    )
    ranked.sort_indices()
    return ranked


@njit(cache=True, nogil=True)
def _split(indptr, ranks, weights, maxweight, floor):
    # Per entry: the bounds of its row up to and including it (Σ w · maxweight, Σ w²);
    # per row: where its suffix starts (the first entry whose bound reaches the floor).
    n = indptr.shape[0] - 1
    bound_max = np.empty(weights.shape[0])
    bound_sq = np.empty(weights.shape[0])
    start = np.empty(n, dtype=np.int64)
    for y in range(n):
        b1 = 0.0
        b2 = 0.0
        start[y] = indptr[y + 1]
        for k in range(indptr[y], indptr[y + 1]):
            b1 += weights[k] * maxweight[ranks[k]]
            b2 += weights[k] * weights[k]
            bound_max[k] = b1
            bound_sq[k] = b2
            if start[y] == indptr[y + 1] and min(b1, np.sqrt(b2)) >= floor:
                start[y] = k
    return bound_max, bound_sq, start


@njit(cache=True, nogil=True)
def _index(indptr, ranks, weights, bound_sq, start, n_ranks):
    # Posting lists of the suffix entries: row, weight, ||row up to the entry||.
    ptr = np.zeros(n_ranks + 1, dtype=np.int64)
    for y in range(indptr.shape[0] - 1):
        for k in range(start[y], indptr[y + 1]):
            ptr[ranks[k] + 1] += 1
    for j in range(n_ranks):
        ptr[j + 1] += ptr[j]
    fill = ptr[:-1].copy()
    rows = np.empty(ptr[-1], dtype=np.int32)
    weight = np.empty(ptr[-1])
    norm = np.empty(ptr[-1])
    for y in range(indptr.shape[0] - 1):
        for k in range(start[y], indptr[y + 1]):
            q = fill[ranks[k]]
            rows[q] = y
            weight[q] = weights[k]
            norm[q] = np.sqrt(bound_sq[k])
            fill[ranks[k]] += 1
    return ptr, rows, weight, norm


@njit(cache=True, nogil=True)
def _dot(indptr, ranks, weights, x, y):
    # The dot product of rows x and y, by a merge of their rank-sorted entries.
    a, a_end, b, b_end = indptr[x], indptr[x + 1], indptr[y], indptr[y + 1]
    total = 0.0
    while a < a_end and b < b_end:
        if ranks[a] == ranks[b]:
            total += weights[a] * weights[b]
            a += 1
            b += 1
        elif ranks[a] < ranks[b]:
            a += 1
        else:
            b += 1
    return total


@njit(cache=True, nogil=True)
def _probe(first, last, indptr, ranks, weights, bound_max, bound_sq, ptr, rows, weight, norm, floor):
    # Pairs (x, y > x) of the rows first … last - 1 whose dot product reaches the floor.
    n = indptr.shape[0] - 1
    seen = np.full(n, -1, dtype=np.int64)
    total = np.zeros(n)  # dot product over the columns met so far; -1: dropped
    met = np.empty(n, dtype=np.int64)
    left = np.empty(1024, dtype=np.int64)
    right = np.empty(1024, dtype=np.int64)
    w = 0
    for x in range(first, last):
        m = 0
        for k in range(indptr[x + 1] - 1, indptr[x] - 1, -1):
            if min(bound_max[k], np.sqrt(bound_sq[k])) < floor:
                break  # no row met from here on can reach the floor
            x_below = np.sqrt(bound_sq[k - 1]) if k > indptr[x] else 0.0
            j = ranks[k]
            for q in range(ptr[j], ptr[j + 1]):
                y = rows[q]
                if y <= x:
                    continue
                if seen[y] != x:
                    seen[y] = x
                    if min(bound_max[k], np.sqrt(bound_sq[k]) * norm[q]) < floor:
                        total[y] = -1.0
                        continue
                    total[y] = 0.0
                    met[m] = y
                    m += 1
                elif total[y] < 0.0:
                    continue
                total[y] += weights[k] * weight[q]
                # Every shared column rarer than this one has been met (it lies in y's
                # suffix), so the rest of the dot product is at most ||x_<|| ||y_<||.
                y_below = np.sqrt(max(norm[q] * norm[q] - weight[q] * weight[q], 0.0))
                if total[y] + x_below * y_below < floor:
                    total[y] = -1.0
        for i in range(m):
            y = met[i]
            if total[y] >= 0.0 and _dot(indptr, ranks, weights, x, y) >= floor:
                if w == left.shape[0]:
                    left = grown(left, w)
                    right = grown(right, w)
                left[w] = x
                right[w] = y
                w += 1
    return left[:w].copy(), right[:w].copy()


def cosine_candidate_pairs(
    rows: sp.csr_matrix, threshold: float, workers: int | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Pairs ``(left < right)`` of unit-length rows whose cosine reaches ``threshold``
    (within `MARGIN`), sorted: every pair that reaches it is among them (see the module notes).

    Notes
    -----
    Cost: one sort of the entries (renumbering the columns), the index of the row
    suffixes (20 bytes an entry), then per row the posting lists of its rarer columns —
    the most frequent columns, whose lists would be longest, fall in the prefixes and
    are never indexed, and a row stops walking before its most frequent columns — and
    one merge of two rows per pair that survives the bounds. Memory beyond the rows:
    about 36 bytes an entry, and 24 bytes a pair found.

    Examples
    --------
    >>> rows = sp.csr_matrix(np.array([[0.6, 0.8, 0.0], [0.6, 0.8, 0.0], [0.0, 0.0, 1.0]]))
    >>> left, right = cosine_candidate_pairs(rows, 0.9)
    >>> list(zip(left.tolist(), right.tolist()))
    [(0, 1)]
    """
    n_docs = rows.shape[0]
    if n_docs < 2 or rows.nnz == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    ranked = _frequent_first(rows)
    indptr, ranks, weights = ranked.indptr, ranked.indices.astype(np.int64), ranked.data
    maxweight = np.zeros(ranked.shape[1])
    np.maximum.at(maxweight, ranks, weights)
    floor = float(threshold) - MARGIN
    bound_max, bound_sq, start = _split(indptr, ranks, weights, maxweight, floor)
    ptr, post_rows, post_weight, post_norm = _index(indptr, ranks, weights, bound_sq, start, ranked.shape[1])
    del start

    def search(first: int, last: int) -> tuple[np.ndarray, np.ndarray]:
        return _probe(
            first,
            last,
            indptr,
            ranks,
            weights,
            bound_max,
            bound_sq,
            ptr,
            post_rows,
            post_weight,
            post_norm,
            floor,
        )

    return pairs_by_blocks(search, n_docs, workers)
