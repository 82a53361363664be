"""Similarity search checked against scikit-learn's TF-IDF and cosine over the same rows."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer, TfidfVectorizer
from sklearn.metrics.pairwise import cosine_similarity

from benchmarks.corpus import synthetic_documents
from dedup import AuditSettings
from dedup.features import build_features
from dedup.index import QueryError, build, open_index, query_text_of_file, similar, update
from dedup.ingest import iter_documents
from dedup.normalize import canonical_text, content_hash, token_text
from dedup.sketch import fit_tfidf


def _distinct_texts(root) -> dict[str, str]:
    """content hash -> canonical text of every document with words, read as the index reads them."""
    out = {}
    for doc in iter_documents([str(root)], ledger=[]):
        canonical = canonical_text(doc.text)
        if token_text(canonical):
            out[content_hash(canonical)] = canonical
    return out


def _first_ids(root) -> dict[str, str]:
    first: dict[str, str] = {}
    for doc in iter_documents([str(root)], ledger=[]):
        h = content_hash(canonical_text(doc.text))
        first[h] = min(first.get(h, doc.id), doc.id)
    return first


@pytest.fixture
def indexed(tmp_path, write_corpus, corpus_files):
    root = write_corpus(corpus_files)
    path = str(tmp_path / "i.index")
    build([str(root)], path, AuditSettings(tfidf_features=2**32))
    return root, path


def _check_against(results, hashes, expected, first_ids, k):
    order = np.lexsort((np.array([first_ids[h] for h in hashes]), -expected))
    expected_top = [(first_ids[hashes[i]], expected[i]) for i in order[:k] if expected[i] > 0]
    assert [r["document_id"] for r in results] == [doc for doc, _ in expected_top]
    np.testing.assert_allclose(
        [r["cosine"] for r in results], [s for _, s in expected_top], rtol=0, atol=1e-12
    )


def test_ranking_equals_tfidf_vectorizer_and_cosine_similarity(indexed, base_texts):
    """Reference: sklearn TfidfVectorizer(smooth_idf=True, norm='l2') fitted on the distinct indexed texts,
    its transform of the query, and sklearn.metrics.pairwise.cosine_similarity. The query uses only words of
    the corpus (sklearn drops unknown words) and 2**32 hashed columns leave no two terms in one column."""
    root, path = indexed
    texts = _distinct_texts(root)
    hashes = list(texts)
    vectorizer = TfidfVectorizer(analyzer=str.split, smooth_idf=True, norm="l2")
    rows = vectorizer.fit_transform([token_text(texts[h]) for h in hashes])
    words = token_text(canonical_text(base_texts[0])).split()
    query = " ".join(words[40:70]) + " " + " ".join(token_text(canonical_text(base_texts[4])).split()[:15])
    expected = cosine_similarity(vectorizer.transform([token_text(canonical_text(query))]), rows).ravel()
    with open_index(path) as index:
        results = similar(index, query, k=6)
    _check_against(results, hashes, expected, _first_ids(root), 6)
    assert results[0]["document_id"] == "a/one.txt"


def test_unknown_query_words_weigh_as_in_tfidf_transformer(indexed):
    """Reference: sklearn TfidfTransformer fitted on count rows of the indexed texts over a vocabulary that also
    has the query's new words (df = 0, so idf = ln(1 + n) + 1, as for a hashed feature no text uses)."""
    root, path = indexed
    texts = _distinct_texts(root)
    hashes = list(texts)
    query = "zebra walrus entirely novel words " + " ".join(token_text(texts[hashes[3]]).split()[:10])
    counter = CountVectorizer(analyzer=str.split).fit(
        [token_text(texts[h]) for h in hashes] + [token_text(query)]
    )
    transformer = TfidfTransformer(smooth_idf=True, norm="l2").fit(
        counter.transform([token_text(texts[h]) for h in hashes])
    )
    rows = transformer.transform(counter.transform([token_text(texts[h]) for h in hashes]))
    expected = cosine_similarity(
        transformer.transform(counter.transform([token_text(canonical_text(query))])), rows
    )
    with open_index(path) as index:
        results = similar(index, query, k=4)
    _check_against(results, hashes, expected.ravel(), _first_ids(root), 4)


