"""Honest keepers: what decided, ties said as ties, where dates come from, first-seen,
and preferred paths that match nothing."""

from __future__ import annotations

import fnmatch

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from dedup import AuditSettings
from dedup.cluster import (
    build_clusters,
    choose_keeper,
    explain_keeper,
    input_positions,
    unmatched_prefer,
)
from dedup.cluster.actions import ClusterInputs
from dedup.ingest import LedgerEntry
from dedup.report.wording import describe_roles, reason_sentence
from dedup.settings import KEEPER_POLICIES
from dedup.verify import PairScores

PATHS = ["a/x.md", "a/yy.md", "b/x.md", "b/c/x.md", "zz.md", "a/b/c.md", "c.md"]
GLOBS = ["a/*", "b/**", "nothing/*", "*.md"]


def reference(members, ids, lengths, dates, policy, prefer, order):
    """The keeper and what decided, in plain Python: best preferred path, then the policy's
    value, then (shortest-path) the id's length, then the id."""

    def rank(doc_id):
        return next((r for r, g in enumerate(prefer) if fnmatch.fnmatchcase(doc_id, g)), len(prefer))

    def value(m):
        missing = float("inf")
        return {
            "longest": -lengths[m],
            "newest": -dates[m] if dates[m] is not None else missing,
            "oldest": dates[m] if dates[m] is not None else missing,
            "shortest-path": ids[m].count("/"),
            "first-seen": order[m] if order[m] is not None else missing,
        }[policy]

    best_rank = min(rank(ids[m]) for m in members)
    competing = [m for m in members if rank(ids[m]) == best_rank]
    best = min(value(m) for m in competing)
    top = [m for m in competing if value(m) == best]
    tie = None
    if policy == "shortest-path" and len(top) > 1:
        shortest = min(len(ids[m]) for m in top)
        top2 = [m for m in top if len(ids[m]) == shortest]
        tie = ("id-length", len(top)) if len(top2) == 1 else ("id-order", len(top2))
        top = top2
    elif len(top) > 1:
        tie = ("id-order", len(top))
    keeper = min(top, key=lambda m: ids[m])
    return keeper, best_rank, len(competing), tie


cases = st.integers(2, 6).flatmap(
    lambda n: st.tuples(
        st.permutations(PATHS).map(lambda p: p[:n]),
        st.lists(st.integers(1, 3), min_size=n, max_size=n),
        st.lists(st.sampled_from([None, 1.0, 2.0]), min_size=n, max_size=n),
        st.permutations(range(n)).map(list),
        st.sampled_from(KEEPER_POLICIES),
        st.lists(st.sampled_from(GLOBS), max_size=2, unique=True),
    )
)


@given(cases)
def test_keeper_and_what_decided_equal_plain_python(case):
    ids, lengths, dates, order, policy, prefer = case
    members = list(range(len(ids)))
    keeper, best_rank, matching, tie = reference(members, ids, lengths, dates, policy, prefer, order)
    assert choose_keeper(members[::-1], ids, lengths, dates, policy, prefer, order) == keeper
    code, figures = explain_keeper(members, keeper, ids, lengths, dates, policy, prefer, order, "updated")
    if best_rank < len(prefer):
        assert (code, figures["glob"], figures["matching"]) == ("preferred-path", prefer[best_rank], matching)
        if matching == 1:
            assert set(figures) == {"glob", "then", "matching"}
            return
    else:
        assert code == {"longest": "most-text"}.get(policy, policy)
    assert (figures.get("tie_break"), figures.get("tied")) == (tie or (None, None))
    reason_sentence(code, figures)  # every explanation can be worded


