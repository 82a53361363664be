"""Similarity search: BM25 checked against the paper's formula written out here, the TF-IDF ranking
against scikit-learn, and the snippet, containment and Jaccard figures against plain Python."""

from __future__ import annotations

import math
from collections import Counter

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer, TfidfVectorizer
from sklearn.metrics.pairwise import cosine_similarity

from benchmarks.corpus import synthetic_documents
from dedup import AuditSettings
from dedup.index import QueryError, build, open_index, query_text_of_file, similar, update
from dedup.index.stopwords import STOP_WORDS
from dedup.ingest import iter_documents
from dedup.normalize import canonical_text, content_hash, token_text


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


def _check_against(results, hashes, expected, first_ids, k, key="score"):
    order = np.lexsort((np.array([first_ids[h] for h in hashes]), -expected))
    expected_top = [(first_ids[hashes[i]], expected[i]) for i in order[:k] if expected[i] > 0]
    assert [r["document_id"] for r in results] == [doc for doc, _ in expected_top]
    np.testing.assert_allclose(
        [r[key] for r in results], [s for _, s in expected_top], rtol=1e-12, atol=1e-12
    )


def bm25_from_the_paper(texts: list[str], query: str, k1: float = 1.2, b: float = 0.75) -> np.ndarray:
    """Reference: Robertson & Zaragoza (2009), BM25 written out with dictionaries over words.

    score(d, q) = sum over distinct query terms t of  qtf(t) * w(t) * tf(t, d) (k1 + 1) / (tf(t, d) + K(d)),
    K(d) = k1 ((1 - b) + b dl(d) / avdl), w(t) = log(1 + (N - n(t) + 0.5) / (n(t) + 0.5)); stop words left out.
    """
    docs = [Counter(token_text(t).split()) for t in texts]
    lengths = [sum(d.values()) for d in docs]
    avdl = sum(lengths) / len(lengths)
    n = len(docs)
    scores = np.zeros(n)
    for term, qtf in Counter(token_text(canonical_text(query)).split()).items():
        if term in STOP_WORDS:
            continue
        df = sum(1 for d in docs if term in d)
        if df == 0:
            continue
        w = math.log(1 + (n - df + 0.5) / (df + 0.5))
        for i, d in enumerate(docs):
            tf = d.get(term, 0)
            if tf:
                scores[i] += qtf * w * tf * (k1 + 1) / (tf + k1 * ((1 - b) + b * lengths[i] / avdl))
    return scores


def test_bm25_equals_the_formula_written_from_the_paper(indexed, base_texts):
    root, path = indexed
    texts = _distinct_texts(root)
    hashes = list(texts)
    words = token_text(canonical_text(base_texts[0])).split()
    query = " ".join(words[40:70]) + " the of and to " + " ".join(token_text(base_texts[4]).split()[:15])
    expected = bm25_from_the_paper([texts[h] for h in hashes], query)
    with open_index(path) as index:
        results = similar(index, query, k=6)
    assert all(r["ranking"] == "bm25" for r in results)
    _check_against(results, hashes, expected, _first_ids(root), 6)
    assert {"a/one.txt", "lone/4.txt"} <= {r["document_id"] for r in results[:4]}


def test_tfidf_ranking_equals_tfidf_vectorizer_with_stop_words_and_sublinear_tf(indexed, base_texts):
    """Reference: sklearn TfidfVectorizer(sublinear_tf=True, smooth_idf=True, norm='l2', stop_words=STOP_WORDS)
    fitted on the distinct indexed texts, its transform of the query, and cosine_similarity. The query uses only
    words of the corpus (sklearn drops unknown words) and 2**32 hashed columns leave no two terms in one column."""
    root, path = indexed
    texts = _distinct_texts(root)
    hashes = list(texts)
    vectorizer = TfidfVectorizer(
        token_pattern=r"\S+",
        lowercase=False,
        stop_words=sorted(STOP_WORDS),
        sublinear_tf=True,
        smooth_idf=True,
    )
    rows = vectorizer.fit_transform([token_text(texts[h]) for h in hashes])
    words = token_text(canonical_text(base_texts[0])).split()
    query = " ".join(words[40:70]) + " " + " ".join(token_text(canonical_text(base_texts[4])).split()[:15])
    expected = cosine_similarity(vectorizer.transform([token_text(canonical_text(query))]), rows).ravel()
    with open_index(path) as index:
        results = similar(index, query, k=6, ranking="tfidf")
        bm25 = similar(index, query, k=6)
    _check_against(results, hashes, expected, _first_ids(root), 6)
    _check_against(results, hashes, expected, _first_ids(root), 6, key="cosine")
    by_id = {r["document_id"]: r["cosine"] for r in results}
    assert all(
        r["cosine"] == pytest.approx(by_id[r["document_id"]], abs=1e-12)
        for r in bm25
        if r["document_id"] in by_id
    )


def test_unknown_query_words_weigh_as_in_tfidf_transformer(indexed):
    """Reference: sklearn TfidfTransformer(sublinear_tf=True) fitted on count rows of the indexed texts (stop
    words left out) over a vocabulary that also has the query's new words (df = 0, so idf = ln(1 + n) + 1, as
    for a hashed feature no text uses)."""
    root, path = indexed
    texts = _distinct_texts(root)
    hashes = list(texts)
    query = "zebra walrus entirely novel words " + " ".join(token_text(texts[hashes[3]]).split()[:10])
    counter = CountVectorizer(token_pattern=r"\S+", lowercase=False, stop_words=sorted(STOP_WORDS)).fit(
        [token_text(texts[h]) for h in hashes] + [token_text(query)]
    )
    transformer = TfidfTransformer(smooth_idf=True, norm="l2", sublinear_tf=True).fit(
        counter.transform([token_text(texts[h]) for h in hashes])
    )
    rows = transformer.transform(counter.transform([token_text(texts[h]) for h in hashes]))
    expected = cosine_similarity(
        transformer.transform(counter.transform([token_text(canonical_text(query))])), rows
    )
    with open_index(path) as index:
        results = similar(index, query, k=4, ranking="tfidf")
    _check_against(results, hashes, expected.ravel(), _first_ids(root), 4)


