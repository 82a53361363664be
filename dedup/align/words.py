"""Words of original texts with their hashes and character spans, a batch per call.

A reviewer reads the original text, so a passage must point at characters of the text as
read, while matching is done on normalized words. A word is a maximal run of letters and
digits (the code points for which ``str.isalnum`` is true, the class of the regular
expression ``[^\\W_]``), normalized on its own with NFKC and case folding. NFKC can turn
one original word into several (``"½"`` gives ``"1"`` and ``"2"``) or into none; each
part keeps the span of the word it comes from. A word's hash is FNV-1a + fmix64 of the
UTF-8 bytes of its normalized form, the token hash of `dedup.features.tokenize`.

A compiled kernel reads the UTF-8 bytes of the whole batch: it finds every run, counts
code points for its span and hashes the lower-cased bytes of runs made only of ASCII
(for ASCII, NFKC is the identity and case folding is lower-casing). Runs that hold any
other code point are marked and normalized in Python afterwards, once per distinct word.
Cost O(bytes) compiled, in parallel over texts, plus O(characters) in Python for the
non-ASCII words only.
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numba import njit, prange

from dedup.features.hashing import FNV_OFFSET, FNV_PRIME, fmix64
from dedup.features.tokenize import word_table

__all__ = ["WordSpans", "NamedWords", "word_spans", "normalized_parts"]

_WORD = re.compile(r"[^\W_]+")
_MASK = (1 << 64) - 1


@dataclass(frozen=True)
class WordSpans:
    """Words of a batch of texts, laid end to end.

    Attributes
    ----------
    hashes : ndarray of uint64
        Hash of every normalized word, texts in order.
    starts, ends : ndarray of int64
        Character span ``[start, end)`` of each word in its original text (code points of
        the Python string, 0-based). Parts of one word split by NFKC share its span.
    offsets : ndarray of int64
        ``n_texts + 1`` entries: the words of text ``d`` are rows
        ``offsets[d]:offsets[d + 1]``.
    """

    hashes: np.ndarray
    starts: np.ndarray
    ends: np.ndarray
    offsets: np.ndarray

    @property
    def n_texts(self) -> int:
        return int(self.offsets.shape[0] - 1)

    def of(self, d: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``(hashes, starts, ends)`` of text ``d`` (views, no copy)."""
        a, b = int(self.offsets[d]), int(self.offsets[d + 1])
        return self.hashes[a:b], self.starts[a:b], self.ends[a:b]


@dataclass(frozen=True)
class NamedWords:
    """`WordSpans` of texts known by id: the words of ``id`` are text ``number[id]`` of
    ``spans``. Lets the steps that read the same texts (align, settle) find their words once.
    """

    number: dict[str, int]
    spans: WordSpans

    @classmethod
    def of(cls, texts: Mapping[str, str], ids: Iterable[str]) -> NamedWords:
        """The words of the texts of ``ids`` (each once, in id order); O(their bytes), see `word_spans`."""
        ordered = sorted(set(ids))
        return cls({doc: k for k, doc in enumerate(ordered)}, word_spans([texts[doc] for doc in ordered]))

    def numbers(self, ids: Iterable[str]) -> np.ndarray:
        """Text numbers of ``ids``, in order (a KeyError names an id without words here)."""
        return np.asarray([self.number[doc] for doc in ids], dtype=np.int64)


def _ascii_tables() -> tuple[np.ndarray, np.ndarray]:
    is_word = np.array([chr(c).isalnum() for c in range(128)], dtype=np.uint8)
    lower = np.array([ord(chr(c).lower()) for c in range(128)], dtype=np.uint8)
    return is_word, lower


_ASCII_WORD, _ASCII_LOWER = _ascii_tables()


@njit(cache=True, inline="always")
def _code_point(buf, i, stop):
    # One UTF-8 sequence at buf[i] (lead byte >= 0x80): (code point, byte length). Text is
    # encoded here with "surrogatepass", so every sequence is complete and each is one
    # code point of the Python string.
    b0 = np.int64(buf[i])
    if b0 >= 0xF0 and i + 3 < stop:
        cp = ((b0 & 0x07) << 18) | ((np.int64(buf[i + 1]) & 0x3F) << 12)
        return cp | ((np.int64(buf[i + 2]) & 0x3F) << 6) | (np.int64(buf[i + 3]) & 0x3F), 4
    if b0 >= 0xE0 and i + 2 < stop:
        cp = ((b0 & 0x0F) << 12) | ((np.int64(buf[i + 1]) & 0x3F) << 6)
        return cp | (np.int64(buf[i + 2]) & 0x3F), 3
    if b0 >= 0xC0 and i + 1 < stop:
        return ((b0 & 0x1F) << 6) | (np.int64(buf[i + 1]) & 0x3F), 2
    return np.int64(-1), 1


