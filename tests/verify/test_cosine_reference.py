"""Exact cosine: the audit's TF-IDF cosine equals scikit-learn's on the same tokens.

Reference: ``sklearn.feature_extraction.text.TfidfVectorizer(smooth_idf=True,
sublinear_tf=…, norm="l2")`` fitted on the word texts the audit weighs (its distinct
texts, tokens split on spaces), then ``sklearn.metrics.pairwise.cosine_similarity``.
With the exact vocabulary (``tfidf_features=0``, which is also what an audit takes when
the setting is left unset) every pair agrees to 1e-9; with a small hashed space terms
share columns and the same check fails, as it must.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.metrics.pairwise import cosine_similarity

import dedup
from benchmarks.corpus import synthetic_documents
from benchmarks.quality_scale import plant_synthetic
from dedup.features import build_features
from dedup.normalize import canonical_text, token_text
from dedup.sketch import fit_tfidf, pair_cosines
from dedup.sketch.tfidf import DocumentFrequency


def _words(texts: list[str]) -> list[str]:
    return [token_text(canonical_text(t)) for t in texts]


def _reference(words: list[str], sublinear: bool) -> np.ndarray:
    """scikit-learn's cosine of every pair (the reference)."""
    vectorizer = TfidfVectorizer(
        analyzer=str.split, lowercase=False, smooth_idf=True, sublinear_tf=sublinear, norm="l2"
    )
    return cosine_similarity(vectorizer.fit_transform(words))


def _ours(words: list[str], sublinear: bool, n_features: int) -> np.ndarray:
    features = build_features(words, shingle_size=1)
    model = fit_tfidf(
        features.token_hashes, features.token_offsets, n_features=n_features, sublinear_tf=sublinear
    )
    left, right = np.triu_indices(len(words), k=1)
    out = np.eye(len(words))
    out[left, right] = out[right, left] = pair_cosines(model.rows, left, right)
    return out


@pytest.fixture(scope="module")
def invented() -> list[str]:
    return [text for _, text in synthetic_documents(120, seed=5, doc_bytes=900)]


@pytest.mark.parametrize("sublinear", [False, True])
def test_exact_vocabulary_cosine_equals_scikit_learn(invented, sublinear):
    """Reference: TfidfVectorizer + cosine_similarity (scikit-learn), every pair, to 1e-9."""
    words = _words(invented)
    expected = _reference(words, sublinear)
    ours = _ours(words, sublinear, n_features=0)
    assert np.abs(ours - expected).max() < 1e-9
    assert (expected[np.triu_indices(len(words), k=1)] > 0.05).sum() > 100  # pairs with weight to compare


def test_a_small_hashed_space_fails_the_same_check(invented):
    """The reference check is able to fail: 256 hashed columns for a few thousand terms."""
    words = _words(invented)
    assert np.abs(_ours(words, False, n_features=256) - _reference(words, False)).max() > 1e-3


def test_exact_vocabulary_streamed_in_chunks_equals_one_fit(invented):
    """Document frequencies counted chunk by chunk and merged (as the engines do) give the
    rows of one fit over all texts."""
    words = _words(invented)
    features = build_features(words, shingle_size=1)
    hashes, offsets = features.token_hashes, features.token_offsets
    parts = [DocumentFrequency(0), DocumentFrequency(0)]
    cut = 50
    parts[0].add(hashes[: offsets[cut]], offsets[: cut + 1])
    parts[1].add(hashes[offsets[cut] :], offsets[cut:] - offsets[cut])
    merged = parts[0].merge(parts[1])
    whole = fit_tfidf(hashes, offsets, n_features=0)
    rows = merged.model(hashes, offsets).rows
    assert rows.shape == whole.rows.shape == (len(words), merged.width)
    assert abs(rows - whole.rows).max() < 1e-15
    record = merged.collision_stats()
    assert record["n_features"] == 0 and record["vocabulary_size"] == merged.width
    assert record["measured_colliding_share"] == 0.0 and record["expected_colliding_share"] < 1e-12