def test_after_updates_the_search_gives_what_a_fresh_build_gives(tmp_path, write_corpus):
    docs = [text for _, text in synthetic_documents(60, seed=4, doc_bytes=600)]
    root = write_corpus({f"d/{i:03d}.txt": t for i, t in enumerate(docs[:45])})
    path = str(tmp_path / "i.index")
    build([str(root)], path)
    for i in range(45, 60):  # replace, add and remove documents in three updates
        (root / f"d/{i % 50:03d}.txt").write_text(docs[i], encoding="utf-8")
        if i % 5 == 0:
            (root / f"d/{i - 40:03d}.txt").unlink()
            update(None, path)
    update(None, path)
    fresh = str(tmp_path / "fresh.index")
    build([str(root)], fresh)
    with open_index(path) as updated, open_index(fresh) as built:
        for query in (docs[50][:400], docs[3][100:300] + " " + docs[30][:200], "words that no document has"):
            for ranking in ("bm25", "tfidf"):
                mine, theirs = (
                    similar(updated, query, ranking=ranking),
                    similar(built, query, ranking=ranking),
                )
                assert [r["document_id"] for r in mine] == [r["document_id"] for r in theirs]
                for a, b in zip(mine, theirs):
                    assert a["score"] == pytest.approx(b["score"], rel=1e-12)
                    assert a["snippet"] == b["snippet"]


def test_terms_name_query_words_without_stop_words_and_their_parts_add_up_to_the_score(indexed, base_texts):
    root, path = indexed
    query = "the of a to " + " ".join(token_text(canonical_text(base_texts[2])).split()[10:60])
    with open_index(path) as index:
        for ranking in ("bm25", "tfidf"):
            results = similar(index, query, k=3, terms=1000, ranking=ranking)
            query_words = set(token_text(canonical_text(query)).split()) - STOP_WORDS
            for r in results:
                assert sum(t["weight"] for t in r["terms"]) == pytest.approx(r["score"], rel=1e-12)
                assert sum(t["share"] for t in r["terms"]) == pytest.approx(1.0, abs=1e-12)
                weights = [t["weight"] for t in r["terms"]]
                assert weights == sorted(weights, reverse=True)
                assert all(set(t["term"].split(" / ")) <= query_words for t in r["terms"])
        assert len(similar(index, query, k=1, terms=2)[0]["terms"]) == 2


def test_jaccard_and_containment_are_exact_and_the_minhash_estimate_is_close(indexed, base_texts):
    """Reference: Jaccard and containment of Python sets of shingle strings; the MinHash estimate within four
    standard errors sqrt(J (1 - J) / num_perm)."""
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
        assert r["containment"] == pytest.approx(len(mine & theirs) / len(mine), abs=1e-12)
        assert abs(r["jaccard_estimate"] - exact) <= 4 * np.sqrt(exact * (1 - exact) / 128) + 1e-9
    assert (
        results[0]["document_id"] == "a/one.txt" and results[0]["containment"] == 1.0
    )  # the draft is written
    assert results[0]["jaccard"] < 0.6


def test_the_snippet_is_the_passage_with_the_rarest_query_words(tmp_path, write_corpus, base_texts):
    page = (
        " ".join(base_texts[5].split()[:120]) + " to reset the vpn password open the portal " + base_texts[6]
    )
    root = write_corpus({"kb/vpn.txt": page, **{f"kb/{k}.txt": base_texts[k] for k in range(3)}})
    path = str(tmp_path / "s.index")
    build([str(root)], path)
    with open_index(path) as index:
        best = similar(index, "how do I reset my VPN password", k=1)[0]
    assert best["document_id"] == "kb/vpn.txt"
    snippet = best["snippet"]
    assert "reset the vpn password" in snippet["text"] and len(snippet["text"].split()) == 24
    canonical = canonical_text(page)
    assert " ".join(canonical[snippet["start"] : snippet["end"]].split()) == snippet["text"]
    assert snippet["characters"] == len(canonical)


def test_exact_copies_are_one_result_and_ties_are_broken_by_id(indexed, base_texts):
    root, path = indexed
    with open_index(path) as index:
        results = similar(index, base_texts[1], k=2)
    assert results[0]["document_id"] == "b/copy.txt" and results[0]["copies"] == ["b/one.txt"]
    assert results[0]["cosine"] == pytest.approx(1.0) and results[0]["jaccard"] == 1.0
    assert results[0]["containment"] == 1.0


def test_queries_without_words_only_stop_words_and_empty_indexes(tmp_path, indexed):
    _, path = indexed
    with open_index(path) as index:
        with pytest.raises(QueryError, match="no words"):
            similar(index, " ... !!! ")
        with pytest.raises(QueryError, match="only stop words"):
            similar(index, "To be or not to be, that is the ...")
        with pytest.raises(QueryError):
            similar(index, "words", k=0)
        with pytest.raises(QueryError, match="ranking"):
            similar(index, "words", ranking="loudest")
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
