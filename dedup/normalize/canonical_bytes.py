"""Canonical lines of packed UTF-8 texts in compiled code.

The canonical lines of a text (see `dedup.normalize.boilerplate.canonical_lines`) are
made here over its bytes without a Python string per line or word: lines are split
where ``str.splitlines`` splits (LF, CR, VT, FF, FS, GS, RS, NEL, LS, PS), runs of
``str.split`` whitespace inside a line (which also counts US, NBSP and the Unicode
spaces) become one space, empty lines are dropped, A–Z are lower-cased. The result is
the lines joined by LF; replacing LF by a space gives the canonical text.

Unicode NFKC and case folding stay in Python (``unicodedata`` and ``str.casefold``),
applied before: for a text of ASCII characters only both change nothing but the case
of A–Z, so ASCII texts go straight from their bytes.
"""

from __future__ import annotations

import unicodedata

import numpy as np
from numba import njit, prange

from ..features.shingles import pack_bytes
from ..features.tokenize import _decode

__all__ = ["packed_canonical_lines", "canonical_line_bytes"]


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
def _canonical_one(buf, a, b, out):
    # Text buf[a:b] → its canonical lines written at out[a:]; returns (bytes, characters).
    w = a
    chars = 0
    in_line = False  # the current output line has a word
    space = False  # whitespace seen since the last word of the line
    newline = False  # a finished line waits for its separator
    i = a
    while i < b:
        c = buf[i]
        n = 1
        if c < 0x80:
            k = _kind(np.int64(c))
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
            if 65 <= c <= 90:
                c += 32
            out[w] = c
            w += 1
            chars += 1
            for j in range(1, n):
                out[w] = buf[i + j]
                w += 1
        elif k == 1:
            if in_line:
                space = True
        else:
            if in_line:
                newline = True
            in_line = False
            space = False
        i += n
    return w - a, chars


@njit(cache=True, parallel=True)
def _canonical(buf, offsets, out, lengths, chars):
    for d in prange(offsets.shape[0] - 1):
        lengths[d], chars[d] = _canonical_one(buf, offsets[d], offsets[d + 1], out)


@njit(cache=True)
def _canonical_serial(buf, offsets, out, lengths, chars):
    # For worker processes, which must not start threads of their own after a fork.
    for d in range(offsets.shape[0] - 1):
        lengths[d], chars[d] = _canonical_one(buf, offsets[d], offsets[d + 1], out)


def _run(buf, offsets, parallel):
    offsets = np.asarray(offsets, dtype=np.int64)
    out = np.empty(buf.shape[0], dtype=np.uint8)
    lengths = np.empty(offsets.shape[0] - 1, dtype=np.int64)
    chars = np.empty(offsets.shape[0] - 1, dtype=np.int64)
    (_canonical if parallel else _canonical_serial)(buf, offsets, out, lengths, chars)
    return out, offsets, lengths, chars


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
            prepared.append(unicodedata.normalize("NFKC", text).casefold().encode("utf-8", "surrogatepass"))
    out, offsets, lengths, chars = _run(*pack_bytes(prepared), parallel)
    data = out.tobytes()
    starts = offsets[:-1].tolist()
    return [data[a : a + n] for a, n in zip(starts, lengths.tolist())], chars.tolist()


def packed_canonical_lines(buf: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Canonical lines joined by LF of each packed text (ASCII, or already NFKC-normalized
    and case-folded): ``(buf, offsets)``.

    >>> from dedup.features.shingles import pack_bytes
    >>> out, off = packed_canonical_lines(*pack_bytes([b"  The  Cat\\r\\n\\n sat\\t ", b"A"]))
    >>> bytes(out), off.tolist()
    (b'the cat\\nsata', [0, 11, 12])
    """
    out, offsets, lengths, _ = _run(buf, offsets, True)
    new_offsets = np.zeros(lengths.shape[0] + 1, dtype=np.int64)
    np.cumsum(lengths, out=new_offsets[1:])
    result = np.empty(new_offsets[-1], dtype=np.uint8)
    _compact(out, offsets, new_offsets, result)
    return result, new_offsets


@njit(cache=True, parallel=True)
def _compact(out, offsets, new_offsets, result):
    # Text d's lines were written at out[offsets[d]:...]; move them end to end.
    for d in prange(offsets.shape[0] - 1):
        a = offsets[d]
        w = new_offsets[d]
        for j in range(new_offsets[d + 1] - w):
            result[w + j] = out[a + j]
