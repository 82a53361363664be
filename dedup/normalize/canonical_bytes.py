"""Canonical lines of packed UTF-8 texts in compiled code.

The canonical lines of a text (see `dedup.normalize.boilerplate.canonical_lines`) are
made here over its bytes without a Python string per line or word: lines are split
where ``str.splitlines`` splits (LF, CR, VT, FF, FS, GS, RS, NEL, LS, PS), runs of
``str.split`` whitespace inside a line (which also counts US, NBSP and the Unicode
spaces) become one space, empty lines are dropped, A–Z are lower-cased. The result is
the lines joined by LF; replacing LF by a space gives the canonical text.

Unicode NFKC stays in Python (``unicodedata``), applied first to texts that are not
ASCII (for ASCII it changes nothing). Case folding is done in the kernel by a table of
``str.casefold`` for every code point below U+20000 that folds to one code point; a text
with a character outside the table, or one that folds to several (ß → ss), is folded by
``str.casefold`` in Python instead — so the result is always Python's.
"""

from __future__ import annotations

import unicodedata
from functools import lru_cache

import numpy as np
from numba import njit, prange

from ..features.shingles import pack_bytes
from ..features.tokenize import _decode

# Code points below this have a place in the case-folding table.
_FOLD_LIMIT = 0x20000


@lru_cache(maxsize=1)
def fold_table() -> np.ndarray:
    """``ord(chr(c).casefold())`` for every code point below `_FOLD_LIMIT`; -1 where the
    fold is several code points."""
    table = np.arange(_FOLD_LIMIT, dtype=np.int32)
    for c in range(0x80, _FOLD_LIMIT):
        folded = chr(c).casefold()
        if len(folded) != 1:
            table[c] = -1
        elif folded != chr(c):
            table[c] = ord(folded)
    return table


_NO_FOLD = np.zeros(0, dtype=np.int32)
# Per ASCII byte: its kind (see _kind) and its lower case.
_ASCII_KIND = np.zeros(128, dtype=np.uint8)
_ASCII_KIND[[9, 32, 31]] = 1
_ASCII_KIND[[10, 11, 12, 13, 28, 29, 30]] = 2
_ASCII_LOWER = np.arange(128, dtype=np.uint8)
_ASCII_LOWER[65:91] += 32

__all__ = ["canonical_line_bytes"]


@njit(cache=True, inline="always")
def _kind(c):
    # 0: part of a word, 1: space inside a line, 2: line break (as str.split / str.splitlines).
    if c == 32 or c == 9 or c == 31:
        return 1
    if c == 10 or c == 11 or c == 12 or c == 13 or c == 28 or c == 29 or c == 30:
        return 2
    if c < 0x85:
        return 0
    if c == 0x85 or c == 0x2028 or c == 0x2029:
        return 2
    if c == 0xA0 or c == 0x1680 or (0x2000 <= c <= 0x200A) or c == 0x202F or c == 0x205F or c == 0x3000:
        return 1
    return 0


@njit(cache=True, inline="always")
def _put(out, w, f):
    # UTF-8 of code point f at out[w]; returns the new end.
    if f < 0x80:
        out[w] = f
        return w + 1
    if f < 0x800:
        out[w] = 0xC0 | (f >> 6)
        out[w + 1] = 0x80 | (f & 0x3F)
        return w + 2
    if f < 0x10000:
        out[w] = 0xE0 | (f >> 12)
        out[w + 1] = 0x80 | ((f >> 6) & 0x3F)
        out[w + 2] = 0x80 | (f & 0x3F)
        return w + 3
    out[w] = 0xF0 | (f >> 18)
    out[w + 1] = 0x80 | ((f >> 12) & 0x3F)
    out[w + 2] = 0x80 | ((f >> 6) & 0x3F)
    out[w + 3] = 0x80 | (f & 0x3F)
    return w + 4


