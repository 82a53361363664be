"""Compact byte encodings of the integer and float arrays the index keeps as blobs.

Every blob is little-endian whatever the machine, so an index file can be copied between
machines. Two integer encodings are offered:

``pack_uints``
    One byte giving the item width (1, 2, 4 or 8), then the values at that width: the
    narrowest width that holds the largest value. Term counts are mostly 1 or 2, so
    they take one byte each instead of eight.
``pack_sorted``
    A sorted array of non-negative integers as the gaps between neighbours, packed
    with `pack_uints`. Posting lists of text ids are sorted and dense, so their gaps
    fit one or two bytes.

Decoding a damaged blob raises `BlobError` rather than returning wrong numbers.
Costs are O(n) with numpy.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "BlobError",
    "pack_uints",
    "unpack_uints",
    "pack_sorted",
    "unpack_sorted",
    "pack_array",
    "unpack_array",
]

_WIDTHS = {1: "<u1", 2: "<u2", 4: "<u4", 8: "<u8"}


class BlobError(ValueError):
    """A blob does not decode: the index file holding it is damaged."""


def pack_uints(values: np.ndarray) -> bytes:
    """Non-negative integers at the narrowest width that holds the largest one."""
    values = np.asarray(values)
    if values.size and int(values.min()) < 0:
        raise ValueError("pack_uints takes non-negative integers")
    top = int(values.max()) if values.size else 0
    width = 1 if top < 2**8 else 2 if top < 2**16 else 4 if top < 2**32 else 8
    return bytes([width]) + values.astype(_WIDTHS[width], copy=False).tobytes()


def unpack_uints(blob: bytes) -> np.ndarray:
    """The integers of `pack_uints`, as int64."""
    if not blob or blob[0] not in _WIDTHS or (len(blob) - 1) % blob[0]:
        raise BlobError("an integer blob has a bad header or length")
    return np.frombuffer(blob, dtype=_WIDTHS[blob[0]], offset=1).astype(np.int64)


def pack_sorted(values: np.ndarray) -> bytes:
    """A sorted array of non-negative integers as packed gaps (the first gap is from 0)."""
    values = np.asarray(values, dtype=np.int64)
    gaps = np.diff(values, prepend=np.int64(0))
    if gaps.size and int(gaps.min()) < 0:
        raise ValueError("pack_sorted takes a sorted array of non-negative integers")
    return pack_uints(gaps)


def unpack_sorted(blob: bytes) -> np.ndarray:
    """The sorted integers of `pack_sorted`, as int64."""
    return np.cumsum(unpack_uints(blob))


def pack_array(values: np.ndarray, dtype: str) -> bytes:
    """A flat array at a fixed little-endian dtype such as ``"<u4"`` or ``"<f8"``."""
    return np.ascontiguousarray(values, dtype=dtype).tobytes()


def unpack_array(blob: bytes, dtype: str, length: int | None = None) -> np.ndarray:
    """The array of `pack_array`; ``length`` (items) is checked when given."""
    size = np.dtype(dtype).itemsize
    if len(blob) % size or (length is not None and len(blob) != length * size):
        raise BlobError(f"an array blob has {len(blob)} bytes, which does not fit its {dtype} items")
    return np.frombuffer(blob, dtype=dtype)
