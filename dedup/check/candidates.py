"""Candidate sources: an exact inverted index of the submissions' shingles.

Containment is asymmetric: a 40-word passage copied into a 2,000-word essay gives the
pair a Jaccard near 0.01, which a Jaccard-tuned LSH never pairs. So candidates are
found exactly. The shingles of all submissions form one sorted array of distinct hashes
with, for each, the submissions holding it (`SubmissionIndex`). References stream past
it a batch at a time: each reference's shingles are looked up (a bit filter, then
``np.searchsorted``, compiled: `dedup.check.probe`) and every distinct hit is kept as
(reference, shingle). At the end a
shingle found in too many references is common and seeds nothing; every (submission,
reference) sharing at least ``seed_shingles`` of the other shingles is a candidate
(`source_candidates`). Submissions are paired the same way among themselves
(`peer_candidates`).

Cost: O(S log S) to build for S submission shingles; O(R log S) per R reference
shingles looked up; O(hits × postings) to count the pairs. Memory O(S + hits): the
references themselves are not kept.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from .probe import key_filter, probe_batch

__all__ = ["SubmissionIndex", "HitLog", "source_candidates", "peer_candidates", "common_limit"]


@dataclass(frozen=True)
class SubmissionIndex:
    """Distinct shingle hashes of all submissions with their postings.

    Attributes
    ----------
    keys : ndarray of uint64
        Sorted distinct hashes.
    post_offsets, post_docs : ndarray of int64
        The submissions holding ``keys[i]`` are ``post_docs[post_offsets[i]:post_offsets[i + 1]]``,
        ascending.
    seeds : ndarray of bool
        Whether ``keys[i]`` may seed a candidate (false for a template's shingles).
    bits : ndarray of uint64
        The bit filter of the keys (`dedup.check.probe.key_filter`).
    """

    keys: np.ndarray
    post_offsets: np.ndarray
    post_docs: np.ndarray
    seeds: np.ndarray
    bits: np.ndarray

    @classmethod
    def build(
        cls, values: np.ndarray, offsets: np.ndarray, barred: np.ndarray | None = None
    ) -> SubmissionIndex:
        """The index of the shingle sets ``values[offsets[d]:offsets[d + 1]]`` of each submission ``d``;
        hashes in ``barred`` (sorted) seed nothing. Cost O(S log S)."""
        docs = np.repeat(np.arange(offsets.shape[0] - 1, dtype=np.int64), np.diff(offsets))
        order = np.lexsort((docs, values))
        ordered = values[order]
        starts = (
            np.flatnonzero(np.r_[True, ordered[1:] != ordered[:-1]]) if ordered.size else np.zeros(0, int)
        )
        keys = ordered[starts]
        post_offsets = np.r_[starts, ordered.size].astype(np.int64)
        seeds = np.ones(keys.shape[0], dtype=np.bool_)
        if barred is not None and barred.size:
            seeds &= ~np.isin(keys, barred, assume_unique=True)
        return cls(keys, post_offsets, docs[order], seeds, key_filter(keys))

    def lookup(self, values: np.ndarray) -> np.ndarray:
        """Index of each of ``values`` in `keys`, or -1 where it is not there."""
        if self.keys.size == 0:
            return np.full(values.shape[0], -1, dtype=np.int64)
        at = np.searchsorted(self.keys, values)
        at[at == self.keys.shape[0]] = 0
        return np.where(self.keys[at] == values, at, -1)


@dataclass
class HitLog:
    """Hits of references on the index, gathered batch by batch.

    ``refs`` and ``keys`` are parallel lists of arrays: reference ``refs[b][j]`` holds
    shingle ``keys[b][j]`` of the index. ``count`` is the number of references seen.
    """

    refs: list
    keys: list
    count: int = 0

    @classmethod
    def empty(cls) -> HitLog:
        return cls([], [], 0)

    def add(self, index: SubmissionIndex, hashes: np.ndarray, offsets: np.ndarray, k: int) -> np.ndarray:
        """Look up the k-word shingles of a batch of references (word hashes laid end to end,
        `dedup.align.WordSpans`); returns the number of distinct keys each reference of the batch holds."""
        found, found_offsets = probe_batch(hashes, offsets, k, index.keys, index.bits)
        n = offsets.shape[0] - 1
        per_ref = np.diff(found_offsets)
        self.refs.append(np.repeat(np.arange(self.count, self.count + n, dtype=np.int64), per_ref))
        self.keys.append(found)
        self.count += n
        return per_ref

    def arrays(self) -> tuple[np.ndarray, np.ndarray]:
        """All hits as two arrays (reference, key)."""
        if not self.refs:
            return np.zeros(0, np.int64), np.zeros(0, np.int64)
        return np.concatenate(self.refs), np.concatenate(self.keys)


def common_limit(share: float, least: int, total: int) -> int:
    """Most texts a shingle may be in and still seed: ``max(least, share × total)``."""
    return max(int(least), int(share * total))


@njit(cache=True, nogil=True)
def _expand(hit_refs, hit_keys, post_offsets, post_docs, n_refs):
    # One code sub * n_refs + ref per (hit, submission of its key).
    total = 0
    for h in range(hit_keys.shape[0]):
        k = hit_keys[h]
        total += post_offsets[k + 1] - post_offsets[k]
    out = np.empty(total, dtype=np.int64)
    w = 0
    for h in range(hit_keys.shape[0]):
        k = hit_keys[h]
        for p in range(post_offsets[k], post_offsets[k + 1]):
            out[w] = post_docs[p] * n_refs + hit_refs[h]
            w += 1
    return out


def source_candidates(
    index: SubmissionIndex, hits: HitLog, *, seed_shingles: int, limit: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(submission, reference, shared seed shingles) of every candidate pair, sorted.

    A key held by more than ``limit`` references seeds nothing. Cost O(hits × postings).
    """
    refs, keys = hits.arrays()
    frequency = np.bincount(keys, minlength=index.keys.shape[0])
    keep = index.seeds[keys] & (frequency[keys] <= limit)
    n_refs = max(hits.count, 1)
    codes = _expand(refs[keep], keys[keep], index.post_offsets, index.post_docs, n_refs)
    return _counted_pairs(codes, n_refs, seed_shingles)


def _counted_pairs(codes: np.ndarray, base: int, least: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    pairs, counts = np.unique(codes, return_counts=True)
    pairs, counts = pairs[counts >= least], counts[counts >= least]
    return pairs // base, pairs % base, counts.astype(np.int64)


@njit(cache=True, nogil=True)
def _pairs_of_keys(post_offsets, post_docs, picked, n_docs):
    total = 0
    for k in picked:
        m = post_offsets[k + 1] - post_offsets[k]
        total += m * (m - 1) // 2
    out = np.empty(total, dtype=np.int64)
    w = 0
    for k in picked:
        a0, a1 = post_offsets[k], post_offsets[k + 1]
        for i in range(a0, a1):
            for j in range(i + 1, a1):
                out[w] = post_docs[i] * n_docs + post_docs[j]
                w += 1
    return out


def peer_candidates(
    index: SubmissionIndex, n_docs: int, *, seed_shingles: int, limit: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(submission a, submission b > a, shared seed shingles) of every pair of submissions sharing
    at least ``seed_shingles`` seeding shingles; a shingle in more than ``limit`` submissions seeds
    nothing. Cost O(Σ postings²) over the shingles held by 2..limit submissions."""
    sizes = np.diff(index.post_offsets)
    picked = np.flatnonzero(index.seeds & (sizes >= 2) & (sizes <= limit)).astype(np.int64)
    codes = _pairs_of_keys(index.post_offsets, index.post_docs, picked, max(n_docs, 1))
    return _counted_pairs(codes, max(n_docs, 1), seed_shingles)
