"""From normalized texts to token hashes and shingle sets for a whole corpus.

The result travels as flat arrays in a CSR-like layout: the shingles of document
``d`` are ``shingles[shingle_offsets[d]:shingle_offsets[d + 1]]``, sorted and unique,
which is what the MinHash kernel and the exact Jaccard kernel both want.
"""

from __future__ import annotations

import hashlib
import struct
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..normalize.text import token_text
from . import hashing, tokenize

__all__ = [
    "FeatureSet",
    "pack_texts",
    "build_features",
    "features_from_buffer",
    "features_with",
    "features_from_tokens",
    "from_word_hashes",
    "tokens_of",
    "shingle_strings",
]


@dataclass(frozen=True)
class FeatureSet:
    """Token hashes and shingle sets of a corpus (one row per document).

    Attributes
    ----------
    token_hashes, token_offsets : ndarray
        Hash of every token in document order; ``token_offsets`` has ``n_docs + 1``
        entries. Used for TF-IDF term counts.
    shingles, shingle_offsets : ndarray
        Sorted unique shingle hashes per document (uint64).
    spec : dict
        What the shingles are (kind, size, hash scheme); sketches built from
        different specs must not be compared.
    """

    token_hashes: np.ndarray
    token_offsets: np.ndarray
    shingles: np.ndarray
    shingle_offsets: np.ndarray
    spec: dict

    @property
    def n_docs(self) -> int:
        return int(self.shingle_offsets.shape[0] - 1)

    @property
    def shingle_counts(self) -> np.ndarray:
        """Number of distinct shingles per document."""
        return np.diff(self.shingle_offsets)

    def shingles_of(self, doc: int) -> np.ndarray:
        return self.shingles[self.shingle_offsets[doc] : self.shingle_offsets[doc + 1]]


