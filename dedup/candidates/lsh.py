"""LSH banding: candidate pairs from documents that share a band bucket.

Each signature is cut into ``bands`` slices of ``rows`` values; every slice is hashed to
one 64-bit bucket key. Per band, keys are sorted (numpy argsort) and runs of equal keys
are scanned — no dictionaries of lists. A bucket with more than ``bucket_limit``
members (usually shared boilerplate) is not expanded into all its n² pairs: its members
are ordered by full signature and each is paired with its next few neighbours, and the
bucket is reported as a warning with its size.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..features.hashing import FNV_OFFSET, FNV_PRIME, fmix64
from ..features.segment_sort import sorted_distinct

__all__ = ["band_keys", "lsh_candidate_pairs", "OVERSIZE_NEIGHBOURS"]

# Neighbours each member of an oversize bucket is paired with, in signature order.
OVERSIZE_NEIGHBOURS = 10


@njit(cache=True, parallel=True, nogil=True)
def band_keys(signatures: np.ndarray, bands: int, rows: int) -> np.ndarray:
    """Bucket key of every (document, band): uint64 array of shape (n_docs, bands)."""
    n_docs = signatures.shape[0]
    out = np.empty((n_docs, bands), dtype=np.uint64)
    for d in prange(n_docs):
        for band in range(bands):
            h = FNV_OFFSET
            for r in range(band * rows, (band + 1) * rows):
                h = fmix64((h ^ np.uint64(signatures[d, r])) * FNV_PRIME)
            out[d, band] = h
    return out


@njit(cache=True, nogil=True)
def _emit_run_pairs(order, run_starts, run_lengths, total, left, right):
    w = 0
    for k in range(run_starts.shape[0]):
        s = run_starts[k]
        m = run_lengths[k]
        for i in range(s, s + m):
            for j in range(i + 1, s + m):
                a = order[i]
                b = order[j]
                if a < b:
                    left[w] = a
                    right[w] = b
                else:
                    left[w] = b
                    right[w] = a
                w += 1
    return w


def _unique_pairs(left: np.ndarray, right: np.ndarray, n_docs: int) -> tuple[np.ndarray, np.ndarray]:
    keys = sorted_distinct(left.astype(np.int64) * n_docs + right.astype(np.int64))
    return keys // n_docs, keys % n_docs


def lsh_candidate_pairs(
    signatures: np.ndarray, bands: int, rows: int, bucket_limit: int = 200, keys: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray, list[dict]]:
    """Candidate pairs ``(left, right)`` with ``left < right``, and oversize-bucket warnings.

    ``keys`` are the band keys when already computed (chunk by chunk, as an audit
    does); ``signatures`` may then be a memory map: only members of oversize buckets
    are read from it.

    Notes
    -----
    Cost O(bands * n log n) for the sorts plus the number of pairs emitted, which is
    at most ``bands * n * bucket_limit`` thanks to the oversize rule.

    Examples
    --------
    >>> sig = np.array([[1, 2, 3, 4], [1, 2, 9, 9], [7, 7, 7, 7]], dtype=np.uint32)
    >>> left, right, warnings = lsh_candidate_pairs(sig, bands=2, rows=2)
    >>> list(zip(left.tolist(), right.tolist()))
    [(0, 1)]
    """
    n_docs = signatures.shape[0]
    if keys is None:
        keys = band_keys(np.ascontiguousarray(signatures), bands, rows)
    lefts: list[np.ndarray] = []
    rights: list[np.ndarray] = []
    oversize: dict[tuple[int, ...], dict] = {}
    for band in range(bands):
        column = keys[:, band]
        order = np.argsort(column, kind="stable")
        ordered = column[order]
        if n_docs < 2:
            break
        boundaries = np.flatnonzero(ordered[1:] != ordered[:-1]) + 1
        starts = np.concatenate(([0], boundaries)).astype(np.int64)
        lengths = np.diff(np.concatenate((starts, [n_docs]))).astype(np.int64)
        shared = lengths > 1
        starts, lengths = starts[shared], lengths[shared]
        small = lengths <= bucket_limit
        total = int((lengths[small] * (lengths[small] - 1) // 2).sum())
        left = np.empty(total, dtype=np.int64)
        right = np.empty(total, dtype=np.int64)
        _emit_run_pairs(order, starts[small], lengths[small], total, left, right)
        lefts.append(left)
        rights.append(right)
        for s, m in zip(starts[~small].tolist(), lengths[~small].tolist()):
            members = np.sort(order[s : s + m])
            # Order by the whole signature so that neighbours are the most alike.
            by_signature = members[np.lexsort(np.asarray(signatures[members]).T[::-1])]
            pair_left, pair_right = [], []
            for step in range(1, OVERSIZE_NEIGHBOURS + 1):
                a, b = by_signature[:-step], by_signature[step:]
                pair_left.append(np.minimum(a, b))
                pair_right.append(np.maximum(a, b))
            lefts.append(np.concatenate(pair_left))
            rights.append(np.concatenate(pair_right))
            entry = oversize.setdefault(tuple(members.tolist()), {"size": m, "bands": [], "members": members})
            entry["bands"].append(band)
    if lefts:
        left, right = _unique_pairs(np.concatenate(lefts), np.concatenate(rights), max(n_docs, 1))
    else:
        left = right = np.zeros(0, dtype=np.int64)
    warnings = sorted(oversize.values(), key=lambda e: (-e["size"], int(e["members"][0])))
    return left, right, warnings
