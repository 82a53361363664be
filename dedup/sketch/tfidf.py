"""TF-IDF rows over our stable token hashes: one column per term, or the hashing trick.

With ``n_features = 0`` (the audit's default) every distinct term has a column of its
own — the exact vocabulary: terms are counted by ``token_hash mod (2**63 - 1)`` while
the texts stream by, and once every text has been counted the vocabulary (the distinct
values, sorted) numbers the columns 0 … V - 1. Two terms share a column only when their
64-bit hashes agree modulo 2**63 - 1, about once in 10**12 for a million terms; so the
cosine is scikit-learn's on the same tokens. Nothing is sized by 2**63: the counts are
sparse and the document frequencies are sorted runs of the columns met.

With ``n_features > 0`` each token goes to column ``token_hash mod n_features``
(Weinberger et al. 2009, the hashing trick), so the columns are known before the
vocabulary is, and an index can add texts without renumbering. Weights follow
scikit-learn's ``TfidfVectorizer(smooth_idf=True, norm="l2")``:

    tf      raw count, or 1 + ln(count) when ``sublinear_tf``
    idf     ln((1 + n) / (1 + df)) + 1       (natural log, smoothed)
    row     tf * idf, scaled to unit Euclidean length

so the cosine of two documents is the dot product of their rows.

Colliding terms share a column. With V distinct terms in m columns, the expected share
of terms that share their column with another is 1 - (1 - 1/m)^(V - 1) (each other term
lands elsewhere with probability 1 - 1/m); it is recorded with the measured share.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from numba import njit, prange

from ..features.hashing import sort_segments_count_unique
from ..features.segment_sort import sorted_distinct
from .distinct import DistinctSet

__all__ = [
    "TfidfModel",
    "fit_tfidf",
    "pair_cosines",
    "collision_stats",
    "DocumentFrequency",
    "term_counts",
]

# Up to this many columns document frequencies are counted in a dense array (8 bytes each).
DENSE_DF_LIMIT = 2**24
# ``n_features`` that means the exact vocabulary, and the space its terms are counted in
# first: 2**63 - 1 is prime, and every column fits a signed 64-bit index.
EXACT_VOCABULARY = 0
EXACT_SPACE = 2**63 - 1


def counting_space(n_features: int) -> int:
    """Columns term counts are made in: ``n_features``, or `EXACT_SPACE` for the exact
    vocabulary (``n_features = 0``)."""
    return EXACT_SPACE if n_features == EXACT_VOCABULARY else int(n_features)


@dataclass(frozen=True)
class TfidfModel:
    """Fitted TF-IDF: document rows and the idf per column.

    Attributes
    ----------
    rows : scipy.sparse.csr_matrix
        One unit-length row per document, shape ``(n_docs, n_features)`` (hashed) or
        ``(n_docs, V)`` (exact vocabulary of V terms).
    columns, column_idf : ndarray
        The columns some document uses (sorted) and their idf; kept sparse so a
        feature space of 2**40 costs nothing.
    unseen_idf : float
        idf of a column no document uses (df = 0).
    sublinear_tf : bool
    vocabulary : ndarray or None
        Exact vocabulary only: the term (``token_hash mod EXACT_SPACE``) of each column,
        sorted; None when hashed.
    """

    rows: sp.csr_matrix
    columns: np.ndarray
    column_idf: np.ndarray
    unseen_idf: float
    sublinear_tf: bool
    vocabulary: np.ndarray | None = None

    @property
    def n_features(self) -> int:
        return int(self.rows.shape[1])

    def idf(self, columns: np.ndarray) -> np.ndarray:
        """idf of the given columns."""
        columns = np.asarray(columns, dtype=np.int64)
        where = np.searchsorted(self.columns, columns)
        where = np.minimum(where, max(self.columns.shape[0] - 1, 0))
        known = (
            (self.columns.shape[0] > 0) & (self.columns[where] == columns)
            if self.columns.size
            else np.zeros(columns.shape, bool)
        )
        out = np.full(columns.shape, self.unseen_idf, dtype=np.float64)
        out[known] = self.column_idf[where[known]]
        return out

    def transform(self, token_hashes: np.ndarray, token_offsets: np.ndarray) -> sp.csr_matrix:
        """Rows for new texts with the fitted idf (e.g. a search query). With the exact
        vocabulary, terms no fitted text has get columns after the vocabulary's."""
        if self.vocabulary is None:
            counts = term_counts(token_hashes, token_offsets, self.n_features)
            entry_idf = self.idf(counts.indices)
            return _weight(counts, entry_idf, np.arange(entry_idf.shape[0]), self.sublinear_tf)
        counts = term_counts(token_hashes, token_offsets, EXACT_VOCABULARY)
        terms = counts.indices.astype(np.int64)
        where = np.minimum(np.searchsorted(self.vocabulary, terms), max(self.vocabulary.shape[0] - 1, 0))
        known = self.vocabulary[where] == terms if self.vocabulary.size else np.zeros(terms.shape, bool)
        unseen, unseen_rank = np.unique(terms[~known], return_inverse=True)
        columns = where.copy()
        columns[~known] = self.vocabulary.shape[0] + unseen_rank.ravel()
        entry_idf = np.where(known, self.column_idf[where] if self.column_idf.size else 0.0, self.unseen_idf)
        width = self.vocabulary.shape[0] + unseen.shape[0]
        ranked = _sorted_rows(counts.data, columns, counts.indptr, width)
        order_idf = _sorted_rows(entry_idf, columns, counts.indptr, width).data
        return _weight(ranked, order_idf, np.arange(order_idf.shape[0]), self.sublinear_tf)


