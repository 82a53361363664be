"""Shingle sets of a batch of texts, from the words of `dedup.align.word_spans`.

The check measures containment on the same words its passages are found on: a shingle
is a run of k consecutive normalized words, hashed as the aligner hashes its seeds (the
polynomial hash of `dedup.features.hashing.rolling_word_shingles` finished with
``fmix64``). A word may be left out (quoted, in a reference list, in the template): a
shingle holding a left-out word is not made, so the counted shingles of a submission are
those of its counted stretches only, never bridging a gap.

Cost O(words × k) compiled, in parallel over texts, plus the per-text sort of
`dedup.features.hashing.sort_unique_segments`.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..features.hashing import ROLL_MULTIPLIER, fmix64, sort_unique_segments

__all__ = ["shingle_sets", "shingle_of"]


@njit(cache=True, nogil=True)
def _window_ok(keep, start, k):
    kept = 0
    for j in range(k):
        kept += keep[start + j]
    return kept == k


@njit(cache=True, parallel=True, nogil=True)
def _count(offsets, keep, k):
    n_docs = offsets.shape[0] - 1
    counts = np.zeros(n_docs, dtype=np.int64)
    for d in prange(n_docs):
        c = 0
        for s in range(offsets[d], offsets[d + 1] - k + 1):
            if _window_ok(keep, s, k):
                c += 1
        counts[d] = c
    return counts


@njit(cache=True, parallel=True, nogil=True)
def _fill(hashes, offsets, keep, k, out_offsets, out):
    for d in prange(offsets.shape[0] - 1):
        w = out_offsets[d]
        for s in range(offsets[d], offsets[d + 1] - k + 1):
            if _window_ok(keep, s, k):
                h = np.uint64(0)
                for j in range(k):
                    h = h * ROLL_MULTIPLIER + hashes[s + j]
                out[w] = fmix64(h)
                w += 1


def shingle_sets(
    hashes: np.ndarray, offsets: np.ndarray, k: int, keep: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Sorted unique k-word shingle hashes of each text.

    Parameters
    ----------
    hashes, offsets : ndarray
        Word hashes of the texts laid end to end, ``offsets`` with ``n + 1`` entries (as in
        `dedup.align.WordSpans`).
    k : int
        Words per shingle; a text (or counted stretch) of fewer words gives none.
    keep : ndarray of bool, optional
        Which words count; default all.

    Returns
    -------
    (values, value_offsets)
        The set of text ``d`` is ``values[value_offsets[d]:value_offsets[d + 1]]``, sorted.
    """
    keep = np.ones(hashes.shape[0], dtype=np.bool_) if keep is None else np.ascontiguousarray(keep, np.bool_)
    offsets = np.ascontiguousarray(offsets, dtype=np.int64)
    counts = _count(offsets, keep, k)
    out_offsets = np.zeros(counts.shape[0] + 1, dtype=np.int64)
    np.cumsum(counts, out=out_offsets[1:])
    out = np.empty(int(out_offsets[-1]), dtype=np.uint64)
    _fill(np.ascontiguousarray(hashes, np.uint64), offsets, keep, k, out_offsets, out)
    return sort_unique_segments(out, out_offsets)


def shingle_of(word_hashes: list[int]) -> int:
    """The hash of one shingle of the given word hashes, in Python (for checks).

    >>> import numpy as np
    >>> v, _ = shingle_sets(np.array([3, 5, 7], np.uint64), np.array([0, 3]), 3)
    >>> int(v[0]) == shingle_of([3, 5, 7])
    True
    """
    mask = (1 << 64) - 1
    h = 0
    for w in word_hashes:
        h = (h * int(ROLL_MULTIPLIER) + w) & mask
    for mult in (0xFF51AFD7ED558CCD, 0xC4CEB9FE1A85EC53):
        h ^= h >> 33
        h = (h * mult) & mask
    return h ^ (h >> 33)
