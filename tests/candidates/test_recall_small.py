"""Measured candidate recall of every measure against an exhaustive truth, past the
exhaustive size, beside the recall ``audit.json`` states.

A few hundred invented pages with edited copies and pasted reuse passages
(`benchmarks.quality_scale.plant_corpus`) are audited with ``exhaustive_max_docs`` far
below their number, so ``auto`` does what it does on a large corpus. The truth is every
pair of distinct texts scored without the tool's hashing or kernels
(`benchmarks.quality_scale.compute_truth`: shingles as tuples of word numbers, TF-IDF
rows from scikit-learn's ``TfidfVectorizer``, full products).
"""

from __future__ import annotations

import math

import pytest

import dedup
from benchmarks.quality_scale import (
    CHECKS,
    compute_truth,
    distinct_texts,
    measured_recall,
    plant_synthetic,
    read_scale_corpus,
)


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    folder = tmp_path_factory.mktemp("recall") / "corpus"
    plant_synthetic(folder, 320, seed=21, doc_bytes=1800, prefix="p", edited=100, reuse=40, plants_seed=8)
    return read_scale_corpus(folder)


@pytest.fixture(scope="module")
def truth(corpus):
    ids, words = distinct_texts(corpus)
    return compute_truth(ids, words, CHECKS)


def _audit(corpus, measure: str, threshold: float, **options):
    settings = dedup.AuditSettings(
        measure=measure,
        threshold=threshold,
        boilerplate=False,
        exhaustive_max_docs=50,
        tfidf_features=0,
        **options,
    )
    return dedup.audit([str(corpus.folder)], settings)


def _reported(result, ids: list[str]) -> set[tuple[int, int]]:
    number = {doc: k for k, doc in enumerate(ids)}
    return {
        tuple(sorted((number[p["left"]], number[p["right"]]))) for p in result.pairs if p["kind"] == "near"
    }


@pytest.mark.parametrize(("measure", "threshold"), [c for c in CHECKS if c[0] != "jaccard"])
def test_containment_and_cosine_find_every_pair_and_say_so(corpus, truth, measure, threshold):
    expected = truth.pairs[(measure, threshold)]
    assert len(expected) >= 30  # pairs to find, or the check says little
    result = _audit(corpus, measure, threshold)
    assert result.summary["distinct_texts"] > 50  # past the exhaustive size
    assert measured_recall(expected, _reported(result, truth.ids)) == 1.0
    assert _reported(result, truth.ids) == expected  # verified exactly: nothing below the threshold
    block = result.candidates
    assert block["method"] == "exhaustive" and block["expected_recall"]["value"] == 1.0
    assert measure in block["reason"] and "no pair is missed" in block["reason"]


def test_jaccard_by_lsh_keeps_its_statement_and_meets_it(corpus, truth):
    """LSH for Jaccard: the recall measured is at least the catch probability stated at
    the threshold, less three binomial standard errors."""
    expected = truth.pairs[("jaccard", 0.8)]
    result = _audit(corpus, "jaccard", 0.8)
    block = result.candidates
    assert block["method"] == "lsh" and "value" not in block["expected_recall"]
    stated = block["expected_recall"]["points"]["at"]["probability"]
    recall = measured_recall(expected, _reported(result, truth.ids))
    slack = 3 * math.sqrt(stated * (1 - stated) / len(expected))
    assert len(expected) >= 30 and recall >= stated - slack


def test_lsh_chosen_for_containment_promises_nothing_and_misses_reuse(corpus, truth):
    """Forced onto LSH (tuned for Jaccard), containment at 0.1 misses pasted passages; the
    record says no recall can be promised instead of quoting Jaccard probabilities as recall."""
    expected = truth.pairs[("containment", 0.1)]
    result = _audit(corpus, "containment", 0.1, candidates="lsh")
    assert measured_recall(expected, _reported(result, truth.ids)) < 0.9
    recall = result.candidates["expected_recall"]
    assert recall["value"] is None and "no recall can be promised for containment" in recall["note"]
