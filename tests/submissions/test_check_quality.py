"""A small run of `benchmarks.check_quality` on the man pages of this machine (PAN-style measures of
Potthast et al., COLING 2010, as written from memory in `benchmarks.pan_measures`)."""

from __future__ import annotations

import pytest

from benchmarks.check_quality import LEVELS, run
from benchmarks.corpus import MAN_ROOT

pytestmark = pytest.mark.slow

if not MAN_ROOT.is_dir():
    pytest.skip("no man pages on this machine", allow_module_level=True)


@pytest.fixture(scope="module")
def scored():
    return run(per_kind=4, pool_size=1200, seed=5)


def test_planted_copies_are_found_at_their_source(scored):
    table, _, _ = scored
    for level in LEVELS:
        assert table[level]["source_recall"] >= 0.98, level
    assert table["none"]["plagdet"] >= 0.9 and table["light"]["plagdet"] >= 0.9
    assert table["heavy"]["plagdet"] >= 0.75


def test_quoted_copies_are_excluded_and_shared_sections_linked(scored):
    table, _, _ = scored
    assert table["quoted"]["excluded"] == table["quoted"]["cases"] > 0
    assert table["shared"]["linked"] == table["shared"]["cases"] > 0


def test_clean_submissions_stay_low_and_containment_is_exact(scored):
    table, wrong, _ = scored
    assert table["clean"]["above_5_percent"] == 0
    assert wrong == []
