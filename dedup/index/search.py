"""Similarity search: the indexed texts that best match a query, with the passage that
matches and how much of the query each one holds.

The query is taken through the same steps as an indexed text: the audit's compiled
normalize step, the index's template lines left out by the audit's rule (a query pasted
from a page with the site's footer is not matched on the footer), and the plan's sketch
step (features, MinHash signature, term counts, sorted shingle set). Its stop words
(`dedup.index.stopwords`) are left out of the ranking.

Rankings
--------
``bm25`` (the default)
    Okapi BM25 as written in Robertson & Zaragoza (2009), "The Probabilistic Relevance
    Framework: BM25 and Beyond", with the term-frequency saturation

        w(t, c) = tf(t, c) * (k1 + 1) / (tf(t, c) + k1 * ((1 - b) + b * dl(t) / avdl))

    times the Robertson/Spärck Jones weight without relevance information,
    ``log((N - n(c) + 0.5) / (n(c) + 0.5))``, summed over the query's terms, each
    weighed by how often the query uses it (``k3`` taken as infinite). ``dl`` is the
    text's length in words, ``avdl`` the mean over the searchable texts, ``N`` their
    number and ``n(c)`` how many use the term. That weight is negative for a term in more
    than half the texts; here 1 is added inside the logarithm, ``log(1 + (N - n + 0.5) /
    (n + 0.5))``, so it never is (measured on man pages, `benchmarks/search_quality.py`:
    mean reciprocal rank 0.903 with it against 0.890 with the weight floored at zero).
    ``k1 = 1.2`` and ``b = 0.75`` are the usual values quoted in that paper, from memory.
``tfidf``
    Cosine of TF-IDF rows with sublinear tf (``1 + ln tf``) and the stop words left out:
    scikit-learn's ``TfidfVectorizer(sublinear_tf=True, smooth_idf=True, norm="l2",
    stop_words=...)`` over hashed term columns (a query word no indexed text uses keeps
    the unseen idf, as `dedup.sketch.TfidfModel.transform` gives it).

BM25 was chosen as the default by `benchmarks/search_quality.py`: with the NAME line of
916 man pages as queries, each page the answer to its own, the mean reciprocal rank is
0.903 for BM25 against 0.766 for this TF-IDF cosine (0.686 for the cosine with raw tf and
stop words kept, the ranking before), recall at 10 0.990 against 0.954; with the first
sentence of DESCRIPTION, 0.975 against 0.899. Leaving the stop words out changes BM25's
figures by less than 0.005 (0.906 with them kept); it keeps them out of the terms a
result names and off the longest posting lists.

Both are inverted-index sums: only the posting lists of the query's own columns are
read, O(sum of those lists' lengths), independent of the rest of the index. Each result
also reports the TF-IDF ``cosine``, the query terms that contribute most to its score,
``containment`` (the share of the query's shingles the text holds: is this draft already
written?), the MinHash estimate and the exact Jaccard similarity of the shingle sets,
and the passage of the text that holds the most query terms (``snippet``: offsets into
the text as normalized, which is what the index stores).

Everything is read in one read transaction, so a search running while an update writes
sees the index as it was before that update.
"""

from __future__ import annotations

import re
import sqlite3
import zlib
from dataclasses import dataclass

import numpy as np

from ..ingest.document import RawDocument
from ..normalize import token_text
from ..normalize.batch import prepare_documents
from ..normalize.boilerplate import Boilerplate
from ..plan import Plan, sketch_batch
from ..sketch import estimate_jaccard
from ..sketch.tfidf import DocumentFrequency, hashed_columns
from .blobs import BlobError, unpack_array
from .postings import Statistics, load_statistics, postings_of
from .stopwords import stop_columns
from .store import Index
from .templates import load_templates

__all__ = ["QueryError", "RANKINGS", "similar", "query_text_of_file", "bm25_idf", "best_passage"]

RANKINGS = ("bm25", "tfidf")
K1, B = 1.2, 0.75
# Words in a snippet window.
SNIPPET_WORDS = 24
_WORD = re.compile(r"[^\W_]+")


class QueryError(ValueError):
    """The query cannot be searched for (it has no words, or its file cannot be read)."""


@dataclass
class _Query:
    """A query as an indexed text is sketched: its text as sketched, term counts (sorted
    columns, stop words left out), signature, sorted unique shingles, and the words
    behind each column."""

    text: str
    columns: np.ndarray
    counts: np.ndarray
    signature: np.ndarray
    shingles: np.ndarray
    names: dict[int, str]


def bm25_idf(df: np.ndarray, n: int) -> np.ndarray:
    """The Robertson/Spärck Jones weight with 1 added inside the logarithm (see the module notes)."""
    df = np.asarray(df, dtype=np.float64)
    return np.log1p((n - df + 0.5) / (df + 0.5))