# The two scans below test each code point in line: through a shared helper returning a
# (flag, length) pair, numba compiles them many times slower.


@njit(cache=True, nogil=True)
def _count_text(buf, start, stop, table, ascii_word):
    # Number of runs of letters and digits in buf[start:stop]. Integer flags: the
    # arithmetic on them compiles without branches.
    at = start
    n = 0
    in_word = 0
    while at < stop:
        c = buf[at]
        if c < 0x80:
            is_word = np.int64(ascii_word[c])
            at += 1
        else:
            cp, length = _code_point(buf, at, stop)
            is_word = 1 if cp >= 0 and cp < table.shape[0] and table[cp] == 1 else 0
            at += length
        n += is_word & (in_word ^ 1)
        in_word = is_word
    return n


@njit(cache=True, nogil=True)
def _scan_text(buf, start, stop, table, ascii_word, ascii_lower, hashes, starts, ends, marks, w):
    # Runs of letters and digits of buf[start:stop], written from row w. A run's hash
    # covers its lower-cased ASCII bytes; a run holding any other code point is marked,
    # its hash left for Python to set.
    at = start
    char = 0
    in_word = 0
    first = 0
    other = 0
    h = FNV_OFFSET
    while at < stop:
        c = buf[at]
        if c < 0x80:
            is_word = np.int64(ascii_word[c])
            length = 1
        else:
            cp, length = _code_point(buf, at, stop)
            is_word = 1 if cp >= 0 and cp < table.shape[0] and table[cp] == 1 else 0
        if is_word != in_word:
            if is_word:
                first, other, h = char, 0, FNV_OFFSET
            else:
                hashes[w], starts[w], ends[w], marks[w] = fmix64(h), first, char, other
                w += 1
        if is_word:
            if c < 0x80:
                h = (h ^ np.uint64(ascii_lower[c])) * FNV_PRIME
            else:
                other = 1
        in_word = is_word
        at += length
        char += 1
    if in_word:
        hashes[w], starts[w], ends[w], marks[w] = fmix64(h), first, char, other


@njit(cache=True, parallel=True, nogil=True)
def _count_runs(buf, doc_offsets, table, ascii_word):
    n_docs = doc_offsets.shape[0] - 1
    counts = np.zeros(n_docs, dtype=np.int64)
    for d in prange(n_docs):
        counts[d] = _count_text(buf, doc_offsets[d], doc_offsets[d + 1], table, ascii_word)
    return counts


@njit(cache=True, parallel=True, nogil=True)
def _fill_runs(buf, doc_offsets, table, ascii_word, ascii_lower, word_offsets, hashes, starts, ends, marks):
    for d in prange(doc_offsets.shape[0] - 1):
        _scan_text(
            buf, doc_offsets[d], doc_offsets[d + 1], table, ascii_word, ascii_lower,
            hashes, starts, ends, marks, word_offsets[d],
        )  # fmt: skip


def _word_hash(word: str) -> int:
    """FNV-1a 64 + MurmurHash3 fmix64 of the UTF-8 bytes (Fowler-Noll-Vo; Appleby), in
    Python for the few words the kernel leaves; equal to `dedup.features.hashing`."""
    h = 0xCBF29CE484222325
    for byte in word.encode("utf-8", "surrogatepass"):
        h = ((h ^ byte) * 0x100000001B3) & _MASK
    for mult in (0xFF51AFD7ED558CCD, 0xC4CEB9FE1A85EC53):
        h ^= h >> 33
        h = (h * mult) & _MASK
    return h ^ (h >> 33)


@lru_cache(maxsize=65536)
def normalized_parts(word: str) -> tuple[str, ...]:
    """The normalized words one original word gives: NFKC, case folding, then the runs of
    letters and digits of the result (zero, one or more).

    >>> normalized_parts("Straße"), normalized_parts("½"), normalized_parts("ﬁle")
    (('strasse',), ('1', '2'), ('file',))
    """
    return tuple(_WORD.findall(unicodedata.normalize("NFKC", word).casefold()))


@lru_cache(maxsize=65536)
def _part_hashes(word: str) -> tuple[int, ...]:
    # Words repeat within a text and across a batch: normalize and hash each once.
    return tuple(_word_hash(p) for p in normalized_parts(word))


