"""The hash set of distinct values gives what ``np.unique`` gives (the reference)."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.sketch.distinct import DistinctSet


@settings(max_examples=80, deadline=None)
@given(st.lists(st.lists(st.integers(0, 2**64 - 1) | st.integers(0, 40), max_size=300), max_size=6))
def test_chunks_give_the_distinct_values(chunks):
    s = DistinctSet(bits=1)  # a tiny table grows many times
    for chunk in chunks:
        s.add(np.array(chunk, dtype=np.uint64))
    every = np.array([v for chunk in chunks for v in chunk], dtype=np.uint64)
    assert s.values().tolist() == np.unique(every).tolist()
    assert len(s) == np.unique(every).shape[0]


def test_many_values_with_repeats():
    rng = np.random.default_rng(8)
    values = rng.integers(0, 2**63, 50_000, dtype=np.uint64) % np.uint64(7_000) * np.uint64(2**40 + 3)
    s = DistinctSet()
    for part in np.array_split(values, 7):
        s.add(part)
    assert s.values().tolist() == np.unique(values).tolist()
