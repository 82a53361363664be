"""TF-IDF rows checked against scikit-learn."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.metrics.pairwise import cosine_similarity

from dedup.features import build_features, tokens_of
from dedup.normalize import canonical_text, token_text
from dedup.sketch import collision_stats, fit_tfidf, pair_cosines
from dedup.sketch.tfidf import DocumentFrequency

TEXTS = [
    "Reset your VPN password from the self-service portal before it expires.",
    "The payroll portal password can be reset by the HR service desk.",
    "Meter readings are estimated when the reader cannot reach the meter.",
    "Estimated readings are corrected at the next actual meter reading.",
    "Reset reset reset: the word repeats so term frequency matters here.",
    "portal",
]


def _ours(texts, sublinear, n_features=2**32):
    words = [token_text(canonical_text(t)) for t in texts]
    fs = build_features(words, shingle_size=1)
    model = fit_tfidf(fs.token_hashes, fs.token_offsets, n_features=n_features, sublinear_tf=sublinear)
    return words, fs, model


@pytest.mark.parametrize("sublinear", [False, True])
def test_rows_equal_scikit_learn_tfidf_vectorizer(sublinear):
    """Reference: sklearn.feature_extraction.text.TfidfVectorizer(smooth_idf=True, norm='l2'),
    fed the same tokens. With a feature space of 2**32 no two of these terms share a column,
    so every sklearn column maps to exactly one of ours (token hash mod 2**32)."""
    words, fs, model = _ours(TEXTS, sublinear)
    ref = TfidfVectorizer(analyzer=tokens_of, smooth_idf=True, norm="l2", sublinear_tf=sublinear)
    expected = ref.fit_transform(words).toarray()
    vocabulary = ref.get_feature_names_out()
    hashes = build_features([" ".join(vocabulary)], shingle_size=1).token_hashes
    columns = (hashes % np.uint64(2**32)).astype(np.int64)
    assert len(set(columns.tolist())) == len(vocabulary)
    position = {c: i for i, c in enumerate(columns.tolist())}
    coo = model.rows.tocoo()
    ours = np.zeros_like(expected)
    for r, c, v in zip(coo.row, coo.col, coo.data):
        ours[r, position[int(c)]] = v  # a KeyError here would be a column sklearn does not have
    np.testing.assert_allclose(ours, expected, rtol=0, atol=1e-12)
    # Every row is unit length, so no weight lies outside the compared columns.
    np.testing.assert_allclose(
        np.asarray(model.rows.multiply(model.rows).sum(axis=1)).ravel(), 1.0, atol=1e-12
    )


def test_pair_cosines_equal_scikit_learn_cosine_similarity():
    """Reference: sklearn.metrics.pairwise.cosine_similarity on the same rows."""
    _, _, model = _ours(TEXTS, False, n_features=2**20)
    n = len(TEXTS)
    left, right = np.triu_indices(n, k=1)
    expected = cosine_similarity(model.rows)[left, right]
    np.testing.assert_allclose(pair_cosines(model.rows, left, right), expected, atol=1e-12)


def test_idf_is_minimal_for_a_term_in_every_document_and_falls_with_df():
    """Log idf (common practice, no source; natural log as scikit-learn uses): a term present in
    every document gets the minimum idf, ln((1+n)/(1+n)) + 1 = 1, and idf falls strictly as document
    frequency rises."""
    texts = ["common rare1 mid", "common mid", "common mid other", "common"]
    words = [token_text(t) for t in texts]
    fs = build_features(words, shingle_size=1)
    model = fit_tfidf(fs.token_hashes, fs.token_offsets, n_features=2**30)

    def idf(term):
        h = build_features([term], shingle_size=1).token_hashes[0]
        return float(model.idf(np.array([int(h % np.uint64(2**30))]))[0])

    assert idf("common") == pytest.approx(1.0, abs=1e-15)
    assert idf("common") < idf("mid") < idf("rare1")
    assert idf("rare1") == pytest.approx(np.log(5 / 2) + 1)


def test_collision_share_expected_and_measured():
    rng = np.random.default_rng(0)
    hashes = rng.integers(0, 2**63, size=20_000, dtype=np.uint64)
    stats = collision_stats(hashes, 2**14)
    # Expected 1 - (1 - 1/m)^(V-1) ≈ 1 - exp(-V/m) for V = 20,000, m = 16,384 (common practice, no source).
    assert stats["expected_colliding_share"] == pytest.approx(1 - np.exp(-19_999 / 2**14), rel=1e-3)
    assert abs(stats["measured_colliding_share"] - stats["expected_colliding_share"]) < 0.02


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.lists(st.integers(0, 40), max_size=30), min_size=1, max_size=12),
    st.sampled_from([8, 64, 2**20]),
)
def test_term_counts_equal_scipy_summing_repeated_entries(docs, n_features):
    """Reference: scipy.sparse, which sums repeated (row, column) entries when a COO matrix
    becomes CSR. Few distinct terms, so runs of one column (and empty documents) abound."""
    import scipy.sparse as sp

    from dedup.sketch.tfidf import _term_counts

    hashes = np.array([t * 0x9E3779B97F4A7C15 % 2**64 for doc in docs for t in doc], dtype=np.uint64)
    offsets = np.zeros(len(docs) + 1, dtype=np.int64)
    np.cumsum([len(doc) for doc in docs], out=offsets[1:])
    rows = np.repeat(np.arange(len(docs)), np.diff(offsets))
    columns = (hashes % np.uint64(n_features)).astype(np.int64)
    expected = sp.coo_matrix(
        (np.ones(hashes.shape[0]), (rows, columns)), shape=(len(docs), n_features)
    ).tocsr()
    expected.sum_duplicates()
    got = _term_counts(hashes, offsets, n_features)
    assert np.array_equal(got.indptr, expected.indptr)
    assert np.array_equal(got.indices, expected.indices)
    assert np.array_equal(got.data, expected.data)


@pytest.mark.parametrize("n_features", [64, 2**30])
def test_merged_frequencies_equal_one_count_over_all(n_features):
    """Reference: one `DocumentFrequency` fed every chunk in order (partitions merged must agree)."""
    rng = np.random.default_rng(11)
    hashes = rng.integers(0, 70, 2000).astype(np.uint64) * np.uint64(0x9E3779B97F4A7C15)
    offsets = np.array([0, 300, 300, 900, 1400, 2000])
    whole, left, right = (DocumentFrequency(n_features) for _ in range(3))
    whole.add(hashes, offsets)
    left.add(hashes[:900], offsets[:4])
    right.add(hashes[900:], offsets[3:] - 900)
    merged = left.merge(right)
    for x, y in zip(whole._columns_and_df(), merged._columns_and_df()):
        assert x.tolist() == y.tolist()
    assert (merged.n_docs, merged.tokens) == (whole.n_docs, whole.tokens) == (5, 2000)
    assert merged.collision_stats() == whole.collision_stats()
    query = hashes[300:900], np.array([0, 600])
    assert abs(merged.model(*query).rows - whole.model(*query).rows).max() < 1e-15


def test_frequencies_of_different_spaces_do_not_merge():
    with pytest.raises(ValueError, match="different feature spaces"):
        DocumentFrequency(64).merge(DocumentFrequency(128))
