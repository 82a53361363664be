"""LSH banding: the S-curve, the choice of bands, candidate pairs from buckets."""

from __future__ import annotations

import numpy as np
import pytest
from datasketch.lsh import _optimal_param

from dedup.candidates import catch_probability, choose_bands, lsh_candidate_pairs


@pytest.mark.parametrize(
    "s,expected",
    [(0.2, 0.006), (0.3, 0.047), (0.4, 0.186), (0.5, 0.470), (0.6, 0.802), (0.7, 0.975), (0.8, 0.9996)],
)
def test_s_curve_matches_the_published_table_for_20_bands_of_5(s, expected):
    """Reference: Leskovec, Rajaraman, Ullman, Mining of Massive Datasets, §3.4, the table of
    1 - (1 - s^5)^20 (values recalled from the book's table; each also follows from the formula)."""
    decimals = len(str(expected).split(".")[1])
    assert round(float(catch_probability(s, 20, 5)), decimals) == expected


@pytest.mark.parametrize("threshold", [0.3, 0.5, 0.6, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95])
@pytest.mark.parametrize("num_perm", [64, 128])
@pytest.mark.parametrize("fp_weight", [0.5, 0.05])
def test_choice_of_bands_equals_datasketch(threshold, num_perm, fp_weight):
    """Reference: datasketch.lsh._optimal_param, which minimises the same weighted areas with
    scipy's adaptive quadrature (ours integrates the polynomials exactly by Gauss-Legendre)."""
    expected = _optimal_param(threshold, num_perm, fp_weight, 1 - fp_weight)
    assert choose_bands(threshold, num_perm, fp_weight) == expected


def test_default_weights_catch_pairs_at_the_threshold_with_high_probability():
    for threshold in (0.5, 0.7, 0.8, 0.9):
        bands, rows = choose_bands(threshold, 128)
        assert catch_probability(threshold, bands, rows) > 0.9
        assert catch_probability(min(threshold + 0.05, 1.0), bands, rows) > 0.98


def test_candidates_are_the_pairs_sharing_a_band():
    rng = np.random.default_rng(5)
    sig = rng.integers(0, 2**32, size=(60, 12), dtype=np.uint32)
    sig[10] = sig[3]  # identical signature: shares every band
    sig[20, :4] = sig[7, :4]  # shares exactly band 0
    sig[30, 4:8] = sig[8, 4:8]  # shares exactly band 1
    left, right, warnings = lsh_candidate_pairs(sig, bands=3, rows=4)
    found = set(zip(left.tolist(), right.tolist()))
    # Reference: the definition, by brute force over all pairs.
    expected = {
        (i, j)
        for i in range(60)
        for j in range(i + 1, 60)
        if any(np.array_equal(sig[i, b * 4 : (b + 1) * 4], sig[j, b * 4 : (b + 1) * 4]) for b in range(3))
    }
    assert found == expected
    assert {(3, 10), (7, 20), (8, 30)} <= found
    assert warnings == []
    assert np.all(left < right)


def test_oversize_bucket_is_reported_and_not_expanded():
    sig = np.zeros((500, 8), dtype=np.uint32)  # 500 identical signatures: one huge bucket
    sig[:, 4:] = np.arange(500, dtype=np.uint32)[:, None]  # only band 0 is shared
    left, right, warnings = lsh_candidate_pairs(sig, bands=2, rows=4, bucket_limit=50)
    assert len(warnings) == 1
    assert warnings[0]["size"] == 500 and warnings[0]["bands"] == [0]
    assert 0 < left.shape[0] < 500 * 499 // 2 // 10
    # Every member still gets compared with some neighbours: no document is dropped.
    assert set(left.tolist()) | set(right.tolist()) == set(range(500))
