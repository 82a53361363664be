"""Words and their stable hashes straight from canonical UTF-8 text, in compiled code.

A word is a maximal run of letters and digits: exactly the characters for which Python's
``str.isalnum()`` is true (the same class as the regular expression ``[^\\W_]``), so the
words are the tokens of `dedup.normalize.token_text`, without building that string. The
kernel decodes UTF-8 itself (`dedup.kernels.utf8`) and looks each code point up in a
table made once from ``str.isalnum``; a word's hash is FNV-1a + fmix64 of its UTF-8
bytes, as in `dedup.features.hashing`. Cost O(bytes), in parallel over documents.
"""

from __future__ import annotations

import threading
from functools import lru_cache

import numpy as np
from numba import njit, prange

from ..kernels.tables import stored_table
from ..kernels.utf8 import decode_code_point
from .hashing import FNV_OFFSET, FNV_PRIME, fmix64

__all__ = [
    "word_table",
    "has_words",
    "words_and_hashes",
    "gather_segments",
    "compact_segments",
]

_MAX_CODE_POINT = 0x110000


@lru_cache(maxsize=1)
def word_table() -> np.ndarray:
    """1 for every code point that is a letter or digit (``str.isalnum``), else 0 (kept on
    disk between runs: `dedup.kernels.tables`)."""
    return stored_table("word-table", 1, _build_word_table)


def _build_word_table() -> np.ndarray:
    return np.fromiter(
        (chr(c).isalnum() for c in range(_MAX_CODE_POINT)), dtype=np.uint8, count=_MAX_CODE_POINT
    )


# The old private name of `decode_code_point`, for code that still uses it.
_decode = decode_code_point


