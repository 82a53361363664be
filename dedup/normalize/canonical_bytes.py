"""Canonical lines of packed UTF-8 texts in compiled code.

The canonical lines of a text (see `dedup.normalize.boilerplate.canonical_lines`) are
made here over its bytes without a Python string per line or word: lines are split
where ``str.splitlines`` splits (LF, CR, VT, FF, FS, GS, RS, NEL, LS, PS), runs of
``str.split`` whitespace inside a line (which also counts US, NBSP and the Unicode
spaces) become one space, empty lines are dropped, A–Z are lower-cased. The result is
the lines joined by LF; replacing LF by a space gives the canonical text.

Unicode NFKC is mostly a no-op, and the kernel checks that itself: a text in which every
character is its own NFKC form, has combining class 0 and never ends a canonical
composition (the NFKC quick check of Unicode UAX #15 answering "yes") is already
normalized; a character whose NFKC form is one such character (a full-width letter, a
no-break space) is replaced by it, which gives the same result in any context because
both have the same compatibility decomposition. Any other text (a combining accent,
a ligature, a Hangul jamo) is normalized by ``unicodedata`` in Python and run again.
Case folding is done in the kernel by a table of ``str.casefold`` for every code point
below U+20000 that folds to one code point; a text with a character outside the table,
or one that folds to several (ß → ss), is folded by ``str.casefold`` in Python instead —
so the result is always Python's.
"""

from __future__ import annotations

import unicodedata
from functools import lru_cache

import numpy as np
from numba import njit, prange

from ..features.shingles import pack_bytes
from ..kernels.tables import stored_table
from ..kernels.utf8 import decode_code_point

# Code points below this have a place in the case-folding table.
_FOLD_LIMIT = 0x20000


@lru_cache(maxsize=1)
def fold_table() -> np.ndarray:
    """``ord(chr(c).casefold())`` for every code point below `_FOLD_LIMIT`; -1 where the
    fold is several code points (kept on disk between runs: `dedup.kernels.tables`)."""
    return stored_table("fold-table", 1, _build_fold_table)


def _build_fold_table() -> np.ndarray:
    folds = [chr(c).casefold() for c in range(_FOLD_LIMIT)]
    return np.array([ord(f) if len(f) == 1 else -1 for f in folds], dtype=np.int32)


# Hangul vowel and trailing consonant jamo: they compose with what precedes them by the
# algorithm of the Unicode standard (section 3.12), not by a listed decomposition.
_HANGUL_SECONDS = (range(0x1161, 0x1176), range(0x11A8, 0x11C3))


@lru_cache(maxsize=1)
def nfkc_table() -> np.ndarray:
    """For every code point below `_FOLD_LIMIT`: the one code point NFKC makes of it when
    the kernel may put that in its place whatever surrounds it, else -1.

    A code point q is "settled" when NFKC leaves it alone, its combining class is 0 and it
    is not the second part of any two-part canonical decomposition (nor a Hangul vowel or
    trailing jamo): those are the characters whose NFKC quick check is "yes" and that
    start no reordering, so a text made only of them is its own NFKC form (UAX #15). A
    code point c maps to q when ``NFKC(c) == q`` and q is settled: c and q have the same
    compatibility decomposition, so the text with q in place of c has the same NFKC form.
    Kept on disk between runs (`dedup.kernels.tables`).
    """
    return stored_table("nfkc-table", 1, _build_nfkc_table)


def _build_nfkc_table() -> np.ndarray:
    seconds = {c for block in _HANGUL_SECONDS for c in block}
    for c in range(0x80, 0x30000):  # every canonical decomposition lies below U+30000
        parts = unicodedata.decomposition(chr(c)).split()
        if len(parts) == 2 and not parts[0].startswith("<"):
            seconds.add(int(parts[1], 16))
    chars = [chr(c) for c in range(_FOLD_LIMIT)]
    forms = [unicodedata.normalize("NFKC", ch) for ch in chars]
    settled = [
        forms[c] == chars[c] and unicodedata.combining(chars[c]) == 0 and c not in seconds
        for c in range(_FOLD_LIMIT)
    ]
    table = np.full(_FOLD_LIMIT, -1, dtype=np.int32)
    for c, form in enumerate(forms):
        if len(form) == 1 and ord(form) < _FOLD_LIMIT and settled[ord(form)]:
            table[c] = ord(form)
    table[0xD800:0xE000] = -1  # lone surrogates: left to Python
    return table


