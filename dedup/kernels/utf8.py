"""Decoding of one UTF-8 code point in compiled code.

Shared by the stages that read canonical UTF-8 text byte by byte (the canonical lines of
`dedup.normalize.canonical_bytes` and the words of `dedup.features.tokenize`), so both
read code points the same way.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["decode_code_point"]


@njit(cache=True, inline="always")
def decode_code_point(buf, i, stop):
    """One UTF-8 code point at ``buf[i]``: ``(code point, byte length)``.

    Invalid bytes count as one byte with code point -1 (canonical text is always valid
    UTF-8, so that happens only on other input). A sequence cut by ``stop`` is invalid.
    Inlined into its callers; cost O(1).
    """
    b0 = np.int64(buf[i])
    if b0 < 0x80:
        return b0, 1
    if b0 >= 0xF0 and i + 3 < stop:
        return ((b0 & 0x07) << 18) | ((np.int64(buf[i + 1]) & 0x3F) << 12) | (
            (np.int64(buf[i + 2]) & 0x3F) << 6
        ) | (np.int64(buf[i + 3]) & 0x3F), 4
    if b0 >= 0xE0 and i + 2 < stop:
        return ((b0 & 0x0F) << 12) | ((np.int64(buf[i + 1]) & 0x3F) << 6) | (np.int64(buf[i + 2]) & 0x3F), 3
    if b0 >= 0xC0 and i + 1 < stop:
        return ((b0 & 0x1F) << 6) | (np.int64(buf[i + 1]) & 0x3F), 2
    return -1, 1
