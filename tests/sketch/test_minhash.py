"""MinHash signatures checked against datasketch and against exact Jaccard."""

from __future__ import annotations

import datasketch
import numpy as np
import pytest

from dedup.features import build_features, shingle_strings
from dedup.sketch import minhash_signatures

TEXTS = [
    "water meters are read every quarter by the field team and estimates follow",
    "water meters are read every quarter by the field crew and estimates follow later",
    "a short one",
    "x",
]


@pytest.mark.parametrize("num_perm,seed", [(128, 1), (64, 7), (256, 42)])
def test_compatibility_scheme_reproduces_datasketch_hashvalues(num_perm, seed):
    """Reference: datasketch.MinHash(num_perm, seed) with its default hash (SHA-1, 32 bits) updated
    with the same shingle strings; our compatibility scheme must give the same hashvalues exactly."""
    fs = build_features(TEXTS, shingle_size=3, hash_scheme="datasketch-sha1")
    ours = minhash_signatures(
        fs.shingles, fs.shingle_offsets, num_perm=num_perm, seed=seed, hash_scheme="datasketch-sha1"
    )
    for d, text in enumerate(TEXTS):
        ref = datasketch.MinHash(num_perm=num_perm, seed=seed)
        ref.update_batch([s.encode("utf-8") for s in shingle_strings(text, 3)])
        assert np.array_equal(
            ours.values[d].astype(np.uint64), np.asarray(ref.hashvalues, dtype=np.uint64)
        ), d


def test_estimates_stay_within_four_standard_errors_of_exact_jaccard():
    """The MinHash estimator is unbiased with standard error sqrt(J(1-J)/k) (Broder 1997); over many
    random set pairs each estimate must lie within 4 standard errors (plus one position of slack for
    J near 0 or 1), and the mean error must be near zero."""
    rng = np.random.default_rng(2024)
    k = 128
    sets, pairs, exact = [], [], []
    for _ in range(300):
        size_a, size_b = rng.integers(50, 400, size=2)
        shared = int(rng.integers(0, min(size_a, size_b) + 1))
        universe = rng.choice(2**62, size=size_a + size_b - shared, replace=False).astype(np.uint64)
        a = universe[:size_a]
        b = np.concatenate([universe[:shared], universe[size_a:]])
        sets += [np.unique(a), np.unique(b)]
        pairs.append((len(sets) - 2, len(sets) - 1))
        exact.append(shared / (size_a + size_b - shared))
    offsets = np.zeros(len(sets) + 1, dtype=np.int64)
    np.cumsum([s.shape[0] for s in sets], out=offsets[1:])
    sig = minhash_signatures(np.concatenate(sets), offsets, num_perm=k, seed=3).values
    errors = []
    for (i, j), jac in zip(pairs, exact):
        estimate = float(np.mean(sig[i] == sig[j]))
        se = np.sqrt(jac * (1 - jac) / k)
        assert abs(estimate - jac) <= 4 * se + 1 / k, (estimate, jac)
        errors.append(estimate - jac)
    assert abs(np.mean(errors)) < 0.01


def test_different_seeds_give_different_signatures_and_refuse_to_mix():
    fs = build_features(TEXTS, shingle_size=3)
    a = minhash_signatures(fs.shingles, fs.shingle_offsets, num_perm=32, seed=1)
    b = minhash_signatures(fs.shingles, fs.shingle_offsets, num_perm=32, seed=2)
    assert not np.array_equal(a.values, b.values)
    with pytest.raises(ValueError, match="different settings"):
        a.check_compatible(b)
    a.check_compatible(minhash_signatures(fs.shingles, fs.shingle_offsets, num_perm=32, seed=1))