@njit(cache=True, inline="always")
def _canonical_one(buf, a, b, out, start, fold):
    # Text buf[a:b] → its canonical lines written at out[start:]; returns (bytes,
    # characters, needs Python folding). An empty ``fold`` table folds nothing but A–Z.
    w = start
    chars = 0
    unfolded = False
    in_line = False  # the current output line has a word
    space = False  # whitespace seen since the last word of the line
    newline = False  # a finished line waits for its separator
    i = a
    while i < b:
        c = buf[i]
        n = 1
        cp = np.int64(c)
        if c < 0x80:
            k = _kind(cp)
        else:
            cp, n = _decode(buf, i, b)
            k = _kind(cp)
        if k == 0:
            if not in_line:
                if newline:
                    out[w] = 10
                    w += 1
                    chars += 1
                    newline = False
                in_line = True
            elif space:
                out[w] = 32
                w += 1
                chars += 1
            space = False
            chars += 1
            if c < 0x80:
                out[w] = _ASCII_LOWER[c]
                w += 1
                # The rest of a run of ASCII word bytes, without the general checks.
                i += 1
                while i < b:
                    c = buf[i]
                    if c >= 0x80 or _ASCII_KIND[c] != 0:
                        break
                    out[w] = _ASCII_LOWER[c]
                    w += 1
                    chars += 1
                    i += 1
                continue
            elif fold.shape[0] == 0 or cp < 0:
                for j in range(n):
                    out[w + j] = buf[i + j]
                w += n
            else:
                f = fold[cp] if cp < fold.shape[0] else -1
                if f < 0:
                    unfolded = True
                    for j in range(n):
                        out[w + j] = buf[i + j]
                    w += n
                else:
                    w = _put(out, w, np.int64(f))
        elif k == 1:
            if in_line:
                space = True
        else:
            if in_line:
                newline = True
            in_line = False
            space = False
        i += n
    return w - start, chars, unfolded


@njit(cache=True, parallel=True)
def _canonical(buf, offsets, out, lengths, chars, unfolded, fold):
    for d in prange(offsets.shape[0] - 1):
        lengths[d], chars[d], unfolded[d] = _canonical_one(
            buf, offsets[d], offsets[d + 1], out, 2 * offsets[d], fold
        )


@njit(cache=True)
def _canonical_serial(buf, offsets, out, lengths, chars, unfolded, fold):
    # For worker processes, which must not start threads of their own after a fork.
    for d in range(offsets.shape[0] - 1):
        lengths[d], chars[d], unfolded[d] = _canonical_one(
            buf, offsets[d], offsets[d + 1], out, 2 * offsets[d], fold
        )


def _run(buf, offsets, parallel, fold=_NO_FOLD):
    # Text d is written at out[2 * offsets[d]:]: room for folds that lengthen the UTF-8.
    offsets = np.asarray(offsets, dtype=np.int64)
    out = np.empty(2 * buf.shape[0], dtype=np.uint8)
    n = offsets.shape[0] - 1
    lengths = np.empty(n, dtype=np.int64)
    chars = np.empty(n, dtype=np.int64)
    unfolded = np.zeros(n, dtype=np.bool_)
    (_canonical if parallel else _canonical_serial)(buf, offsets, out, lengths, chars, unfolded, fold)
    return out, 2 * offsets, lengths, chars, unfolded


def canonical_line_bytes(
    texts: list[str], parallel: bool = True, encoded: list[bytes] | None = None
) -> tuple[list[bytes], list[int]]:
    """Canonical lines joined by LF of each text, as UTF-8, and the characters of each
    (of the lines joined by spaces: the canonical text).

    ``parallel=False`` runs in this thread only (for worker processes). ``encoded``, the
    texts' UTF-8 bytes when the caller has them already, saves encoding ASCII texts again.

    >>> canonical_line_bytes(["  The ﬁle\\u2028IS  here ", "Straße"])
    ([b'the file\\nis here', b'strasse'], [16, 7])
    """
    prepared = []
    for k, text in enumerate(texts):
        if text.isascii():
            prepared.append(encoded[k] if encoded is not None else text.encode("ascii"))
        else:
            prepared.append(unicodedata.normalize("NFKC", text).encode("utf-8", "surrogatepass"))
    out, starts, lengths, chars, unfolded = _run(*pack_bytes(prepared), parallel, fold_table())
    results = [out[a : a + n].tobytes() for a, n in zip(starts[:-1].tolist(), lengths.tolist())]
    characters = chars.tolist()
    redo = np.flatnonzero(unfolded).tolist()
    if redo:
        # Folds the table does not hold: str.casefold, then the kernel without a table.
        folded = [
            prepared[k].decode("utf-8", "surrogatepass").casefold().encode("utf-8", "surrogatepass")
            for k in redo
        ]
        out, starts, lengths, chars, _ = _run(*pack_bytes(folded), parallel)
        for j, k in enumerate(redo):
            a = int(starts[j])
            results[k] = out[a : a + int(lengths[j])].tobytes()
            characters[k] = int(chars[j])
    return results, characters