_NO_FOLD = np.zeros(0, dtype=np.int32)
# Per ASCII byte: its kind (see _kind) and its lower case.
# Per byte: its lower case when it is an ASCII word character, else what it is:
# -1 a space inside a line, -2 a line break, -3 the first or a later byte of a non-ASCII character.
_SPACE, _BREAK, _WIDE = -1, -2, -3
_BYTE_CLASS = np.full(256, _WIDE, dtype=np.int16)
_BYTE_CLASS[:128] = np.arange(128)
_BYTE_CLASS[65:91] += 32
_BYTE_CLASS[[9, 32, 31]] = _SPACE
_BYTE_CLASS[[10, 11, 12, 13, 28, 29, 30]] = _BREAK

__all__ = ["canonical_line_bytes", "canonical_packed", "canonical_segments"]


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


_ONE = np.uint64(1)


@njit(cache=True, inline="always")
def _canonical_one(buf, a, b, out, start, fold, nfkc, line_separator):
    # Text buf[a:b] → its canonical lines written at out[start:]; returns (bytes,
    # characters, status): status 1 when a fold needs Python, 2 when NFKC does (the text
    # is left there). An empty ``fold`` table folds nothing but A–Z; an empty ``nfkc``
    # table takes the text as normalized already.
    #
    # Between two words of the output stands one separator: ``line_separator`` when a
    # line break came between them, else a space; nothing before the first word or after
    # the last. ASCII bytes take no branch that depends on the text: a separator byte and
    # the byte itself are always stored, and the end moves on by whether each belongs
    # there. Their indices are unsigned, which spares the compiled code a test for
    # negative indices on every byte (about half its time).
    w = np.uint64(start)
    i = np.uint64(a)
    end = np.uint64(b)
    line_step = np.int64(line_separator) - 32
    chars = 0
    status = 0
    started = 0  # a word has been written
    after_word = 0  # the previous character was part of a word
    broke = 0  # a line break came since the last word
    while i < end:
        v = _BYTE_CLASS[buf[i]]
        if v != _WIDE:
            word = np.int64(v >= 0)
            separate = word & started & (1 - after_word)
            out[w] = 32 + line_step * broke
            w += np.uint64(separate)
            out[w] = v
            w += np.uint64(word)
            chars += separate + word
            started |= word
            broke = (broke | np.int64(v == _BREAK)) & (1 - word)
            after_word = word
            i += _ONE
            continue
        at = np.int64(i)
        to = np.int64(w)
        cp, n = decode_code_point(buf, at, b)
        if nfkc.shape[0] > 0:
            if cp < 0 or cp >= nfkc.shape[0] or nfkc[cp] < 0:
                return to - start, chars, 2
            cp = np.int64(nfkc[cp])
        k = _kind(cp)
        if k == 0:
            if started and not after_word:
                out[to] = line_separator if broke else 32
                to += 1
                chars += 1
            started, after_word, broke = 1, 1, 0
            chars += 1
            if cp < 0 or fold.shape[0] == 0:
                for j in range(n):
                    out[to + j] = buf[at + j]
                to += n
            elif cp < 0x80:  # NFKC made it ASCII (a full-width letter)
                out[to] = _BYTE_CLASS[cp]
                to += 1
            else:
                f = fold[cp] if cp < fold.shape[0] else -1
                if f < 0:
                    status = 1
                    to = _put(out, to, cp)
                else:
                    to = _put(out, to, np.int64(f))
        else:
            after_word = 0
            if k == 2:
                broke = 1
        w = np.uint64(to)
        i = np.uint64(at + n)
    return np.int64(w) - start, chars, status