def _term_names(text: str, token_hashes: np.ndarray, n_features: int) -> dict[int, str]:
    """Column -> the query word(s) in it. The kernel's tokens are `token_text`'s words, in order."""
    words = token_text(text).split()
    names: dict[int, set[str]] = {}
    if len(words) == token_hashes.shape[0]:
        for word, column in zip(words, hashed_columns(token_hashes, n_features).tolist()):
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
    columns = part.counts.indices.astype(np.int64)
    keep = ~np.isin(columns, stop_columns(settings.tfidf_features))
    if not keep.any():
        raise QueryError(
            "the query has only stop words (such as 'the', 'a', 'to'): give words of the subject"
        )
    return _Query(
        stripped,
        columns[keep],
        np.asarray(part.counts.data)[keep],
        part.values[0],
        part.shingles,
        _term_names(stripped, part.features.token_hashes, settings.tfidf_features),
    )


def _query_weights(stats: Statistics, query: _Query) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per query column: its document frequency, its BM25 weight (idf times the query's
    count) and its unit-length TF-IDF weight."""
    df = stats.df_of(query.columns)
    bm25 = bm25_idf(df, stats.n_texts) * query.counts
    tfidf = (1.0 + np.log(np.asarray(query.counts, dtype=np.float64))) * stats.idf(query.columns)
    tfidf /= np.sqrt(float(np.dot(tfidf, tfidf)))
    return df, bm25, tfidf


def _scores(
    db: sqlite3.Connection, stats: Statistics, query: _Query, ranking: str
) -> tuple[np.ndarray, np.ndarray, list[tuple[int, np.ndarray, np.ndarray]]]:
    """The ranking's score and the TF-IDF cosine of every searchable text, and each
    column's part of the ranking's score: ``(scores, cosines, [(column, positions, parts)])``."""
    df, bm25_weights, tfidf_weights = _query_weights(stats, query)
    avdl = float(stats.lengths.mean()) if stats.n_texts else 1.0
    length_norm = K1 * ((1.0 - B) + B * stats.lengths / max(avdl, 1e-12))
    inverse = np.divide(
        1.0, stats.search_norms, out=np.zeros_like(stats.search_norms), where=stats.search_norms > 0
    )
    bm25 = np.zeros(stats.n_texts, dtype=np.float64)
    cosine = np.zeros(stats.n_texts, dtype=np.float64)
    parts: list[tuple[int, np.ndarray, np.ndarray]] = []
    for k, column in enumerate(query.columns.tolist()):
        if df[k] == 0:
            continue
        text_ids, values = postings_of(db, column)
        positions = stats.position_of(text_ids)
        keep = positions >= 0
        positions, tf = positions[keep], values[keep].astype(np.float64)
        b_part = bm25_weights[k] * tf * (K1 + 1.0) / (tf + length_norm[positions])
        c_part = tfidf_weights[k] * (1.0 + np.log(tf)) * stats.idf(np.array([column]))[0] * inverse[positions]
        bm25[positions] += b_part
        cosine[positions] += c_part
        parts.append((column, positions, b_part if ranking == "bm25" else c_part))
    return (bm25 if ranking == "bm25" else cosine), cosine, parts


def _chosen(db: sqlite3.Connection, stats: Statistics, scores: np.ndarray, k: int) -> list[tuple]:
    """The best texts with their present documents, best first (ties by first document id):
    ``(score, [(doc_id, title)], position, (text_id, content_hash, signature blob, shingle blob))``."""
    hits = np.flatnonzero(scores > 0)
    if not hits.size:
        return []
    # Take every text scoring at least the k-th best, so ties at the edge are decided by id.
    top = hits if hits.size <= k else hits[scores[hits] >= np.partition(scores[hits], -k)[-k]]
    chosen = []
    for position in top.tolist():
        row = db.execute(
            "SELECT t.text_id, t.content_hash, s.signature, s.shingles FROM texts AS t JOIN sketches AS s "
            "ON s.text_id = t.text_id WHERE t.text_id = ?",
            (int(stats.text_ids[position]),),
        ).fetchone()
        if row is None:  # cannot happen within one snapshot; keep the search going regardless
            continue
        docs = db.execute(
            "SELECT doc_id, title FROM documents WHERE content_hash = ? AND status = 'present' ORDER BY doc_id",
            (row[1],),
        ).fetchall()
        if docs:
            chosen.append((float(scores[position]), docs, position, row))
    chosen.sort(key=lambda c: (-c[0], c[1][0][0]))
    return chosen[:k]


def best_passage(text: str, weights: dict[str, float], width: int = SNIPPET_WORDS) -> tuple[int, int]:
    """Character span of the run of ``width`` words of ``text`` whose distinct words weigh
    the most (``weights``: word -> weight; the earliest of equal runs).

    >>> t = "one two three reset the vpn password here four five"
    >>> s, e = best_passage(t, {"vpn": 2.0, "password": 1.5}, width=3); t[s:e]
    'the vpn password'

    Cost O(words of the text).
    """
    words = [(m.start(), m.end(), m.group()) for m in _WORD.finditer(text)]
    if not words:
        return 0, 0
    width = max(1, min(width, len(words)))
    inside: dict[str, int] = {}
    score = best = 0.0
    best_at = 0
    for i, (_, _, word) in enumerate(words):
        if word in weights:
            inside[word] = inside.get(word, 0) + 1
            score += weights[word] if inside[word] == 1 else 0.0
        if i >= width:
            gone = words[i - width][2]
            if gone in weights:
                inside[gone] -= 1
                score -= weights[gone] if inside[gone] == 0 else 0.0
        start = max(0, i - width + 1)
        if score > best + 1e-12:
            best, best_at = score, start
    return words[best_at][0], words[best_at + width - 1][1]


def _snippet(db: sqlite3.Connection, text_id: int, query: _Query, stats: Statistics) -> dict:
    """The passage of a stored text holding the most query terms (see `best_passage`)."""
    row = db.execute("SELECT form FROM canonicals WHERE text_id = ?", (text_id,)).fetchone()
    try:
        text = zlib.decompress(row[0]).decode("utf-8", "surrogatepass") if row else ""
    except zlib.error as err:
        raise BlobError(f"the canonical form of text {text_id} does not decompress ({err})") from None
    idf = dict(zip(query.columns.tolist(), bm25_idf(stats.df_of(query.columns), stats.n_texts).tolist()))
    weights = {
        word: idf[column]
        for column, names in query.names.items()
        if column in idf
        for word in names.split(" / ")
    }
    start, end = best_passage(text, weights)
    return {"text": " ".join(text[start:end].split()), "start": start, "end": end, "characters": len(text)}


def _result(
    rank: int,
    chosen: tuple,
    parts: list,
    cosines: np.ndarray,
    query: _Query,
    db: sqlite3.Connection,
    stats: Statistics,
    options: tuple[int, int, str, bool],
) -> dict:
    """One result (see `similar`)."""
    score, docs, position, (text_id, digest, signature_blob, shingle_blob) = chosen
    num_perm, terms, ranking, snippets = options
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
        "ranking": ranking,
        "score": score,
        "cosine": min(float(cosines[position]), 1.0),
        "terms": [{"term": name, "weight": w, "share": w / score} for w, name in contributions[:terms]],
        "containment": shared / query.shingles.shape[0] if query.shingles.shape[0] else 0.0,
        "jaccard_estimate": estimate_jaccard(query.signature, signature),
        "jaccard": shared / union if union else 0.0,
        "snippet": _snippet(db, int(text_id), query, stats) if snippets else None,
    }


def similar(
    index: Index, text: str, k: int = 10, *, terms: int = 5, ranking: str = "bm25", snippets: bool = True
) -> list[dict]:
    """The ``k`` indexed texts that best match ``text``, best first.

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
    ranking : {"bm25", "tfidf"}
        See the module notes.
    snippets : bool
        Find each result's best passage (``snippet``; None without).

    Returns
    -------
    list of dict
        ``rank``, ``document_id`` (the first of the documents with this text, by id),
        ``copies`` (the others), ``title``, ``content_hash``, ``ranking``, ``score`` (of
        the ranking), ``cosine`` (TF-IDF), ``terms`` (``[{"term", "weight", "share"}]``:
        a query term's part of the score and its share of it, largest first),
        ``containment``, ``jaccard_estimate`` (MinHash), ``jaccard`` (exact, over the
        stored shingles) and ``snippet`` (``text``, ``start``, ``end``, ``characters``,
        or None).
        Texts sharing no term with the query are never listed. Ties are broken by
        document id, so the order is deterministic.

    Raises
    ------
    QueryError
        The query has no words (or only stop words), or ``k`` or ``ranking`` is wrong.
    IndexFileError
        The index cannot be read, or awaits ``dedup index update`` after a migration.

    Notes
    -----
    Cost O(length of the query's posting lists) plus, per result, reading its shingles
    and decompressing its text for the snippet.
    """
    if k < 1:
        raise QueryError(f"k must be at least 1, got {k}")
    if ranking not in RANKINGS:
        raise QueryError(f"the ranking must be one of {', '.join(RANKINGS)}, not {ranking!r}")
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
        scores, cosines, parts = _scores(db, stats, query, ranking)
        chosen = _chosen(db, stats, scores, k)
        options = (settings.num_perm, terms, ranking, snippets)
        return [
            _result(rank, c, parts, cosines, query, db, stats, options) for rank, c in enumerate(chosen, 1)
        ]


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
