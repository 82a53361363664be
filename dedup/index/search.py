"""Similarity search: the indexed documents closest to a query text by TF-IDF cosine.

The query is taken through the same steps as an indexed text: the audit's compiled
normalize step, the index's template lines left out by the audit's rule (a query pasted
from a page with the site's footer is not matched on the footer), and the plan's sketch
step (features, MinHash signature, term counts, sorted shingle set). It is weighted with
the index's current idf (a term no indexed text uses gets the unseen idf,
as `dedup.sketch.TfidfModel.transform` gives it), then scaled to unit length. The cosine
with an indexed text t is

    cos(q, t) = sum over the query's columns c of  q(c) * tf(t, c) * idf(c) / ||w(t)||

so only the posting lists of the query's own columns are read: an inverted-index
product, O(sum of those lists' lengths), independent of the rest of the index. The norms
``||w(t)||`` are the stored statistics (`dedup.index.postings`).

Each result names the query terms that contribute most to its score (a column's share
of the cosine, ``q(c) * w(t, c) / ||w(t)||``; the shares add up to the cosine). Only
terms the query and the text share can contribute, so the query's own words name them,
and the index needs no vocabulary. Two different words that hash to the same column are
named together (``"reset / resets"``). Each result also has the MinHash estimate of the
Jaccard similarity of the two shingle sets and the exact Jaccard from the stored
shingles.

Everything is read in one read transaction, so a search running while an update writes
sees the index as it was before that update.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..ingest.document import RawDocument
from ..normalize import token_text
from ..normalize.batch import prepare_documents
from ..normalize.boilerplate import Boilerplate
from ..plan import Plan, sketch_batch
from ..sketch import estimate_jaccard
from ..sketch.tfidf import DocumentFrequency
from .blobs import unpack_array
from .postings import Statistics, load_statistics, postings_of, term_frequency
from .store import Index
from .templates import load_templates

__all__ = ["QueryError", "similar", "query_text_of_file"]


class QueryError(ValueError):
    """The query cannot be searched for (it has no words, or its file cannot be read)."""


@dataclass
class _Query:
    """A query as an indexed text is sketched: its text as sketched, term counts (sorted
    columns), signature, sorted unique shingles, and the words behind each column."""

    text: str
    columns: np.ndarray
    counts: np.ndarray
    signature: np.ndarray
    shingles: np.ndarray
    names: dict[int, str]


def _term_names(text: str, token_hashes: np.ndarray, n_features: int) -> dict[int, str]:
    """Column -> the query word(s) in it. The kernel's tokens are `token_text`'s words, in order."""
    words = token_text(text).split()
    names: dict[int, set[str]] = {}
    if len(words) == token_hashes.shape[0]:
        for word, column in zip(words, (token_hashes % np.uint64(n_features)).tolist()):
            names.setdefault(int(column), set()).add(word)
    return {column: " / ".join(sorted(ws)) for column, ws in names.items()}


def _sketched_query(text: str, settings, boilerplate: Boilerplate, max_text_share: float) -> _Query:
    """Normalize, strip and sketch the query as an indexed text (see the module notes)."""
    doc = RawDocument(id="query", text=text, source="", format="text", size=len(text), encoding="utf-8")
    prepare_documents([doc], parallel=False, lines=True)
    canonical = doc.prepared[1]
    buf = np.frombuffer(canonical, dtype=np.uint8) if canonical else np.zeros(0, np.uint8)
    buf, offsets, _, _ = boilerplate.strip(buf, np.array([0, buf.shape[0]], dtype=np.int64), max_text_share)
    frequencies = DocumentFrequency(settings.tfidf_features, settings.sublinear_tf)
    part = sketch_batch(
        settings, buf, offsets, lsh=Plan.of(settings).lsh, frequencies=frequencies, keep_sets=True
    )
    if part.features.token_hashes.shape[0] == 0:
        raise QueryError("the query has no words to search for")
    stripped = buf.tobytes().decode("utf-8", "surrogatepass")
    return _Query(
        stripped,
        part.counts.indices.astype(np.int64),
        part.counts.data,
        part.values[0],
        part.shingles,
        _term_names(stripped, part.features.token_hashes, settings.tfidf_features),
    )


def _scores(db, stats: Statistics, query: _Query, sublinear: bool):
    """Cosine of the query with every searchable text, and each column's shares of it:
    ``(scores, [(column, positions (sorted), shares)])``."""
    idf = stats.idf(query.columns)
    weights = term_frequency(query.counts, sublinear) * idf
    weights /= np.sqrt(float(np.dot(weights, weights)))
    scores = np.zeros(stats.n_texts, dtype=np.float64)
    parts: list[tuple[int, np.ndarray, np.ndarray]] = []
    for column, q_weight, column_idf, df in zip(
        query.columns.tolist(), weights.tolist(), idf.tolist(), stats.df_of(query.columns).tolist()
    ):
        if df == 0:
            continue
        text_ids, values = postings_of(db, column)
        positions = stats.position_of(text_ids)
        keep = positions >= 0
        positions = positions[keep]
        shares = q_weight * term_frequency(values[keep], sublinear) * column_idf
        shares /= stats.norms[positions]
        scores[positions] += shares
        parts.append((column, positions, shares))
    return scores, parts


def _chosen(db, stats: Statistics, scores: np.ndarray, k: int) -> list[tuple]:
    """The best texts with their present documents, best first (ties by first document id):
    ``(score, [(doc_id, title)], position, (content_hash, signature blob, shingle blob))``."""
    hits = np.flatnonzero(scores > 0)
    if not hits.size:
        return []
    # Take every text scoring at least the k-th best, so ties at the edge are decided by id.
    top = hits if hits.size <= k else hits[scores[hits] >= np.partition(scores[hits], -k)[-k]]
    chosen = []
    for position in top.tolist():
        row = db.execute(
            "SELECT t.content_hash, s.signature, s.shingles FROM texts AS t JOIN sketches AS s "
            "ON s.text_id = t.text_id WHERE t.text_id = ?",
            (int(stats.text_ids[position]),),
        ).fetchone()
        if row is None:  # cannot happen within one snapshot; keep the search going regardless
            continue
        docs = db.execute(
            "SELECT doc_id, title FROM documents WHERE content_hash = ? AND status = 'present' ORDER BY doc_id",
            (row[0],),
        ).fetchall()
        if docs:
            chosen.append((float(scores[position]), docs, position, row))
    chosen.sort(key=lambda c: (-c[0], c[1][0][0]))
    return chosen[:k]


def _result(rank: int, chosen: tuple, parts: list, query: _Query, num_perm: int, terms: int) -> dict:
    """One result (see `similar`)."""
    score, docs, position, (digest, signature_blob, shingle_blob) = chosen
    contributions = []
    for column, positions, shares in parts:
        at = int(np.searchsorted(positions, position))
        if at < positions.shape[0] and positions[at] == position:
            contributions.append((float(shares[at]), query.names.get(column, f"#{column}")))
    contributions.sort(key=lambda c: (-c[0], c[1]))
    signature = unpack_array(signature_blob, "<u4", num_perm)
    shingles = unpack_array(shingle_blob, "<u8")
    shared = int(np.intersect1d(query.shingles, shingles, assume_unique=True).shape[0])
    union = int(query.shingles.shape[0] + shingles.shape[0] - shared)
    return {
        "rank": rank,
        "document_id": docs[0][0],
        "copies": [d[0] for d in docs[1:]],
        "title": docs[0][1],
        "content_hash": digest,
        "cosine": min(score, 1.0),
        "terms": [{"term": name, "share": share} for share, name in contributions[:terms]],
        "jaccard_estimate": estimate_jaccard(query.signature, signature),
        "jaccard": shared / union if union else 0.0,
    }


def similar(index: Index, text: str, k: int = 10, *, terms: int = 5) -> list[dict]:
    """The ``k`` indexed texts most similar to ``text`` by TF-IDF cosine, best first.

    Parameters
    ----------
    index : Index
    text : str
        The query (any length; it is normalized, stripped of the index's template lines
        and sketched like an indexed document).
    k : int
        How many results (distinct texts; exact copies are listed together).
    terms : int
        How many contributing terms to name per result.

    Returns
    -------
    list of dict
        ``rank``, ``document_id`` (the first of the documents with this text, by id),
        ``copies`` (the others), ``title``, ``content_hash``, ``cosine``, ``terms``
        (``[{"term", "share"}]``, largest first), ``jaccard_estimate`` (MinHash) and
        ``jaccard`` (exact, over the stored shingles). Texts sharing no term with the
        query are never listed. Ties are broken by document id, so the order is
        deterministic.

    Raises
    ------
    QueryError
        The query has no words.
    IndexFileError
        The index cannot be read, or awaits ``dedup index update`` after a migration.

    Notes
    -----
    Cost O(length of the query's posting lists) plus O(k) row reads.
    """
    if k < 1:
        raise QueryError(f"k must be at least 1, got {k}")
    index.require_sketched()
    settings = index.settings
    with index.reading() as db:
        stored = load_templates(db)
        boilerplate = stored.boilerplate() if stored is not None else Boilerplate({}, 0)
        share = stored.max_text_share if stored is not None else settings.boilerplate_max_text_share
        query = _sketched_query(text, settings, boilerplate, share)
        stats = load_statistics(db)
        if stats.n_texts == 0:
            return []
        scores, parts = _scores(db, stats, query, settings.sublinear_tf)
        chosen = _chosen(db, stats, scores, k)
        return [_result(rank, c, parts, query, settings.num_perm, terms) for rank, c in enumerate(chosen, 1)]


def query_text_of_file(path: str, settings) -> str:
    """The text of one document file, read as an audit reads it (markup removed).

    Raises
    ------
    QueryError
        The file cannot be read, has no document, or holds several (a records file).
    """
    from ..ingest import InputError, iter_documents
    from .store import read_keys

    ledger: list = []
    reading = {key: getattr(settings, key) for key in read_keys()}
    try:
        docs = list(iter_documents([path], ledger=ledger, **reading))
    except InputError as err:
        raise QueryError(str(err)) from err
    if not docs:
        reasons = "; ".join(e.reason for e in ledger if e.reason) or "no text"
        raise QueryError(f"nothing to search for in {path}: {reasons}")
    if len(docs) > 1:
        raise QueryError(f"{path} holds {len(docs)} documents; give a file with one document")
    return docs[0].text