@njit(cache=True, parallel=True, nogil=True)
def _canonical(buf, offsets, out, lengths, chars, status, fold, nfkc, line_separator):
    for d in prange(offsets.shape[0] - 1):
        lengths[d], chars[d], status[d] = _canonical_one(
            buf, offsets[d], offsets[d + 1], out, 2 * offsets[d], fold, nfkc, line_separator
        )


@njit(cache=True, nogil=True)
def _canonical_serial(buf, offsets, out, lengths, chars, status, fold, nfkc, line_separator):
    # For worker processes, which must not start threads of their own after a fork.
    for d in range(offsets.shape[0] - 1):
        lengths[d], chars[d], status[d] = _canonical_one(
            buf, offsets[d], offsets[d + 1], out, 2 * offsets[d], fold, nfkc, line_separator
        )


def _run(buf, offsets, parallel, separator, fold=_NO_FOLD, nfkc=_NO_FOLD, spare=None):
    # Text d is written at out[2 * offsets[d]:]: room for folds that lengthen the UTF-8.
    # ``spare``: an array to write into when it is large enough.
    offsets = np.asarray(offsets, dtype=np.int64)
    size = 2 * buf.shape[0]
    out = spare[:size] if spare is not None and spare.shape[0] >= size else np.empty(size, dtype=np.uint8)
    n = offsets.shape[0] - 1
    lengths = np.empty(n, dtype=np.int64)
    chars = np.empty(n, dtype=np.int64)
    status = np.zeros(n, dtype=np.int8)
    kernel = _canonical if parallel else _canonical_serial
    kernel(buf, offsets, out, lengths, chars, status, fold, nfkc, np.uint8(separator[0]))
    return out, 2 * offsets, lengths, chars, status


@njit(cache=True, parallel=True, nogil=True)
def _compact(out, starts, lengths, dest, dest_offsets):
    # Each text's output laid end to end.
    for d in prange(lengths.shape[0]):
        a, w, n = starts[d], dest_offsets[d], lengths[d]
        dest[w : w + n] = out[a : a + n]


@njit(cache=True, nogil=True)
def _compact_serial(out, starts, lengths, dest, dest_offsets):
    for d in range(lengths.shape[0]):
        a, w, n = starts[d], dest_offsets[d], lengths[d]
        dest[w : w + n] = out[a : a + n]


def canonical_packed(
    texts: list[str], parallel: bool = True, encoded: list[bytes] | None = None, separator: bytes = b"\n"
) -> tuple[np.ndarray, np.ndarray, list[int]]:
    """The canonical lines of each text laid end to end in one buffer, with offsets (n + 1),
    and the characters of each canonical text.

    Lines are joined by ``separator``: LF (the canonical lines) or a space (the canonical
    text). ``parallel=False`` runs in this thread only (for worker processes). ``encoded``,
    the texts' UTF-8 bytes (``surrogatepass``) when the caller has them already, saves
    encoding them again.

    >>> buf, offsets, characters = canonical_packed(["  The ﬁle\u2028IS  here ", "Straße"], separator=b" ")
    >>> buf.tobytes(), offsets.tolist(), characters
    (b'the file is herestrasse', [0, 16, 23], [16, 7])
    """
    out, starts, lengths, chars, fixed = canonical_segments(texts, parallel, encoded, separator)
    sizes = lengths.copy()
    for k, value in fixed.items():
        sizes[k], lengths[k] = len(value), 0  # copied in below, not by the kernel
    offsets = np.zeros(lengths.shape[0] + 1, dtype=np.int64)
    np.cumsum(sizes, out=offsets[1:])
    dest = np.empty(int(offsets[-1]), dtype=np.uint8)
    (_compact if parallel else _compact_serial)(out, starts, lengths, dest, offsets)
    for k, value in fixed.items():
        dest[offsets[k] : offsets[k + 1]] = np.frombuffer(value, dtype=np.uint8)
    return dest, offsets, chars


