"""The exact searches of containment and cosine find every pair that reaches the threshold.

References: every pair scored by brute force — containment from Python sets, cosine from
a dense product of the rows (numpy) — on random sets and rows built to have pairs
exactly at, just below and just above the thresholds.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.candidates import (
    EXACT_SEARCHES,
    containment_candidate_pairs,
    cosine_candidate_pairs,
    exact_candidate_pairs,
)
from dedup.candidates.blocks import block_bounds, pairs_by_blocks
from dedup.candidates.containment import fewest_shared
from dedup.candidates.cosine import MARGIN


def _packed(sets: list[set[int]]) -> tuple[np.ndarray, np.ndarray]:
    offsets = np.zeros(len(sets) + 1, dtype=np.int64)
    offsets[1:] = np.cumsum([len(s) for s in sets])
    values = [np.array(sorted(s), dtype=np.uint64) for s in sets]
    return (np.concatenate(values) if values else np.zeros(0, np.uint64)), offsets


def _containment_truth(sets: list[set[int]], threshold: float) -> set[tuple[int, int]]:
    """Pairs whose larger containment reaches the threshold, from Python sets (the verify
    step's definition: |A ∩ B| / min(|A|, |B|), in float64)."""
    found = set()
    for a, b in itertools.combinations(range(len(sets)), 2):
        smaller = min(len(sets[a]), len(sets[b]))
        if smaller and len(sets[a] & sets[b]) / smaller >= threshold:
            found.add((a, b))
    return found


def _random_sets(rng: np.random.Generator, n: int) -> list[set[int]]:
    """Sets of a small universe (many overlaps) with planted subsets and supersets."""
    universe = int(rng.integers(8, 300))
    sets = [set(rng.integers(0, universe, size=int(rng.integers(0, 60))).tolist()) for _ in range(n)]
    for _ in range(n // 4):
        source = sets[int(rng.integers(n))]
        keep = [v for v in source if rng.random() < rng.uniform(0.3, 1.0)]
        sets.append(
            set(keep) | set(rng.integers(universe, 2 * universe, size=int(rng.integers(0, 20))).tolist())
        )
    return sets


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("threshold", [0.05, 0.1, 1 / 3, 0.5, 0.8, 0.9, 1.0])
def test_containment_candidates_are_exactly_the_pairs_reaching_the_threshold(seed, threshold):
    rng = np.random.default_rng(seed)
    sets = _random_sets(rng, int(rng.integers(2, 70)))
    shingles, offsets = _packed(sets)
    left, right = containment_candidate_pairs(shingles, offsets, threshold, workers=2)
    assert set(zip(left.tolist(), right.tolist())) == _containment_truth(sets, threshold)
    assert np.all(left < right) and np.all(np.diff(left * len(sets) + right) > 0)  # sorted, distinct


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.sets(st.integers(0, 40), max_size=25), min_size=2, max_size=25),
    st.sampled_from([0.1, 0.25, 0.5, 0.6, 0.75, 1.0]),
)
def test_containment_search_on_any_sets(sets, threshold):
    shingles, offsets = _packed(sets)
    left, right = containment_candidate_pairs(shingles, offsets, threshold, workers=1)
    assert set(zip(left.tolist(), right.tolist())) == _containment_truth(sets, threshold)


def test_fewest_shared_is_the_first_count_whose_quotient_reaches_the_threshold():
    for threshold in (0.1, 0.3, 1 / 3, 0.7, 0.8, 0.9, 1.0):
        sizes = np.arange(1, 400)
        need = fewest_shared(sizes, threshold)
        for s, c in zip(sizes.tolist(), need.tolist()):
            assert c / s >= threshold and (c == 1 or (c - 1) / s < threshold), (threshold, s, c)


