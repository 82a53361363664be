"""Exact candidates for each measure: every pair that can reach the threshold, none missed.

``exhaustive`` candidates leave nothing to chance, whatever the corpus size:

    jaccard       every pair sharing a shingle (sparse product, `exhaustive_candidate_pairs`)
    containment   an inverted index of shingles with prefix filtering (`containment_candidate_pairs`)
    cosine        all-pairs search over the TF-IDF rows with prefix filtering (`cosine_candidate_pairs`)

Containment and cosine cannot be searched by MinHash LSH with a promise: LSH catches a
pair by its Jaccard, and a pair whose containment or cosine reaches the threshold can
have almost any Jaccard (a short page inside a long one; the same words reordered).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .containment import containment_candidate_pairs
from .cosine import cosine_candidate_pairs
from .exhaustive import exhaustive_candidate_pairs

__all__ = ["exact_candidate_pairs", "EXACT_SEARCHES"]

# What each measure's exact search is, in the words of the candidates record.
EXACT_SEARCHES = {
    "jaccard": "every pair sharing a shingle (sparse product)",
    "containment": "inverted index of shingles with prefix filtering",
    "cosine": "all-pairs search over the TF-IDF rows with prefix filtering",
}


def exact_candidate_pairs(
    measure: str,
    threshold: float,
    shingles: np.ndarray,
    shingle_offsets: np.ndarray,
    tfidf_rows: sp.csr_matrix,
    workers: int | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Candidate pairs ``(left < right)`` of the measure's exact search (see the module
    notes): a superset of the pairs whose deciding score reaches ``threshold``, sorted.

    Examples
    --------
    >>> sh = np.array([1, 2, 3, 2, 3, 4, 9], np.uint64); off = np.array([0, 3, 6, 7])
    >>> rows = sp.identity(3, format="csr")
    >>> [p.tolist() for p in exact_candidate_pairs("containment", 0.5, sh, off, rows)]
    [[0], [1]]
    """
    if measure == "jaccard":
        return exhaustive_candidate_pairs(shingles, shingle_offsets)
    if measure == "containment":
        return containment_candidate_pairs(shingles, shingle_offsets, threshold, workers)
    if measure == "cosine":
        return cosine_candidate_pairs(tfidf_rows, threshold, workers)
    raise ValueError(f"unknown measure {measure!r}")
