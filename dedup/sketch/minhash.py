"""MinHash signatures over shingle sets, computed by one compiled kernel per corpus.

For a set S and a random hash function h, P[min h(S) = min h(T)] = J(S, T), the
Jaccard similarity (Broder 1997). With ``num_perm`` independent functions the share
of equal signature positions estimates J with standard error sqrt(J(1 - J)/num_perm).

Hash functions (``stable64`` scheme): multiply-add-shift universal hashing
(Dietzfelbinger 1996) on 64-bit shingle hashes, h(x) = ((a*x + b) mod 2^64) >> 32,
with ``a`` odd. The parameters come from a SplitMix64 stream seeded by ``seed``, our
own generator, so they never depend on a numpy version.

Binned scheme (``binned``, the default): one hash per shingle instead of one per shingle
and permutation, as in one-permutation hashing (Li, Owen, Zhang 2012). A seeded 64-bit
mix of the shingle hash puts it in one of ``num_perm`` bins by its high bits, and each
bin keeps the least of the low 32 bits. While some bin of a document is empty, its
shingles are hashed again with the next round's offset, and a value of round r only
fills bins still empty or holding a round-r value: a value of an earlier round always
wins (the rounds of fast similarity sketching, Dahlgaard, Knudsen, Thorup 2017). Each
bin thus holds the least (round, value) point of the document in it; every shingle of
A ∪ B is equally likely to own that point of A ∪ B, so a position of two signatures
agrees with probability J, as with independent permutations. A document of n shingles
costs about max(1, (k ln k) / n) passes over its shingles instead of k.

Compatibility scheme (``datasketch-sha1``): the permutations datasketch draws by
default (numpy ``RandomState(seed)``, ``a`` odd 32-bit, ``b`` 32-bit), applied after
the MurmurHash3 32-bit finalizer, ``a*h + b mod 2^32``. With SHA-1 shingle hashes
this reproduces ``datasketch.MinHash(num_perm, seed).hashvalues`` exactly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from ..features.hashing import fmix64

__all__ = ["Signatures", "minhash_parameters", "minhash_signatures", "signatures_with", "estimate_jaccard"]

_MASK64 = (1 << 64) - 1
_MASK32 = np.uint64(0xFFFFFFFF)
_EMPTY = np.uint32(0xFFFFFFFF)
_S32 = np.uint64(32)


def _splitmix64(seed: int, count: int) -> list[int]:
    # SplitMix64 (Steele, Lea, Flood 2014): a tiny generator whose output is fixed
    # by its published constants, so our permutations never drift between versions.
    state = seed & _MASK64
    out = []
    for _ in range(count):
        state = (state + 0x9E3779B97F4A7C15) & _MASK64
        z = state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & _MASK64
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & _MASK64
        out.append(z ^ (z >> 31))
    return out


def minhash_parameters(
    num_perm: int, seed: int, hash_scheme: str = "stable64"
) -> tuple[np.ndarray, np.ndarray]:
    """The ``(a, b)`` of every hash function, as uint64 arrays of length ``num_perm``.

    For ``binned`` there is one function: ``(mix, step)`` are the multiplier and offset
    of the shingle mix and the change of the offset from one round to the next.
    """
    if hash_scheme == "datasketch-sha1":
        # datasketch 2.x, scheme "affine32": a = 2*randint(0, 2^31) + 1, then b, from one RandomState.
        gen = np.random.RandomState(seed)
        a = gen.randint(0, 1 << 31, num_perm, dtype=np.uint32) * np.uint32(2) + np.uint32(1)
        b = gen.randint(0, 1 << 32, num_perm, dtype=np.uint32)
        return a.astype(np.uint64), b.astype(np.uint64)
    if hash_scheme == "binned":
        a, b, c = _splitmix64(seed, 3)
        return np.array([a | 1, b], dtype=np.uint64), np.array([c | 1], dtype=np.uint64)
    stream = _splitmix64(seed, 2 * num_perm)
    a = np.array([x | 1 for x in stream[0::2]], dtype=np.uint64)
    b = np.array(stream[1::2], dtype=np.uint64)
    return a, b


@njit(cache=True, parallel=True, nogil=True)
def _minhash_multiply_shift(shingles, offsets, a, b, out):
    n_docs = offsets.shape[0] - 1
    num_perm = a.shape[0]
    for d in prange(n_docs):
        row = np.full(num_perm, _EMPTY, dtype=np.uint32)
        for s in range(offsets[d], offsets[d + 1]):
            x = shingles[s]
            for p in range(num_perm):
                v = np.uint32((a[p] * x + b[p]) >> _S32)
                if v < row[p]:
                    row[p] = v
        out[d, :] = row


@njit(cache=True, inline="always")
def _bin_of(h, k):
    # High 32 bits scaled to [0, k): an even split for any k below 2^32.
    return (h >> _S32) * np.uint64(k) >> _S32


@njit(cache=True, parallel=True, nogil=True)
def _minhash_binned(shingles, offsets, mix, step, out):
    n_docs = offsets.shape[0] - 1
    k = out.shape[1]
    a, b, c = mix[0], mix[1], step[0]
    for d in prange(n_docs):
        row = np.full(k, _EMPTY, dtype=np.uint32)
        # Round in which each bin got its value; 2^62 marks a bin still empty.
        got = np.full(k, np.int64(2**62), dtype=np.int64)
        empty = k if offsets[d + 1] > offsets[d] else 0
        r = 0
        while empty > 0:
            offset = b + np.uint64(r) * c
            for s in range(offsets[d], offsets[d + 1]):
                h = fmix64(a * shingles[s] + offset)
                j = _bin_of(h, k)
                v = np.uint32(h & _MASK32)
                # No branch on the values (which bin comes first, and which value is
                # smaller, the processor could not guess): a bin settled in an earlier
                # round keeps its value, any other takes the smaller of its value and v.
                old = row[j]
                row[j] = old if got[j] < r else min(old, v)
                got[j] = min(got[j], r)
            empty = 0
            for j in range(k):
                empty += got[j] > r
            r += 1
        out[d, :] = row


@njit(cache=True, inline="always")
def _fmix32(h):
    # MurmurHash3 32-bit finalizer, in 64-bit registers masked to 32 bits.
    h ^= h >> np.uint64(16)
    h = (h * np.uint64(0x85EBCA6B)) & _MASK32
    h ^= h >> np.uint64(13)
    h = (h * np.uint64(0xC2B2AE35)) & _MASK32
    h ^= h >> np.uint64(16)
    return h


@njit(cache=True, parallel=True, nogil=True)
def _minhash_affine32(shingles, offsets, a, b, out):
    n_docs = offsets.shape[0] - 1
    num_perm = a.shape[0]
    for d in prange(n_docs):
        row = np.full(num_perm, _EMPTY, dtype=np.uint32)
        for s in range(offsets[d], offsets[d + 1]):
            x = _fmix32(shingles[s] & _MASK32)
            for p in range(num_perm):
                v = np.uint32((a[p] * x + b[p]) & _MASK32)
                if v < row[p]:
                    row[p] = v
        out[d, :] = row


@dataclass(frozen=True)
class Signatures:
    """MinHash signatures of a corpus with what is needed to compare them safely.

    ``values`` is uint32 of shape ``(n_docs, num_perm)``.
    """

    values: np.ndarray
    seed: int
    hash_scheme: str
    shingle_spec: dict

    @property
    def num_perm(self) -> int:
        return int(self.values.shape[1])

    def check_compatible(self, other: Signatures) -> None:
        """Raise ValueError when two sets of signatures cannot be compared."""
        mine = (self.seed, self.num_perm, self.hash_scheme, self.shingle_spec)
        theirs = (other.seed, other.num_perm, other.hash_scheme, other.shingle_spec)
        if mine != theirs:
            raise ValueError(
                f"signatures built with different settings cannot be compared: "
                f"(seed, num_perm, scheme, shingles) {mine} vs {theirs}"
            )


def minhash_signatures(
    shingles: np.ndarray,
    shingle_offsets: np.ndarray,
    *,
    num_perm: int = 128,
    seed: int = 1,
    hash_scheme: str = "binned",
    shingle_spec: dict | None = None,
) -> Signatures:
    """MinHash signature of every shingle set.

    Parameters
    ----------
    shingles, shingle_offsets : ndarray
        Shingle hashes (uint64) in CSR layout, see `dedup.features.FeatureSet`.
    num_perm, seed, hash_scheme
        See `dedup.AuditSettings`.

    Notes
    -----
    Cost O(total shingles * num_perm), in parallel over documents; about O(total shingles +
    documents * num_perm log num_perm) with the ``binned`` scheme. A document with
    no shingle gets the all-0xFFFFFFFF signature.

    Examples
    --------
    >>> sig = minhash_signatures(np.array([1, 2, 3], np.uint64), np.array([0, 3, 3]), num_perm=4)
    >>> sig.values.shape
    (2, 4)
    """
    a, b = minhash_parameters(num_perm, seed, hash_scheme)
    n_docs = shingle_offsets.shape[0] - 1
    out = np.empty((n_docs, num_perm), dtype=np.uint32)
    kernels = {"datasketch-sha1": _minhash_affine32, "binned": _minhash_binned}
    kernel = kernels.get(hash_scheme, _minhash_multiply_shift)
    kernel(np.ascontiguousarray(shingles, dtype=np.uint64), shingle_offsets.astype(np.int64), a, b, out)
    return Signatures(out, seed, hash_scheme, dict(shingle_spec or {}))


def estimate_jaccard(sig_a: np.ndarray, sig_b: np.ndarray) -> float:
    """Share of equal positions of two signatures: the MinHash estimate of Jaccard."""
    if sig_a.shape != sig_b.shape:
        raise ValueError(f"signatures of different lengths: {sig_a.shape} vs {sig_b.shape}")
    return float(np.mean(sig_a == sig_b))


def signatures_with(settings, features) -> Signatures:
    """`minhash_signatures` of a `FeatureSet` with the MinHash settings of an `AuditSettings`."""
    return minhash_signatures(
        features.shingles,
        features.shingle_offsets,
        num_perm=settings.num_perm,
        seed=settings.seed,
        hash_scheme=settings.hash_scheme,
        shingle_spec=features.spec,
    )