def _sorted_rows(data: np.ndarray, columns: np.ndarray, indptr: np.ndarray, width: int) -> sp.csr_matrix:
    """CSR of the given entries with each row's columns sorted (renumbered columns may
    come out of order)."""
    matrix = sp.csr_matrix(
        (np.asarray(data, np.float64).copy(), columns, indptr), shape=(len(indptr) - 1, width)
    )
    matrix.sort_indices()
    return matrix


@njit(cache=True, parallel=True, nogil=True)
def _fill_counts(columns, offsets, indptr, indices, data):
    # Each document's sorted columns in runs: a run's column and length. No branch depends
    # on the columns (a new run starts at every other token or so, too often to predict):
    # every token stores its column and position at the current run, which moves on where
    # the column changes, so the run keeps its last position; the lengths are then the
    # differences of consecutive last positions.
    for d in prange(offsets.shape[0] - 1):
        a, b = offsets[d], offsets[d + 1]
        if b == a:
            continue
        w = indptr[d]
        indices[w] = columns[a]
        data[w] = a
        for i in range(a + 1, b):
            w += columns[i] != columns[i - 1]
            indices[w] = columns[i]
            data[w] = i
        previous = a - 1
        for k in range(indptr[d], indptr[d + 1]):
            last = data[k]
            data[k] = last - previous
            previous = last


def hashed_columns(token_hashes: np.ndarray, n_features: int) -> np.ndarray:
    """Column of every token: ``hash mod n_features`` as int64 (a mask and a view, no
    copy beyond the result, when ``n_features`` is a power of two); with ``n_features``
    0 (the exact vocabulary), the term: ``hash mod EXACT_SPACE``.

    >>> hashed_columns(np.array([5, 2**64 - 1], np.uint64), 4).tolist()
    [1, 3]
    >>> hashed_columns(np.array([5, 2**64 - 1], np.uint64), 0).tolist()
    [5, 1]
    """
    n_features = counting_space(n_features)
    if n_features & (n_features - 1) == 0 and n_features <= 2**62:
        return np.bitwise_and(token_hashes, np.uint64(n_features - 1)).view(np.int64)
    return (token_hashes % np.uint64(n_features)).astype(np.int64)


