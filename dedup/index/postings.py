"""TF-IDF in the index: term counts stored column-major, and the statistics over them.

Weights are those of `dedup.sketch.tfidf` (scikit-learn's ``TfidfVectorizer(smooth_idf=True,
norm="l2")`` over hashed term columns), fitted on the distinct texts of the present
documents that have words:

    idf(c) = ln((1 + n) / (1 + df(c))) + 1,      w(t, c) = tf(t, c) * idf(c),
    row(t) = w(t, .) / ||w(t, .)||

The idf changes with every added or removed text, and with it every row's norm, so rows
are never stored weighted. Instead the index keeps the raw counts as posting lists (for
each column, the texts using it and how often), which is what a search needs: the
cosine of a query with every text is a sum over the query's few columns only. After
each write `refresh_statistics` recomputes df and every norm in one pass over the
postings, O(entries), so the stored statistics always equal a fit from scratch.

The same pass gives the search's statistics (`dedup.index.search`): each text's norm
with sublinear tf (``1 + ln(count)``) and the stop words' columns left out
(`dedup.index.stopwords`), which is scikit-learn's ``TfidfVectorizer(sublinear_tf=True,
stop_words=...)``, and each text's length in words for BM25.

Writes are incremental: each build or update adds one *segment* of postings holding
just the texts it sketched. A text that is gone keeps its entries in old segments until
a merge rewrites all postings as one segment without them; that happens when there are
more than `MAX_SEGMENTS` segments or fewer than `MIN_LIVE_SHARE` of the stored entries
belong to present texts, so a search reads at most a few rows per query term.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from numba import njit

from ..sketch import tfidf
from .blobs import BlobError, pack_array, pack_sorted, pack_uints, unpack_array, unpack_sorted, unpack_uints
from .stopwords import stop_columns

__all__ = [
    "MAX_SEGMENTS",
    "MIN_LIVE_SHARE",
    "Statistics",
    "term_counts",
    "term_frequency",
    "write_segment",
    "refresh_statistics",
    "load_statistics",
    "postings_of",
]

MAX_SEGMENTS = 8
MIN_LIVE_SHARE = 0.7
# Up to this many columns a segment is turned column-major with a dense column pointer.
_DENSE_COLUMNS = 2**24


def term_counts(token_hashes: np.ndarray, token_offsets: np.ndarray, n_features: int) -> sp.csr_matrix:
    """Count of every hashed term column per text (CSR, sorted columns, float counts).

    The same counting as `dedup.sketch.fit_tfidf`, so the index's rows equal the audit's.
    Cost O(tokens log tokens per text), compiled.
    """
    return tfidf.term_counts(token_hashes, token_offsets, n_features)


def term_frequency(counts: np.ndarray, sublinear: bool) -> np.ndarray:
    """tf from raw counts: the counts, or 1 + ln(count) when ``sublinear``."""
    counts = np.asarray(counts, dtype=np.float64)
    return 1.0 + np.log(counts) if sublinear else counts


def _idf(df: np.ndarray, n: int) -> np.ndarray:
    return np.log((1.0 + n) / (1.0 + np.asarray(df, dtype=np.float64))) + 1.0


@dataclass(frozen=True)
class Statistics:
    """TF-IDF statistics of the present texts, as stored after the last write.

    Attributes
    ----------
    text_ids : ndarray of int64
        Searchable texts (present, with words), sorted.
    norms : ndarray of float64
        Euclidean norm of each text's tf * idf row, aligned with ``text_ids``.
    columns, df : ndarray of int64
        Every column some searchable text uses (sorted) and its document frequency.
    entries, live_entries, segments : int
        Stored postings entries, those of searchable texts, and segments.
    search_norms : ndarray of float64
        Norm of each text's row with sublinear tf and without the stop words' columns.
    lengths : ndarray of int64
        Words of each text as sketched (template lines left out).
    """

    text_ids: np.ndarray
    norms: np.ndarray
    columns: np.ndarray
    df: np.ndarray
    entries: int
    live_entries: int
    segments: int
    search_norms: np.ndarray
    lengths: np.ndarray

    @property
    def n_texts(self) -> int:
        return int(self.text_ids.shape[0])

    @property
    def unseen_idf(self) -> float:
        """idf of a column no text uses (df = 0), as `dedup.sketch.TfidfModel.transform` gives it."""
        return float(np.log(1.0 + self.n_texts) + 1.0)

    def df_of(self, columns: np.ndarray) -> np.ndarray:
        """Document frequency of the given columns (0 for unused ones)."""
        columns = np.asarray(columns, dtype=np.int64)
        if not self.columns.size:
            return np.zeros(columns.shape, np.int64)
        where = np.minimum(np.searchsorted(self.columns, columns), self.columns.shape[0] - 1)
        return np.where(self.columns[where] == columns, self.df[where], 0)

    def idf(self, columns: np.ndarray) -> np.ndarray:
        """idf of the given columns; unused columns get `unseen_idf`."""
        return _idf(self.df_of(columns), self.n_texts)

    def position_of(self, text_ids: np.ndarray) -> np.ndarray:
        """Position of each text id in ``text_ids``, or -1 for a text that is not searchable."""
        text_ids = np.asarray(text_ids, dtype=np.int64)
        if not self.text_ids.size:
            return np.full(text_ids.shape, -1, np.int64)
        where = np.minimum(np.searchsorted(self.text_ids, text_ids), self.text_ids.shape[0] - 1)
        return np.where(self.text_ids[where] == text_ids, where, -1)


def write_segment(
    connection: sqlite3.Connection, segment: int, text_ids: np.ndarray, counts: sp.csr_matrix
) -> int:
    """Add the postings of newly sketched texts as segment ``segment``; returns the entries written.

    ``text_ids`` must be sorted and larger than every id already stored (new texts get
    new ids), so that concatenating a column's segments in segment order keeps its ids
    sorted. Cost O(entries + columns used), one row per column.
    """
    if counts.nnz == 0:
        return 0
    text_ids = np.asarray(text_ids, dtype=np.int64)
    if counts.shape[1] <= _DENSE_COLUMNS:
        csc = counts.tocsc()
        used = np.flatnonzero(np.diff(csc.indptr))
        column_of = used
        indptr = csc.indptr
        pick = used
    else:
        # A huge hashed space: number the used columns first so the column pointer stays small.
        coo = counts.tocoo()
        column_of, compact = np.unique(coo.col, return_inverse=True)
        csc = sp.csc_matrix(
            (coo.data, (coo.row, compact.ravel())), shape=(counts.shape[0], column_of.shape[0])
        )
        indptr = csc.indptr
        pick = np.arange(column_of.shape[0])
    csc.sort_indices()
    data = csc.data.astype(np.int64)
    rows = []
    for column, k in zip(column_of.tolist(), pick.tolist()):
        a, b = int(indptr[k]), int(indptr[k + 1])
        rows.append((segment, column, b - a, pack_sorted(text_ids[csc.indices[a:b]]), pack_uints(data[a:b])))
    connection.executemany(
        "INSERT INTO postings (segment, term_column, df, text_ids, counts) VALUES (?, ?, ?, ?, ?)", rows
    )
    return int(counts.nnz)


def _searchable(connection: sqlite3.Connection) -> tuple[np.ndarray, int, int, np.ndarray]:
    # Every stored text has words (texts without are not stored): all are searchable.
    rows = connection.execute("SELECT text_id, terms, words FROM texts ORDER BY text_id").fetchall()
    ids = np.asarray([r[0] for r in rows], dtype=np.int64)
    live = int(sum(r[1] for r in rows))
    lengths = np.asarray([r[2] for r in rows], dtype=np.int64)
    top = connection.execute("SELECT seq FROM sqlite_sequence WHERE name = 'texts'").fetchone()
    return ids, live, int(top[0]) if top else 0, lengths


@njit(cache=True, nogil=True)
def _decode_packed(buf, offsets, cumulative, out, starts):
    # buf holds many `pack_uints` blobs end to end; blob r is buf[offsets[r]:offsets[r + 1]].
    # Writes its values into out[starts[r]:starts[r + 1]]; returns False on a bad blob.
    for r in range(offsets.shape[0] - 1):
        a, b = offsets[r], offsets[r + 1]
        if b <= a:
            return False
        width = np.int64(buf[a])
        if width != 1 and width != 2 and width != 4 and width != 8:
            return False
        if (b - a - 1) % width != 0 or (b - a - 1) // width != starts[r + 1] - starts[r]:
            return False
        total = np.int64(0)
        w = starts[r]
        for i in range(a + 1, b, width):
            v = np.int64(0)
            for j in range(width):
                v |= np.int64(buf[i + j]) << (8 * j)
            if cumulative:
                total += v
                out[w] = total
            else:
                out[w] = v
            w += 1
    return True


def _decode_rows(blobs: list[bytes], cumulative: bool) -> tuple[np.ndarray, np.ndarray]:
    """Decode many `pack_uints` blobs at once: (values laid end to end, start of each blob's values).

    With ``cumulative`` each blob's gaps are summed back into values (`pack_sorted`).
    Cost O(total bytes), compiled.
    """
    lengths = np.fromiter((len(b) for b in blobs), dtype=np.int64, count=len(blobs))
    offsets = np.zeros(len(blobs) + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    buf = np.frombuffer(b"".join(blobs), dtype=np.uint8)
    heads = buf[offsets[:-1][lengths > 0]].astype(np.int64) if buf.size else np.zeros(0, np.int64)
    if heads.shape[0] != len(blobs) or not np.all(np.isin(heads, (1, 2, 4, 8))):
        raise BlobError("a postings blob has a bad header")
    starts = np.zeros(len(blobs) + 1, dtype=np.int64)
    np.cumsum((lengths - 1) // heads, out=starts[1:])
    out = np.empty(int(starts[-1]), dtype=np.int64)
    if not _decode_packed(buf, offsets, cumulative, out, starts):
        raise BlobError("a postings blob has a bad length")
    return out, starts


@njit(cache=True, inline="always")
def _uint_at(buf, i, width):
    v = np.int64(0)
    for j in range(width):
        v |= np.int64(buf[i + j]) << (8 * j)
    return v


@njit(cache=True, nogil=True)
def _df_and_norms(
    id_buf, id_offsets, count_buf, count_offsets, row_group, position, n_groups, n_texts, sublinear, stop
):
    # Straight from the packed blobs, without materialising the entries: pass 1 counts
    # the document frequency of every column over searchable texts, pass 2 sums each
    # text's squared tf * idf, and its squared (1 + ln tf) * idf over the columns whose
    # stop[group] is False (the search's norm). Row r is one posting list of column
    # row_group[r]. Returns (df, squared norms, squared search norms, stored entries,
    # ok); ok is False for a damaged blob.
    df = np.zeros(n_groups, dtype=np.int64)
    norm2 = np.zeros(n_texts, dtype=np.float64)
    search2 = np.zeros(n_texts, dtype=np.float64)
    n_rows = id_offsets.shape[0] - 1
    entries = np.int64(0)
    for r in range(n_rows):
        a, b = id_offsets[r], id_offsets[r + 1]
        c, d = count_offsets[r], count_offsets[r + 1]
        if b <= a or d <= c:
            return df, norm2, search2, entries, False
        wi, wc = np.int64(id_buf[a]), np.int64(count_buf[c])
        if (wi != 1 and wi != 2 and wi != 4 and wi != 8) or (wc != 1 and wc != 2 and wc != 4 and wc != 8):
            return df, norm2, search2, entries, False
        if (b - a - 1) % wi != 0 or (d - c - 1) % wc != 0 or (b - a - 1) // wi != (d - c - 1) // wc:
            return df, norm2, search2, entries, False
        entries += (b - a - 1) // wi
        text_id = np.int64(0)
        g = row_group[r]
        for i in range(a + 1, b, wi):
            text_id += _uint_at(id_buf, i, wi)
            if text_id >= position.shape[0]:
                return df, norm2, search2, entries, False
            if position[text_id] >= 0:
                df[g] += 1
    idf = np.log((1.0 + n_texts) / (1.0 + df.astype(np.float64))) + 1.0
    for r in range(n_rows):
        a, b = id_offsets[r], id_offsets[r + 1]
        c = count_offsets[r]
        wi, wc = np.int64(id_buf[a]), np.int64(count_buf[c])
        weight = idf[row_group[r]]
        searched = not stop[row_group[r]]
        text_id = np.int64(0)
        k = c + 1
        for i in range(a + 1, b, wi):
            text_id += _uint_at(id_buf, i, wi)
            p = position[text_id]
            if p >= 0:
                count = np.float64(_uint_at(count_buf, k, wc))
                tf = 1.0 + np.log(count) if sublinear else count
                w = tf * weight
                norm2[p] += w * w
                if searched:
                    s = (1.0 + np.log(count)) * weight
                    search2[p] += s * s
            k += wc
    return df, norm2, search2, entries, True


def _joined(blobs: list[bytes]) -> tuple[np.ndarray, np.ndarray]:
    offsets = np.zeros(len(blobs) + 1, dtype=np.int64)
    np.cumsum(np.fromiter((len(b) for b in blobs), dtype=np.int64, count=len(blobs)), out=offsets[1:])
    return np.frombuffer(b"".join(blobs), dtype=np.uint8), offsets


def refresh_statistics(
    connection: sqlite3.Connection, run: int, sublinear: bool, *, n_features: int, merge: bool | None = None
) -> dict:
    """Recompute df and every norm from the postings, and merge segments when due.

    Runs inside the caller's write transaction.

    Parameters
    ----------
    run : int
        The run writing; a merged segment takes its number.
    sublinear : bool
        tf = 1 + ln(count) instead of the count (the audit's norms; the search's always
        use it).
    n_features : int
        The hashed space, which says where the stop words' columns are.
    merge : bool, optional
        Force (True) or forbid (False) a merge; by default merge when there are more
        than `MAX_SEGMENTS` segments or the live share of entries is below `MIN_LIVE_SHARE`.

    Returns
    -------
    dict
        ``texts``, ``entries``, ``live_entries``, ``segments``, ``merged``.

    Notes
    -----
    Cost O(stored entries): every posting list is read once, and df and the norms are
    summed straight from the packed bytes in compiled code (about 2.5 bytes of memory
    per stored entry; a merge decodes them, about 30 bytes per entry).
    """
    ids, live_entries, top, lengths = _searchable(connection)
    position = np.full(top + 1, -1, dtype=np.int64)
    position[ids] = np.arange(ids.shape[0])
    rows = connection.execute(
        "SELECT term_column, text_ids, counts FROM postings ORDER BY term_column, segment"
    ).fetchall()
    segments = connection.execute("SELECT count(DISTINCT segment) FROM postings").fetchone()[0]
    columns, df, norm2, search2, entries = _column_statistics(
        rows, position, int(ids.shape[0]), sublinear, stop_columns(n_features)
    )
    if merge is None:
        merge = segments > MAX_SEGMENTS or (entries > 0 and live_entries < MIN_LIVE_SHARE * entries)
    if merge:
        entries, segments = _merge_segments(connection, run, rows, columns, df, position)
    used = df > 0
    blobs = (
        pack_sorted(ids),
        pack_array(np.sqrt(norm2), "<f8"),
        pack_sorted(columns[used]),
        pack_uints(df[used]),
        pack_array(np.sqrt(search2), "<f8"),
        pack_uints(lengths),
    )
    connection.execute(
        "UPDATE tfidf SET texts = ?, text_ids = ?, norms = ?, term_columns = ?, df = ?, search_norms = ?, "
        "lengths = ?, entries = ?, live_entries = ?, segments = ?, run = ? WHERE id = 1",
        (int(ids.shape[0]), *blobs, entries, live_entries, int(segments), run),
    )
    return {
        "texts": int(ids.shape[0]),
        "entries": entries,
        "live_entries": live_entries,
        "segments": int(segments),
        "merged": bool(merge),
    }


def _column_statistics(
    rows: list, position: np.ndarray, n: int, sublinear: bool, stop: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, int]:
    """Over posting rows ``(column, ids blob, counts blob)`` ordered by column: the columns,
    their document frequency over searchable texts, each searchable text's squared norm
    and squared search norm (without the columns ``stop``), and the entries stored.
    Raises `BlobError` on a damaged blob."""
    row_columns = np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))
    id_buf, id_offsets = _joined([r[1] for r in rows])
    count_buf, count_offsets = _joined([r[2] for r in rows])
    # Rows are ordered by column, so each column's posting lists are neighbours.
    columns, group_of_row = np.unique(row_columns, return_inverse=True)
    df, norm2, search2, entries, ok = _df_and_norms(
        id_buf,
        id_offsets,
        count_buf,
        count_offsets,
        group_of_row.ravel().astype(np.int64),
        position,
        columns.shape[0],
        n,
        bool(sublinear),
        np.isin(columns, stop),
    )
    if not ok:
        raise BlobError("the postings do not fit the stored texts")
    return columns, df, norm2, search2, int(entries)


def _merge_segments(
    connection: sqlite3.Connection,
    run: int,
    rows: list,
    columns: np.ndarray,
    df: np.ndarray,
    position: np.ndarray,
) -> tuple[int, int]:
    """Rewrite all postings as one segment without the entries of texts that are gone;
    the entries and segments after."""
    text_ids, _ = _decode_rows([r[1] for r in rows], cumulative=True)
    counts, _ = _decode_rows([r[2] for r in rows], cumulative=False)
    keep = position[text_ids] >= 0
    kept_ids, kept_counts = text_ids[keep], counts[keep]
    bounds = np.zeros(columns.shape[0] + 1, dtype=np.int64)
    np.cumsum(df, out=bounds[1:])
    used = df > 0
    merged_rows = [
        (run, int(columns[g]), int(df[g]), pack_sorted(kept_ids[a:b]), pack_uints(kept_counts[a:b]))
        for g, a, b in zip(
            np.flatnonzero(used).tolist(), bounds[:-1][used].tolist(), bounds[1:][used].tolist()
        )
    ]
    connection.execute("DELETE FROM postings")
    connection.executemany(
        "INSERT INTO postings (segment, term_column, df, text_ids, counts) VALUES (?, ?, ?, ?, ?)",
        merged_rows,
    )
    return int(kept_ids.shape[0]), 1 if merged_rows else 0


def load_statistics(connection: sqlite3.Connection) -> Statistics:
    """The stored statistics (O(texts + columns) to decode)."""
    row = connection.execute(
        "SELECT texts, text_ids, norms, term_columns, df, entries, live_entries, segments, search_norms, "
        "lengths FROM tfidf WHERE id = 1"
    ).fetchone()
    if row is None:
        raise BlobError("the TF-IDF statistics are missing")
    n, id_blob, norm_blob, column_blob, df_blob, entries, live, segments, search_blob, length_blob = row
    counts = (int(entries), int(live), int(segments))
    if n == 0:
        empty = np.zeros(0, np.int64)
        return Statistics(empty, np.zeros(0), empty, empty, *counts, np.zeros(0), empty)
    text_ids = unpack_sorted(id_blob)
    norms = unpack_array(norm_blob, "<f8", n)
    columns = unpack_sorted(column_blob)
    df = unpack_uints(df_blob)
    search_norms = unpack_array(search_blob, "<f8", n)
    lengths = unpack_uints(length_blob)
    if text_ids.shape[0] != n or columns.shape != df.shape or lengths.shape[0] != n:
        raise BlobError("the TF-IDF statistics do not fit together")
    return Statistics(text_ids, norms, columns, df, *counts, search_norms, lengths)


def postings_of(connection: sqlite3.Connection, column: int) -> tuple[np.ndarray, np.ndarray]:
    """All stored (text id, count) entries of one column, over every segment (dead texts included)."""
    ids, counts = [], []
    for id_blob, count_blob in connection.execute(
        "SELECT text_ids, counts FROM postings WHERE term_column = ? ORDER BY segment", (int(column),)
    ):
        ids.append(unpack_sorted(id_blob))
        counts.append(unpack_uints(count_blob))
    if not ids:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    text_ids, values = np.concatenate(ids), np.concatenate(counts)
    if text_ids.shape != values.shape:
        raise BlobError(f"the postings of term column {column} are damaged")
    return text_ids, values