def canonical_segments(
    texts: list[str], parallel: bool = True, encoded: list[bytes] | None = None, separator: bytes = b"\n"
) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[int], dict[int, bytes]]:
    """`canonical_packed` before its texts are laid end to end, for a caller that takes
    each text apart anyway: ``(out, starts, lengths, characters, fixed)``, where text k
    is ``fixed[k]`` when Python normalized it, else ``out[starts[k]:starts[k] + lengths[k]]``.
    """
    job = CanonicalJob(texts, encoded, separator)
    return job.finish(job.run(parallel), parallel)


class CanonicalJob:
    """`canonical_segments` in two steps: `run`, all compiled (it may run in another thread
    while this one goes on: it needs no interpreter lock), then `finish`, which normalizes in
    Python the few texts the kernel cannot. Both steps must see the same texts."""

    def __init__(self, texts: list[str], encoded: list[bytes] | None = None, separator: bytes = b"\n"):
        if encoded is None:
            encoded = [
                text.encode("ascii") if text.isascii() else text.encode("utf-8", "surrogatepass")
                for text in texts
            ]
        if all(text.isascii() for text in texts):  # no table is looked at
            self.fold, self.nfkc = _NO_FOLD, _NO_FOLD
        else:
            self.fold, self.nfkc = fold_table(), nfkc_table()
        self.texts, self.separator = texts, separator
        self.buf, self.offsets = pack_bytes(encoded)

    @property
    def room_bytes(self) -> int:
        """Bytes `run` writes into at most (twice the UTF-8 of the texts)."""
        return 2 * int(self.buf.shape[0])

    def run(self, parallel: bool = True, spare: np.ndarray | None = None) -> tuple:
        """The kernel's pass: ``(out, starts, lengths, chars, status)`` (see `_run`); ``out``
        is ``spare`` when it holds `room_bytes`."""
        return _run(self.buf, self.offsets, parallel, self.separator, self.fold, self.nfkc, spare)

    def finish(
        self, ran: tuple, parallel: bool = True
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[int], dict[int, bytes]]:
        """What `canonical_segments` returns, from what `run` returned."""
        texts, separator = self.texts, self.separator
        out, starts, lengths, chars, status = ran
        fixed: dict[int, bytes] = {}
        redo = np.flatnonzero(status == 2).tolist()
        if redo:
            # Texts the kernel cannot normalize alone: NFKC in Python, then the kernel again.
            normalized = [
                unicodedata.normalize("NFKC", texts[k]).encode("utf-8", "surrogatepass") for k in redo
            ]
            again_out, again_starts, again_lengths, again_chars, again = _run(
                *pack_bytes(normalized), parallel, separator, self.fold
            )
            for j, k in enumerate(redo):
                a = int(again_starts[j])
                fixed[k] = again_out[a : a + int(again_lengths[j])].tobytes()
                chars[k] = again_chars[j]
                status[k] = again[j]
        redo = np.flatnonzero(status == 1).tolist()
        if redo:
            # Folds the table does not hold: NFKC and str.casefold, then the kernel without a table.
            folded = [
                unicodedata.normalize("NFKC", texts[k]).casefold().encode("utf-8", "surrogatepass")
                for k in redo
            ]
            again_out, again_starts, again_lengths, again_chars, _ = _run(
                *pack_bytes(folded), parallel, separator
            )
            for j, k in enumerate(redo):
                a = int(again_starts[j])
                fixed[k] = again_out[a : a + int(again_lengths[j])].tobytes()
                chars[k] = again_chars[j]
        return out, starts[:-1], lengths, chars.tolist(), fixed


def canonical_line_bytes(
    texts: list[str], parallel: bool = True, encoded: list[bytes] | None = None
) -> tuple[list[bytes], list[int]]:
    """Canonical lines joined by LF of each text, as UTF-8, and the characters of each
    (of the lines joined by spaces: the canonical text). See `canonical_packed`.

    >>> canonical_line_bytes(["  The ﬁle\\u2028IS  here ", "Straße"])
    ([b'the file\\nis here', b'strasse'], [16, 7])
    """
    buf, offsets, characters = canonical_packed(texts, parallel, encoded)
    bounds = offsets.tolist()
    return [buf[a:b].tobytes() for a, b in zip(bounds[:-1], bounds[1:])], characters