def term_counts(token_hashes: np.ndarray, token_offsets: np.ndarray, n_features: int) -> sp.csr_matrix:
    """Term counts per document as CSR with sorted columns, built in compiled code: O(tokens log).

    Rows count every hashed column (`hashed_columns`) of a document's tokens, as floats.
    Public because the index counts its texts the same way, so its rows equal the audit's.
    With ``n_features`` 0 the columns are terms (``hash mod EXACT_SPACE``) in a matrix of
    `EXACT_SPACE` columns: sparse, as every matrix here, so that size costs nothing.
    """
    n_docs = token_offsets.shape[0] - 1
    columns = hashed_columns(token_hashes, n_features)
    n_features = counting_space(n_features)
    offsets = np.ascontiguousarray(token_offsets, dtype=np.int64)
    # Sorts each document's columns in place and counts the distinct ones.
    unique_counts = sort_segments_count_unique(columns, offsets)
    indptr = np.zeros(n_docs + 1, dtype=np.int64)
    np.cumsum(unique_counts, out=indptr[1:])
    # 32-bit column numbers halve the memory of the index whenever the feature space allows it.
    indices = np.empty(indptr[-1], dtype=np.int32 if n_features <= 2**31 else np.int64)
    data = np.empty(indptr[-1], dtype=np.float64)
    _fill_counts(columns, offsets, indptr, indices, data)
    return sp.csr_matrix((data, indices, indptr), shape=(n_docs, n_features))


# The old private name of `term_counts`, for code that still uses it.
_term_counts = term_counts


@njit(cache=True, parallel=True, nogil=True)
def _weight_rows(indptr, idf_index, data, idf, sublinear):
    # In place: tf (or 1 + ln tf) times idf[idf_index[i]], then each row scaled to unit length.
    for d in prange(indptr.shape[0] - 1):
        a, b = indptr[d], indptr[d + 1]
        total = 0.0
        for i in range(a, b):
            tf = data[i]
            if sublinear:
                tf = 1.0 + np.log(tf)
            w = tf * idf[idf_index[i]]
            data[i] = w
            total += w * w
        if total > 0.0:
            norm = np.sqrt(total)
            for i in range(a, b):
                data[i] /= norm


def _weight(
    counts: sp.csr_matrix, idf: np.ndarray, idf_index: np.ndarray, sublinear_tf: bool, in_place: bool = False
) -> sp.csr_matrix:
    """tf * idf scaled to unit length; entry i takes ``idf[idf_index[i]]``.

    ``in_place`` reuses the counts' own array (the counts are then gone), saving a copy.
    """
    data = counts.data if in_place else counts.data.copy()
    _weight_rows(
        counts.indptr.astype(np.int64),
        idf_index,
        data,
        np.ascontiguousarray(idf, dtype=np.float64),
        sublinear_tf,
    )
    return sp.csr_matrix((data, counts.indices, counts.indptr), shape=counts.shape)


def fit_tfidf(
    token_hashes: np.ndarray,
    token_offsets: np.ndarray,
    *,
    n_features: int = 2**20,
    sublinear_tf: bool = False,
) -> TfidfModel:
    """Fit idf on the given documents and return their unit-length TF-IDF rows.

    Notes
    -----
    Cost O(tokens + n_features), O(tokens log tokens) for the exact vocabulary
    (``n_features=0``). idf = ln((1 + n) / (1 + df)) + 1 as in scikit-learn with
    ``smooth_idf=True``.

    Examples
    --------
    >>> m = fit_tfidf(np.array([1, 2, 1], np.uint64), np.array([0, 2, 3]), n_features=8)
    >>> round(float(m.rows[1].multiply(m.rows[1]).sum()), 6)
    1.0
    """
    if n_features == EXACT_VOCABULARY:
        frequencies = DocumentFrequency(EXACT_VOCABULARY, sublinear_tf)
        frequencies.add(token_hashes, token_offsets)
        return frequencies.model(token_hashes, token_offsets)
    counts = term_counts(token_hashes, token_offsets, n_features)
    n_docs = counts.shape[0]
    if n_features <= DENSE_DF_LIMIT:
        df = np.bincount(counts.indices, minlength=n_features)
        columns = np.flatnonzero(df)
        dense_idf = np.log((1.0 + n_docs) / (1.0 + df)) + 1.0
        column_idf = dense_idf[columns]
        rows = _weight(counts, dense_idf, counts.indices, sublinear_tf, in_place=True)
    else:
        columns, inverse, df = np.unique(counts.indices, return_inverse=True, return_counts=True)
        column_idf = np.log((1.0 + n_docs) / (1.0 + df)) + 1.0
        rows = _weight(counts, column_idf, inverse.ravel(), sublinear_tf, in_place=True)
    unseen = float(np.log(1.0 + n_docs) + 1.0)
    return TfidfModel(rows, columns.astype(np.int64), column_idf, unseen, sublinear_tf)


