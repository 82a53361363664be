"""Lines of packed canonical texts, in compiled code.

A text stored for boilerplate detection is its canonical lines joined by ``\\n`` (a
canonical line never holds a line break). These kernels find the lines, hash their
bytes with the project's stable hash, count their characters (UTF-8 aware) and rebuild
texts without chosen lines — so boilerplate is counted and removed without a Python
string per line.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..kernels.hash64 import hash_bytes

__all__ = ["line_spans", "line_hashes", "line_characters", "join_kept_lines"]

_NEWLINE = np.uint8(0x0A)
_SPACE = np.uint8(0x20)


@njit(cache=True, parallel=True, nogil=True)
def _line_counts(buf, offsets):
    out = np.zeros(offsets.shape[0] - 1, dtype=np.int64)
    for d in prange(offsets.shape[0] - 1):
        a, b = offsets[d], offsets[d + 1]
        if b > a:
            n = 1
            for i in range(a, b):
                if buf[i] == _NEWLINE:
                    n += 1
            out[d] = n
    return out


@njit(cache=True, parallel=True, nogil=True)
def _fill_spans(buf, offsets, line_offsets, starts, stops):
    for d in prange(offsets.shape[0] - 1):
        a, b = offsets[d], offsets[d + 1]
        if b == a:
            continue
        w = line_offsets[d]
        s = a
        for i in range(a, b):
            if buf[i] == _NEWLINE:
                starts[w] = s
                stops[w] = i
                w += 1
                s = i + 1
        starts[w] = s
        stops[w] = b


def line_spans(buf: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Byte spans of every line: ``(starts, stops, line_offsets)``; text d has lines
    ``line_offsets[d]:line_offsets[d + 1]``. An empty text has no line.

    >>> buf = np.frombuffer(b"ab\\ncd" + b"e", np.uint8)
    >>> starts, stops, per_text = line_spans(buf, np.array([0, 5, 6]))
    >>> starts.tolist(), stops.tolist(), per_text.tolist()
    ([0, 3, 5], [2, 5, 6], [0, 2, 3])
    """
    offsets = np.asarray(offsets, dtype=np.int64)
    counts = _line_counts(buf, offsets)
    line_offsets = np.zeros(counts.shape[0] + 1, dtype=np.int64)
    np.cumsum(counts, out=line_offsets[1:])
    starts = np.empty(line_offsets[-1], dtype=np.int64)
    stops = np.empty(line_offsets[-1], dtype=np.int64)
    _fill_spans(buf, offsets, line_offsets, starts, stops)
    return starts, stops, line_offsets


@njit(cache=True, parallel=True, nogil=True)
def line_hashes(buf: np.ndarray, starts: np.ndarray, stops: np.ndarray) -> np.ndarray:
    """Stable 64-bit hash of the bytes of every span (equal lines, equal hashes)."""
    out = np.empty(starts.shape[0], dtype=np.uint64)
    for k in prange(starts.shape[0]):
        out[k] = hash_bytes(buf, starts[k], stops[k])
    return out


@njit(cache=True, parallel=True, nogil=True)
def line_characters(buf: np.ndarray, starts: np.ndarray, stops: np.ndarray) -> np.ndarray:
    """Characters (not bytes) of every span: bytes that do not continue a UTF-8 sequence."""
    out = np.zeros(starts.shape[0], dtype=np.int64)
    for k in prange(starts.shape[0]):
        n = 0
        for i in range(starts[k], stops[k]):
            if (buf[i] & 0xC0) != 0x80:
                n += 1
        out[k] = n
    return out


@njit(cache=True, nogil=True)
def _join(buf, starts, stops, line_offsets, keep, out_offsets, out):
    for d in range(line_offsets.shape[0] - 1):
        w = out_offsets[d]
        first = True
        for k in range(line_offsets[d], line_offsets[d + 1]):
            if not keep[k]:
                continue
            if not first:
                out[w] = _SPACE
                w += 1
            first = False
            for i in range(starts[k], stops[k]):
                out[w] = buf[i]
                w += 1


def join_kept_lines(
    buf: np.ndarray, starts: np.ndarray, stops: np.ndarray, line_offsets: np.ndarray, keep: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Each text rebuilt from its kept lines joined by single spaces: ``(buf, offsets)``.

    >>> buf = np.frombuffer(b"ab\\ncd\\nef", np.uint8)
    >>> s, e, lo = line_spans(buf, np.array([0, 8]))
    >>> out, offsets = join_kept_lines(buf, s, e, lo, np.array([True, False, True]))
    >>> bytes(out), offsets.tolist()
    (b'ab ef', [0, 5])
    """
    keep = np.asarray(keep, dtype=np.bool_)
    kept_bytes = np.where(keep, stops - starts, 0)
    kept_lines = keep.astype(np.int64)
    cum_bytes = np.concatenate(([0], np.cumsum(kept_bytes)))
    cum_lines = np.concatenate(([0], np.cumsum(kept_lines)))
    per_text_bytes = cum_bytes[line_offsets[1:]] - cum_bytes[line_offsets[:-1]]
    per_text_lines = cum_lines[line_offsets[1:]] - cum_lines[line_offsets[:-1]]
    lengths = per_text_bytes + np.maximum(per_text_lines - 1, 0)
    out_offsets = np.zeros(lengths.shape[0] + 1, dtype=np.int64)
    np.cumsum(lengths, out=out_offsets[1:])
    out = np.empty(out_offsets[-1], dtype=np.uint8)
    _join(buf, starts, stops, line_offsets, keep, out_offsets, out)
    return out, out_offsets
