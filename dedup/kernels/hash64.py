"""The project's stable 64-bit hash of bytes, compiled with numba.

FNV-1a over the bytes, finished with the MurmurHash3 64-bit finalizer (``fmix64``) so
that nearby inputs land far apart. The same bytes give the same hash on every machine,
in every process, forever. Shared by the stages that hash bytes (lines in
`dedup.normalize.lines`, tokens and character n-grams in `dedup.features.hashing`), so
every stage hashes the same way; `dedup.features.hashing` re-exports these names.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["FNV_OFFSET", "FNV_PRIME", "fmix64", "hash_bytes"]

# FNV-1a 64-bit parameters (Fowler, Noll, Vo; the published offset basis and prime).
FNV_OFFSET = np.uint64(0xCBF29CE484222325)
FNV_PRIME = np.uint64(0x100000001B3)
# MurmurHash3 fmix64 constants (Appleby, MurmurHash3 reference implementation).
_M1 = np.uint64(0xFF51AFD7ED558CCD)
_M2 = np.uint64(0xC4CEB9FE1A85EC53)
_S33 = np.uint64(33)


@njit(cache=True, inline="always")
def fmix64(h: np.uint64) -> np.uint64:
    """MurmurHash3 64-bit finalizer: a bijection on 64-bit integers that avalanches."""
    h ^= h >> _S33
    h *= _M1
    h ^= h >> _S33
    h *= _M2
    h ^= h >> _S33
    return h


@njit(cache=True, inline="always")
def hash_bytes(buf: np.ndarray, start: int, stop: int) -> np.uint64:
    """Stable hash of ``buf[start:stop]``: FNV-1a 64 then `fmix64`; O(stop - start), inlined."""
    h = FNV_OFFSET
    for i in range(start, stop):
        h ^= np.uint64(buf[i])
        h *= FNV_PRIME
    return fmix64(h)