def _pack(texts: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
    # "surrogatepass" keeps lone surrogates (texts read with "surrogateescape") as one
    # 3-byte sequence each, so byte sequences still count code points of the string.
    encoded = [t.encode("utf-8", "surrogatepass") for t in texts]
    offsets = np.zeros(len(encoded) + 1, dtype=np.int64)
    np.cumsum([len(e) for e in encoded], out=offsets[1:])
    buf = np.frombuffer(b"".join(encoded), dtype=np.uint8) if offsets[-1] else np.zeros(0, np.uint8)
    return buf, offsets


def word_spans(texts: Sequence[str]) -> WordSpans:
    """Normalized word hashes and original character spans of every text of a batch.

    Parameters
    ----------
    texts : sequence of str
        Original texts, as read.

    Returns
    -------
    WordSpans
        One row per normalized word; equal, word for word, to the words and spans of
        the per-word NFKC and case folding of Python's `unicodedata` with each word hashed.

    Notes
    -----
    Cost O(bytes) in two compiled passes (count, then fill) in parallel over texts, plus
    Python work for each distinct word holding a non-ASCII letter or digit.

    >>> w = word_spans(["Ünïcode ﬁle, OK?", "", "a_b"])
    >>> w.offsets.tolist(), w.starts.tolist(), w.ends.tolist()
    ([0, 3, 3, 5], [0, 8, 13, 0, 2], [7, 11, 15, 1, 3])
    """
    buf, doc_offsets = _pack(texts)
    table = word_table()
    counts = _count_runs(buf, doc_offsets, table, _ASCII_WORD)
    offsets = np.zeros(len(texts) + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    n = int(offsets[-1])
    hashes = np.empty(n, dtype=np.uint64)
    starts = np.empty(n, dtype=np.int64)
    ends = np.empty(n, dtype=np.int64)
    marks = np.zeros(n, dtype=np.uint8)
    _fill_runs(buf, doc_offsets, table, _ASCII_WORD, _ASCII_LOWER, offsets, hashes, starts, ends, marks)
    marked = np.flatnonzero(marks)
    if marked.size == 0:
        return WordSpans(hashes, starts, ends, offsets)
    return _normalize_marked(texts, WordSpans(hashes, starts, ends, offsets), marked)


def _normalize_marked(texts: Sequence[str], words: WordSpans, marked: np.ndarray) -> WordSpans:
    # Rows holding a non-ASCII letter or digit become the hashes of their normalized
    # parts: usually one part (hash replaced in place), sometimes none or several (rows
    # repeated or dropped, keeping the span). Cost O(marked) Python, plus O(rows) compiled
    # when a row does not give exactly one part.
    doc_of = np.searchsorted(words.offsets, marked, side="right") - 1
    parts = [
        _part_hashes(texts[d][s:e])
        for d, s, e in zip(doc_of.tolist(), words.starts[marked].tolist(), words.ends[marked].tolist())
    ]
    sizes = np.fromiter(map(len, parts), dtype=np.int64, count=len(parts))
    flat = np.fromiter((h for p in parts for h in p), dtype=np.uint64, count=int(sizes.sum()))
    if np.all(sizes == 1):
        words.hashes[marked] = flat
        return words
    return WordSpans(*_splice(words.hashes, words.starts, words.ends, words.offsets, marked, sizes, flat))


@njit(cache=True, nogil=True)
def _splice(hashes, starts, ends, offsets, marked, sizes, flat):
    # Row marked[m] becomes sizes[m] rows with hashes from `flat` (in order), others stay.
    total = hashes.shape[0] - marked.shape[0] + flat.shape[0]
    out_h = np.empty(total, dtype=np.uint64)
    out_s = np.empty(total, dtype=np.int64)
    out_e = np.empty(total, dtype=np.int64)
    new_offsets = np.zeros(offsets.shape[0], dtype=np.int64)
    w = 0
    m = 0
    f = 0
    for d in range(offsets.shape[0] - 1):
        new_offsets[d] = w
        for r in range(offsets[d], offsets[d + 1]):
            if m < marked.shape[0] and marked[m] == r:
                for _ in range(sizes[m]):
                    out_h[w], out_s[w], out_e[w] = flat[f], starts[r], ends[r]
                    w += 1
                    f += 1
                m += 1
            else:
                out_h[w], out_s[w], out_e[w] = hashes[r], starts[r], ends[r]
                w += 1
    new_offsets[offsets.shape[0] - 1] = w
    return out_h, out_s, out_e, new_offsets
