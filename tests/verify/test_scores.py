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