@njit(cache=True, parallel=True, nogil=True)
def _row_dots(indptr, indices, data, left, right, out):
    # A merge without branches on the values, on unsigned indices (see intersection_sizes).
    for p in prange(left.shape[0]):
        i, i_end = np.uint64(indptr[left[p]]), np.uint64(indptr[left[p] + 1])
        j, j_end = np.uint64(indptr[right[p]]), np.uint64(indptr[right[p] + 1])
        total = 0.0
        while i < i_end and j < j_end:
            a, b = indices[i], indices[j]
            total += (data[i] * data[j]) * (a == b)
            i += np.uint64(a <= b)
            j += np.uint64(b <= a)
        out[p] = total


def pair_cosines(rows: sp.csr_matrix, left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """Cosine of each pair ``(left[i], right[i])`` of unit-length rows with sorted columns.

    A merge of the two rows' sorted column lists in compiled code, in parallel over
    pairs: O(pairs * row length).
    """
    if not rows.has_sorted_indices:
        rows = rows.sorted_indices()
    out = np.empty(left.shape[0], dtype=np.float64)
    _row_dots(
        rows.indptr.astype(np.int64, copy=False),
        rows.indices,
        rows.data,
        np.asarray(left, dtype=np.int64),
        np.asarray(right, dtype=np.int64),
        out,
    )
    # Rounding can push a self-similar pair a hair above 1.
    np.clip(out, 0.0, 1.0, out=out)
    return out


# Up to this many tokens the vocabulary is counted exactly; beyond, it is estimated.
EXACT_VOCABULARY_LIMIT = 5_000_000


def collision_stats(token_hashes: np.ndarray, n_features: int, occupied_columns: int | None = None) -> dict:
    """Expected and measured share of distinct terms that share a hashed column.

    Up to `EXACT_VOCABULARY_LIMIT` tokens the distinct terms are counted exactly. Beyond,
    the vocabulary V is estimated from the number of occupied columns O by linear counting
    (Whang, Vander-Zanden, Taylor 1990): V = ln(1 - O/m) / ln(1 - 1/m); the measured share
    is then not available.
    """
    if token_hashes.shape[0] <= EXACT_VOCABULARY_LIMIT or occupied_columns is None:
        return _exact_collisions(sorted_distinct(token_hashes), n_features)
    return _estimated_collisions(occupied_columns, n_features)


def _exact_collisions(vocabulary: np.ndarray, n_features: int) -> dict:
    v = int(vocabulary.shape[0])
    if v:
        _, counts = np.unique(vocabulary % np.uint64(n_features), return_counts=True)
        measured: float | None = float(counts[counts > 1].sum()) / v
    else:
        measured = 0.0
    return _collision_record(v, n_features, "exact", measured)


def _estimated_collisions(occupied_columns: int, n_features: int) -> dict:
    fill = min(occupied_columns / n_features, 1.0 - 1.0 / n_features)
    v = int(round(np.log1p(-fill) / np.log1p(-1.0 / n_features)))
    return _collision_record(v, n_features, "estimated from occupied columns (linear counting)", None)


def _collision_record(v: int, n_features: int, method: str, measured: float | None) -> dict:
    expected = 1.0 - (1.0 - 1.0 / n_features) ** max(v - 1, 0) if v else 0.0
    return {
        "n_features": int(n_features),
        "vocabulary_size": v,
        "vocabulary_method": method,
        "expected_colliding_share": float(expected),
        "measured_colliding_share": measured,
    }


@njit(cache=True, nogil=True)
def _count_df(columns, offsets, first_doc, last_seen, df):
    # One pass over the tokens: a column counts once per document (the last document that
    # touched it is remembered), so no per-document sort is needed.
    # Unsigned indices: no test for negative indices on every access.
    for d in range(offsets.shape[0] - 1):
        doc = first_doc + d
        i, end = np.uint64(offsets[d]), np.uint64(offsets[d + 1])
        while i < end:
            c = np.uint64(columns[i])
            if last_seen[c] != doc:
                last_seen[c] = doc
                df[c] += 1
            i += np.uint64(1)


class DocumentFrequency:
    """Document frequencies of hashed columns (or of terms) counted chunk after chunk.

    An audit streams its texts once: each chunk's token hashes are counted here and
    dropped; afterwards `model` gives the idf of the whole corpus and the TF-IDF rows of
    just the texts that are compared — the same numbers `fit_tfidf` gives over all texts
    at once. The vocabulary for `collision_stats` is kept exactly while the corpus has at
    most `EXACT_VOCABULARY_LIMIT` tokens, as `collision_stats` does.

    With ``n_features = 0`` the columns are the exact vocabulary (see the module notes):
    `counts` are made in the term space, and `weigh` numbers the columns by the sorted
    terms of the whole corpus, so its rows have one column per term. ``None`` (the
    ``tfidf_features`` setting left unset, as the engines pass it) means the same: the
    audit's default.

    Examples
    --------
    >>> df = DocumentFrequency(8)
    >>> df.add(np.array([1, 2, 1], np.uint64), np.array([0, 2, 3]))
    >>> m = df.model(np.array([1, 2], np.uint64), np.array([0, 2]))
    >>> ref = fit_tfidf(np.array([1, 2, 1], np.uint64), np.array([0, 2, 3]), n_features=8)
    >>> bool(np.allclose(m.rows.toarray(), ref.rows[0].toarray()))
    True
    >>> exact = DocumentFrequency(0)
    >>> exact.add(np.array([1, 2, 1], np.uint64), np.array([0, 2, 3]))
    >>> exact.model(np.array([1, 2], np.uint64), np.array([0, 2])).rows.shape
    (1, 2)
    """

    def __init__(self, n_features: int | None = 2**20, sublinear_tf: bool = False) -> None:
        # None: a ``tfidf_features`` setting left unset, which an audit reads as the exact
        # vocabulary (`dedup.settings.AUDIT_TFIDF_FEATURES`).
        self.n_features = EXACT_VOCABULARY if n_features is None else int(n_features)
        self.sublinear_tf = sublinear_tf
        self.n_docs = 0
        self.tokens = 0
        self.exact = self.n_features == EXACT_VOCABULARY
        self._dense = not self.exact and self.n_features <= DENSE_DF_LIMIT
        if self._dense:
            self._df = np.zeros(self.n_features, dtype=np.int64)
            self._last = np.full(self.n_features, -1, dtype=np.int64)
        else:
            self._parts: list[tuple[np.ndarray, np.ndarray]] = []
        self._vocabulary: DistinctSet | None = DistinctSet()
        self._table: tuple[np.ndarray, np.ndarray] | None = None  # `_columns_and_df`, once counted

    def add(
        self, token_hashes: np.ndarray, token_offsets: np.ndarray, counts: sp.csr_matrix | None = None
    ) -> None:
        """Count the documents of one chunk. ``counts``, their term counts by `counts` when
        already made, saves finding each document's columns again."""
        offsets = np.ascontiguousarray(token_offsets, dtype=np.int64)
        n = offsets.shape[0] - 1
        self._table = None
        if counts is not None:
            # Each row holds a column once: the document frequencies are column counts.
            if self._dense:
                self._df += np.bincount(counts.indices, minlength=self.n_features)
            else:
                self._parts.append(np.unique(counts.indices.astype(np.int64), return_counts=True))
            self._count_tokens(token_hashes)
            self.n_docs += n
            return
        columns = hashed_columns(token_hashes, self.n_features)
        if self._dense:
            _count_df(columns, offsets, self.n_docs, self._last, self._df)
        else:
            unique_counts = sort_segments_count_unique(columns, offsets)
            keep = np.ones(columns.shape[0], dtype=bool)
            keep[1:] = columns[1:] != columns[:-1]
            keep[offsets[:-1][unique_counts > 0]] = True
            self._parts.append(np.unique(columns[keep], return_counts=True))
        self._count_tokens(token_hashes)
        self.n_docs += n

    def merge(self, other: DocumentFrequency) -> DocumentFrequency:
        """Add the counts of ``other`` (other documents, e.g. another partition's); returns
        self. Both must have the same feature space and tf rule. O(n_features) dense, else
        O(1) (the parts are joined when the model is made).

        >>> a, b, whole = DocumentFrequency(8), DocumentFrequency(8), DocumentFrequency(8)
        >>> tokens, offsets = np.array([1, 2, 1, 3], np.uint64), np.array([0, 2, 4])
        >>> a.add(tokens[:2], offsets[:2]); b.add(tokens[2:], offsets[:2]); whole.add(tokens, offsets)
        >>> merged = a.merge(b)
        >>> [x.tolist() for x in merged._columns_and_df()] == [x.tolist() for x in whole._columns_and_df()]
        True
        """
        if (self.n_features, self.sublinear_tf) != (other.n_features, other.sublinear_tf):
            raise ValueError(
                "cannot merge document frequencies of different feature spaces: "
                f"{self.n_features} features (sublinear {self.sublinear_tf}) and "
                f"{other.n_features} (sublinear {other.sublinear_tf})"
            )
        self._table = None
        if self._dense:
            self._df += other._df
            # Document numbers of ``other`` are all below the merged count: they never
            # equal a later document's number, so the last-seen marks stay valid.
        else:
            self._parts.extend(other._parts)
        if self._vocabulary is not None and other._vocabulary is not None:
            self.tokens += other.tokens
            if self.tokens <= EXACT_VOCABULARY_LIMIT:
                self._vocabulary.add(other._vocabulary.values())
            else:
                self._vocabulary = None
        else:
            self.tokens += other.tokens
            self._vocabulary = None
        self.n_docs += other.n_docs
        return self

    def _count_tokens(self, token_hashes: np.ndarray) -> None:
        self.tokens += int(token_hashes.shape[0])
        if self._vocabulary is not None:
            if self.tokens <= EXACT_VOCABULARY_LIMIT:
                self._vocabulary.add(token_hashes)
            else:
                self._vocabulary = None

    def _columns_and_df(self) -> tuple[np.ndarray, np.ndarray]:
        """The columns met (sorted) and their document frequencies; counted once after the
        last `add` or `merge` (the parts are joined by one sort)."""
        if self._table is None:
            self._table = self._count_columns()
        return self._table

    def _count_columns(self) -> tuple[np.ndarray, np.ndarray]:
        if self._dense:
            columns = np.flatnonzero(self._df)
            return columns, self._df[columns]
        if not self._parts:
            return np.zeros(0, np.int64), np.zeros(0, np.int64)
        cols = np.concatenate([c for c, _ in self._parts])
        counts = np.concatenate([k for _, k in self._parts])
        columns, inverse = np.unique(cols, return_inverse=True)
        return columns, np.bincount(inverse.ravel(), weights=counts, minlength=columns.shape[0]).astype(
            np.int64
        )

    @property
    def width(self) -> int:
        """Columns of the rows `weigh` makes: the vocabulary's size when exact, else ``n_features``."""
        return int(self._columns_and_df()[0].shape[0]) if self.exact else self.n_features

    def collision_stats(self) -> dict:
        """What `collision_stats` reports for the whole corpus (for the exact vocabulary:
        its size, and the share of terms that share a column by `EXACT_SPACE`)."""
        columns, _ = self._columns_and_df()
        if self.exact:
            record = _exact_vocabulary_record(self._vocabulary, int(columns.shape[0]))
        elif self._vocabulary is not None:
            return _exact_collisions(self._vocabulary.values(), self.n_features)
        else:
            return _estimated_collisions(int(columns.shape[0]), self.n_features)
        return record

    def model(self, token_hashes: np.ndarray, token_offsets: np.ndarray) -> TfidfModel:
        """The fitted idf with the unit-length rows of the given texts."""
        return self.weigh(self.counts(token_hashes, token_offsets))

    def counts(self, token_hashes: np.ndarray, token_offsets: np.ndarray) -> sp.csr_matrix:
        """Term counts of the given texts, rows with sorted columns: what `weigh` turns into
        TF-IDF rows once every text has been counted."""
        return term_counts(token_hashes, token_offsets, self.n_features)

    def weigh(self, counts: sp.csr_matrix) -> TfidfModel:
        """The fitted idf with the unit-length rows of term counts made by `counts` (whose
        values become the weights: the counts are used up). For the exact vocabulary each
        term becomes its column number (its rank among the corpus's terms): the terms are
        sorted, so the row's columns stay sorted. Cost O(entries log V)."""
        columns, df = self._columns_and_df()
        column_idf = np.log((1.0 + self.n_docs) / (1.0 + df)) + 1.0
        unseen = float(np.log(1.0 + self.n_docs) + 1.0)
        if self._dense:
            dense_idf = np.log((1.0 + self.n_docs) / (1.0 + self._df)) + 1.0
            rows = _weight(counts, dense_idf, counts.indices, self.sublinear_tf, in_place=True)
        else:
            where = np.searchsorted(columns, counts.indices.astype(np.int64))
            if self.exact:
                width = columns.shape[0]
                ranks = where.astype(np.int32 if width <= 2**31 else np.int64)
                counts = sp.csr_matrix((counts.data, ranks, counts.indptr), shape=(counts.shape[0], width))
            rows = _weight(counts, column_idf, where, self.sublinear_tf, in_place=True)
        if self.exact:
            ranked = np.arange(columns.shape[0], dtype=np.int64)
            return TfidfModel(rows, ranked, column_idf, unseen, self.sublinear_tf, columns.astype(np.int64))
        return TfidfModel(rows, columns.astype(np.int64), column_idf, unseen, self.sublinear_tf)


def _exact_vocabulary_record(vocabulary: DistinctSet | None, n_columns: int) -> dict:
    """The ``tfidf`` record of an exact vocabulary: V columns, one per term; the terms of
    two distinct token hashes share one with probability 2**-63 (expected share
    1 - (1 - 1/m)^(V - 1) with m = `EXACT_SPACE`), measured while the token hashes are kept."""
    measured = None
    if vocabulary is not None:
        values = vocabulary.values()
        _, counts = np.unique(hashed_columns(values, EXACT_VOCABULARY), return_counts=True)
        measured = float(counts[counts > 1].sum()) / values.shape[0] if values.size else 0.0
    expected = float(-np.expm1(max(n_columns - 1, 0) * np.log1p(-1.0 / EXACT_SPACE)))
    return {
        "n_features": EXACT_VOCABULARY,
        "columns": "exact vocabulary: one column per term",
        "vocabulary_size": int(n_columns),
        "vocabulary_method": "exact",
        "expected_colliding_share": expected,
        "measured_colliding_share": measured,
    }
