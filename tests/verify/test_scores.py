"""Exact scores and exhaustive candidates, checked against plain Python sets."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from dedup.candidates import exhaustive_candidate_pairs
from dedup.features import build_features, shingle_strings
from dedup.sketch import fit_tfidf
from dedup.verify import deciding_score, score_pairs

TEXTS = [
    "the field team reads water meters every quarter and sends the readings to billing",
    "the field team reads water meters every quarter and sends the readings to billing on time",
    "the field team reads water meters every quarter",
    "completely different words about annual leave requests and approval",
    "annual leave requests need approval from your line manager",
]


def _setup():
    fs = build_features(TEXTS, shingle_size=3)
    model = fit_tfidf(fs.token_hashes, fs.token_offsets, n_features=2**20)
    return fs, model


def test_jaccard_and_containment_equal_python_set_arithmetic():
    """Reference: the definitions |A∩B|/|A∪B| and |A∩B|/|A| (Broder 1997) on Python sets of the
    shingle strings, independent of our hashing."""
    fs, model = _setup()
    left, right = np.array(list(itertools.combinations(range(len(TEXTS)), 2))).T
    scores = score_pairs(fs.shingles, fs.shingle_offsets, model.rows, left, right)
    for k, (i, j) in enumerate(zip(left, right)):
        a, b = set(shingle_strings(TEXTS[i], 3)), set(shingle_strings(TEXTS[j], 3))
        assert scores.jaccard[k] == pytest.approx(len(a & b) / len(a | b), abs=1e-15)
        assert scores.containment_left_in_right[k] == pytest.approx(len(a & b) / len(a), abs=1e-15)
        assert scores.containment_right_in_left[k] == pytest.approx(len(a & b) / len(b), abs=1e-15)
    containment = deciding_score(scores, "containment")
    assert np.all(containment >= scores.jaccard)


def test_exhaustive_candidates_are_exactly_the_pairs_sharing_a_shingle():
    fs, _ = _setup()
    left, right = exhaustive_candidate_pairs(fs.shingles, fs.shingle_offsets)
    expected = {
        (i, j)
        for i, j in itertools.combinations(range(len(TEXTS)), 2)
        if set(shingle_strings(TEXTS[i], 3)) & set(shingle_strings(TEXTS[j], 3))
    }
    assert set(zip(left.tolist(), right.tolist())) == expected
    assert (0, 2) in expected and (0, 3) not in expected


def _random_sets(rng, n_sets, universe):
    """Sorted unique sets of many sizes (empty and nested ones too) over a small universe,
    so that pairs share all, much, little or nothing."""
    parts, offsets = [], [0]
    base = np.sort(rng.choice(universe, size=universe // 2, replace=False))
    for k in range(n_sets):
        kind = k % 5
        if kind == 4 and parts:  # a copy of the set before
            parts.append(parts[-1])
            offsets.append(offsets[-1] + parts[-1].shape[0])
            continue
        if kind == 0:
            values = np.zeros(0, np.int64)
        elif kind == 1:  # a slice of the base set: nested in others, equal to some
            a = int(rng.integers(0, base.shape[0]))
            values = base[a : a + int(rng.integers(1, 400))]
        elif kind == 2:  # the base set with a few values changed
            values = np.where(rng.random(base.shape[0]) < rng.random() * 0.15, base + universe, base)
        else:
            values = rng.choice(universe, size=int(rng.integers(1, 600)), replace=False)
        values = np.unique(values).astype(np.uint64)
        parts.append(values)
        offsets.append(offsets[-1] + values.shape[0])
    return np.concatenate(parts), np.array(offsets, dtype=np.int64)


@pytest.mark.parametrize("measure", ["jaccard", "containment", "cosine"])
def test_may_reach_keeps_exactly_the_pairs_the_scores_confirm(measure):
    """Reference: `score_pairs` + `deciding_score` >= threshold, merged in full (whose
    Jaccard and containment equal Python set arithmetic above). Thresholds include ratios
    of small integers that some pairs reach exactly (1/2, 2/3, 3/4, 4/5)."""
    import scipy.sparse as sp

    from dedup.verify import may_reach

    rng = np.random.default_rng(7)
    shingles, offsets = _random_sets(rng, 60, 1200)
    n = offsets.shape[0] - 1
    left, right = np.array(list(itertools.combinations(range(n), 2))).T
    rows = sp.identity(n, format="csr")
    scores = score_pairs(shingles, offsets, rows, left, right)
    decided = deciding_score(scores, measure)
    for threshold in (0.0, 0.3, 0.5, 2 / 3, 0.75, 0.8, 0.95, 1.0):
        expected = decided >= threshold if measure != "cosine" else np.ones(left.shape[0], bool)
        got = may_reach(shingles, offsets, left, right, measure, threshold)
        assert got.tolist() == expected.tolist(), threshold
        if measure != "cosine" and 0 < threshold < 1:
            assert 0 < expected.sum() < expected.shape[0]  # the case is not trivial
