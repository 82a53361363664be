"""Compiled steps of passage alignment over two arrays of word hashes.

Every function here works on word positions (indices into the word arrays of the two
texts, called left and right) and never on characters; `dedup.align.passages` maps the
result back to characters. A passage is one row of ``FIELDS`` int64 values:

``left_start, left_end, right_start, right_end`` (word ranges, end exclusive),
``left_matched, right_matched`` (words of each range that lie in a seed or were added by
exact extension) and ``moved`` (1 when the passage is off the main chain).

The steps, for one pair (cost for n left and m right words, A anchors, P passages):

1. seeds: k-word shingle hashes of both texts, O(n + m);
2. anchors: every pair of equal shingles, a shingle seeding only when it occurs at most
   ``max_repeat`` times in each text, ordered by left position and, for one left
   position, by decreasing right position, through a hash table, O(n + m + A);
3. chain: the longest chain of anchors increasing in both texts (a longest increasing
   subsequence, patience method), O(A log A);
4. runs: chain anchors merged into passages while both gaps are at most ``max_gap``
   words, then grown word by word while the words on both sides are equal, O(A + n + m);
5. rounds: passages of at least ``min_words`` words on both sides and ``min_similarity``
   are kept and their words marked; steps 3-4 run again on the anchors that touch no
   marked word, and what they keep is flagged moved; this stops at the first round that
   keeps nothing, or after ``max_rounds`` rounds;
6. merge: two passages next to each other in both texts with both gaps at most
   ``max_gap`` become one, also when swapped if the shorter has at most ``max_swap``
   words (a swapped pair of sentences), O(P^2 log P) at worst.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from dedup.features.hashing import ROLL_MULTIPLIER, fmix64

FIELDS = 7
_LS, _LE, _RS, _RE, _LM, _RM, _MOVED = range(FIELDS)


@njit(cache=True, nogil=True)
def shingle_hashes(words: np.ndarray, k: int) -> np.ndarray:
    """Hash of every run of ``k`` consecutive words (none when there are fewer than k).

    The polynomial hash of `dedup.features.hashing.rolling_word_shingles` (rolled, O(1)
    per shingle), finished with fmix64. Cost O(n).
    """
    n = words.shape[0] - k + 1
    if n <= 0:
        return np.empty(0, dtype=np.uint64)
    out = np.empty(n, dtype=np.uint64)
    lead = np.uint64(1)
    h = np.uint64(0)
    for j in range(k):
        h = h * ROLL_MULTIPLIER + words[j]
        if j > 0:
            lead *= ROLL_MULTIPLIER
    out[0] = fmix64(h)
    for s in range(1, n):
        h = (h - words[s - 1] * lead) * ROLL_MULTIPLIER + words[s + k - 1]
        out[s] = fmix64(h)
    return out


@njit(cache=True, nogil=True)
def _table_slots(right: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    # Open addressing over the right shingles (already fmix64-mixed, so the low bits are
    # a fine slot): per slot its key and the last right position holding it, each
    # position linked to the previous one with that key, and the count of positions.
    size = 1
    while size < 2 * right.shape[0]:
        size *= 2
    mask = np.uint64(size - 1)
    keys = np.empty(size, dtype=np.uint64)
    head = np.full(size, -1, dtype=np.int64)
    count = np.zeros(size, dtype=np.int64)
    below = np.empty(right.shape[0], dtype=np.int64)
    for j in range(right.shape[0]):
        slot = np.int64(right[j] & mask)
        while head[slot] >= 0 and keys[slot] != right[j]:
            slot = (slot + 1) & (size - 1)
        keys[slot] = right[j]
        below[j] = head[slot]
        head[slot] = j
        count[slot] += 1
    return keys, head, count, below


@njit(cache=True, nogil=True)
def anchors(left: np.ndarray, right: np.ndarray, max_repeat: int) -> tuple[np.ndarray, np.ndarray]:
    """Positions ``(i, j)`` with ``left[i] == right[j]``: ordered by i, then by decreasing j.

    A value found more than ``max_repeat`` times in either array gives no anchor: such
    shingles (a repeated table row, a refrain) would give up to count x count anchors
    while saying little about where a passage lies. Values must be well mixed (hashes):
    they are looked up in a hash table of the right values. Cost O(n + m + A).
    """
    keys, head, count, below = _table_slots(right)
    size = keys.shape[0]
    mask = np.uint64(size - 1)
    slot_of = np.full(left.shape[0], -1, dtype=np.int64)
    left_count = np.zeros(size, dtype=np.int64)
    for i in range(left.shape[0]):
        slot = np.int64(left[i] & mask)
        while head[slot] >= 0 and keys[slot] != left[i]:
            slot = (slot + 1) & (size - 1)
        if head[slot] >= 0:
            slot_of[i] = slot
            left_count[slot] += 1
    total = 0
    for i in range(left.shape[0]):
        slot = slot_of[i]
        if slot >= 0 and count[slot] <= max_repeat and left_count[slot] <= max_repeat:
            total += count[slot]
    ai = np.empty(total, dtype=np.int64)
    aj = np.empty(total, dtype=np.int64)
    w = 0
    for i in range(left.shape[0]):
        slot = slot_of[i]
        if slot >= 0 and count[slot] <= max_repeat and left_count[slot] <= max_repeat:
            j = head[slot]
            while j >= 0:
                ai[w] = i
                aj[w] = j
                w += 1
                j = below[j]
    return ai, aj


@njit(cache=True, nogil=True)
def longest_chain(aj: np.ndarray) -> np.ndarray:
    """Indices of a longest strictly increasing subsequence of ``aj`` (patience method).

    With anchors ordered by left position and, for one left position, by decreasing
    right position, this is a longest chain increasing in both texts: no two of its
    anchors share a left position. Cost O(A log A).
    """
    size = aj.shape[0]
    tails = np.empty(size, dtype=np.int64)
    tail_j = np.empty(size, dtype=np.int64)
    prev = np.empty(size, dtype=np.int64)
    length = 0
    for a in range(size):
        j = aj[a]
        lo, hi = 0, length
        # Along a shared passage most anchors extend the longest chain: skip the search.
        if length > 0 and tail_j[length - 1] < j:
            lo = length
        while lo < hi:
            mid = (lo + hi) >> 1
            if tail_j[mid] < j:
                lo = mid + 1
            else:
                hi = mid
        prev[a] = tails[lo - 1] if lo > 0 else -1
        tails[lo] = a
        tail_j[lo] = j
        if lo == length:
            length += 1
    chain = np.empty(length, dtype=np.int64)
    a = tails[length - 1] if length > 0 else -1
    for t in range(length - 1, -1, -1):
        chain[t] = a
        a = prev[a]
    return chain


@njit(cache=True, nogil=True)
def chain_runs(ai, aj, chain, k, max_gap, marked_left, marked_right):
    """Passages made of consecutive chain anchors whose gaps are at most ``max_gap`` words
    in both texts and hold no marked word (``marked_*`` are prefix sums of the marks).

    Gaps are measured from the end of one anchor's k words to the start of the next.
    A passage that starts inside the previous one's last words (a split made by a long
    gap on the other side) starts where that one ends. Cost O(chain).
    """
    out = np.empty((chain.shape[0], FIELDS), dtype=np.int64)
    p = -1
    for t in range(chain.shape[0]):
        i = ai[chain[t]]
        j = aj[chain[t]]
        start_l, start_r = i, j
        if p >= 0:
            le, re = out[p, _LE], out[p, _RE]
            clear = (
                marked_left[max(i, le)] == marked_left[le] and marked_right[max(j, re)] == marked_right[re]
            )
            if i - le <= max_gap and j - re <= max_gap and clear:
                out[p, _LM] += i + k - max(i, le)
                out[p, _RM] += j + k - max(j, re)
                out[p, _LE] = i + k
                out[p, _RE] = j + k
                continue
            start_l, start_r = max(i, le), max(j, re)
        p += 1
        out[p, _LS], out[p, _LE], out[p, _RS], out[p, _RE] = start_l, i + k, start_r, j + k
        out[p, _LM], out[p, _RM], out[p, _MOVED] = i + k - start_l, j + k - start_r, 0
    return out[: p + 1]


@njit(cache=True, nogil=True)
def extend_runs(runs, left, right, mark_left, mark_right):
    """Grow each passage at both ends while the next words of both texts are equal and
    unmarked, up to its neighbours (the runs come from one chain, so they are ordered in
    both texts). Seeds of k words miss up to k - 1 equal words at each end. Cost
    O(words added)."""
    count = runs.shape[0]
    for p in range(count):
        floor_l = runs[p - 1, _LE] if p > 0 else 0
        floor_r = runs[p - 1, _RE] if p > 0 else 0
        a, b = runs[p, _LS], runs[p, _RS]
        while a > floor_l and b > floor_r and mark_left[a - 1] == 0 and mark_right[b - 1] == 0:
            if left[a - 1] != right[b - 1]:
                break
            a -= 1
            b -= 1
        ceil_l = runs[p + 1, _LS] if p + 1 < count else left.shape[0]
        ceil_r = runs[p + 1, _RS] if p + 1 < count else right.shape[0]
        c, d = runs[p, _LE], runs[p, _RE]
        while c < ceil_l and d < ceil_r and mark_left[c] == 0 and mark_right[d] == 0:
            if left[c] != right[d]:
                break
            c += 1
            d += 1
        added = (runs[p, _LS] - a) + (c - runs[p, _LE])
        runs[p, _LM] += added
        runs[p, _RM] += added
        runs[p, _LS], runs[p, _RS], runs[p, _LE], runs[p, _RE] = a, b, c, d


@njit(cache=True, nogil=True)
def _keeps(row, min_words, min_similarity):
    # Long enough on both sides, and enough of its words matched (the similarity of
    # `dedup.align.passages`).
    wl = row[_LE] - row[_LS]
    wr = row[_RE] - row[_RS]
    if wl < min_words or wr < min_words:
        return False
    return (row[_LM] + row[_RM]) >= min_similarity * (wl + wr)


@njit(cache=True, nogil=True)
def _prefix(marks):
    out = np.zeros(marks.shape[0] + 1, dtype=np.int64)
    for t in range(marks.shape[0]):
        out[t + 1] = out[t] + marks[t]
    return out


@njit(cache=True, nogil=True)
def _free_anchors(ai, aj, k, marked_left, marked_right):
    # Anchors whose k words touch no marked word on either side.
    keep = np.empty(ai.shape[0], dtype=np.bool_)
    for a in range(ai.shape[0]):
        i, j = ai[a], aj[a]
        keep[a] = marked_left[i + k] == marked_left[i] and marked_right[j + k] == marked_right[j]
    return ai[keep], aj[keep]


@njit(cache=True, nogil=True)
def _room(rows, need):
    # Rows array with room for `need` rows, doubled when full (amortized O(1) per row).
    if need <= rows.shape[0]:
        return rows
    grown = np.empty((max(need, 2 * rows.shape[0]), rows.shape[1]), dtype=rows.dtype)
    grown[: rows.shape[0]] = rows
    return grown


@njit(cache=True, nogil=True)
def _words(row):
    return min(row[_LE] - row[_LS], row[_RE] - row[_RS])


@njit(cache=True, nogil=True)
def _near(first, second, second_after_right, max_gap, max_swap):
    # Both gaps between two passages, first before second in the left text, within
    # max_gap; when they come in the other order in the right text, one of them (the
    # part that moved) must also be at most max_swap words: a sentence, not a section.
    if second[_LS] - first[_LE] > max_gap:
        return False
    if second_after_right:
        return second[_RS] - first[_RE] <= max_gap
    return first[_RS] - second[_RE] <= max_gap and min(_words(first), _words(second)) <= max_swap


@njit(cache=True, nogil=True)
def merge_neighbours(rows: np.ndarray, max_gap: int, max_swap: int) -> np.ndarray:
    """Merge passages (sorted by left start) that follow each other in both texts with
    both gaps at most ``max_gap``: in the same order (a run split by a long gap that the
    ends grown since have closed), or swapped when the shorter of the two has at most
    ``max_swap`` words (two sentences swapped, each too long to be bridged as a gap).

    Two passages next to each other in the order of both texts enclose no other passage
    on either side, so their merged spans overlap nothing. The merged passage is moved
    only when both parts were. Cost O(P log P) per pass, at most P passes.
    """
    rows = rows.copy()
    merged = True
    while merged and rows.shape[0] > 1:
        merged = False
        count = rows.shape[0]
        rank = np.empty(count, dtype=np.int64)
        order = np.argsort(rows[:, _RS])
        for t in range(count):
            rank[order[t]] = t
        keep = np.ones(count, dtype=np.bool_)
        p = 0
        while p < count - 1:
            q = p + 1
            if abs(rank[p] - rank[q]) == 1 and _near(rows[p], rows[q], rank[q] > rank[p], max_gap, max_swap):
                rows[p, _LE] = rows[q, _LE]
                rows[p, _RS] = min(rows[p, _RS], rows[q, _RS])
                rows[p, _RE] = max(rows[p, _RE], rows[q, _RE])
                rows[p, _LM] += rows[q, _LM]
                rows[p, _RM] += rows[q, _RM]
                rows[p, _MOVED] = rows[p, _MOVED] & rows[q, _MOVED]
                keep[q] = False
                merged = True
                p += 2
            else:
                p += 1
        rows = rows[keep]
    return rows


@njit(cache=True, nogil=True)
def _keep_round(runs, rows, count, moved, mark_left, mark_right, min_words, min_similarity):
    # Append the runs worth keeping to rows[:count] and mark their words.
    for p in range(runs.shape[0]):
        if not _keeps(runs[p], min_words, min_similarity):
            continue
        rows = _room(rows, count + 1)
        rows[count] = runs[p]
        rows[count, _MOVED] = moved
        mark_left[runs[p, _LS] : runs[p, _LE]] = 1
        mark_right[runs[p, _RS] : runs[p, _RE]] = 1
        count += 1
    return rows, count


@njit(cache=True, nogil=True)
def align_words(left, right, k, max_gap, max_swap, min_words, min_similarity, max_repeat, max_rounds):
    """Passages shared by two texts given as word hashes, sorted by left start.

    Runs steps 1-6 of this module. Cost O(n + m + R A log A + P^2), R rounds,
    A anchors, P passages; for two related texts A is about the number of words.
    """
    ai, aj = anchors(shingle_hashes(left, k), shingle_hashes(right, k), max_repeat)
    mark_left = np.zeros(left.shape[0], dtype=np.int64)
    mark_right = np.zeros(right.shape[0], dtype=np.int64)
    marked_left = np.zeros(left.shape[0] + 1, dtype=np.int64)
    marked_right = np.zeros(right.shape[0] + 1, dtype=np.int64)
    rows = np.empty((8, FIELDS), dtype=np.int64)
    count = 0
    for turn in range(max_rounds):
        if ai.shape[0] == 0:
            break
        runs = chain_runs(ai, aj, longest_chain(aj), k, max_gap, marked_left, marked_right)
        extend_runs(runs, left, right, mark_left, mark_right)
        before = count
        rows, count = _keep_round(
            runs, rows, count, 1 if turn > 0 else 0, mark_left, mark_right, min_words, min_similarity
        )
        if count == before:
            break
        marked_left = _prefix(mark_left)
        marked_right = _prefix(mark_right)
        ai, aj = _free_anchors(ai, aj, k, marked_left, marked_right)
    rows = rows[:count]
    rows = rows[np.argsort(rows[:, _LS], kind="mergesort")]
    return merge_neighbours(rows, max_gap, max_swap)


@njit(cache=True, nogil=True)
def align_batch(
    hashes,
    offsets,
    left_idx,
    right_idx,
    k,
    max_gap,
    max_swap,
    min_words,
    min_similarity,
    max_repeat,
    max_rounds,
):
    """`align_words` for every pair ``(left_idx[p], right_idx[p])`` of texts laid end to end
    (text d is ``hashes[offsets[d]:offsets[d + 1]]``). Returns the passage rows of all
    pairs, pair by pair, and the pair of each row. Releases the GIL."""
    rows = np.empty((max(16, left_idx.shape[0]), FIELDS), dtype=np.int64)
    pair = np.empty(rows.shape[0], dtype=np.int64)
    count = 0
    for p in range(left_idx.shape[0]):
        a, b = left_idx[p], right_idx[p]
        found = align_words(
            hashes[offsets[a] : offsets[a + 1]], hashes[offsets[b] : offsets[b + 1]],
            k, max_gap, max_swap, min_words, min_similarity, max_repeat, max_rounds,
        )  # fmt: skip
        need = count + found.shape[0]
        if need > rows.shape[0]:
            rows = _room(rows, need)
            grown = np.empty(rows.shape[0], dtype=np.int64)
            grown[:count] = pair[:count]
            pair = grown
        rows[count:need] = found
        pair[count:need] = p
        count = need
    return rows[:count], pair[:count]
