"""The sentences of the cluster stage's reason codes.

The expected sentences are written out in full: they are the wording of audit.json,
actions.csv and the report, which must not change when the reasons' data does not.
"""

from __future__ import annotations

import pytest

from dedup.cluster import REASON_CODES
from dedup.report.wording import describe_member, describe_roles, describe_warning, reason_sentence

SCORES = {"jaccard": 0.6049, "containment_in_keeper": 0.7, "keeper_containment": 0.8251, "cosine": 0.5}
WORDS = "Jaccard 0.60, containment 0.70 / 0.83, cosine 0.50 (deciding: containment)"
UNIQUE = {"unique_words": 212, "unique_runs": 3, "unique_share": 0.0912, "unique_min_words": 15}
MARCH_FIRST_NOON = 1709294400.0  # 2024-03-01 12:00:00 UTC

CASES = {
    "most-text": ({}, "keeper: it has the most text"),
    "newest": ({}, "keeper: it is the newest"),
    "oldest": ({}, "keeper: it is the oldest"),
    "shortest-path": ({}, "keeper: it has the shortest path"),
    "first-seen": ({"position": 3}, "keeper: it was read first (document 3 in input order)"),
    "preferred-path": (
        {"glob": "current/**", "then": "oldest"},
        "keeper: matches preferred path 'current/**'; among those, it is the oldest",
    ),
    "exact-copy": ({"keeper": "k.md"}, "exact copy of k.md (same text after normalization)"),
    "covered": (
        {"keeper": "k.md", "measure": "containment", **SCORES, "retire_coverage": 0.5},
        f"near-duplicate of k.md: {WORDS}",
    ),
    "not-covered": (
        {"keeper": "k.md", "measure": "containment", **SCORES, "retire_coverage": 0.8},
        f"similar to k.md ({WORDS}), but only 70% of its text is in the keeper: "
        "merge what is missing before retiring it",
    ),
    "linked-through": (
        {
            "keeper": "k.md",
            "linked_through": "m.md",
            "link_score": 0.9349,
            "measure": "containment",
            **SCORES,
        },
        f"in this cluster because it resembles m.md (containment 0.93), not the keeper k.md ({WORDS}); "
        "decide separately",
    ),
    "unique-text": (
        {"keeper": "k.md", "measure": "containment", **SCORES, **UNIQUE},
        f"near-duplicate of k.md ({WORDS}), but 212 of its words (9%) in 3 passages are not in k.md: "
        "merge them into k.md before retiring it",
    ),
    "mostly-unique": (
        {
            "keeper": "k.md",
            "measure": "containment",
            **SCORES,
            **UNIQUE,
            "unique_words": 1234,
            "unique_share": 0.6171,
            "unique_runs": 1,
            "max_merge_share": 0.5,
        },
        f"shares text with k.md ({WORDS}), but 1,234 of its words (62%) in 1 passage are not in k.md: "
        "more than 50% of it is its own text, so it is not proposed for retirement; decide separately",
    ),
}


def test_every_code_of_the_cluster_stage_has_a_case_here():
    assert sorted(CASES) == sorted(REASON_CODES)


@pytest.mark.parametrize("code", sorted(CASES))
def test_each_reason_code_renders_its_sentence(code):
    figures, sentence = CASES[code]
    assert reason_sentence(code, figures) == sentence


def test_a_link_without_a_score_names_only_the_document():
    figures = {**CASES["linked-through"][0], "link_score": None}
    assert reason_sentence("linked-through", figures) == (
        f"in this cluster because it resembles m.md, not the keeper k.md ({WORDS}); decide separately"
    )


def test_an_unknown_code_is_refused():
    with pytest.raises(ValueError, match="unknown reason code 'made-up'"):
        reason_sentence("made-up", {})


def test_the_sentence_takes_the_place_of_the_data_in_the_key_order():
    entry = {
        "document_id": "a.md",
        "action": "retire",
        "reason_code": "exact-copy",
        "reason_figures": {"keeper": "k.md"},
        "cluster_id": "C00001",
    }
    same = describe_member(entry)
    assert same is entry
    assert list(entry.items()) == [
        ("document_id", "a.md"),
        ("action", "retire"),
        ("reason", "exact copy of k.md (same text after normalization)"),
        ("cluster_id", "C00001"),
    ]
    # Worded once: a second pass changes nothing.
    assert describe_member(entry) == same


def test_describe_roles_words_every_role_in_place():
    keeper = {"document_id": "k.md", "reason_code": "most-text", "reason_figures": {}}
    copy = {"document_id": "a.md", "reason_code": "exact-copy", "reason_figures": {"keeper": "k.md"}}
    roles = {0: keeper, 3: copy}
    assert describe_roles(roles) is roles
    assert roles[0] is keeper and roles[3] is copy
    assert keeper == {"document_id": "k.md", "reason": "keeper: it has the most text"}
    assert copy == {"document_id": "a.md", "reason": "exact copy of k.md (same text after normalization)"}


