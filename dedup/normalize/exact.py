"""Exact-duplicate pass: group documents whose canonical texts are identical.

Runs before any sketching, so every copy but one is left out of the expensive stages
and copies are reported as exact rather than as near-duplicates.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence

import numpy as np

__all__ = ["content_hash", "exact_groups"]


def content_hash(canonical: str | bytes | memoryview | np.ndarray) -> str:
    """BLAKE2b (128-bit digest) of the canonical text (or its UTF-8 bytes, in any contiguous
    buffer), as hex; identical on every machine."""
    data = canonical.encode("utf-8") if isinstance(canonical, str) else canonical
    return hashlib.blake2b(data, digest_size=16).hexdigest()


def exact_groups(hashes: Sequence[str]) -> tuple[np.ndarray, list[list[int]]]:
    """Representative of every document and the groups of identical texts.

    Parameters
    ----------
    hashes : sequence of str
        Content hash of each document, in document order.

    Returns
    -------
    representative : ndarray of int64
        For each document, the index of the first document with the same hash.
    groups : list of list of int
        Groups with at least two members, each sorted, ordered by first member.

    Notes
    -----
    O(n) with a dictionary, plus a sort of the copies.

    >>> exact_groups(["a", "b", "a"])[1]
    [[0, 2]]
    """
    first: dict[str, int] = {}
    setdefault = first.setdefault
    representative = np.fromiter(
        (setdefault(h, i) for i, h in enumerate(hashes)), dtype=np.int64, count=len(hashes)
    )
    copies = np.flatnonzero(representative != np.arange(len(hashes)))
    if copies.shape[0] == 0:
        return representative, []
    # Group the copies by representative (stable: members stay in document order).
    order = np.argsort(representative[copies], kind="stable")
    copies, reps = copies[order], representative[copies][order]
    starts = np.flatnonzero(np.concatenate(([True], reps[1:] != reps[:-1])))
    bounds = np.append(starts, reps.shape[0]).tolist()
    copy_list, rep_list = copies.tolist(), reps.tolist()
    groups = [[rep_list[a], *copy_list[a:b]] for a, b in zip(bounds[:-1], bounds[1:])]
    return representative, groups
