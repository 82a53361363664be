"""Exact scores of candidate pairs: Jaccard, containment both ways, TF-IDF cosine.

For shingle sets A and B:

    Jaccard          |A ∩ B| / |A ∪ B|
    containment A→B  |A ∩ B| / |A|     (how much of A is in B; Broder 1997,
                                        *On the resemblance and containment of documents*)

Intersections are counted by merging the two sorted shingle arrays in compiled code,
in parallel over pairs: O(|A| + |B|) per pair.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from numba import njit, prange

from ..sketch.tfidf import pair_cosines

__all__ = ["PairScores", "intersection_sizes", "score_pairs", "deciding_score", "may_reach"]


@njit(cache=True, inline="always")
def _shared(shingles, i, i_end, j, j_end, need):
    # |A ∩ B| of the sorted unique runs shingles[i:i_end] and shingles[j:j_end], given up
    # (with a count short of ``need``) once the shingles left on the shorter side could
    # no longer bring the count to ``need``; with need 0, never given up.
    #
    # The merge takes no branch on the values (each side moves on by a comparison's 0 or
    # 1), so the processor never guesses wrong about which side moves, and its indices
    # are unsigned (no test for negative indices): about twice as fast as the plain merge.
    c = 0
    step = 0
    while i < i_end and j < j_end:
        a = shingles[i]
        b = shingles[j]
        c += np.int64(a == b)
        i += np.uint64(a <= b)
        j += np.uint64(b <= a)
        step += 1
        if (step & 63) == 0 and c + np.int64(min(i_end - i, j_end - j)) < need:
            break
    return c


@njit(cache=True, parallel=True, nogil=True)
def intersection_sizes(shingles, offsets, left, right):
    """|A ∩ B| for every pair, by a merge of the two sorted unique arrays."""
    n_pairs = left.shape[0]
    out = np.zeros(n_pairs, dtype=np.int64)
    for p in prange(n_pairs):
        out[p] = _shared(
            shingles,
            np.uint64(offsets[left[p]]),
            np.uint64(offsets[left[p] + 1]),
            np.uint64(offsets[right[p]]),
            np.uint64(offsets[right[p] + 1]),
            0,
        )
    return out


@dataclass(frozen=True)
class PairScores:
    """Scores of pairs ``(left[i], right[i])``, all arrays of equal length."""

    left: np.ndarray
    right: np.ndarray
    shared: np.ndarray
    jaccard: np.ndarray
    containment_left_in_right: np.ndarray
    containment_right_in_left: np.ndarray
    cosine: np.ndarray

    def __len__(self) -> int:
        return int(self.left.shape[0])

    def select(self, mask: np.ndarray) -> PairScores:
        return PairScores(*(getattr(self, f)[mask] for f in self.__dataclass_fields__))


def score_pairs(
    shingles: np.ndarray,
    shingle_offsets: np.ndarray,
    tfidf_rows: sp.csr_matrix,
    left: np.ndarray,
    right: np.ndarray,
) -> PairScores:
    """All exact scores for the given pairs (indices into the same documents).

    Examples
    --------
    >>> import scipy.sparse as sp
    >>> sh = np.array([1, 2, 3, 2, 3, 4], np.uint64); off = np.array([0, 3, 6])
    >>> s = score_pairs(sh, off, sp.identity(2, format="csr"), np.array([0]), np.array([1]))
    >>> float(s.jaccard[0]), float(s.containment_left_in_right[0])
    (0.5, 0.6666666666666666)
    """
    left = np.asarray(left, dtype=np.int64)
    right = np.asarray(right, dtype=np.int64)
    shared = intersection_sizes(shingles, shingle_offsets, left, right)
    sizes = np.diff(shingle_offsets)
    size_left = sizes[left].astype(np.float64)
    size_right = sizes[right].astype(np.float64)
    union = size_left + size_right - shared
    with np.errstate(divide="ignore", invalid="ignore"):
        jaccard = np.where(union > 0, shared / union, 0.0)
        c_lr = np.where(size_left > 0, shared / size_left, 0.0)
        c_rl = np.where(size_right > 0, shared / size_right, 0.0)
    cosine = pair_cosines(tfidf_rows, left, right) if left.size else np.zeros(0)
    return PairScores(left, right, shared, jaccard, c_lr, c_rl, cosine)


def deciding_score(scores: PairScores, measure: str) -> np.ndarray:
    """The score the chosen measure decides on (containment: the larger direction)."""
    if measure == "jaccard":
        return scores.jaccard
    if measure == "containment":
        return np.maximum(scores.containment_left_in_right, scores.containment_right_in_left)
    if measure == "cosine":
        return scores.cosine
    raise ValueError(f"unknown measure {measure!r}")


# Kinds of deciding score `may_reach` can bound (cosine it cannot: every pair may reach it).
_JACCARD, _CONTAINMENT = 0, 1


@njit(cache=True, inline="always")
def _reaches(c, size_a, size_b, kind, threshold):
    # Whether c shared shingles give a deciding score of at least threshold, computed as
    # `score_pairs` and `deciding_score` compute it (the same float64 divisions).
    if kind == _JACCARD:
        union = size_a + size_b - c
        return union > 0 and c / union >= threshold
    smaller = min(size_a, size_b)
    return smaller > 0 and c / smaller >= threshold


@njit(cache=True, parallel=True, nogil=True)
def _may_reach(shingles, offsets, left, right, kind, threshold, out):
    for p in prange(left.shape[0]):
        i = np.uint64(offsets[left[p]])
        i_end = np.uint64(offsets[left[p] + 1])
        j = np.uint64(offsets[right[p]])
        j_end = np.uint64(offsets[right[p] + 1])
        size_a = np.int64(i_end - i)
        size_b = np.int64(j_end - j)
        most = min(size_a, size_b)
        # The fewest shared shingles that reach the threshold: the scores grow with the
        # count, so the first count that reaches it, counted up from an estimate.
        need = 0
        if kind == _JACCARD:
            need = max(np.int64(threshold * (size_a + size_b) / (1.0 + threshold)) - 1, 0)
        else:
            need = max(np.int64(threshold * most) - 1, 0)
        while need <= most and not _reaches(need, size_a, size_b, kind, threshold):
            need += 1
        if need > most:  # not even all of the smaller set would do
            out[p] = False
            continue
        out[p] = _shared(shingles, i, i_end, j, j_end, need) >= need


def may_reach(
    shingles: np.ndarray,
    shingle_offsets: np.ndarray,
    left: np.ndarray,
    right: np.ndarray,
    measure: str,
    threshold: float,
) -> np.ndarray:
    """For each pair, whether its deciding score (`deciding_score`) reaches ``threshold``;
    exactly the pairs `score_pairs` would confirm, for Jaccard and containment.

    Most candidate pairs fall well short: a pair whose sizes alone rule it out is never
    merged, and a merge stops once the shingles left could not make up the shortfall.
    Cosine is not bounded by the shingles: every pair is kept (all True).

    >>> sh = np.array([1, 2, 3, 2, 3, 4, 9], np.uint64); off = np.array([0, 3, 6, 7])
    >>> may_reach(sh, off, np.array([0, 0]), np.array([1, 2]), "jaccard", 0.5).tolist()
    [True, False]
    """
    left = np.asarray(left, dtype=np.int64)
    right = np.asarray(right, dtype=np.int64)
    if measure == "cosine" or threshold <= 0:
        return np.ones(left.shape[0], dtype=np.bool_)
    if measure not in ("jaccard", "containment"):
        raise ValueError(f"unknown measure {measure!r}")
    kind = _JACCARD if measure == "jaccard" else _CONTAINMENT
    out = np.empty(left.shape[0], dtype=np.bool_)
    _may_reach(shingles, shingle_offsets, left, right, kind, float(threshold), out)
    return out