@pytest.mark.parametrize("sublinear", [False, True])
def test_hashed_ranking_after_updates_equals_cosine_similarity_over_fit_tfidf_rows(
    tmp_path, write_corpus, sublinear
):
    """Reference: sklearn.metrics.pairwise.cosine_similarity over the rows of dedup.sketch.fit_tfidf (the audit's
    TF-IDF, default 2**20 hashed columns) fitted on the final distinct texts, and its transform of the query."""
    docs = [text for _, text in synthetic_documents(60, seed=4, doc_bytes=600)]
    root = write_corpus({f"d/{i:03d}.txt": t for i, t in enumerate(docs[:45])})
    path = str(tmp_path / "i.index")
    build([str(root)], path, AuditSettings(sublinear_tf=sublinear))
    for i in range(45, 60):  # replace, add and remove documents in three updates
        (root / f"d/{i % 50:03d}.txt").write_text(docs[i], encoding="utf-8")
        if i % 5 == 0:
            (root / f"d/{i - 40:03d}.txt").unlink()
            update(None, path)
    update(None, path)
    texts = _distinct_texts(root)
    hashes = list(texts)
    features = build_features([texts[h] for h in hashes])
    model = fit_tfidf(features.token_hashes, features.token_offsets, sublinear_tf=sublinear)
    first_ids = _first_ids(root)
    with open_index(path) as index:
        for query in (
            docs[50][:400],
            docs[3][100:300] + " " + docs[30][:200],
            "words that no document has at all",
        ):
            q = build_features([canonical_text(query)])
            expected = cosine_similarity(model.transform(q.token_hashes, q.token_offsets), model.rows).ravel()
            _check_against(similar(index, query, k=10), hashes, expected, first_ids, 10)


def test_terms_name_query_words_and_their_shares_add_up_to_the_cosine(indexed, base_texts):
    root, path = indexed
    query = " ".join(token_text(canonical_text(base_texts[2])).split()[10:60])
    with open_index(path) as index:
        results = similar(index, query, k=3, terms=1000)
    query_words = set(token_text(canonical_text(query)).split())
    for r in results:
        assert sum(t["share"] for t in r["terms"]) == pytest.approx(r["cosine"], abs=1e-12)
        shares = [t["share"] for t in r["terms"]]
        assert shares == sorted(shares, reverse=True)
        assert all(set(t["term"].split(" / ")) <= query_words for t in r["terms"])
    with open_index(path) as index:
        assert len(similar(index, query, k=1, terms=2)[0]["terms"]) == 2


def test_jaccard_is_exact_and_the_minhash_estimate_is_close(indexed, base_texts):
    """Reference: Jaccard of Python sets of shingle strings; the MinHash estimate within four standard errors
    sqrt(J (1 - J) / num_perm)."""
    from dedup.features import shingle_strings

    root, path = indexed
    query = " ".join(token_text(canonical_text(base_texts[0])).split()[:200])
    with open_index(path) as index:
        results = similar(index, query, k=3)
    mine = set(shingle_strings(token_text(canonical_text(query)), 5))
    text_of = {doc.id: doc.text for doc in iter_documents([str(root)], ledger=[])}
    for r in results:
        theirs = set(shingle_strings(token_text(canonical_text(text_of[r["document_id"]])), 5))
        exact = len(mine & theirs) / len(mine | theirs)
        assert r["jaccard"] == pytest.approx(exact, abs=1e-12)
        assert abs(r["jaccard_estimate"] - exact) <= 4 * np.sqrt(exact * (1 - exact) / 128) + 1e-9


def test_exact_copies_are_one_result_and_ties_are_broken_by_id(indexed, base_texts):
    root, path = indexed
    with open_index(path) as index:
        results = similar(index, base_texts[1], k=2)
    assert results[0]["document_id"] == "b/copy.txt" and results[0]["copies"] == ["b/one.txt"]
    assert results[0]["cosine"] == pytest.approx(1.0) and results[0]["jaccard"] == 1.0


def test_queries_without_words_and_empty_indexes(tmp_path, indexed):
    _, path = indexed
    with open_index(path) as index:
        with pytest.raises(QueryError, match="no words"):
            similar(index, " ... !!! ")
        with pytest.raises(QueryError):
            similar(index, "words", k=0)
    empty = tmp_path / "empty"
    empty.mkdir()
    build([str(empty)], str(tmp_path / "e.index"))
    with open_index(str(tmp_path / "e.index")) as index:
        assert similar(index, "any words") == []


def test_a_query_file_is_read_like_an_indexed_document(tmp_path):
    page = tmp_path / "draft.html"
    page.write_text("<html><body><nav>Home | Menu</nav><p>Reset the <b>VPN</b> password.</p></body></html>")
    text = query_text_of_file(str(page), AuditSettings())
    assert "<b>" not in text and "VPN" in text
    records = tmp_path / "many.jsonl"
    records.write_text('{"text": "one"}\n{"text": "two"}\n')
    with pytest.raises(QueryError, match="holds 2 documents"):
        query_text_of_file(str(records), AuditSettings())
    with pytest.raises(QueryError, match="no such file"):
        query_text_of_file(str(tmp_path / "none.md"), AuditSettings())
