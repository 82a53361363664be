"""Passage quality on planted passages of real man pages, a small and quick version of
`benchmarks.passage_quality` (twelve cases per level), scored with the measures of
Potthast et al. (COLING 2010) in `benchmarks.pan_measures`.

The floors sit below the full benchmark's figures (0.99 / 0.99 / 0.91 on 100 cases per
level) by enough to absorb the spread of a dozen cases, and well above what a splitting
or one-sided aligner scores, so a regression fails here.
"""

from __future__ import annotations

import pytest

from benchmarks.corpus import available_manpages
from benchmarks.passage_quality import load_pool, make_cases, score

FLOORS = {"none": 0.9, "light": 0.85, "heavy": 0.65}


@pytest.fixture(scope="module")
def table():
    if not available_manpages(300):
        pytest.skip("fewer than 300 man pages under /usr/share/man")
    pool = load_pool(200)
    return score(make_cases(pool, per_level=12, seed=3))


@pytest.mark.parametrize("level", sorted(FLOORS))
def test_plagdet_above_floor(table, level):
    row = table[level]
    assert row["cases"] == 12
    assert row["plagdet"] >= FLOORS[level], row


def test_cases_are_reproducible():
    if not available_manpages(300):
        pytest.skip("fewer than 300 man pages under /usr/share/man")
    pool = load_pool(60)
    first, second = make_cases(pool, 2, seed=5), make_cases(pool, 2, seed=5)
    assert first == second
    for case in first:
        t = case.truth
        assert case.source[t.src_start : t.src_end].split()[0] in case.suspicious