def test_unseen_terms_of_a_new_text_weigh_with_the_unseen_idf():
    fitted = build_features(["alpha beta", "beta gamma"], shingle_size=1)
    model = fit_tfidf(fitted.token_hashes, fitted.token_offsets, n_features=0)
    query = build_features(["beta delta delta"], shingle_size=1)
    row = model.transform(query.token_hashes, query.token_offsets)
    assert row.shape == (1, model.n_features + 1)  # delta: a column after the vocabulary's
    beta = np.log(3 / 3) + 1.0  # in both fitted texts: ln((1 + n) / (1 + df)) + 1
    weights = np.array([beta, 2 * model.unseen_idf])
    np.testing.assert_allclose(row.data, weights / np.linalg.norm(weights), atol=1e-15)


@pytest.fixture(scope="module")
def planted(tmp_path_factory):
    """Invented pages with edited copies and reuse passages, as `benchmarks.quality_scale`."""
    folder = tmp_path_factory.mktemp("cosine") / "corpus"
    return plant_synthetic(
        folder, 240, seed=9, doc_bytes=1500, prefix="doc", edited=30, reuse=20, plants_seed=4
    )


def _planted_reference(planted) -> tuple[list[str], np.ndarray]:
    """The planted documents' ids and scikit-learn's cosine of every pair of them (the reference)."""
    paths = sorted(p for p in planted.rglob("*.txt"))
    ids = [p.relative_to(planted).as_posix() for p in paths]
    return ids, _reference(_words([p.read_text(encoding="utf-8") for p in paths]), False)


@pytest.mark.parametrize("given", [{}, {"tfidf_features": 0}], ids=["default", "exact-given"])
def test_audit_cosines_and_pairs_equal_scikit_learn(planted, given):
    """Reference: scikit-learn's cosine (TfidfVectorizer + cosine_similarity) of every pair
    of the audit's distinct texts: the audit — with its default TF-IDF space, and with the
    exact vocabulary asked for — reports exactly the pairs at or above the threshold, with
    the same cosine to 1e-9."""
    threshold = 0.5
    settings = dedup.AuditSettings(
        measure="cosine", threshold=threshold, boilerplate=False, exhaustive_max_docs=20, **given
    )
    result = dedup.audit([str(planted)], settings)
    ids, expected = _planted_reference(planted)
    number = {doc: k for k, doc in enumerate(ids)}
    near = [p for p in result.pairs if p["kind"] == "near"]
    assert len(near) > 20
    for pair in near:
        assert pair["cosine"] == pytest.approx(
            expected[number[pair["left"]], number[pair["right"]]], abs=1e-9
        )
    left, right = np.triu_indices(len(ids), k=1)
    reaching = {(int(a), int(b)) for a, b in zip(left, right) if expected[a, b] >= threshold}
    reported = {tuple(sorted((number[p["left"]], number[p["right"]]))) for p in near}
    assert reported == reaching
    assert (
        result.candidates["method"] == "exhaustive" and result.candidates["expected_recall"]["value"] == 1.0
    )
    assert result.tfidf["n_features"] == 0 and result.tfidf["vocabulary_size"] > 1000
    assert result.tfidf["columns"] == "exact vocabulary: one column per term"
    assert result.to_dict()["settings"]["tfidf_features"] == 0  # what audit.json records


def test_a_hashed_space_given_to_the_audit_moves_its_cosines_off_scikit_learn(planted):
    """The audit check above is able to fail: a hashed space given explicitly is honoured,
    its terms share columns, and its cosines leave scikit-learn's (the reference)."""
    settings = dedup.AuditSettings(
        measure="cosine", threshold=0.5, boilerplate=False, exhaustive_max_docs=20, tfidf_features=512
    )
    result = dedup.audit([str(planted)], settings)
    ids, expected = _planted_reference(planted)
    number = {doc: k for k, doc in enumerate(ids)}
    near = [p for p in result.pairs if p["kind"] == "near"]
    worst = max(abs(p["cosine"] - expected[number[p["left"]], number[p["right"]]]) for p in near)
    assert worst > 1e-3
    assert result.tfidf["n_features"] == 512 and result.tfidf["measured_colliding_share"] > 0.5
    assert result.to_dict()["settings"]["tfidf_features"] == 512