def _unit_rows(rng: np.random.Generator, n: int, m: int) -> sp.csr_matrix:
    """Unit rows with Zipf-like column weights, some rows near copies of others."""
    dense = rng.random((n, m)) * (rng.random((n, m)) < rng.uniform(0.05, 0.6))
    dense *= 1.0 / (1.0 + np.arange(m)) ** rng.uniform(0.0, 1.5)
    for k in range(n // 5):
        dense[n - 1 - k] = dense[k] + 0.05 * rng.random(m) * (dense[k] > 0)
    norms = np.linalg.norm(dense, axis=1, keepdims=True)
    dense = np.divide(dense, norms, out=np.zeros_like(dense), where=norms > 0)
    rows = sp.csr_matrix(dense)
    rows.sort_indices()
    return rows


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("threshold", [0.05, 0.3, 0.5, 0.8, 0.95, 1.0])
def test_cosine_candidates_are_the_pairs_reaching_the_threshold(seed, threshold):
    rng = np.random.default_rng(100 + seed)
    rows = _unit_rows(rng, int(rng.integers(2, 90)), int(rng.integers(1, 80)))
    left, right = cosine_candidate_pairs(rows, threshold, workers=2)
    found = set(zip(left.tolist(), right.tolist()))
    product = (rows @ rows.T).toarray()
    n = rows.shape[0]
    reaching = {(a, b) for a, b in itertools.combinations(range(n), 2) if product[a, b] >= threshold}
    near = {(a, b) for a, b in itertools.combinations(range(n), 2) if product[a, b] >= threshold - 2 * MARGIN}
    assert reaching <= found <= near


def test_cosine_search_ignores_the_column_numbers():
    """Columns far apart in a huge space (hashed, or terms): the same pairs as when packed."""
    rng = np.random.default_rng(7)
    rows = _unit_rows(rng, 60, 40)
    spread = sp.csr_matrix(
        (rows.data, rows.indices.astype(np.int64) * 2**40 + 5, rows.indptr), shape=(60, 2**62)
    )
    for threshold in (0.3, 0.7):
        a = cosine_candidate_pairs(rows, threshold)
        b = cosine_candidate_pairs(spread, threshold)
        assert all(np.array_equal(x, y) for x, y in zip(a, b))


def test_exact_candidate_pairs_picks_the_measures_search():
    sets = [{1, 2, 3, 4, 5, 6, 7, 8}, {1, 2, 3}, {9, 10}, {2, 3, 4, 11, 12, 13}]
    shingles, offsets = _packed(sets)
    rows = sp.csr_matrix(np.array([[1.0, 0.0], [0.6, 0.8], [0.0, 1.0], [1.0, 0.0]]))
    containment = exact_candidate_pairs("containment", 0.9, shingles, offsets, rows)
    assert list(zip(*(x.tolist() for x in containment))) == [(0, 1)]
    cosine = exact_candidate_pairs("cosine", 0.99, shingles, offsets, rows)
    assert list(zip(*(x.tolist() for x in cosine))) == [(0, 3)]
    jaccard = exact_candidate_pairs("jaccard", 0.9, shingles, offsets, rows)
    assert list(zip(*(x.tolist() for x in jaccard))) == [(0, 1), (0, 3), (1, 3)]
    assert set(EXACT_SEARCHES) == {"jaccard", "containment", "cosine"}
    with pytest.raises(ValueError, match="unknown measure"):
        exact_candidate_pairs("overlap", 0.5, shingles, offsets, rows)


def test_blocks_cover_every_document_once_and_the_pairs_do_not_depend_on_threads():
    assert block_bounds(0) == []
    bounds = block_bounds(1030, 512)
    assert bounds[0][0] == 0 and bounds[-1][1] == 1030
    assert all(a[1] == b[0] for a, b in zip(bounds, bounds[1:]))
    rng = np.random.default_rng(3)
    sets = _random_sets(rng, 1200)
    shingles, offsets = _packed(sets)
    one = containment_candidate_pairs(shingles, offsets, 0.6, workers=1)
    two = containment_candidate_pairs(shingles, offsets, 0.6, workers=2)
    assert one[0].size > 0 and all(np.array_equal(x, y) for x, y in zip(one, two))

    def twice(first, last):  # the same pair found twice, out of order
        return np.array([first, first], np.int64), np.array([last - 1, last - 1], np.int64)

    left, right = pairs_by_blocks(twice, 3000, workers=2)
    assert left.tolist() == sorted(set(left.tolist())) and len(left) == len(block_bounds(3000))
