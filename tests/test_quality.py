"""Detection quality on a small planted corpus: the targets of `benchmarks.quality`, checked.

The corpus is made of invented text (`benchmarks.corpus.synthetic_documents`), so these
checks never need the machine's man pages. Ground truth is exhaustive and independent of
the tool's hashing: shingle strings counted with scikit-learn's ``CountVectorizer`` and a
scipy sparse product (see `benchmarks.quality_truth`).
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET
from collections import Counter

import numpy as np
import pytest
from sklearn.metrics import jaccard_score

from benchmarks.quality import (
    TARGET_ARI,
    TARGET_F1,
    TARGET_LSH_POINTS,
    cluster_quality,
    lsh_recall,
    pair_quality,
    predicted_labels,
    prepare,
    purity,
    reference_labels,
    reported_keys,
    run_audit,
    score_agreement,
    svg_chart,
)
from benchmarks.quality_truth import features_text
from dedup.features import shingle_strings
from dedup.normalize import canonical_text

THRESHOLD = 0.8
SIZES = {"n_families": 40, "copies_per_family": 6, "n_merged": 5, "n_siblings": 20, "n_distractors": 40}
LSH_SEEDS = tuple(range(1, 31))
# A bucket is compared with the S-curve only when it holds this many (pair, seed) trials.
MIN_TRIALS = 2000


@pytest.fixture(scope="module")
def bench(tmp_path_factory):
    return prepare(tmp_path_factory.mktemp("quality"), "synthetic", seed=3, **SIZES)


@pytest.fixture(scope="module")
def default_audit(bench):
    result, _ = run_audit(bench, threshold=THRESHOLD, candidates="lsh")
    return result, reported_keys(result, bench)


def test_corpus_has_every_kind_of_document(bench):
    roles = Counter(d.role for d in bench.corpus.documents)
    assert roles == {
        "base": SIZES["n_families"],
        "copy": SIZES["n_families"] * SIZES["copies_per_family"],
        "merged": SIZES["n_merged"],
        "sibling": SIZES["n_siblings"],
        "distractor": SIZES["n_distractors"],
    }
    # Planted pairs span the whole range, so every bucket of the tables has pairs.
    planted = bench.truth.jaccard[bench.truth.planted]
    assert (planted >= THRESHOLD).sum() >= 100
    assert ((planted >= 0.5) & (planted < THRESHOLD)).sum() >= 100


def test_surface_operations_do_what_they_say(bench):
    """Whitespace and case changes keep the normalized text; punctuation changes keep only the words."""
    base = {d.family: d for d in bench.corpus.documents if d.role == "base"}
    for doc in bench.corpus.documents:
        original = base.get(doc.family)
        if doc.operation == "whitespace_case":
            assert canonical_text(doc.visible) == canonical_text(original.visible), doc.doc_id
        elif doc.operation == "punctuation":
            assert canonical_text(doc.visible) != canonical_text(original.visible), doc.doc_id
            assert features_text(doc.visible) == features_text(original.visible), doc.doc_id


def test_truth_jaccard_equals_sklearn_jaccard_score(bench):
    """Reference: ``sklearn.metrics.jaccard_score`` on binary shingle indicators of a pair."""
    truth = bench.truth
    rng = np.random.default_rng(0)
    chosen = rng.choice(np.flatnonzero(truth.planted), size=25, replace=False)
    texts = bench.words["whole"]
    for position in chosen.tolist():
        i, j = divmod(int(truth.keys[position]), truth.n_docs)
        if bench.words["default"][i] != texts[i] or bench.words["default"][j] != texts[j]:
            continue  # boilerplate lines were left out; the whole-text table is checked below
        a, b = set(shingle_strings(texts[i], 5)), set(shingle_strings(texts[j], 5))
        vocabulary = sorted(a | b)
        expected = jaccard_score([s in a for s in vocabulary], [s in b for s in vocabulary])
        assert truth.jaccard[position] == pytest.approx(expected, abs=1e-12)
    whole = bench.truths["whole"]
    for position in rng.choice(np.flatnonzero(whole.planted), size=25, replace=False).tolist():
        i, j = divmod(int(whole.keys[position]), whole.n_docs)
        a, b = set(shingle_strings(texts[i], 5)), set(shingle_strings(texts[j], 5))
        vocabulary = sorted(a | b)
        expected = jaccard_score([s in a for s in vocabulary], [s in b for s in vocabulary])
        assert whole.jaccard[position] == pytest.approx(expected, abs=1e-12)


def test_audit_scores_equal_the_independent_truth(bench, default_audit):
    """Every near pair the audit reports carries the Jaccard and containment of the ground truth."""
    result, _ = default_audit
    assert result.pairs, "the audit found nothing: the check would say little"
    differences = score_agreement(result, bench, bench.truth)
    assert differences["jaccard"] < 1e-12
    assert differences["containment"] < 1e-12


def test_pair_f1_target_and_nothing_below_threshold(bench, default_audit):
    _, keys = default_audit
    counts = pair_quality(keys, bench.truth, "jaccard", THRESHOLD)
    assert counts.positives >= 100
    assert counts.below == 0, f"{counts.below} pairs reported below {THRESHOLD}"
    assert counts.f1 >= TARGET_F1, f"F1 {counts.f1:.4f}: recall {counts.recall:.4f} over {counts.positives}"


def test_pair_check_fails_when_lsh_is_crippled(bench):
    """The same check rejects an audit whose bands almost never catch a pair (1 band of 64 rows)."""
    result, _ = run_audit(bench, threshold=THRESHOLD, candidates="lsh", bands=1, rows=64)
    counts = pair_quality(reported_keys(result, bench), bench.truth, "jaccard", THRESHOLD)
    assert counts.f1 < TARGET_F1


def test_cluster_ari_target(bench, default_audit):
    """Reference: ``sklearn.metrics.adjusted_rand_score`` against components of the planted positives."""
    result, _ = default_audit
    quality = cluster_quality(result, bench, bench.truth, "jaccard", THRESHOLD)
    assert quality.reference_groups >= 30
    assert quality.ari_reference >= TARGET_ARI
    assert quality.cross_edges_below == 0


def test_purity_equals_plain_counting(bench, default_audit):
    """Purity (common practice, no source) checked against counting by hand in Python."""
    result, _ = default_audit
    predicted = predicted_labels(result, bench)
    reference = reference_labels(bench.truth, "jaccard", THRESHOLD)
    families = np.array([d.family for d in bench.corpus.documents])
    for truth_labels in (reference, families):
        by_cluster: dict[int, Counter] = {}
        for p, t in zip(predicted.tolist(), truth_labels.tolist()):
            by_cluster.setdefault(p, Counter())[t] += 1
        expected = sum(c.most_common(1)[0][1] for c in by_cluster.values()) / len(predicted)
        assert purity(truth_labels, predicted) == pytest.approx(expected)


def test_lsh_candidate_recall_follows_the_s_curve(bench, default_audit):
    """Pooled over 30 MinHash seeds, each bucket's recall is within 2 points of mean P(s), or 3 standard errors.

    Reference: P(s) = 1 - (1 - s^r)^b, *Mining of Massive Datasets* §3.4; the binomial
    standard error is common practice, no source.
    """
    result, _ = default_audit
    recall = lsh_recall(bench, threshold=THRESHOLD, num_perm=128, seeds=LSH_SEEDS)
    assert recall.candidates_first_seed == result.candidates["candidate_pairs"]
    checked = 0
    for bucket in recall.buckets:
        if bucket.trials < MIN_TRIALS:
            continue
        allowed = max(TARGET_LSH_POINTS, 3 * bucket.standard_error)
        assert abs(bucket.gap) <= allowed, (
            f"{bucket.low:.1f}-{bucket.high:.1f}: measured {bucket.measured:.4f}, predicted {bucket.predicted:.4f}"
        )
        checked += 1
    assert checked >= 3


def test_chart_is_well_formed_svg(bench):
    recall = lsh_recall(bench, threshold=THRESHOLD, num_perm=128, seeds=(1, 2))
    root = ET.fromstring(svg_chart(recall, "title & <test>"))
    assert root.tag.endswith("svg")
    circles = [c for c in root.iter() if c.tag.endswith("circle") and c.get("class") == "measured"]
    assert len(circles) == sum(1 for b in recall.buckets if b.trials)
    for circle in circles:
        assert math.isfinite(float(circle.get("cy")))