@njit(cache=True, parallel=True, nogil=True)
def has_words(buf: np.ndarray, doc_offsets: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Whether each document has a word; stops at the first letter or digit."""
    n_docs = doc_offsets.shape[0] - 1
    found = np.zeros(n_docs, dtype=np.bool_)
    for d in prange(n_docs):
        i = doc_offsets[d]
        stop = doc_offsets[d + 1]
        while i < stop:
            cp, length = decode_code_point(buf, i, stop)
            if cp >= 0 and cp < table.shape[0] and table[cp] == 1:
                found[d] = True
                break
            i += length
    return found


_ONE = np.uint64(1)


@njit(cache=True, inline="always")
def _hash_words(buf, i, stop, table, out, w):
    # Hashes of the words of buf[i:stop] written from out[w]; returns the next free place.
    # ASCII bytes (most of any text) take no branch that depends on the text, and their
    # indices are unsigned (no test for negative indices on every byte); others are
    # decoded. Every ASCII byte stores the hash so far at the next free place, which
    # moves on only where a word has just ended (so that store stays); between words the
    # hash goes on over the other bytes too and is reset at the next word's first byte.
    # Mispredicted branches at every word's start and end cost more than these stores.
    # fmix64 is applied at the end, to the words only. The stores stay in the room of
    # `word_room`: before byte k at most k // 2 words have ended (each takes a byte and a
    # separator), fewer than the (n + 1) // 2 places of a text of n bytes.
    in_word = np.uint64(0)
    h = FNV_OFFSET
    at = np.uint64(i)
    end = np.uint64(stop)
    to = np.uint64(w)
    while at < end:
        c = buf[at]
        if c < 0x80:
            is_word = np.uint64(table[c])
            out[to] = h
            to += in_word & (is_word ^ _ONE)
            h = ((FNV_OFFSET if in_word == 0 else h) ^ np.uint64(c)) * FNV_PRIME
            in_word = is_word
            at += _ONE
            continue
        a = np.int64(at)
        cp, length = decode_code_point(buf, a, stop)
        word = cp >= 0 and cp < table.shape[0] and table[cp] == 1
        if word:
            if in_word == 0:
                h = FNV_OFFSET
            for j in range(a, a + length):
                h ^= np.uint64(buf[j])
                h *= FNV_PRIME
        elif in_word:
            out[to] = h
            to += _ONE
        in_word = np.uint64(1) if word else np.uint64(0)
        at += np.uint64(length)
    if in_word:
        out[to] = h
        to += _ONE
    for k in range(np.uint64(w), to):
        out[k] = fmix64(out[k])
    return np.int64(to)


@njit(cache=True, parallel=True, nogil=True)
def _hash_words_bounded(buf, doc_offsets, room_offsets, table, out, counts):
    # Document d has room_offsets[d + 1] - room_offsets[d] places (see `word_room`).
    for d in prange(doc_offsets.shape[0] - 1):
        counts[d] = (
            _hash_words(buf, doc_offsets[d], doc_offsets[d + 1], table, out, room_offsets[d])
            - room_offsets[d]
        )


@njit(cache=True, parallel=True, nogil=True)
def compact_segments(values, starts, offsets, out):
    """Move segment d, written at ``values[starts[d]:]``, to ``out[offsets[d]:offsets[d + 1]]``
    (segments written with room to spare, laid end to end)."""
    for d in prange(offsets.shape[0] - 1):
        a, w, n = starts[d], offsets[d], offsets[d + 1] - offsets[d]
        out[w : w + n] = values[a : a + n]


_SCRATCH = threading.local()


def _scratch(size: int) -> np.ndarray:
    """A work array of at least ``size`` values reused by this thread: a fresh one per
    chunk would fault in (and zero) its pages again every time."""
    held = getattr(_SCRATCH, "array", None)
    if held is None or held.shape[0] < size:
        held = _SCRATCH.array = np.empty(max(size, 1), dtype=np.uint64)
    return held


def release_scratch() -> None:
    """Free this thread's work array (an audit calls it when it ends)."""
    _SCRATCH.array = None


def word_room(doc_offsets: np.ndarray) -> np.ndarray:
    """Where each document's word hashes go in `words_and_hashes`'s work array: room for
    the most words it can hold (a word and its separator take at least two bytes)."""
    room = (np.diff(doc_offsets) + 1) // 2
    room_offsets = np.zeros(room.shape[0] + 1, dtype=np.int64)
    np.cumsum(room, out=room_offsets[1:])
    return room_offsets


def words_and_hashes(
    buf: np.ndarray, doc_offsets: np.ndarray, table: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The stable hash of every word, documents laid end to end, and the word offsets
    (n + 1), in one pass over the bytes: each document's hashes go into room for the
    most words it can hold (a word and its separator take at least two bytes), then
    move end to end.

    >>> from dedup.features.shingles import pack_bytes
    >>> buf, offsets = pack_bytes([b"a bc", b"", b"d a"])
    >>> hashes, words = words_and_hashes(buf, offsets, word_table())
    >>> words.tolist(), bool(hashes[0] == hashes[3]), len(set(hashes.tolist()))
    ([0, 2, 2, 4], True, 3)
    """
    doc_offsets = np.asarray(doc_offsets, dtype=np.int64)
    room_offsets = word_room(doc_offsets)
    n = doc_offsets.shape[0] - 1
    spread = _scratch(int(room_offsets[-1]))
    counts = np.empty(n, dtype=np.int64)
    _hash_words_bounded(buf, doc_offsets, room_offsets, table, spread, counts)
    offsets = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    out = np.empty(offsets[-1], dtype=np.uint64)
    compact_segments(spread, room_offsets, offsets, out)
    return out, offsets


@njit(cache=True, nogil=True)
def _gather(buf, offsets, picks, out_offsets, out):
    for k in range(picks.shape[0]):
        d = picks[k]
        a, w, n = offsets[d], out_offsets[k], offsets[d + 1] - offsets[d]
        out[w : w + n] = buf[a : a + n]


def gather_segments(buf: np.ndarray, offsets: np.ndarray, picks: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A new packed buffer holding only the segments ``picks`` (in that order)."""
    picks = np.asarray(picks, dtype=np.int64)
    lengths = offsets[picks + 1] - offsets[picks]
    out_offsets = np.zeros(picks.shape[0] + 1, dtype=np.int64)
    np.cumsum(lengths, out=out_offsets[1:])
    out = np.empty(out_offsets[-1], dtype=buf.dtype)
    _gather(buf, offsets, picks, out_offsets, out)
    return out, out_offsets
