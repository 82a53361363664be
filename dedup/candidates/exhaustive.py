"""Exhaustive candidates: every pair that shares a shingle, found by a sparse product.

For small corpora comparing all pairs exactly is cheap and leaves nothing to chance:
with a binary documents × shingles matrix A, (A Aᵀ)[i, j] is the number of shingles
documents i and j share. Cost O(sum over shingles of df²), fine for a few thousand
documents.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..features.segment_sort import sorted_distinct

__all__ = ["exhaustive_candidate_pairs"]


def exhaustive_candidate_pairs(
    shingles: np.ndarray, shingle_offsets: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Pairs ``(left < right)`` sharing at least one shingle, sorted: every pair whose
    Jaccard or containment is above 0. (Cosine can be high without a shared shingle,
    e.g. sentences reordered word by word: its exact search is `cosine_candidate_pairs`.)"""
    n_docs = shingle_offsets.shape[0] - 1
    if n_docs < 2:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    _, columns = np.unique(shingles, return_inverse=True)
    rows = np.repeat(np.arange(n_docs, dtype=np.int64), np.diff(shingle_offsets))
    incidence = sp.csr_matrix(
        (np.ones(columns.shape[0], dtype=np.int32), (rows, columns.ravel())),
        shape=(n_docs, int(columns.max()) + 1 if columns.size else 0),
    )
    shared = sp.triu(incidence @ incidence.T, k=1).tocoo()
    keys = sorted_distinct(shared.row.astype(np.int64) * n_docs + shared.col.astype(np.int64))
    return keys // n_docs, keys % n_docs