def pack_texts(texts: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
    """UTF-8 encode texts into one byte buffer with offsets (n_docs + 1)."""
    return pack_bytes([t.encode("utf-8") for t in texts])


def pack_bytes(encoded: Sequence[bytes]) -> tuple[np.ndarray, np.ndarray]:
    """Byte strings laid end to end in one buffer with offsets (n + 1)."""
    offsets = np.zeros(len(encoded) + 1, dtype=np.int64)
    np.cumsum([len(e) for e in encoded], out=offsets[1:])
    buf = np.frombuffer(b"".join(encoded), dtype=np.uint8) if encoded else np.zeros(0, np.uint8)
    return buf, offsets


def _exclusive_cumsum(counts: np.ndarray) -> np.ndarray:
    offsets = np.zeros(counts.shape[0] + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    return offsets


def tokens_of(token_text: str) -> list[str]:
    """The tokens of a normalized text, as the kernels see them (split on spaces)."""
    return token_text.split()


def shingle_strings(token_text: str, shingle_size: int = 5, char_ngrams: int | None = None) -> list[str]:
    """The shingles of one text as strings (tokens joined by one space).

    Used by the datasketch compatibility scheme and by tests; the fast path never
    builds these strings.
    """
    if char_ngrams:
        n = char_ngrams
        if not token_text:
            return []
        return [token_text[i : i + n] for i in range(max(1, len(token_text) - n + 1))]
    tokens = tokens_of(token_text)
    if not tokens:
        return []
    width = min(shingle_size, len(tokens))
    return [" ".join(tokens[i : i + width]) for i in range(max(1, len(tokens) - shingle_size + 1))]


def _sha1_32(data: bytes) -> int:
    # datasketch.hashfunc.sha1_hash32: the first 4 bytes of SHA-1, little-endian.
    return struct.unpack("<I", hashlib.sha1(data).digest()[:4])[0]


def build_features(
    texts: Sequence[str],
    *,
    shingle_size: int = 5,
    char_ngrams: int | None = None,
    hash_scheme: str = "stable64",
) -> FeatureSet:
    """Token hashes and shingle sets for every text.

    Parameters
    ----------
    texts : sequence of str
        Canonical texts (see `dedup.normalize.canonical_text`); words are the runs of
        letters and digits, so punctuation never reaches a shingle.
    shingle_size : int
        k of word k-shingles.
    char_ngrams : int or None
        Use character n-grams of this length (over the words separated by one space)
        instead of word shingles.
    hash_scheme : {"stable64", "binned", "datasketch-sha1"}
        ``datasketch-sha1`` hashes each shingle string with SHA-1 (32 bits) as
        datasketch does, in Python: slow, for compatibility checks only. ``binned``
        hashes word shingles with a rolling polynomial (O(1) a shingle), ``stable64``
        by chaining the k word hashes (O(k) a shingle).

    Notes
    -----
    Cost O(total bytes * k) in compiled code for word shingles with ``stable64``.

    Examples
    --------
    >>> fs = build_features(["a b c d e f", "a b c d e g"], shingle_size=5)
    >>> fs.shingle_counts.tolist()
    [2, 2]
    """
    buf, doc_offsets = pack_texts(texts)
    return features_from_buffer(
        buf,
        doc_offsets,
        texts=texts,
        shingle_size=shingle_size,
        char_ngrams=char_ngrams,
        hash_scheme=hash_scheme,
    )


def features_from_buffer(
    buf: np.ndarray,
    doc_offsets: np.ndarray,
    *,
    texts: Sequence[str] | None = None,
    shingle_size: int = 5,
    char_ngrams: int | None = None,
    hash_scheme: str = "stable64",
    distinct: bool = True,
) -> FeatureSet:
    """`build_features` over canonical texts already packed as UTF-8 bytes with offsets.

    ``texts`` (the same texts as strings) is needed only for character n-grams and the
    datasketch scheme, which work on the word text in Python. With ``distinct=False``
    the shingles are left in text order with their repeats (no per-document sort): all
    MinHash needs, since a minimum does not change when a value repeats.
    """
    table = tokenize.word_table()
    tokens, token_offsets = tokenize.words_and_hashes(buf, doc_offsets, table)

    if hash_scheme == "datasketch-sha1" or char_ngrams:
        if texts is None:
            texts = [
                bytes(buf[doc_offsets[d] : doc_offsets[d + 1]]).decode("utf-8")
                for d in range(len(doc_offsets) - 1)
            ]
        word_texts = [token_text(t) for t in texts]
    if hash_scheme == "datasketch-sha1":
        values: list[int] = []
        counts = []
        for text in word_texts:
            strings = shingle_strings(text, shingle_size, char_ngrams)
            counts.append(len(strings))
            values.extend(_sha1_32(s.encode("utf-8")) for s in strings)
        raw = np.asarray(values, dtype=np.uint64)
        raw_offsets = _exclusive_cumsum(np.asarray(counts, dtype=np.int64))
    elif char_ngrams:
        word_buf, word_offsets = pack_texts(word_texts)
        raw_offsets = _exclusive_cumsum(hashing.char_ngram_counts(word_buf, word_offsets, char_ngrams))
        raw = hashing.char_ngrams(word_buf, word_offsets, raw_offsets, char_ngrams)
    else:
        return features_from_tokens(
            tokens, token_offsets, shingle_size=shingle_size, hash_scheme=hash_scheme, distinct=distinct
        )
    return _feature_set(
        tokens,
        token_offsets,
        raw,
        raw_offsets,
        distinct,
        char_ngrams or shingle_size,
        hash_scheme,
        bool(char_ngrams),
    )


def _feature_set(tokens, token_offsets, raw, raw_offsets, distinct, size, hash_scheme, chars) -> FeatureSet:
    if distinct:
        shingles, shingle_offsets = hashing.sort_unique_segments(raw, raw_offsets)
    else:
        shingles, shingle_offsets = raw, raw_offsets
    spec = {"kind": "char" if chars else "word", "size": int(size), "hash_scheme": hash_scheme}
    return FeatureSet(tokens, token_offsets, shingles, shingle_offsets, spec)


def features_from_tokens(
    tokens: np.ndarray,
    token_offsets: np.ndarray,
    *,
    shingle_size: int = 5,
    hash_scheme: str = "stable64",
    distinct: bool = True,
) -> FeatureSet:
    """Word shingles of texts given by their word hashes (``stable64`` or ``binned``).

    The same features `features_from_buffer` makes from the texts, without reading the
    texts again: an audit keeps the word hashes of its sketch pass for the texts it
    compares later.
    """
    if hash_scheme not in ("stable64", "binned"):
        raise ValueError(f"word hashes alone cannot give {hash_scheme!r} shingles")
    token_offsets = np.asarray(token_offsets, dtype=np.int64)
    raw_offsets = _exclusive_cumsum(hashing.shingle_counts(token_offsets, shingle_size))
    shingles_of = hashing.rolling_word_shingles if hash_scheme == "binned" else hashing.word_shingles
    raw = shingles_of(tokens, token_offsets, raw_offsets, shingle_size)
    return _feature_set(tokens, token_offsets, raw, raw_offsets, distinct, shingle_size, hash_scheme, False)


def from_word_hashes(settings) -> bool:
    """Whether the shingles of these settings are made from word hashes alone (so kept
    word hashes can stand in for the texts)."""
    return not settings.char_ngrams and settings.hash_scheme in ("stable64", "binned")


def features_with(settings, buf: np.ndarray, doc_offsets: np.ndarray, *, distinct: bool = True) -> FeatureSet:
    """`features_from_buffer` with the shingle settings of an `AuditSettings` (or alike)."""
    return features_from_buffer(
        buf,
        doc_offsets,
        shingle_size=settings.shingle_size,
        char_ngrams=settings.char_ngrams,
        hash_scheme=settings.hash_scheme,
        distinct=distinct,
    )
