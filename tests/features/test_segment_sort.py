"""The segment sort against numpy's own sort and unique (numpy is the reference)."""

import numpy as np
import pytest

from dedup.features.segment_sort import (
    SMALL_BUCKET,
    sort_segments,
    sort_segments_count_unique,
    sorted_distinct,
)


def _segments(rng, lengths):
    offsets = np.zeros(len(lengths) + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    return offsets


def _values(kind, rng, n):
    if kind == "uniform64":  # shingle hashes
        return rng.integers(0, 2**64, n, dtype=np.uint64)
    if kind == "columns":  # hashed term columns: few distinct values, many repeats
        return rng.integers(0, 2**20, n // 8 + 1)[rng.integers(0, n // 8 + 1, n)].astype(np.int64)
    if kind == "zipf":  # small values that share the top bits: the comparison-sort fallback
        return (rng.zipf(1.3, n) % 2**20).astype(np.int64)
    if kind == "negative":  # signed values below zero: no radix digit is monotone
        return rng.integers(-(2**40), 2**40, n)
    if kind == "equal":
        return np.full(n, 7, dtype=np.uint64)
    raise AssertionError(kind)


@pytest.mark.parametrize("kind", ["uniform64", "columns", "zipf", "negative", "equal"])
def test_segments_sorted_and_counted_as_numpy_does(kind):
    rng = np.random.default_rng(11)
    # Lengths around every cutoff: empty, one, the insertion-sort limit, one radix bucket
    # per value, and a segment large enough for the widest digit.
    lengths = [0, 1, 2, SMALL_BUCKET, SMALL_BUCKET + 1, 100, 1000, 5000, 300_000] + list(
        rng.integers(0, 3000, 200)
    )
    offsets = _segments(rng, lengths)
    values = _values(kind, rng, int(offsets[-1]))
    got = values.copy()
    uniques = sort_segments_count_unique(got, offsets)
    again = values.copy()
    sort_segments(again, offsets)
    for d in range(len(lengths)):
        a, b = offsets[d], offsets[d + 1]
        want = np.sort(values[a:b])
        assert np.array_equal(got[a:b], want), (kind, d, lengths[d])
        assert np.array_equal(again[a:b], want)
        assert uniques[d] == np.unique(values[a:b]).shape[0]


def test_values_near_the_top_of_the_range():
    # Every value in the last radix bucket, and the largest uint64 itself.
    values = np.array([2**64 - 1, 2**64 - 2, 2**63, 2**64 - 1] * 20, dtype=np.uint64)
    offsets = np.array([0, values.shape[0]], dtype=np.int64)
    got = values.copy()
    assert sort_segments_count_unique(got, offsets).tolist() == [3]
    assert np.array_equal(got, np.sort(values))


@pytest.mark.parametrize("dtype", [np.uint64, np.int64, np.int32, np.float64])
@pytest.mark.parametrize("size", [0, 1, 2, 1000])
def test_sorted_distinct_equals_numpy_unique(dtype, size):
    """Reference: ``np.unique`` (sorted distinct values)."""
    rng = np.random.default_rng(size)
    values = rng.integers(0, max(size // 3, 1), size).astype(dtype)
    if dtype == np.uint64 and size:
        values[0] = np.uint64(2**64 - 1)  # the top of the range sorts last
    got = sorted_distinct(values)
    ref = np.unique(values)
    assert got.dtype == ref.dtype and got.tolist() == ref.tolist()