# Keeper reasons with the figures `dedup.cluster.keeper.explain_keeper` gives.
KEEPER_CASES = [
    (
        "most-text",
        {"characters": 5000, "next_characters": 4800},
        "keeper: it has the most text (5,000 characters; next 4,800)",
    ),
    (
        "most-text",
        {"characters": 5000, "next_characters": 5000, "tie_break": "id-order", "tied": 2},
        "keeper: it has the most text (5,000 characters), tied with 1 other member; the tie was broken by "
        "sorted id order, which says nothing about the text",
    ),
    (
        "newest",
        {"date": MARCH_FIRST_NOON, "date_source": "file-time", "date_field": None},
        "keeper: it is the newest (2024-03-01 12:00:00 UTC, file modification time)",
    ),
    (
        "oldest",
        {
            "date": MARCH_FIRST_NOON,
            "date_source": "metadata",
            "date_field": "updated",
            "tie_break": "id-order",
            "tied": 3,
        },
        "keeper: it is the oldest (2024-03-01 12:00:00 UTC, metadata field 'updated'), tied with 2 other "
        "members; the tie was broken by sorted id order, which says nothing about the text",
    ),
    (
        "newest",
        {
            "date": None,
            "date_source": "metadata",
            "date_field": "updated",
            "tie_break": "id-order",
            "tied": 4,
        },
        "keeper: none of the 4 members compared has a date (metadata field 'updated'); chosen by sorted id "
        "order, which says nothing about the text",
    ),
    (
        "shortest-path",
        {"levels": 1, "tie_break": "id-length", "tied": 2},
        "keeper: it has the shortest path (1 folder level), tied with 1 other member; the tie was broken by "
        "the shorter id",
    ),
    ("first-seen", {"position": None}, "keeper: it was read first (not in the ledger)"),
    (
        "preferred-path",
        {"glob": "current/**", "then": "most-text", "matching": 1},
        "keeper: the only member matching preferred path 'current/**'",
    ),
    (
        "preferred-path",
        {
            "glob": "current/**",
            "then": "most-text",
            "matching": 3,
            "characters": 900,
            "next_characters": 900,
            "tie_break": "id-order",
            "tied": 2,
        },
        "keeper: matches preferred path 'current/**', as do 2 other members; among those, it has the most "
        "text (900 characters), tied with 1 other member; the tie was broken by sorted id order, which says "
        "nothing about the text",
    ),
]


@pytest.mark.parametrize("code, figures, sentence", KEEPER_CASES)
def test_keeper_reasons_say_what_decided_and_when_a_tie_did(code, figures, sentence):
    assert reason_sentence(code, figures) == sentence


def test_a_tie_is_never_worded_as_a_plain_win():
    tied = {"characters": 10, "next_characters": 10, "tie_break": "id-order", "tied": 2}
    assert "tie was broken" in reason_sentence("most-text", tied)
    assert "tie" not in reason_sentence("most-text", {"characters": 10, "next_characters": 9})


def test_settled_duplicates_say_what_the_keeper_lacks():
    base = {"keeper": "k.md", "measure": "containment", **SCORES}
    covered = {
        **base,
        "retire_coverage": 0.5,
        **UNIQUE,
        "unique_words": 0,
        "unique_runs": 0,
        "unique_share": 0.0,
    }
    assert reason_sentence("covered", covered) == (
        f"near-duplicate of k.md: {WORDS}; no run of 15 or more of its words is missing from the keeper"
    )
    partial = {**base, "retire_coverage": 0.8, **UNIQUE}
    assert reason_sentence("not-covered", partial) == (
        f"similar to k.md ({WORDS}), but only 70% of its text is in the keeper, and 212 of its words (9%) "
        "in 3 passages are not in it: merge what is missing before retiring it"
    )
    edits = {**partial, "unique_words": 0, "unique_runs": 0, "unique_share": 0.0}
    assert reason_sentence("not-covered", edits) == (
        f"similar to k.md ({WORDS}), but only 70% of its text is in the keeper; no run of 15 or more of its "
        "words is missing, so the differences are edits: compare them before retiring it"
    )


@pytest.mark.parametrize(
    "share, words", [(0.004, "under 1%"), (0.996, "over 99%"), (0.0, "0%"), (1.0, "100%")]
)
def test_a_share_never_rounds_a_part_away(share, words):
    figures = {"keeper": "k.md", "measure": "containment", **SCORES, **UNIQUE, "unique_share": share}
    assert f"({words})" in reason_sentence("unique-text", figures)


def test_a_preferred_path_that_matches_nothing_is_worded_as_a_warning():
    data = {"kind": "prefer-matches-nothing", "glob": "curent/**", "documents": 12, "sample": "current/a.md"}
    assert describe_warning(data) == {
        "kind": "prefer-matches-nothing",
        "message": "preferred path 'curent/**' matches none of the 12 documents, so it chose no keeper; "
        "patterns are matched against document ids such as 'current/a.md'",
        "glob": "curent/**",
        "documents": 12,
        "sample": "current/a.md",
    }
    with pytest.raises(ValueError, match="unknown warning kind"):
        describe_warning({"kind": "made-up"})