def test_a_byte_length_tie_between_archive_and_current_is_said_to_be_a_tie():
    # The case of the issue: equal length, no --prefer: the archive copy wins by path order.
    ids, lengths = ["archive/2021/a.md", "current/a.md"], [500, 500]
    keeper = choose_keeper([0, 1], ids, lengths, [None, None], "longest")
    code, figures = explain_keeper([0, 1], keeper, ids, lengths, [None, None], "longest")
    assert (ids[keeper], code, figures["tie_break"], figures["tied"]) == (
        "archive/2021/a.md",
        "most-text",
        "id-order",
        2,
    )
    assert reason_sentence(code, figures) == (
        "keeper: it has the most text (500 characters), tied with 1 other member; the tie was broken by sorted "
        "id order, which says nothing about the text"
    )
    # One character more is a win, and is said as one.
    code, figures = explain_keeper([0, 1], 0, ids, [501, 500], [None, None], "longest")
    assert reason_sentence(code, figures) == "keeper: it has the most text (501 characters; next 500)"


@pytest.mark.parametrize(
    "date_field, words", [(None, "file modification time"), ("updated", "metadata field 'updated'")]
)
def test_newest_and_oldest_say_where_the_date_came_from(date_field, words):
    ids, dates = ["a.md", "b.md"], [1709294400.0, 1609459200.0]
    code, figures = explain_keeper([0, 1], 0, ids, [1, 1], dates, "newest", (), None, date_field)
    assert figures["date_source"] == ("metadata" if date_field else "file-time")
    assert reason_sentence(code, figures) == f"keeper: it is the newest (2024-03-01 12:00:00 UTC, {words})"
    code, figures = explain_keeper([0, 1], 0, ids, [1, 1], [None, None], "oldest", (), None, date_field)
    assert reason_sentence(code, figures).startswith(
        f"keeper: none of the 2 members compared has a date ({words})"
    )


def test_first_seen_follows_the_ledger_not_the_id_order():
    ids = ["a.md", "b.md", "c.md"]  # id order; the ledger read c, then a, then b
    ledger = [
        LedgerEntry("big.bin", "skipped", "file too large"),
        LedgerEntry("c.md", "read", document_id="c.md"),
        LedgerEntry("a.md", "read", document_id="a.md"),
        LedgerEntry("empty.md", "empty"),
        LedgerEntry("b.md", "read", document_id="b.md"),
    ]
    order = input_positions(ids, [entry.document_id for entry in ledger])
    assert order == [1, 2, 0]
    assert choose_keeper([0, 1, 2], ids, [1, 1, 1], [None] * 3, "first-seen", (), order) == 2
    code, figures = explain_keeper([0, 1, 2], 2, ids, [1, 1, 1], [None] * 3, "first-seen", (), order)
    assert reason_sentence(code, figures) == "keeper: it was read first (document 1 in input order)"
    # A document the ledger does not name never wins, and the policy needs the order.
    assert choose_keeper([0, 1], ids, [1, 1], [None] * 2, "first-seen", (), [None, 5]) == 1
    with pytest.raises(ValueError, match="input order"):
        choose_keeper([0, 1], ids, [1, 1], [None] * 2, "first-seen")


def test_build_clusters_takes_the_input_order_for_first_seen():
    def score_against(members, keepers):
        n = len(members)
        return PairScores(members, keepers, np.zeros(n, np.int64), *np.ones((4, n)))

    inputs = ClusterInputs(
        ids=["a.md", "b.md"],
        lengths=[10, 20],
        sizes=[10, 20],
        dates=[None, None],
        representative=np.arange(2),
        order=[1, 0],
    )
    settings = AuditSettings(keeper_policy="first-seen")
    clusters, roles = build_clusters(
        inputs, np.array([0]), np.array([1]), {(0, 1): 1.0}, score_against, settings
    )
    assert clusters[0]["keeper"] == "b.md"
    assert describe_roles(roles)[1]["reason"] == "keeper: it was read first (document 1 in input order)"


def test_a_preferred_path_that_matches_nothing_is_a_warning():
    ids = ["current/a.md", "archive/a.md"]
    assert unmatched_prefer(["current/**", "curent/**", "archive/*"], ids) == [
        {"kind": "prefer-matches-nothing", "glob": "curent/**", "documents": 2, "sample": "current/a.md"}
    ]
    assert unmatched_prefer([], ids) == []
    assert unmatched_prefer(["x"], []) == [
        {"kind": "prefer-matches-nothing", "glob": "x", "documents": 0, "sample": None}
    ]
