"""MinHash signatures checked against datasketch and against exact Jaccard."""

from __future__ import annotations

import datasketch
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.features import build_features, shingle_strings
from dedup.sketch import minhash_signatures
from dedup.sketch.minhash import minhash_parameters

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


@pytest.mark.parametrize("scheme", ["stable64", "binned"])
def test_estimates_stay_within_four_standard_errors_of_exact_jaccard(scheme):
    """The MinHash estimator is unbiased with standard error sqrt(J(1-J)/k) (Broder 1997); over many
    random set pairs each estimate must lie within 4 standard errors (plus one position of slack for
    J near 0 or 1), and the mean error must be near zero. The binned scheme on sets larger than k
    samples bins without replacement, so its error is no larger (Li, Owen, Zhang 2012)."""
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
    sig = minhash_signatures(np.concatenate(sets), offsets, num_perm=k, seed=3, hash_scheme=scheme).values
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


def _set_pair(rng, size: int, shared: int) -> tuple[np.ndarray, np.ndarray]:
    universe = rng.choice(2**62, size=2 * size - shared, replace=False).astype(np.uint64)
    return universe[:size], np.concatenate([universe[:shared], universe[size:]])


@pytest.mark.parametrize("size,shared", [(3, 2), (10, 7), (40, 33)])
def test_binned_positions_collide_with_probability_jaccard_on_short_sets(size, shared):
    """Sets smaller than the number of bins leave bins empty after one round; further rounds fill them
    so that every position still collides with probability exactly J (the argument of Dahlgaard,
    Knudsen, Thorup 2017, fast similarity sketching: every element of A ∪ B is equally likely to own
    the least point of a bin). Over 400 seeds the collision rate of each set pair must be within 4
    binomial standard errors of the exact Jaccard |A∩B| / |A∪B| computed with Python sets."""
    rng = np.random.default_rng(size)
    a, b = _set_pair(rng, size, shared)
    jac = len(set(a.tolist()) & set(b.tolist())) / len(set(a.tolist()) | set(b.tolist()))
    offsets = np.array([0, size, 2 * size], dtype=np.int64)
    k, seeds = 64, 400
    hits = 0
    for seed in range(seeds):
        sig = minhash_signatures(np.concatenate([a, b]), offsets, num_perm=k, seed=seed).values
        hits += int(np.sum(sig[0] == sig[1]))
    rate = hits / (k * seeds)
    # Positions of one signature are dependent, so the binomial error is taken over seeds only.
    assert abs(rate - jac) <= 4 * np.sqrt(jac * (1 - jac) / seeds), (rate, jac)


def test_binned_fills_every_bin_and_keeps_the_empty_signature():
    """Every bin of a non-empty set gets a value, even for a set of one shingle (the rounds go on
    until none is empty); an empty set stays all 0xFFFFFFFF, the empty signature of the other
    schemes; the same input gives the same signature (common practice, no source)."""
    shingles = np.array([12345, 999, 998], dtype=np.uint64)
    offsets = np.array([0, 1, 1, 3], dtype=np.int64)
    sig = minhash_signatures(shingles, offsets, num_perm=128, seed=5).values
    assert not np.any(sig[0] == 0xFFFFFFFF) and not np.any(sig[2] == 0xFFFFFFFF)
    assert np.all(sig[1] == 0xFFFFFFFF)
    # Two one-shingle sets agree nowhere, as their Jaccard of 0 says; a set and itself everywhere.
    single = minhash_signatures(
        np.array([999, 12345], dtype=np.uint64), np.array([0, 1, 2]), num_perm=128, seed=5
    ).values
    assert not np.any(single[0] == single[1]) and np.array_equal(single[1], sig[0])
    again = minhash_signatures(shingles, offsets, num_perm=128, seed=5).values
    assert np.array_equal(sig, again)


def _binned_by_hand(shingles: list[int], k: int, seed: int) -> list[int]:
    """The binned scheme written out in plain Python (common practice, no source: one
    permutation hashing with rounds): in round r every shingle x gets h = fmix64(a*x + b
    + r*c) mod 2^64; its high 32 bits times k, shifted right by 32, choose a bin, its low
    32 bits are the value. A bin keeps the smallest value of the first round that gives
    it any; rounds go on until every bin has one. An empty set keeps 2^32 - 1 everywhere."""
    mask = 2**64 - 1
    mix, step = minhash_parameters(k, seed, "binned")
    a, b, c = int(mix[0]), int(mix[1]), int(step[0])

    def fmix(h):
        h ^= h >> 33
        h = (h * 0xFF51AFD7ED558CCD) & mask
        h ^= h >> 33
        h = (h * 0xC4CEB9FE1A85EC53) & mask
        return h ^ (h >> 33)

    row = [2**32 - 1] * k
    settled = [False] * k
    r = 0
    while shingles and not all(settled):
        best: dict[int, int] = {}
        for x in shingles:
            h = fmix((a * x + b + r * c) & mask)
            j = ((h >> 32) * k) >> 32
            if not settled[j]:
                best[j] = min(best.get(j, 2**32), h & 0xFFFFFFFF)
        for j, v in best.items():
            row[j], settled[j] = v, True
        r += 1
    return row


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.lists(st.integers(0, 2**64 - 1), max_size=40), min_size=1, max_size=5),
    st.sampled_from([1, 8, 64, 128]),
    st.integers(0, 2**32 - 1),
)
def test_binned_signatures_equal_the_scheme_written_out(sets, k, seed):
    """Reference: `_binned_by_hand`, the rounds and bins in plain Python integers. Sets
    shorter than k take several rounds; repeated shingles and empty sets are included."""
    shingles = np.array([x for group in sets for x in group], dtype=np.uint64)
    offsets = np.zeros(len(sets) + 1, dtype=np.int64)
    np.cumsum([len(group) for group in sets], out=offsets[1:])
    got = minhash_signatures(shingles, offsets, num_perm=k, seed=seed, hash_scheme="binned").values
    for d, group in enumerate(sets):
        assert got[d].tolist() == _binned_by_hand(group, k, seed)
